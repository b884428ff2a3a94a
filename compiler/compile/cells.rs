//! Mesh blocks to designed cells: every block T(theta, phi) with theta at
//! or above the smallest realisable split becomes a cell of the chosen kind
//! (geometric three-waveguide cell, directional coupler, or MZI) designed on
//! the process's coupling law; a block below it is a phase on its upper rail
//! only (T(0, phi) = diag(e^{i phi}, 1)), and is counted. Equal splits share
//! one design (a mesh repeats theta = pi/2 and theta = 0 often); the distinct
//! ones are designed in parallel, geometric cells through the refinement
//! cache of `cell::cache` when there are many.
//!
//! The phases each cell leaves (its rail block is S(theta) only up to
//! diagonal phases) and the paths' own phases are merged into the phase
//! shifters by `layout::place`, which knows the geometry.

use super::mesh::{Mesh, MeshOp, Strategy};
use crate::cell::{CellDesign, CellKind, DesignError, coupler, geometric::LengthRule, mzi, refine};
use crate::optics::decompose::Layout;
use crate::process::law::Characterisation;
use crate::process::spec::Process;
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::sync::Arc;

/// Blocks below this split are phases only: their cross power sin^2 theta
/// is below 1e-6, and no cell is built for them.
pub const THETA_MIN: f64 = 1e-3;

/// More distinct splits than this are designed through the cache.
const CACHE_ABOVE: usize = 24;
const CACHE_POINTS: usize = 32;

#[derive(Clone, Debug)]
pub struct PlacedCell {
    pub upper: usize,
    pub column: usize,
    pub theta: f64,
    pub phi: f64,
    pub swap: bool,
    pub element: Option<usize>,
    pub design: Arc<CellDesign>,
}

#[derive(Clone, Debug)]
pub enum CellOp {
    Cell(PlacedCell),
    /// A full swap (theta = pi/2, within `THETA_MIN`): a waveguide
    /// crossing, exact where a cell's full swap is not (a geometric cell
    /// keeps a split error near 2e-3 there: cell/refine.rs), with the
    /// block's phases merged into the phase shifters.
    Crossing(PlacedCrossing),
    Phase {
        mode: usize,
        phase_rad: f64,
    },
}

#[derive(Clone, Copy, Debug)]
pub struct PlacedCrossing {
    pub upper: usize,
    pub column: usize,
    pub phi: f64,
    pub swap: bool,
    pub element: Option<usize>,
}

/// A mesh with every block realised.
#[derive(Clone, Debug)]
pub struct CellMesh {
    pub mesh: Mesh,
    pub kind: CellKind,
    pub rule: LengthRule,
    pub ops: Vec<CellOp>,
    /// Blocks made phases only (theta below `theta_min`).
    pub phase_only_blocks: usize,
    pub theta_min: f64,
    /// Distinct cell designs.
    pub distinct_designs: usize,
    pub crossings: usize,
}

impl CellMesh {
    pub fn cells(&self) -> impl Iterator<Item = &PlacedCell> {
        self.ops.iter().filter_map(|o| match o {
            CellOp::Cell(c) => Some(c),
            CellOp::Phase { .. } | CellOp::Crossing(_) => None,
        })
    }
    pub fn strategy(&self) -> Strategy {
        self.mesh.strategy
    }
    pub fn layout(&self) -> Layout {
        self.mesh.layout
    }
}

/// The smallest split a cell of `kind` realises: a directional coupler's
/// bends alone give `k(g) sqrt(pi R g_c)` (coupler.rs), so it cannot do
/// less than that at the minimum gap.
pub fn theta_min(kind: CellKind, p: &Process, c: &Characterisation) -> f64 {
    match kind {
        CellKind::Geometric | CellKind::Mzi => THETA_MIN,
        CellKind::Coupler => {
            let law = c.law();
            let k0 = law.smooth.k_per_um(p.rules.min_gap_nm);
            let bends = k0
                * (std::f64::consts::PI * p.rules.min_bend_radius_um * law.fit.g_c_nm * 1e-3)
                    .sqrt();
            bends.max(THETA_MIN)
        }
    }
}

/// A block that exchanges its rails whole.
fn is_full_swap(b: &super::mesh::MeshBlock) -> bool {
    b.swap || (std::f64::consts::FRAC_PI_2 - b.theta).abs() < THETA_MIN
}

/// Designs every block of `mesh` as a cell of `kind`.
pub fn realise(
    mesh: &Mesh,
    kind: CellKind,
    rule: LengthRule,
    p: &Process,
    c: &Characterisation,
) -> Result<CellMesh, DesignError> {
    let t_min = theta_min(kind, p, c);
    let mut thetas: BTreeMap<u64, f64> = BTreeMap::new();
    for b in mesh.blocks() {
        if b.theta >= t_min && !is_full_swap(b) {
            thetas.insert(b.theta.to_bits(), b.theta.min(std::f64::consts::FRAC_PI_2));
        }
    }
    let wanted: Vec<f64> = thetas.values().copied().collect();
    let law = c.law();
    let designs: Vec<CellDesign> = match kind {
        CellKind::Geometric => {
            let ctx = refine::CellContext::of(p, c, rule, crate::cell::DEFAULT_RESIDUAL);
            if wanted.len() > CACHE_ABOVE {
                let cache = crate::cell::cache::DesignCache::build(&ctx, CACHE_POINTS)?;
                wanted
                    .par_iter()
                    .map(|&t| cache.design(t).map(CellDesign::Geometric))
                    .collect::<Result<_, _>>()?
            } else {
                wanted
                    .par_iter()
                    .map(|&t| refine::refine(t, &ctx).map(CellDesign::Geometric))
                    .collect::<Result<_, _>>()?
            }
        }
        CellKind::Coupler => wanted
            .par_iter()
            .map(|&t| {
                coupler::design(
                    t,
                    &law.smooth,
                    &law.fit,
                    p.rules.min_gap_nm,
                    p.rules.min_bend_radius_um,
                )
                .map(CellDesign::Coupler)
            })
            .collect::<Result<_, _>>()?,
        CellKind::Mzi => wanted
            .par_iter()
            .map(|&t| {
                mzi::design(
                    t,
                    &law.smooth,
                    &law.fit,
                    p.rules.min_gap_nm,
                    p.rules.min_bend_radius_um,
                    p.thermal.length_um,
                )
                .map(CellDesign::Mzi)
            })
            .collect::<Result<_, _>>()?,
    };
    let by_theta: BTreeMap<u64, Arc<CellDesign>> = thetas
        .keys()
        .copied()
        .zip(designs.into_iter().map(Arc::new))
        .collect();
    let mut ops = Vec::with_capacity(mesh.ops.len());
    let mut phase_only = 0;
    let mut crossings = 0;
    for op in &mesh.ops {
        match *op {
            MeshOp::Phase { mode, phase_rad } => ops.push(CellOp::Phase { mode, phase_rad }),
            MeshOp::Block(b) if is_full_swap(&b) => {
                crossings += 1;
                ops.push(CellOp::Crossing(PlacedCrossing {
                    upper: b.upper,
                    column: b.column,
                    phi: b.phi,
                    swap: b.swap,
                    element: b.element,
                }));
            }
            MeshOp::Block(b) => match by_theta.get(&b.theta.to_bits()) {
                Some(d) => ops.push(CellOp::Cell(PlacedCell {
                    upper: b.upper,
                    column: b.column,
                    theta: b.theta,
                    phi: b.phi,
                    swap: b.swap,
                    element: b.element,
                    design: d.clone(),
                })),
                None => {
                    // T(theta, phi) with theta below the floor: its phase
                    // on the upper rail, the split dropped.
                    phase_only += 1;
                    ops.push(CellOp::Phase {
                        mode: b.upper,
                        phase_rad: b.phi,
                    });
                }
            },
        }
    }
    Ok(CellMesh {
        mesh: mesh.clone(),
        kind,
        rule,
        ops,
        phase_only_blocks: phase_only,
        theta_min: t_min,
        distinct_designs: by_theta.len(),
        crossings,
    })
}
