//! A cache of refined geometric cells on a theta grid, so a mesh of many
//! cells designs quickly: each grid point is refined once (refine.rs); a
//! cell of any theta starts from its analytic design plus the refinement's
//! correction of the two gaps interpolated between the neighbouring grid
//! points (the correction is smooth in theta), and is then polished with
//! the neighbour's Jacobian and step count (Broyden updates from there).
//! Every cell it returns meets the same targets as a fresh refinement.
//!
//! The cache's cells integrate to [`CACHE_TOL`] rather than the single
//! cell's 1e-10: the targets are 1e-6 (split error, leakage power), so an
//! amplitude error of 1e-9 still resolves them a thousandfold, and a
//! fourth-order method needs 10^(1/4) = 1.8 times fewer steps for it.
//!
//! The grid is uniform in theta over (0, pi/2], with points at
//! `theta_k = (k + 1/2) pi / (2 n)`, and the correction interpolated by
//! the cubic through the four nearest points (held constant beyond the
//! ends), so most cells meet the targets at the start and cost one
//! integration.

use super::geometric::{self, CellError};
use super::refine::{self, CellContext, RefinedCell};
use rayon::prelude::*;

/// Integration tolerance of the cache's cells (module doc).
pub const CACHE_TOL: f64 = 1e-9;

pub struct DesignCache<'a> {
    ctx: CellContext<'a>,
    thetas: Vec<f64>,
    cells: Vec<RefinedCell>,
}

impl<'a> DesignCache<'a> {
    /// Refines `points` cells across (0, pi/2] in parallel.
    pub fn build(ctx: &CellContext<'a>, points: usize) -> Result<DesignCache<'a>, CellError> {
        let ctx = CellContext {
            integration_tol: CACHE_TOL,
            ..*ctx
        };
        let n = points.max(2);
        let thetas: Vec<f64> = (0..n)
            .map(|k| (k as f64 + 0.5) * std::f64::consts::FRAC_PI_2 / n as f64)
            .collect();
        let cells = thetas
            .par_iter()
            .map(|&t| refine::refine(t, &ctx))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(DesignCache { ctx, thetas, cells })
    }

    pub fn points(&self) -> usize {
        self.thetas.len()
    }

    /// The refined cell of `theta`, polished from the cache.
    pub fn design(&self, theta: f64) -> Result<RefinedCell, CellError> {
        if !(theta > 0.0 && theta <= std::f64::consts::FRAC_PI_2 + 1e-12) {
            return Err(CellError::Theta(theta));
        }
        let n = self.thetas.len();
        let step = self.thetas[1] - self.thetas[0];
        let x = ((theta - self.thetas[0]) / step).clamp(0.0, (n - 1) as f64);
        let k = (x.floor() as usize).min(n - 2);
        let correction = |c: &RefinedCell| {
            (
                c.design.gap_upper_nm - c.analytic.gap_upper_nm,
                c.design.gap_lower_nm - c.analytic.gap_lower_nm,
            )
        };
        let (a, b) = (&self.cells[k], &self.cells[k + 1]);
        // Four-point Lagrange interpolation of the correction (cubic, so
        // its error falls as step^4), two points at the grid's ends.
        let lo = k.saturating_sub(1).min(n.saturating_sub(4));
        let idx: Vec<usize> = (lo..(lo + 4).min(n)).collect();
        let (mut du, mut dl) = (0.0, 0.0);
        for &i in &idx {
            let mut l = 1.0;
            for &j in &idx {
                if j != i {
                    l *= (theta - self.thetas[j]) / (self.thetas[i] - self.thetas[j]);
                }
            }
            let (u, lw) = correction(&self.cells[i]);
            du += l * u;
            dl += l * lw;
        }
        if theta < self.thetas[0] || theta > self.thetas[n - 1] {
            // beyond the grid: hold the end value
            let (u, lw) = correction(if theta < self.thetas[0] { a } else { b });
            (du, dl) = (u, lw);
        }
        let ctx = &self.ctx;
        let mut start =
            geometric::analytic(theta, ctx.fit, ctx.min_gap_nm, ctx.rule, ctx.residual)?;
        start.gap_upper_nm += du;
        start.gap_lower_nm += dl;
        let near = if x - (k as f64) < 0.5 { a } else { b };
        // A grid cell that had to raise its closer gap to keep the minimum
        // gap is not a smooth neighbour: refine that theta afresh.
        // (Its analytic start differs from the plain analytic design on the
        // process minimum; with uniform lengths the plain one is itself
        // above the minimum, so the minimum alone does not tell.)
        let raised = |c: &RefinedCell| {
            geometric::analytic(
                c.analytic.theta,
                ctx.fit,
                ctx.min_gap_nm,
                ctx.rule,
                ctx.residual,
            )
            .map_or(true, |plain| {
                (plain.gap_lower_nm - c.analytic.gap_lower_nm).abs() > 1e-6
                    || (plain.gap_upper_nm - c.analytic.gap_upper_nm).abs() > 1e-6
            })
        };
        if raised(a) || raised(b) {
            return refine::refine(theta, ctx);
        }
        let cell = refine::polish(theta, ctx, start, near.jacobian, near.half_steps)?;
        let lowest = cell.design.gap_lower_nm.min(cell.design.gap_upper_nm);
        let met = cell.quality.split_error < refine::SPLIT_TARGET
            && cell.quality.leakage < refine::LEAKAGE_TARGET;
        if lowest < ctx.min_gap_nm - 1e-6
            || (!met && (near.quality.split_error < refine::SPLIT_TARGET))
        {
            // Outside what a polish can reach: the full refinement.
            return refine::refine(theta, ctx);
        }
        Ok(cell)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cell::geometric::LengthRule;
    use crate::process::law::characterise;
    use crate::process::presets::preset;

    #[test]
    fn cached_designs_meet_the_targets_and_agree_with_fresh_refinement() {
        // physics.md section 3's targets for every polished cell, and the
        // same geometry as a fresh refinement (both solve the same two
        // equations; they agree to the size of the targets' slack).
        let p = preset("si220_wire").unwrap();
        let c = characterise(&p).unwrap();
        let ctx = CellContext::of(&p, &c, LengthRule::Shortest, 1e-3);
        let cache = DesignCache::build(&ctx, 24).unwrap();
        for theta in [0.05, 0.333, 0.9, 1.234, 1.5] {
            let cell = cache.design(theta).unwrap();
            assert!(
                cell.quality.split_error < refine::SPLIT_TARGET,
                "{theta}: {:?}",
                cell.quality
            );
            assert!(
                cell.quality.leakage < refine::LEAKAGE_TARGET,
                "{theta}: {:?}",
                cell.quality
            );
            let fresh = refine::refine(theta, &ctx).unwrap();
            assert!((cell.design.gap_upper_nm - fresh.design.gap_upper_nm).abs() < 0.05);
            assert!((cell.design.gap_lower_nm - fresh.design.gap_lower_nm).abs() < 0.05);
            assert!(
                cell.iterations <= 3,
                "{theta}: {} iterations",
                cell.iterations
            );
        }
        assert!(cache.design(0.0).is_err());
    }
}
