//! The baseline: a two-guide directional coupler at the process's minimum
//! gap, with the coupling its lead-in and lead-out bends add.
//!
//! Two guides at gap g couple as `[[cos kz, -i sin kz], [-i sin kz, cos kz]]`
//! (Yariv, IEEE JQE 9, 919, 1973), so a cross power sin^2 theta needs
//! `int k dz = theta`. The bends of radius R that bring the guides together
//! open the gap as `g + z^2 / R` (both guides bending, small angles), and add
//! `int k(g + z^2/R) dz` on each side, `k(g) sqrt(pi R g_c) / 2` each for the
//! exponential law (a Gaussian integral). The straight length is what
//! remains; the transfer is then integrated along the whole path with the
//! process's smooth law, and the straight length refined by Newton's method
//! until the cross power is sin^2 theta to 1e-9.

use super::geometric::CellError;
use super::integrate;
use crate::process::coupling::{ExponentialFit, SmoothLaw};
use nalgebra::DMatrix;
use num_complex::Complex64;

#[derive(Clone, Debug, PartialEq)]
pub struct CouplerDesign {
    pub theta: f64,
    pub gap_nm: f64,
    pub straight_um: f64,
    pub bend_radius_um: f64,
    /// How far each bend is followed (to where the gap has grown by
    /// `bend_rise_nm`), um.
    pub bend_reach_um: f64,
    pub length_um: f64,
    pub transfer: DMatrix<Complex64>,
    /// The straight length from the exponential fit, before refinement.
    pub analytic_straight_um: f64,
}

/// Gap growth at which the bends stop counting: the coupling there is
/// exp(-1500 / g_c) of the peak, far below any tolerance.
const BEND_RISE_NM: f64 = 1500.0;

/// The coupler's 2 x 2 transfer with detunings `d` of its two guides.
pub fn transfer_detuned(
    law: &SmoothLaw,
    gap: f64,
    straight: f64,
    radius_um: f64,
    reach: f64,
    d: [f64; 2],
) -> Result<DMatrix<Complex64>, CellError> {
    transfer(law, gap, straight, radius_um, reach, TOL, &|_| (0.0, d))
}

/// Along-z errors of a coupler: at z (um from its start), the gap change
/// (nm) and the detunings of its two guides (rad/um).
pub type AlongZ<'a> = &'a (dyn Fn(f64) -> (f64, [f64; 2]) + Sync);

/// The coupler's transfer with along-z errors (sensitivity, roughness).
pub fn transfer_along(
    law: &SmoothLaw,
    gap: f64,
    straight: f64,
    radius_um: f64,
    reach: f64,
    errors: AlongZ,
) -> Result<DMatrix<Complex64>, CellError> {
    transfer(law, gap, straight, radius_um, reach, TOL, errors)
}

const TOL: f64 = 1e-11;

/// How far z (um from the coupler's start) lies outside its straight
/// section, which runs from `reach` to `reach + straight`: the bends' x in
/// their gap `g + x^2 / R`.
pub fn beyond_straight_um(z: f64, reach: f64, straight: f64) -> f64 {
    if z < reach {
        reach - z
    } else if z > reach + straight {
        z - reach - straight
    } else {
        0.0
    }
}

fn transfer(
    law: &SmoothLaw,
    gap: f64,
    straight: f64,
    radius_um: f64,
    reach: f64,
    tol: f64,
    errors: AlongZ,
) -> Result<DMatrix<Complex64>, CellError> {
    let total = straight + 2.0 * reach;
    let h = |z: f64| {
        let x = beyond_straight_um(z, reach, straight);
        let (dg, d) = errors(z);
        // x^2 / R in um -> nm
        let g = gap + dg + x * x / radius_um * 1e3;
        integrate::two_guide_h(law.k_per_um(g), d)
    };
    // The straight-to-bend joins have a jump in dk/dz, and the law's knots
    // one in its third derivative: no step straddles either.
    let mut breaks = vec![reach, reach + straight];
    for &k in law.knots_nm() {
        if k > gap {
            let x = ((k - gap) * radius_um * 1e-3).sqrt();
            breaks.push(reach - x);
            breaks.push(reach + straight + x);
        }
    }
    Ok(integrate::propagate_piecewise(
        integrate::Method::Magnus6,
        &h,
        0.0,
        total,
        &breaks,
        tol,
        integrate::Start::Probe(8),
    )?
    .matrix)
}

/// Designs the coupler of split theta.
pub fn design(
    theta: f64,
    law: &SmoothLaw,
    fit: &ExponentialFit,
    gap_nm: f64,
    bend_radius_um: f64,
) -> Result<CouplerDesign, CellError> {
    if !(theta > 0.0 && theta <= std::f64::consts::FRAC_PI_2 + 1e-12) {
        return Err(CellError::Theta(theta));
    }
    let g_c_um = fit.g_c_nm * 1e-3;
    let k0 = law.k_per_um(gap_nm);
    let bends = k0 * (std::f64::consts::PI * bend_radius_um * g_c_um).sqrt();
    let analytic = ((theta - bends) / k0).max(0.0);
    let reach = (BEND_RISE_NM * 1e-3 * bend_radius_um).sqrt();
    let tol = TOL;
    // Newton on the straight length: d(area)/d(straight) = k0.
    let mut straight = analytic;
    let mut u = transfer(law, gap_nm, straight, bend_radius_um, reach, tol, &|_| {
        (0.0, [0.0; 2])
    })?;
    for _ in 0..20 {
        let cross = u[(1, 0)].norm().atan2(u[(0, 0)].norm());
        let miss = theta - cross;
        if miss.abs() < 1e-10 {
            break;
        }
        straight = (straight + miss / k0).max(0.0);
        u = transfer(law, gap_nm, straight, bend_radius_um, reach, tol, &|_| {
            (0.0, [0.0; 2])
        })?;
        if straight == 0.0 {
            break;
        }
    }
    Ok(CouplerDesign {
        theta,
        gap_nm,
        straight_um: straight,
        bend_radius_um,
        bend_reach_um: reach,
        length_um: straight + 2.0 * reach,
        transfer: u,
        analytic_straight_um: analytic,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::process::law::characterise;
    use crate::process::presets::preset;

    #[test]
    fn the_coupler_splits_as_asked() {
        // Yariv (1973): cross power sin^2(int k dz); the bends add about
        // k(g) sqrt(pi R g_c) (Gaussian integral of the exponential law).
        let p = preset("si220_wire").unwrap();
        let c = characterise(&p).unwrap();
        let law = c.law();
        for theta in [
            0.3,
            std::f64::consts::FRAC_PI_4,
            std::f64::consts::FRAC_PI_2,
        ] {
            let d = design(theta, &law.smooth, &law.fit, 200.0, 5.0).unwrap();
            assert!(
                (d.transfer[(1, 0)].norm_sqr() - theta.sin().powi(2)).abs() < 1e-9,
                "{theta}"
            );
            // The analytic straight length is close: the law is nearly exponential.
            assert!((d.straight_um - d.analytic_straight_um).abs() < 0.05 * d.straight_um + 0.5);
        }
    }
}
