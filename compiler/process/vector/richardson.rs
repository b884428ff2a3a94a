//! Discretisation error by Richardson extrapolation over nested grids.
//!
//! A value computed on grids of step h, h/2, h/4 behaves as
//! `v(h) = v0 + C h^p + ...`. Two levels give the error of the finer value
//! for an assumed order p; three give the observed order
//! `p = log2((v(h) - v(h/2)) / (v(h/2) - v(h/4)))` as well (Richardson,
//! Phil. Trans. R. Soc. A 210, 307, 1911; Roache, Verification and
//! Validation in Computational Science and Engineering, 1998, ch. 5, for the
//! observed order and error estimate). The grids of a study are nested (every
//! cell split in two, [`super::grid`]), so the expansion holds term by term.
//!
//! The assumed order for two levels is 2, the order of the scheme for
//! smooth fields and of interfaces on grid lines. For 220 nm silicon strips
//! n_eff shows order 2.0 (the tests of [`super`]); the coupling, a
//! difference of two indices, about 1.6 at a 200 nm gap, where an order-2
//! estimate errs low: for order p the next halving changes the value by
//! 3 / 2^p of the two-level estimate, 0.99 at p = 1.6.

use super::super::eim::{Film, Strips};
use super::{FullVector, SolveReport, VectorError};

/// Order assumed when only two levels are given.
pub const ASSUMED_ORDER: f64 = 2.0;

/// A value on nested grids and its extrapolated limit.
#[derive(Clone, Debug, PartialEq)]
pub struct Extrapolation {
    /// The nominal (core) step of each level, um, coarsest first.
    pub steps_um: Vec<f64>,
    /// The value on each level.
    pub values: Vec<f64>,
    /// The Richardson limit.
    pub extrapolated: f64,
    /// Estimated discretisation error of the finest value, `|v_fine - limit|`.
    pub error_estimate: f64,
    /// The order of convergence the last three levels show, if they are
    /// monotone and contracting.
    pub observed_order: Option<f64>,
    /// The order the extrapolation used.
    pub order_used: f64,
}

/// Extrapolates values on grids refined by 2 each level (coarsest first).
/// With three or more levels the last three give the observed order (kept
/// within [1, 4] for the extrapolation); if they are not monotone the
/// estimate is the larger of the last two changes and the limit the finest
/// value.
pub fn extrapolate(steps_um: &[f64], values: &[f64]) -> Extrapolation {
    let n = values.len();
    assert!(n >= 2 && steps_um.len() == n, "two or more levels");
    let (v1, v2) = (values[n - 2], values[n - 1]);
    let d2 = v2 - v1;
    let (observed, order) = if n >= 3 {
        let d1 = v1 - values[n - 3];
        if d1 * d2 > 0.0 && d2.abs() < d1.abs() {
            let p = (d1 / d2).log2();
            (Some(p), Some(p.clamp(1.0, 4.0)))
        } else if d2 == 0.0 && d1 == 0.0 {
            (None, Some(ASSUMED_ORDER))
        } else {
            (None, None)
        }
    } else {
        (None, Some(ASSUMED_ORDER))
    };
    match order {
        Some(p) => {
            let e = d2 / (2f64.powf(p) - 1.0);
            Extrapolation {
                steps_um: steps_um.to_vec(),
                values: values.to_vec(),
                extrapolated: v2 + e,
                error_estimate: e.abs(),
                observed_order: observed,
                order_used: p,
            }
        }
        None => Extrapolation {
            steps_um: steps_um.to_vec(),
            values: values.to_vec(),
            extrapolated: v2,
            error_estimate: d2.abs().max((v1 - values[n - 3]).abs()),
            observed_order: None,
            order_used: f64::NAN,
        },
    }
}

/// A convergence study: every mode's n_eff and, for two or more strips, the
/// coupling `k = pi (n_0 - n_1) / lambda` (rad/um).
#[derive(Clone, Debug, PartialEq)]
pub struct Convergence {
    pub neff: Vec<Extrapolation>,
    pub coupling_per_um: Option<Extrapolation>,
    /// The solve of each level, coarsest first.
    pub reports: Vec<SolveReport>,
}

impl FullVector {
    /// Solves on `levels` (2 to 4) nested grids, this solver's grid and each
    /// cell split once, twice, ... more, and extrapolates.
    pub fn convergence(
        &self,
        film: &Film,
        strips: &Strips,
        wavelength_um: f64,
        levels: usize,
    ) -> Result<Convergence, VectorError> {
        if !(2..=4).contains(&levels) {
            return Err(VectorError::Grid(format!(
                "a convergence study needs 2 to 4 levels, not {levels}"
            )));
        }
        let count = strips.widths_um.len();
        let mut per_mode = vec![Vec::new(); count];
        let mut steps = Vec::new();
        let mut reports = Vec::new();
        for l in 0..levels {
            let grid = self.grid.refined(l as u32);
            let s = FullVector { grid, ..*self }.solve(film, strips, wavelength_um)?;
            for (k, m) in s.modes.iter().enumerate() {
                per_mode[k].push(m.neff);
            }
            steps.push(grid.core_step_um / f64::from(1u32 << grid.subdivide));
            reports.push(s.report);
        }
        let neff: Vec<Extrapolation> = per_mode.iter().map(|v| extrapolate(&steps, v)).collect();
        let coupling_per_um = (count >= 2).then(|| {
            let k: Vec<f64> = per_mode[0]
                .iter()
                .zip(&per_mode[1])
                .map(|(a, b)| std::f64::consts::PI * (a - b) / wavelength_um)
                .collect();
            extrapolate(&steps, &k)
        });
        Ok(Convergence {
            neff,
            coupling_per_um,
            reports,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extrapolates_the_trapezoid_rule_to_the_integral() {
        // The trapezoid rule has the error expansion c2 h^2 + c4 h^4 + ...
        // (the Euler-Maclaurin formula; Abramowitz & Stegun, Handbook of
        // Mathematical Functions, 1964, ch. 25): on integral_0^1 e^x dx = e - 1 the
        // observed order must come out 2 and the extrapolated error estimate
        // must bound the true error of the finest value.
        let trap = |n: usize| {
            let h = 1.0 / n as f64;
            (0..=n)
                .map(|k| {
                    let w = if k == 0 || k == n { 0.5 } else { 1.0 };
                    w * (k as f64 * h).exp()
                })
                .sum::<f64>()
                * h
        };
        let exact = std::f64::consts::E - 1.0;
        let steps = [0.25, 0.125, 0.0625];
        let vals: Vec<f64> = [4, 8, 16].iter().map(|&n| trap(n)).collect();
        let e = extrapolate(&steps, &vals);
        let p = e.observed_order.unwrap();
        assert!((p - 2.0).abs() < 0.01, "order {p}");
        let true_err = (vals[2] - exact).abs();
        assert!((e.error_estimate / true_err - 1.0).abs() < 0.01);
        assert!((e.extrapolated - exact).abs() < 1e-2 * true_err);
        // Two levels assume order 2: the same estimate.
        let e2 = extrapolate(&steps[1..], &vals[1..]);
        assert!((e2.error_estimate / true_err - 1.0).abs() < 0.01);
        assert_eq!(e2.observed_order, None);
    }

    #[test]
    fn non_monotone_sequences_get_a_conservative_estimate() {
        let e = extrapolate(&[0.4, 0.2, 0.1], &[1.0, 1.1, 1.05]);
        assert_eq!(e.observed_order, None);
        assert_eq!(e.extrapolated, 1.05);
        assert!((e.error_estimate - 0.1).abs() < 1e-12);
    }
}
