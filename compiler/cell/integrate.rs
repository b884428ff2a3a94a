//! The propagator of coupled-mode equations `d/dz a = -i H(z) a` for two or
//! three guides, by Magnus integrators with Gauss-Legendre nodes.
//!
//! **Fourth order** (Iserles & Norsett, Phil. Trans. R. Soc. A 357, 983,
//! 1999; Blanes, Casas, Oteo & Ros, Phys. Rep. 470, 151, 2009, section 5.2):
//!
//! ```text
//! H1 = H(z + (1/2 - sqrt3/6) h),  H2 = H(z + (1/2 + sqrt3/6) h)
//! Omega = -i h (H1 + H2) / 2 - (sqrt3 / 12) h^2 [H2, H1]
//! a(z + h) = exp(Omega) a(z)
//! ```
//!
//! **Sixth order** (Blanes, Casas & Ros, BIT 40, 434, 2000; Phys. Rep. 470,
//! section 5.3), three nodes `c = 1/2 -+ sqrt15/10, 1/2`, `A_i = -i H(z + c_i h)`:
//!
//! ```text
//! a1 = h A2,  a2 = (sqrt15 h / 3)(A3 - A1),  a3 = (10 h / 3)(A3 - 2 A2 + A1)
//! C1 = [a1, a2],  C2 = -(1/60) [a1, 2 a3 + C1]
//! Omega = a1 + a3 / 12 + (1/240) [-20 a1 - a3 + C1, a2 + C2]
//! ```
//!
//! Both are tested for their order. The geometric cells use the fourth-order
//! method on equal steps, the fastest at their tolerances (measured in
//! `cell::refine::integrate_cell`); the sixth-order one with breaks at the
//! coupling law's knots is the accurate choice near rounding level.
//!
//! For a Hermitian H(z), Omega is anti-Hermitian and each step is a
//! unitary: `exp(Omega) = exp(-i M)` with `M = i Omega` Hermitian, taken to
//! rounding level by [`expm_hermitian`]. Both methods are symmetric, so the
//! global error is a series in even powers of h. The step count comes from a
//! tolerance with a real estimate: the propagators on n and on 2n equal
//! steps differ by about `(2^p - 1)` times the fine one's error, so
//! `|U_2n - U_n| / (2^p - 1)` estimates the error of U_2n (Richardson, as in
//! Hairer, Norsett & Wanner, Solving ODEs I, 1993, section II.4); n doubles
//! until the estimate meets the tolerance and the last halving shows the
//! method's order (the difference fell by at least half of 2^p), unless the
//! caller vouches for the regime with a step count from an accepted
//! integration of a nearby H ([`Start::Trusted`]).

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
    /// Steps taken in all, the coarser levels of the estimate included.
    pub work_steps: usize,
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

/// The Magnus integrator (module doc).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    Magnus4,
    Magnus6,
}

impl Method {
    /// The global order p.
    pub fn order(self) -> i32 {
        match self {
            Method::Magnus4 => 4,
            Method::Magnus6 => 6,
        }
    }
}

/// Where the step doubling starts.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Start {
    /// From at least this many steps, and at least enough to resolve the
    /// fastest phase of H (half a radian per step); accept only once a
    /// halving shows the method's order.
    Probe(usize),
    /// From exactly this many steps, known from an accepted integration of
    /// a nearby H to lie in the asymptotic range: the first pair that meets
    /// the tolerance is accepted.
    Trusted(usize),
}

type Mat<const N: usize> = SMatrix<Complex64, N, N>;

/// `a b`, written out (a third faster than the generic product for 3 x 3).
#[inline(always)]
fn mul<const N: usize>(a: &Mat<N>, b: &Mat<N>) -> Mat<N> {
    let mut c = Mat::<N>::zeros();
    for j in 0..N {
        for i in 0..N {
            let mut s = a[(i, 0)] * b[(0, j)];
            for k in 1..N {
                s += a[(i, k)] * b[(k, j)];
            }
            c[(i, j)] = s;
        }
    }
    c
}

#[inline(always)]
fn commutator<const N: usize>(a: &Mat<N>, b: &Mat<N>) -> Mat<N> {
    mul(a, b) - mul(b, a)
}

/// `exp(-i M)` for a small Hermitian M, by scaling and squaring with a
/// truncated Taylor series (Moler & Van Loan, SIAM Review 45, 3, 2003,
/// method 3) evaluated by the Paterson-Stockmeyer scheme (SIAM J. Comput.
/// 2, 60, 1973): degree 6 in three products when the norm is below 0.02,
/// degree 12 in five below 0.25, scaled to that beforehand; either way the
/// truncation is below 3e-17 of the norm. An eigen-decomposition would be
/// exactly unitary in exact arithmetic but is less accurate for the nearly
/// degenerate M of the cell ends, where the couplings vanish.
pub fn expm_hermitian<const N: usize>(m: &Mat<N>) -> Mat<N> {
    let norm: f64 = (0..N)
        .map(|i| (0..N).map(|j| m[(i, j)].norm()).sum::<f64>())
        .fold(0.0, f64::max);
    let (squarings, degree12) = if norm <= 0.02 {
        (0, false)
    } else if norm <= 0.25 {
        (0, true)
    } else {
        ((norm / 0.25).log2().ceil() as u32, true)
    };
    let a = m * Complex64::new(0.0, -1.0 / f64::from(1u32 << squarings));
    let id = Mat::<N>::identity();
    let a2 = mul(&a, &a);
    let a3 = mul(&a2, &a);
    // 1/k! for k = 0..12
    const C: [f64; 13] = [
        1.0,
        1.0,
        0.5,
        1.0 / 6.0,
        1.0 / 24.0,
        1.0 / 120.0,
        1.0 / 720.0,
        1.0 / 5040.0,
        1.0 / 40320.0,
        1.0 / 362880.0,
        1.0 / 3628800.0,
        1.0 / 39916800.0,
        1.0 / 479001600.0,
    ];
    let block = |o: usize, top: Option<&Mat<N>>| -> Mat<N> {
        let mut b = id * Complex64::new(C[o], 0.0)
            + a * Complex64::new(C[o + 1], 0.0)
            + a2 * Complex64::new(C[o + 2], 0.0);
        if let Some(t) = top {
            b += t * Complex64::new(C[o + 3], 0.0);
        }
        b
    };
    let mut sum = if degree12 {
        let a4 = mul(&a2, &a2);
        // B0 + A4 (B1 + A4 B2), B_j = sum_{k<4} c_{4j+k} A^k, B2 += c12 A4
        let b0 = block(0, Some(&a3));
        let b1 = block(4, Some(&a3));
        let b2 = block(8, Some(&a3)) + a4 * Complex64::new(C[12], 0.0);
        b0 + mul(&a4, &(b1 + mul(&a4, &b2)))
    } else {
        // B0 + A3 B1, B0 = c0 + c1 A + c2 A2, B1 = c3 + c4 A + c5 A2 + c6 A3
        let b0 = block(0, None);
        let b1 = block(3, Some(&a3));
        b0 + mul(&a3, &b1)
    };
    for _ in 0..squarings {
        sum = mul(&sum, &sum);
    }
    sum
}

/// One Magnus step of length h from z.
fn step<const N: usize>(method: Method, h_of_z: &dyn Fn(f64) -> Mat<N>, z: f64, h: f64) -> Mat<N> {
    let m = match method {
        Method::Magnus4 => {
            let s = 3f64.sqrt() / 6.0;
            let h1 = h_of_z(z + (0.5 - s) * h);
            let h2 = h_of_z(z + (0.5 + s) * h);
            // M = i Omega = h (H1 + H2) / 2 - i (sqrt3/12) h^2 [H2, H1]
            (h1 + h2) * Complex64::new(h / 2.0, 0.0)
                - commutator(&h2, &h1) * Complex64::new(0.0, 3f64.sqrt() / 12.0 * h * h)
        }
        Method::Magnus6 => {
            let s = 15f64.sqrt() / 10.0;
            let mi = Complex64::new(0.0, -1.0);
            let a1 = h_of_z(z + (0.5 - s) * h) * mi;
            let a2 = h_of_z(z + 0.5 * h) * mi;
            let a3 = h_of_z(z + (0.5 + s) * h) * mi;
            let r = |x: f64| Complex64::new(x, 0.0);
            let al1 = a2 * r(h);
            let al2 = (a3 - a1) * r(15f64.sqrt() * h / 3.0);
            let al3 = (a3 - a2 * r(2.0) + a1) * r(10.0 * h / 3.0);
            let c1 = commutator(&al1, &al2);
            let c2 = commutator(&al1, &(al3 * r(2.0) + c1)) * r(-1.0 / 60.0);
            let omega = al1
                + al3 * r(1.0 / 12.0)
                + commutator(&(al1 * r(-20.0) - al3 + c1), &(al2 + c2)) * r(1.0 / 240.0);
            // M = i Omega
            omega * Complex64::new(0.0, 1.0)
        }
    };
    expm_hermitian(&m)
}

/// The propagator over consecutive segments `edges[i]..edges[i + 1]`, each
/// on `counts[i]` equal steps.
pub fn propagate_segments<const N: usize>(
    method: Method,
    h_of_z: &dyn Fn(f64) -> Mat<N>,
    edges: &[f64],
    counts: &[usize],
) -> Mat<N> {
    let mut u = Mat::<N>::identity();
    for (w, &n) in edges.windows(2).zip(counts) {
        let h = (w[1] - w[0]) / n as f64;
        for k in 0..n {
            u = mul(&step(method, h_of_z, w[0] + k as f64 * h, h), &u);
        }
    }
    u
}

/// The propagator on `n` equal steps.
pub fn propagate_fixed<const N: usize>(
    method: Method,
    h_of_z: &dyn Fn(f64) -> Mat<N>,
    z0: f64,
    z1: f64,
    n: usize,
) -> Mat<N> {
    let h = (z1 - z0) / n as f64;
    let mut u = Mat::<N>::identity();
    for k in 0..n {
        u = mul(&step(method, h_of_z, z0 + k as f64 * h, h), &u);
    }
    u
}

fn max_entry<const N: usize>(m: &Mat<N>) -> f64 {
    m.iter().map(|z| z.norm()).fold(0.0, f64::max)
}

/// The propagator from z0 to z1 to the tolerance `tol` (largest entry) by
/// the sixth-order method, starting from at least `n0` steps.
pub fn propagate<const N: usize>(
    h_of_z: &dyn Fn(f64) -> Mat<N>,
    z0: f64,
    z1: f64,
    tol: f64,
    n0: usize,
) -> Result<Propagator, IntegrateError> {
    propagate_with(Method::Magnus6, h_of_z, z0, z1, tol, Start::Probe(n0))
}

/// The propagator from z0 to z1 to the tolerance `tol` (module doc).
pub fn propagate_with<const N: usize>(
    method: Method,
    h_of_z: &dyn Fn(f64) -> Mat<N>,
    z0: f64,
    z1: f64,
    tol: f64,
    start: Start,
) -> Result<Propagator, IntegrateError> {
    propagate_piecewise(method, h_of_z, z0, z1, &[], tol, start)
}

/// As [`propagate_with`], for an H that is smooth only between `breaks`
/// (points where a derivative of H jumps, such as the knots of a spline
/// law): no step straddles one, so the method keeps its order. Each
/// segment gets steps in proportion to its length (at least one), and
/// doubling halves every step. `Start` counts steps in all.
pub fn propagate_piecewise<const N: usize>(
    method: Method,
    h_of_z: &dyn Fn(f64) -> Mat<N>,
    z0: f64,
    z1: f64,
    breaks: &[f64],
    tol: f64,
    start: Start,
) -> Result<Propagator, IntegrateError> {
    if !(z0.is_finite() && z1.is_finite() && z1 > z0) {
        return Err(IntegrateError::BadInterval);
    }
    let mut edges = vec![z0];
    let mut inner: Vec<f64> = breaks
        .iter()
        .copied()
        .filter(|z| z.is_finite() && *z > z0 && *z < z1)
        .collect();
    inner.sort_by(f64::total_cmp);
    for z in inner {
        // Segments shorter than 1e-9 of the interval are merged away.
        if z - edges[edges.len() - 1] > 1e-9 * (z1 - z0) && z1 - z > 1e-9 * (z1 - z0) {
            edges.push(z);
        }
    }
    edges.push(z1);
    let counts_for = |n: usize| -> Vec<usize> {
        edges
            .windows(2)
            .map(|w| ((n as f64 * (w[1] - w[0]) / (z1 - z0)).round() as usize).max(1))
            .collect()
    };
    let (mut n, trusted) = match start {
        Start::Trusted(n) => (n.clamp(1, MAX_STEPS / 2), true),
        Start::Probe(n0) => {
            // Resolve the fastest phase first: no more than half a radian
            // of |H| per step (H sampled at 32 points), else the first
            // estimates come from steps too long for the error to behave
            // as h^p.
            let norm_max = (0..=32)
                .map(|k| {
                    let z = z0 + (z1 - z0) * f64::from(k) / 32.0;
                    h_of_z(z).iter().map(|v| v.norm()).sum::<f64>()
                })
                .fold(0.0, f64::max);
            let n_min = ((z1 - z0) * norm_max / 0.5).ceil() as usize;
            (n0.max(n_min).clamp(1, MAX_STEPS / 2), false)
        }
    };
    let full = f64::from(1u32 << method.order());
    let mut counts = counts_for(n);
    n = counts.iter().sum::<usize>();
    let mut work = n;
    let mut coarse = propagate_segments(method, h_of_z, &edges, &counts);
    let mut previous: Option<f64> = None;
    loop {
        counts.iter_mut().for_each(|c| *c *= 2);
        let fine = propagate_segments(method, h_of_z, &edges, &counts);
        work += 2 * n;
        let estimate = max_entry(&(fine - coarse)) / (full - 1.0);
        // Accept only in the asymptotic range: the last halving cut the
        // difference by at least half of 2^p, or it is at rounding level,
        // or the caller vouched for the start.
        let asymptotic = trusted
            || estimate < 1e-14
            || previous.is_some_and(|p| p / estimate.max(1e-300) > full / 2.0);
        previous = Some(estimate);
        if estimate <= tol && asymptotic {
            return Ok(Propagator {
                matrix: DMatrix::from_fn(N, N, |i, j| fine[(i, j)]),
                error_estimate: estimate,
                steps: 2 * n,
                work_steps: work,
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
        let exact = propagate_fixed(Method::Magnus4, &h, 0.0, 200.0, 1 << 14);
        let exact_d = DMatrix::from_fn(3, 3, |i, j| exact[(i, j)]);
        let err = |n| max_entry(&(propagate_fixed(Method::Magnus4, &h, 0.0, 200.0, n) - exact));
        let (e1, e2, e3) = (err(16), err(32), err(64));
        for r in [e1 / e2, e2 / e3] {
            assert!(
                (12.0..20.0).contains(&r),
                "ratio {r} ({e1:e}, {e2:e}, {e3:e})"
            );
        }
        let p = propagate_with(Method::Magnus4, &h, 0.0, 200.0, 1e-9, Start::Probe(4)).unwrap();
        let true_err = max_abs(&(&p.matrix - &exact_d));
        assert!(
            true_err <= 2.0 * p.error_estimate + 1e-13,
            "{true_err:e} vs {:e}",
            p.error_estimate
        );
        assert!(p.error_estimate <= 1e-9);
    }

    #[test]
    fn sixth_order_convergence_and_an_honest_estimate() {
        // Blanes, Casas & Ros, BIT 40, 434 (2000): the three-node scheme is
        // of order six, an error ratio of about 2^6 = 64 per halving.
        let h = |z: f64| {
            let e = 0.05 * (-((z - 100.0) / 30.0).powi(2)).exp();
            three_guide_h(0.6 * e, 0.8 * e, [1e-3, 2e-3 * (z / 50.0).sin(), 0.0])
        };
        let exact = propagate_fixed(Method::Magnus6, &h, 0.0, 200.0, 1 << 12);
        let exact_d = DMatrix::from_fn(3, 3, |i, j| exact[(i, j)]);
        let err = |n| max_entry(&(propagate_fixed(Method::Magnus6, &h, 0.0, 200.0, n) - exact));
        let (e1, e2, e3) = (err(8), err(16), err(32));
        for r in [e1 / e2, e2 / e3] {
            assert!(
                (45.0..85.0).contains(&r),
                "ratio {r} ({e1:e}, {e2:e}, {e3:e})"
            );
        }
        for tol in [1e-7, 1e-9, 1e-11] {
            let p = propagate(&h, 0.0, 200.0, tol, 4).unwrap();
            let true_err = max_abs(&(&p.matrix - &exact_d));
            assert!(
                true_err <= 2.0 * p.error_estimate + 1e-13 && p.error_estimate <= tol,
                "tol {tol:e}: {true_err:e} vs {:e}",
                p.error_estimate
            );
            // A trusted start at the accepted count takes one pair only.
            let q = propagate_with(
                Method::Magnus6,
                &h,
                0.0,
                200.0,
                tol,
                Start::Trusted(p.steps / 2),
            )
            .unwrap();
            assert_eq!(q.work_steps, p.steps / 2 + p.steps);
            assert!(max_abs(&(&q.matrix - &p.matrix)) < 1e-15);
        }
    }

    #[test]
    fn the_exponential_is_unitary_and_exact_across_norms() {
        // exp(-i M) against the eigen-decomposition of the Hermitian M
        // (nalgebra's symmetric eigen solver on the real 6 x 6 form is not
        // needed: M here is real symmetric, so exp(-i M) = V exp(-i L) V^T).
        for scale in [1e-4, 0.01, 0.1, 0.2, 0.7, 3.0] {
            let m: nalgebra::Matrix3<f64> =
                nalgebra::Matrix3::new(0.3, 1.0, 0.0, 1.0, -0.2, 0.6, 0.0, 0.6, 0.1) * scale;
            let e = m.symmetric_eigen();
            let want = DMatrix::from_fn(3, 3, |i, j| {
                (0..3)
                    .map(|k| {
                        Complex64::from_polar(1.0, -e.eigenvalues[k])
                            * e.eigenvectors[(i, k)]
                            * e.eigenvectors[(j, k)]
                    })
                    .sum::<Complex64>()
            });
            let mc = m.map(|x| Complex64::new(x, 0.0));
            let got = expm_hermitian(&mc);
            let got = DMatrix::from_fn(3, 3, |i, j| got[(i, j)]);
            assert!(max_abs(&(&got - &want)) < 1e-14, "scale {scale}");
            let unit = got.adjoint() * &got - DMatrix::<Complex64>::identity(3, 3);
            assert!(max_abs(&unit) < 1e-14, "scale {scale}");
        }
    }
}
