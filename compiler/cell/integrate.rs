//! The propagator of coupled-mode equations `d/dz a = -i H(z) a` for two or
//! three guides, by the fourth-order Magnus method with Gauss-Legendre nodes
//! (Iserles & Norsett, Phil. Trans. R. Soc. A 357, 983, 1999; Blanes, Casas,
//! Oteo & Ros, Phys. Rep. 470, 151, 2009, section 5.2):
//!
//! ```text
//! H1 = H(z + (1/2 - sqrt3/6) h),  H2 = H(z + (1/2 + sqrt3/6) h)
//! Omega = -i h (H1 + H2) / 2 - (sqrt3 / 12) h^2 [H2, H1]
//! a(z + h) = exp(Omega) a(z)
//! ```
//!
//! For a Hermitian H(z), Omega is anti-Hermitian and each step is a
//! unitary: `exp(Omega) = exp(-i M)` with `M = i Omega` Hermitian, taken to
//! rounding level by [`expm_hermitian`]. The global error is O(h^4). The step count
//! comes from a tolerance with a real estimate: the propagator on n and on 2n
//! equal steps differ by about 15/16 of the coarse one's error, so
//! `|U_2n - U_n| / 15` estimates the error of U_2n (Richardson, as in Hairer,
//! Norsett & Wanner, Solving ODEs I, 1993, section II.4); n doubles until the
//! estimate meets the tolerance.

use nalgebra::{DMatrix, SMatrix};
use num_complex::Complex64;

/// The result of an integration.
#[derive(Clone, Debug, PartialEq)]
pub struct Propagator {
    /// The transfer matrix from z0 to z1 (`a(z1) = U a(z0)`).
    pub matrix: DMatrix<Complex64>,
    /// The estimated error of `matrix` (largest entry).
    pub error_estimate: f64,
    /// Steps of the accepted integration.
    pub steps: usize,
}

#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum IntegrateError {
    #[error(
        "the integration did not reach the tolerance {tol:e} in {steps} steps (estimate {estimate:e})"
    )]
    NoConvergence {
        tol: f64,
        steps: usize,
        estimate: f64,
    },
    #[error("the interval must be finite and z1 > z0")]
    BadInterval,
}

/// Largest step count tried before giving up.
pub const MAX_STEPS: usize = 1 << 20;

/// `exp(-i M)` for a small Hermitian M, by scaling and squaring with a
/// Taylor series (Moler & Van Loan, SIAM Review 45, 3, 2003, method 3):
/// M is scaled to norm below 1/4, where 14 terms reach rounding level, and
/// the result squared back. An eigen-decomposition would be exactly unitary
/// in exact arithmetic but is less accurate for the nearly degenerate M of
/// the cell ends, where the couplings vanish.
pub fn expm_hermitian<const N: usize>(m: &SMatrix<Complex64, N, N>) -> SMatrix<Complex64, N, N> {
    let norm: f64 = (0..N)
        .map(|i| (0..N).map(|j| m[(i, j)].norm()).sum::<f64>())
        .fold(0.0, f64::max);
    let squarings = if norm > 0.25 {
        (norm / 0.25).log2().ceil() as u32
    } else {
        0
    };
    let a = m * Complex64::new(0.0, -1.0 / f64::from(1u32 << squarings));
    let mut term = SMatrix::<Complex64, N, N>::identity();
    let mut sum = term;
    for k in 1..=14 {
        term = term * a * Complex64::new(1.0 / f64::from(k), 0.0);
        sum += term;
    }
    for _ in 0..squarings {
        sum = sum * sum;
    }
    sum
}

/// One Magnus step of length h from z.
fn step<const N: usize>(
    h_of_z: &dyn Fn(f64) -> SMatrix<Complex64, N, N>,
    z: f64,
    h: f64,
) -> SMatrix<Complex64, N, N> {
    let s = 3f64.sqrt() / 6.0;
    let h1 = h_of_z(z + (0.5 - s) * h);
    let h2 = h_of_z(z + (0.5 + s) * h);
    // M = i Omega = h (H1 + H2) / 2 - i (sqrt3/12) h^2 [H2, H1]
    let m = (h1 + h2) * Complex64::new(h / 2.0, 0.0)
        - (h2 * h1 - h1 * h2) * Complex64::new(0.0, 3f64.sqrt() / 12.0 * h * h);
    expm_hermitian(&m)
}

/// The propagator on `n` equal steps.
pub fn propagate_fixed<const N: usize>(
    h_of_z: &dyn Fn(f64) -> SMatrix<Complex64, N, N>,
    z0: f64,
    z1: f64,
    n: usize,
) -> SMatrix<Complex64, N, N> {
    let h = (z1 - z0) / n as f64;
    let mut u = SMatrix::<Complex64, N, N>::identity();
    for k in 0..n {
        u = step(h_of_z, z0 + k as f64 * h, h) * u;
    }
    u
}

fn max_entry<const N: usize>(m: &SMatrix<Complex64, N, N>) -> f64 {
    m.iter().map(|z| z.norm()).fold(0.0, f64::max)
}

/// The propagator from z0 to z1 to the tolerance `tol` (largest entry),
/// starting from `n0` steps.
pub fn propagate<const N: usize>(
    h_of_z: &dyn Fn(f64) -> SMatrix<Complex64, N, N>,
    z0: f64,
    z1: f64,
    tol: f64,
    n0: usize,
) -> Result<Propagator, IntegrateError> {
    if !(z0.is_finite() && z1.is_finite() && z1 > z0) {
        return Err(IntegrateError::BadInterval);
    }
    // Resolve the fastest phase first: no more than half a radian of
    // |H| per step (H sampled at 64 points), else the first estimates come
    // from steps too long for the error to behave as h^4.
    let norm_max = (0..=64)
        .map(|k| {
            let z = z0 + (z1 - z0) * f64::from(k) / 64.0;
            h_of_z(z).iter().map(|v| v.norm()).sum::<f64>()
        })
        .fold(0.0, f64::max);
    let n_min = ((z1 - z0) * norm_max / 0.5).ceil() as usize;
    let mut n = n0.max(n_min).clamp(1, MAX_STEPS / 2);
    let mut coarse = propagate_fixed(h_of_z, z0, z1, n);
    let mut previous: Option<f64> = None;
    loop {
        let fine = propagate_fixed(h_of_z, z0, z1, 2 * n);
        let estimate = max_entry(&(fine - coarse)) / 15.0;
        // Accept only in the asymptotic range: the last halving cut the
        // difference by close to 16 (at least 8), or it is at rounding level.
        let asymptotic =
            estimate < 1e-14 || previous.is_some_and(|p| p / estimate.max(1e-300) > 8.0);
        previous = Some(estimate);
        if estimate <= tol && asymptotic {
            return Ok(Propagator {
                matrix: DMatrix::from_fn(N, N, |i, j| fine[(i, j)]),
                error_estimate: estimate,
                steps: 2 * n,
            });
        }
        if 2 * n >= MAX_STEPS {
            return Err(IntegrateError::NoConvergence {
                tol,
                steps: 2 * n,
                estimate,
            });
        }
        n *= 2;
        coarse = fine;
    }
}

/// H of three guides (upper rail, auxiliary, lower rail) with couplings
/// k_u, k_l to the auxiliary guide and detunings d_u, d_m, d_l (rad/um).
pub fn three_guide_h(k_u: f64, k_l: f64, d: [f64; 3]) -> SMatrix<Complex64, 3, 3> {
    let c = |x: f64| Complex64::new(x, 0.0);
    SMatrix::<Complex64, 3, 3>::new(
        c(d[0]),
        c(k_u),
        c(0.0),
        c(k_u),
        c(d[1]),
        c(k_l),
        c(0.0),
        c(k_l),
        c(d[2]),
    )
}

/// H of two guides with coupling k and detunings d.
pub fn two_guide_h(k: f64, d: [f64; 2]) -> SMatrix<Complex64, 2, 2> {
    let c = |x: f64| Complex64::new(x, 0.0);
    SMatrix::<Complex64, 2, 2>::new(c(d[0]), c(k), c(k), c(d[1]))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn max_abs(m: &DMatrix<Complex64>) -> f64 {
        m.iter().map(|z| z.norm()).fold(0.0, f64::max)
    }

    #[test]
    fn constant_three_guide_coupling_matches_the_analytic_solution() {
        // checks.md (coupled-mode theory): with constant k1, k2 and
        // W = sqrt(k1^2 + k2^2): U11 = (k2^2 + k1^2 cos Wz)/W^2,
        // U33 = (k1^2 + k2^2 cos Wz)/W^2, U13 = k1 k2 (cos Wz - 1)/W^2,
        // U22 = cos Wz, U12 = -i k1 sin(Wz)/W, U23 = -i k2 sin(Wz)/W.
        let (k1, k2, z) = (0.03f64, 0.05f64, 57.0f64);
        let w = (k1 * k1 + k2 * k2).sqrt();
        let (s, co) = (w * z).sin_cos();
        let h = |_z: f64| three_guide_h(k1, k2, [0.0; 3]);
        let u = propagate(&h, 0.0, z, 1e-12, 4).unwrap().matrix;
        let c = |x: f64| Complex64::new(x, 0.0);
        let i = |x: f64| Complex64::new(0.0, x);
        let want = DMatrix::from_row_slice(
            3,
            3,
            &[
                c((k2 * k2 + k1 * k1 * co) / (w * w)),
                i(-k1 * s / w),
                c(k1 * k2 * (co - 1.0) / (w * w)),
                i(-k1 * s / w),
                c(co),
                i(-k2 * s / w),
                c(k1 * k2 * (co - 1.0) / (w * w)),
                i(-k2 * s / w),
                c((k1 * k1 + k2 * k2 * co) / (w * w)),
            ],
        );
        assert!(max_abs(&(&u - &want)) < 1e-12);
    }

    #[test]
    fn detuned_coupler_peak_transfer() {
        // Yariv, IEEE JQE 9, 919 (1973): two guides with coupling k and half
        // the propagation-constant difference d transfer at most
        // k^2 / (k^2 + d^2), at z = pi / (2 sqrt(k^2 + d^2)).
        let (k, d) = (0.04f64, 0.03f64);
        let c = |x: f64| Complex64::new(x, 0.0);
        let h = |_z: f64| two_guide_h(k, [d, -d]);
        let z = std::f64::consts::PI / (2.0 * (k * k + d * d).sqrt());
        let u = propagate(&h, 0.0, z, 1e-12, 2).unwrap().matrix;
        assert!((u[(1, 0)].norm_sqr() - k * k / (k * k + d * d)).abs() < 1e-12);
        // Undetuned: cos kz and -i sin kz.
        let h0 = |_z: f64| two_guide_h(k, [0.0; 2]);
        let u = propagate(&h0, 0.0, 30.0, 1e-13, 2).unwrap().matrix;
        assert!((u[(0, 0)] - c((k * 30.0).cos())).norm() < 1e-13);
        assert!((u[(1, 0)] - Complex64::new(0.0, -(k * 30.0).sin())).norm() < 1e-13);
    }

    #[test]
    fn gaussian_pulses_of_area_pi_return_the_light_to_the_rails() {
        // Sjoqvist et al., New J. Phys. 14, 103035 (2012): a shared envelope
        // with area int W dz = pi gives S(theta) = I - 2|b><b| on the rails,
        // tan(theta/2) = k_u / k_l. Gaussian envelope W0 exp(-(z - L/2)^2 / s^2)
        // has area W0 s sqrt(pi) erf(L / (2 s)) (integral of a Gaussian).
        let theta = std::f64::consts::FRAC_PI_4;
        let (s, len) = (40.0f64, 400.0f64);
        let erf_term = 1.0 - 1e-20; // erf(5) = 1 - 1.5e-12; L/(2s) = 5
        let w0 = std::f64::consts::PI / (s * std::f64::consts::PI.sqrt() * erf_term);
        let (ku, kl) = ((theta / 2.0).sin(), (theta / 2.0).cos());
        let h = |z: f64| {
            let e = w0 * (-((z - len / 2.0) / s).powi(2)).exp();
            three_guide_h(ku * e, kl * e, [0.0; 3])
        };
        let p = propagate(&h, 0.0, len, 1e-11, 16).unwrap();
        let u = &p.matrix;
        // erf(5) differs from 1 by 1.5e-12: the area is pi to that.
        // Light entering a rail leaves m empty.
        assert!(u[(1, 0)].norm() < 1e-9 && u[(1, 2)].norm() < 1e-9, "{u}");
        let want = [[theta.cos(), -theta.sin()], [-theta.sin(), -theta.cos()]];
        let (rows, cols) = ([0, 2], [0, 2]);
        for (a, &r) in rows.iter().enumerate() {
            for (b, &c) in cols.iter().enumerate() {
                assert!(
                    (u[(r, c)] - Complex64::new(want[a][b], 0.0)).norm() < 1e-9,
                    "{r}{c}: {}",
                    u[(r, c)]
                );
            }
        }
    }

    #[test]
    fn fourth_order_convergence_and_an_honest_estimate() {
        // The error ratio per halving of the step is about 2^4 = 16 for a
        // fourth-order method; the estimate must bound the true error.
        let h = |z: f64| {
            let e = 0.05 * (-((z - 100.0) / 30.0).powi(2)).exp();
            three_guide_h(0.6 * e, 0.8 * e, [0.0, 2e-3 * (z / 50.0).sin(), 0.0])
        };
        let exact = propagate_fixed(&h, 0.0, 200.0, 1 << 14);
        let exact_d = DMatrix::from_fn(3, 3, |i, j| exact[(i, j)]);
        let err = |n| max_entry(&(propagate_fixed(&h, 0.0, 200.0, n) - exact));
        let (e1, e2, e3) = (err(16), err(32), err(64));
        for r in [e1 / e2, e2 / e3] {
            assert!(
                (12.0..20.0).contains(&r),
                "ratio {r} ({e1:e}, {e2:e}, {e3:e})"
            );
        }
        let p = propagate(&h, 0.0, 200.0, 1e-9, 4).unwrap();
        let true_err = max_abs(&(&p.matrix - &exact_d));
        assert!(
            true_err <= 2.0 * p.error_estimate + 1e-13,
            "{true_err:e} vs {:e}",
            p.error_estimate
        );
        assert!(p.error_estimate <= 1e-9);
    }
}
