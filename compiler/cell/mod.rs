//! The cells that realise two-mode rotations. So far: the coupled-mode
//! integrator (integrate.rs), the geometric cell's analytic design
//! (geometric.rs) and its refinement against the process's real coupling
//! curve with path detuning (refine.rs). The coupler and MZI baselines, the
//! sensitivity analysis and `trilane cell` follow.

pub mod coupler;
pub mod geometric;
pub mod integrate;
pub mod refine;
pub mod sensitivity;

use crate::process::eim::{EffectiveIndex, WaveguideModel};
use crate::process::law::{Characterisation, ProcessError, characterise};
use crate::process::spec::Process;

/// Which cell realises a rotation (cli.md `--cell`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CellKind {
    Geometric,
    Coupler,
}

/// One designed cell with the process it was designed on.
#[derive(Clone, Debug)]
pub enum CellDesign {
    Geometric(refine::RefinedCell),
    Coupler(coupler::CouplerDesign),
}

#[derive(Debug, thiserror::Error)]
pub enum DesignError {
    #[error(transparent)]
    Process(#[from] ProcessError),
    #[error(transparent)]
    Cell(#[from] geometric::CellError),
}

/// The residual coupling at a geometric cell's ends, relative to its peak.
pub const DEFAULT_RESIDUAL: f64 = 1e-3;

/// Designs one cell of split `theta` on `process` (its law from the
/// effective index method or its table).
pub fn design(
    kind: CellKind,
    theta: f64,
    process: &Process,
    rule: geometric::LengthRule,
) -> Result<(CellDesign, Characterisation), DesignError> {
    let model = EffectiveIndex::TE_LIKE;
    let c = characterise(process, &model as &dyn WaveguideModel)?;
    let law = c.law();
    let cell = match kind {
        CellKind::Geometric => {
            let ctx = refine::CellContext::of(process, &c, rule, DEFAULT_RESIDUAL);
            CellDesign::Geometric(refine::refine(theta, &ctx)?)
        }
        CellKind::Coupler => CellDesign::Coupler(coupler::design(
            theta,
            &law.smooth,
            &law.fit,
            process.rules.min_gap_nm,
            process.rules.min_bend_radius_um,
        )?),
    };
    Ok((cell, c))
}
