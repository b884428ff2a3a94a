//! The data behind `trilane cell --sweep`: how a geometric cell's split
//! follows its gap difference, and how the cells' fidelity falls with an
//! edge bias.
//!
//! - **Gap difference**: the designed envelope (b, L and the pulse area)
//!   kept, the gap difference Dg = g_u - g_l swept; the exponential fit's
//!   rule `tan(theta/2) = exp(-Dg / g_c)` (physics.md section 3) places
//!   both gaps so that `W0 = sqrt(k_u^2 + k_l^2)` stays the designed one.
//!   Each point is integrated on the process's smooth law with path
//!   detuning: its cross power against sin^2 theta(Dg), and the power left
//!   in the auxiliary guide. Off the refined design point this is the
//!   unrefined design of that split, so the leakage shows what refinement
//!   removes.
//! - **Edge bias**: loss-normalised 1 - F of each cell against its own
//!   nominal block, re-integrated with the law recomputed for the biased
//!   guides (sensitivity.rs).

use super::CellDesign;
use super::geometric::GeometricDesign;
use super::refine::{self, CellContext};
use super::sensitivity::{self, Perturbation, SensitivityError};
use crate::process::spec::Process;
use rayon::prelude::*;

#[derive(Clone, Debug, PartialEq)]
pub struct GapPoint {
    pub gap_difference_nm: f64,
    /// sin^2 theta(Dg) by the exponential rule.
    pub ideal_cross: f64,
    pub cross: f64,
    pub leakage: f64,
}

#[derive(Clone, Debug, PartialEq)]
pub struct BiasPoint {
    pub edge_bias_nm: f64,
    pub infidelity: f64,
    pub split_error: f64,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Sweep {
    pub theta: f64,
    pub design_gap_difference_nm: f64,
    pub design_cross: f64,
    pub design_leakage: f64,
    pub g_c_nm: f64,
    pub gaps: Vec<GapPoint>,
    /// (kind name, points) for each cell.
    pub bias: Vec<(&'static str, Vec<BiasPoint>)>,
}

/// The gap-difference sweep of `design` on `ctx` (module doc): `points`
/// from Dg = 0 (theta = pi/2) to 4 g_c (theta about 0.07).
pub fn gap_sweep(
    design: &GeometricDesign,
    ctx: &CellContext,
    points: usize,
) -> Result<Vec<GapPoint>, super::geometric::CellError> {
    let g_c = ctx.fit.g_c_nm;
    let theta_of = |dg: f64| 2.0 * (-dg / g_c).exp().atan();
    let half_d = design.theta / 2.0;
    (0..points)
        .into_par_iter()
        .map(|i| {
            let dg = 4.0 * g_c * i as f64 / (points - 1).max(1) as f64;
            let th = theta_of(dg);
            let mut d = *design;
            // keep W0: k_l = W0 cos(theta/2), so g_l moves by
            // g_c ln(cos(theta_d/2) / cos(theta/2)) on the exponential law
            d.gap_lower_nm = design.gap_lower_nm + g_c * (half_d.cos() / (th / 2.0).cos()).ln();
            d.gap_upper_nm = d.gap_lower_nm + dg;
            d.theta = th;
            let u = refine::transfer(ctx, &d, 1e-10)?;
            Ok(GapPoint {
                gap_difference_nm: dg,
                ideal_cross: th.sin().powi(2),
                cross: u[(2, 0)].norm_sqr(),
                leakage: u[(1, 0)].norm_sqr().max(u[(1, 2)].norm_sqr()),
            })
        })
        .collect()
}

/// 1 - F against edge bias from -max to +max nm in `points` steps.
pub fn bias_sweep(
    cell: &CellDesign,
    p: &Process,
    max_nm: f64,
    points: usize,
) -> Result<Vec<BiasPoint>, SensitivityError> {
    let nominal = cell.rail_block();
    (0..points)
        .into_par_iter()
        .map(|i| {
            let b = -max_nm + 2.0 * max_nm * i as f64 / (points - 1).max(1) as f64;
            let e = Perturbation {
                edge_bias_nm: b,
                ..Default::default()
            };
            let r = sensitivity::respond(cell, p, &e, &nominal)?;
            Ok(BiasPoint {
                edge_bias_nm: b,
                infidelity: (1.0 - r.fidelity).max(0.0),
                split_error: r.split_error,
            })
        })
        .collect()
}
