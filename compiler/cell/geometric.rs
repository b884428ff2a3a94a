//! The geometric-phase three-waveguide cell: its analytic design for an
//! exponential coupling law, and its transfer matrix by integration.
//!
//! Two rails (upper u, lower l) bend on parabolas towards a straight
//! auxiliary guide m between them, `g_j(z) = g_min,j + b (z - L/2)^2`. With
//! `k(g) = k_ref exp(-(g - g_ref) / g_c)` both couplings are Gaussians of one
//! envelope, `k_j(z) = k(g_min,j) exp(-(z - L/2)^2 / s^2)`, `s^2 = g_c / b`,
//! so their ratio is constant. When the pulse area `A = int W dz`,
//! `W = sqrt(k_u^2 + k_l^2)`, equals pi, the bright state
//! `(k_u |u> + k_l |l>) / W` makes one full cycle through m and the rails see
//! the holonomic gate `S(theta) = I - 2 |b><b|` with `tan(theta/2) = k_u/k_l`
//! (Sjoqvist, Tong, Andersson, Hessmo, Johansson & Singh, New J. Phys. 14,
//! 103035, 2012; docs/physics.md). The design, as in physics.md section 3:
//!
//! - gap difference `g_u - g_l = -g_c ln tan(theta/2)` (theta in (0, pi/2]),
//!   the lower rail the closer one;
//! - `W0 s sqrt(pi) erf(L / (2 s)) = pi` (the Gaussian integral), with `L`
//!   where the envelope has fallen to `residual` of its peak:
//!   `L = 2 s sqrt(ln(1 / residual))`;
//! - **shortest**: the closer gap is the process minimum, so `W0 =
//!   k(g_min) / cos(theta/2)` and each theta has its own b and L;
//!   **uniform**: one `W0 = k(g_min)` for every theta (the theta -> 0 cell
//!   sets it), so every cell has the same b and L and only the two gaps
//!   change.
//!
//! Gaps in nm, lengths in um, the bending coefficient `b` in nm/um^2 inside
//! (`bend_per_m = 1e3 b` in the reports: 1 nm/um^2 = 1000 /m).

use super::integrate::{self, IntegrateError, Propagator};
use crate::process::coupling::ExponentialFit;
use nalgebra::DMatrix;
use num_complex::Complex64;

/// How the cells of a mesh are sized (cli.md `--cell-length`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LengthRule {
    Uniform,
    Shortest,
}

#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GeometricDesign {
    pub theta: f64,
    pub gap_upper_nm: f64,
    pub gap_lower_nm: f64,
    /// Bending coefficient of both rails, nm of gap per um^2 of z.
    pub bend_nm_per_um2: f64,
    pub length_um: f64,
    /// Envelope at the cell ends relative to its peak.
    pub residual: f64,
}

impl GeometricDesign {
    /// `b` in 1/m, as reports and netlists give it.
    pub fn bend_per_m(&self) -> f64 {
        self.bend_nm_per_um2 * 1e3
    }

    /// Where either rail's gap crosses one of `knots_nm` (the law's
    /// knots), in z (um): the breaks of H for the integrator.
    pub fn knot_crossings_um(&self, knots_nm: &[f64]) -> Vec<f64> {
        let mut z = Vec::new();
        for g_min in [self.gap_upper_nm, self.gap_lower_nm] {
            for &k in knots_nm {
                if k > g_min && self.bend_nm_per_um2 > 0.0 {
                    let x = ((k - g_min) / self.bend_nm_per_um2).sqrt();
                    z.push(self.length_um / 2.0 - x);
                    z.push(self.length_um / 2.0 + x);
                }
            }
        }
        z
    }

    /// The two gaps at z (nm).
    pub fn gaps_nm(&self, z_um: f64) -> (f64, f64) {
        let x = z_um - self.length_um / 2.0;
        let rise = self.bend_nm_per_um2 * x * x;
        (self.gap_upper_nm + rise, self.gap_lower_nm + rise)
    }
}

#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum CellError {
    #[error("theta must be in (0, pi/2], got {0}")]
    Theta(f64),
    #[error("the residual coupling at the cell ends must be in (0, 0.5), got {0}")]
    Residual(f64),
    #[error("the coupling law must have k_ref > 0 and g_c > 0")]
    Law,
    #[error(transparent)]
    Integrate(#[from] IntegrateError),
}

/// The analytic design for the exponential law `fit` (module doc).
pub fn analytic(
    theta: f64,
    fit: &ExponentialFit,
    min_gap_nm: f64,
    rule: LengthRule,
    residual: f64,
) -> Result<GeometricDesign, CellError> {
    if !(theta > 0.0 && theta <= std::f64::consts::FRAC_PI_2 + 1e-12) {
        return Err(CellError::Theta(theta));
    }
    if !(residual > 0.0 && residual < 0.5) {
        return Err(CellError::Residual(residual));
    }
    if !(fit.k_ref_per_um > 0.0 && fit.g_c_nm > 0.0) {
        return Err(CellError::Law);
    }
    let half = theta / 2.0;
    let k_min_gap = fit.k_per_um(min_gap_nm);
    let (w0, gap_lower) = match rule {
        LengthRule::Shortest => (k_min_gap / half.cos(), min_gap_nm),
        LengthRule::Uniform => {
            // k_l = W0 cos(theta/2) with W0 = k(g_min).
            let k_l = k_min_gap * half.cos();
            (
                k_min_gap,
                fit.g_ref_nm - fit.g_c_nm * (k_l / fit.k_ref_per_um).ln(),
            )
        }
    };
    let gap_upper = gap_lower - fit.g_c_nm * half.tan().ln();
    let root = (1.0 / residual).ln().sqrt();
    // A = W0 s sqrt(pi) erf(root) = pi.
    let s = std::f64::consts::PI.sqrt() / (w0 * erf(root));
    Ok(GeometricDesign {
        theta,
        gap_upper_nm: gap_upper,
        gap_lower_nm: gap_lower,
        bend_nm_per_um2: fit.g_c_nm / (s * s),
        length_um: 2.0 * s * root,
        residual,
    })
}

/// H(z) of a cell with the coupling law `k_of_gap` (rad/um at a gap in
/// nm), a common coupling scale, and detunings `d` of (u, m, l) in rad/um.
pub fn hamiltonian<'a>(
    design: &'a GeometricDesign,
    k_of_gap: &'a dyn Fn(f64) -> f64,
    scale: f64,
    d: [f64; 3],
) -> impl Fn(f64) -> nalgebra::SMatrix<Complex64, 3, 3> + 'a {
    move |z| {
        let (gu, gl) = design.gaps_nm(z);
        integrate::three_guide_h(scale * k_of_gap(gu), scale * k_of_gap(gl), d)
    }
}

/// The cell's 3 x 3 transfer matrix (order u, m, l) to `tol`.
pub fn transfer(
    design: &GeometricDesign,
    k_of_gap: &dyn Fn(f64) -> f64,
    scale: f64,
    d: [f64; 3],
    tol: f64,
) -> Result<Propagator, CellError> {
    let h = hamiltonian(design, k_of_gap, scale, d);
    Ok(integrate::propagate(&h, 0.0, design.length_um, tol, 32)?)
}

/// The rail block (rows and columns u, l) of a 3 x 3 transfer matrix.
pub fn rail_block(u: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    DMatrix::from_fn(2, 2, |i, j| u[(2 * i, 2 * j)])
}

/// `S(theta) = [[cos, -sin], [-sin, -cos]]`.
pub fn s_theta(theta: f64) -> DMatrix<Complex64> {
    let (s, c) = theta.sin_cos();
    let r = |x: f64| Complex64::new(x, 0.0);
    DMatrix::from_row_slice(2, 2, &[r(c), r(-s), r(-s), r(-c)])
}

/// The error function, by the series for |x| < 3 and the continued
/// fraction beyond (Abramowitz & Stegun 7.1.5 and 7.1.14), to about 1e-15.
pub fn erf(x: f64) -> f64 {
    if x < 0.0 {
        return -erf(-x);
    }
    if x < 3.0 {
        // erf x = 2/sqrt(pi) sum (-1)^n x^(2n+1) / (n! (2n+1))
        let mut term = x;
        let mut sum = x;
        let x2 = x * x;
        for n in 1..200 {
            term *= -x2 / n as f64;
            let add = term / (2 * n + 1) as f64;
            sum += add;
            if add.abs() < 1e-17 * sum.abs() {
                break;
            }
        }
        return 2.0 / std::f64::consts::PI.sqrt() * sum;
    }
    // erfc x = exp(-x^2)/sqrt(pi) * 1/(x + 1/2/(x + 1/(x + 3/2/(x + ...))))
    let mut f = x;
    for k in (1..60).rev() {
        f = x + (k as f64 / 2.0) / f;
    }
    1.0 - (-x * x).exp() / (std::f64::consts::PI.sqrt() * f)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn law() -> ExponentialFit {
        // The exponential law of checks.md's cell example: k_ref 0.0634
        // rad/um at 200 nm, g_c 119 nm (computed independently).
        ExponentialFit {
            k_ref_per_um: 0.0634,
            g_ref_nm: 200.0,
            g_c_nm: 119.0,
            fit_rms: 0.0,
        }
    }

    fn max_abs(m: &DMatrix<Complex64>) -> f64 {
        m.iter().map(|z| z.norm()).fold(0.0, f64::max)
    }

    #[test]
    fn erf_values() {
        // Abramowitz & Stegun, table 7.1: erf(0.5) = 0.5204998778,
        // erf(1) = 0.8427007929, erf(2) = 0.9953222650; erf(4) = 1 - 1.54e-8.
        assert!((erf(0.5) - 0.520_499_877_8).abs() < 1e-10);
        assert!((erf(1.0) - 0.842_700_792_9).abs() < 1e-10);
        assert!((erf(2.0) - 0.995_322_265_0).abs() < 1e-10);
        assert!((1.0 - erf(4.0) - 1.541_725_790e-8).abs() < 1e-16);
    }

    #[test]
    fn the_analytic_design_is_exact_for_the_exponential_law() {
        // physics.md section 3: for the exponential law the design gives
        // S(theta) on the rails, up to the envelope cut at the ends (the
        // residual coupling there, 1e-6 of the peak, leaves ~1e-6 behind).
        let f = law();
        let k = |g: f64| f.k_per_um(g);
        for theta in [
            0.1,
            std::f64::consts::FRAC_PI_4,
            1.2,
            std::f64::consts::FRAC_PI_2,
        ] {
            for rule in [LengthRule::Shortest, LengthRule::Uniform] {
                let d = analytic(theta, &f, 200.0, rule, 1e-6).unwrap();
                assert!(d.gap_lower_nm >= 200.0 - 1e-9);
                let p = transfer(&d, &k, 1.0, [0.0; 3], 1e-10).unwrap();
                let r = rail_block(&p.matrix);
                assert!(
                    max_abs(&(&r - s_theta(theta))) < 1e-5,
                    "theta {theta} {rule:?}: {r}"
                );
                let leak = p.matrix[(1, 0)].norm_sqr() + p.matrix[(1, 2)].norm_sqr();
                assert!(leak < 1e-9, "power left in m: {leak:e}");
            }
        }
        // Uniform cells share b and L.
        let a = analytic(0.3, &f, 200.0, LengthRule::Uniform, 1e-3).unwrap();
        let b = analytic(1.3, &f, 200.0, LengthRule::Uniform, 1e-3).unwrap();
        assert!(
            (a.length_um - b.length_um).abs() < 1e-9
                && (a.bend_nm_per_um2 - b.bend_nm_per_um2).abs() < 1e-15
        );
    }

    #[test]
    fn a_common_coupling_scale_gives_the_published_mixture() {
        // checks.md (derived from the dark/bright decomposition, verified
        // independently): every coupling scaled by s makes the area A = s pi
        // and the rail block exactly (eta/2) I + (1 - eta/2) S(theta),
        // eta = 1 + cos A; the bright state leaves sin^2 A... in m.
        let f = law();
        let k = |g: f64| f.k_per_um(g);
        let theta = std::f64::consts::FRAC_PI_4;
        let d = analytic(theta, &f, 200.0, LengthRule::Shortest, 1e-7).unwrap();
        for scale in [0.9, 0.97, 1.05] {
            let p = transfer(&d, &k, scale, [0.0; 3], 1e-11).unwrap();
            // The envelope cut at 1e-7 makes the area s pi erf(...) ~ s pi.
            let area = scale * std::f64::consts::PI;
            let eta = 1.0 + area.cos();
            let want = DMatrix::identity(2, 2) * Complex64::new(eta / 2.0, 0.0)
                + s_theta(theta) * Complex64::new(1.0 - eta / 2.0, 0.0);
            let r = rail_block(&p.matrix);
            assert!(
                max_abs(&(&r - &want)) < 1e-6,
                "scale {scale}: {r} vs {want}"
            );
        }
    }
}
