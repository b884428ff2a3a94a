//! The second baseline: a Mach-Zehnder interferometer of two 50:50
//! directional couplers and an internal phase on the upper arm.
//!
//! With couplers `C = [[c, -i s], [-i s, c]]` and the arm phase
//! `P = diag(e^{i phi}, 1)`, the cell is `U = C P C`. For ideal 50:50
//! couplers `|U_lu|^2 = cos^2(phi / 2)`, so a cross power sin^2 theta needs
//! `phi = pi - 2 theta` (Born & Wolf, Principles of Optics, 7th ed., 1999,
//! section 7.5; for integrated optics Okamoto, Fundamentals of Optical
//! Waveguides, 2nd ed., 2006, section 4.7). The couplers are this crate's
//! refined directional couplers (coupler.rs) on the real law, so their
//! small split error is carried, and the phase is solved on the real
//! transfer: `phi` is set where `|U_lu|^2 = sin^2 theta` exactly, which an
//! imperfect coupler pair can still reach when `|c^2 - s^2|` is below
//! `cos 2 theta`. The arm is a thermal phase shifter of the process's
//! length, between the couplers at the rail pitch (the arms are as long
//! as each other: no path-length phase).

use super::coupler::{self, CouplerDesign};
use super::geometric::CellError;
use crate::process::coupling::{ExponentialFit, SmoothLaw};
use nalgebra::DMatrix;
use num_complex::Complex64;

#[derive(Clone, Debug, PartialEq)]
pub struct MziDesign {
    pub theta: f64,
    /// Each of the two 50:50 couplers.
    pub coupler: CouplerDesign,
    /// The internal phase on the upper arm, rad.
    pub phase_rad: f64,
    /// Length of the phase section between the couplers, um.
    pub arm_um: f64,
    pub length_um: f64,
    /// 2 x 2, order (upper, lower).
    pub transfer: DMatrix<Complex64>,
}

/// `C diag(e^{i phi}, 1) C'` for two couplers' transfers.
pub fn compose(
    first: &DMatrix<Complex64>,
    second: &DMatrix<Complex64>,
    phase_rad: f64,
) -> DMatrix<Complex64> {
    let mut p = DMatrix::<Complex64>::identity(2, 2);
    p[(0, 0)] = Complex64::from_polar(1.0, phase_rad);
    second * p * first
}

/// Designs the MZI of split theta on the law, with couplers at `gap_nm`
/// and bends of `bend_radius_um`, and a phase section of `arm_um`.
pub fn design(
    theta: f64,
    law: &SmoothLaw,
    fit: &ExponentialFit,
    gap_nm: f64,
    bend_radius_um: f64,
    arm_um: f64,
) -> Result<MziDesign, CellError> {
    if !(theta > 0.0 && theta <= std::f64::consts::FRAC_PI_2 + 1e-12) {
        return Err(CellError::Theta(theta));
    }
    let c = coupler::design(
        std::f64::consts::FRAC_PI_4,
        law,
        fit,
        gap_nm,
        bend_radius_um,
    )?;
    // Solve |U_lu(phi)|^2 = sin^2 theta on [0, pi] by bisection from the
    // ideal phi = pi - 2 theta: the cross power falls monotonically in phi
    // there for a coupler pair near 50:50.
    let target = theta.sin().powi(2);
    let cross = |phi: f64| compose(&c.transfer, &c.transfer, phi)[(1, 0)].norm_sqr();
    let (mut lo, mut hi) = (0.0f64, std::f64::consts::PI);
    let mut phi = std::f64::consts::PI - 2.0 * theta;
    if cross(lo) >= target && cross(hi) <= target {
        for _ in 0..80 {
            phi = 0.5 * (lo + hi);
            if cross(phi) > target {
                lo = phi;
            } else {
                hi = phi;
            }
        }
    }
    Ok(MziDesign {
        theta,
        length_um: 2.0 * c.length_um + arm_um,
        transfer: compose(&c.transfer, &c.transfer, phi),
        coupler: c,
        phase_rad: phi,
        arm_um,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::process::law::characterise;
    use crate::process::presets::preset;

    #[test]
    fn the_mzi_splits_as_asked_and_its_phase_is_the_textbook_one() {
        // Born & Wolf (1999) section 7.5: |U_lu|^2 = cos^2(phi/2) for ideal
        // 50:50 couplers, so phi = pi - 2 theta; the refined couplers are
        // 50:50 to 1e-9, so the solved phase is that to about 1e-4.
        let p = preset("si220_wire").unwrap();
        let c = characterise(&p).unwrap();
        let law = c.law();
        for theta in [0.2, std::f64::consts::FRAC_PI_4, 1.4] {
            let d = design(theta, &law.smooth, &law.fit, 200.0, 5.0, 100.0).unwrap();
            assert!((d.transfer[(1, 0)].norm_sqr() - theta.sin().powi(2)).abs() < 1e-9);
            assert!(
                (d.phase_rad - (std::f64::consts::PI - 2.0 * theta)).abs() < 1e-4,
                "{theta}: {}",
                d.phase_rad
            );
            let unit = d.transfer.adjoint() * &d.transfer - DMatrix::identity(2, 2);
            assert!(unit.iter().all(|z| z.norm() < 1e-9));
            assert!((d.length_um - 2.0 * d.coupler.length_um - 100.0).abs() < 1e-9);
        }
        assert!(design(0.0, &law.smooth, &law.fit, 200.0, 5.0, 100.0).is_err());
    }
}
