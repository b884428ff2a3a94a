//! The cells that realise two-mode rotations: the coupled-mode integrator
//! (integrate.rs), the geometric cell's analytic design (geometric.rs) and
//! its refinement against the process's real coupling curve with path
//! detuning (refine.rs), the directional-coupler and MZI baselines
//! (coupler.rs, mzi.rs), and their sensitivity to fabrication errors
//! (sensitivity.rs, roughness.rs).

pub mod cache;
pub mod coupler;
pub mod geometric;
pub mod integrate;
pub mod mzi;
pub mod refine;
pub mod roughness;
pub mod sensitivity;
pub mod sweep;

use crate::process::law::{Characterisation, ProcessError, characterise};
use crate::process::spec::Process;

/// Which cell realises a rotation (cli.md `--cell`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CellKind {
    Geometric,
    Coupler,
    Mzi,
}

impl CellKind {
    /// The name `--cell` and the reports use.
    pub fn name(self) -> &'static str {
        match self {
            CellKind::Geometric => "geometric",
            CellKind::Coupler => "coupler",
            CellKind::Mzi => "mzi",
        }
    }
}

/// One designed cell with the process it was designed on.
#[derive(Clone, Debug)]
pub enum CellDesign {
    Geometric(refine::RefinedCell),
    Coupler(coupler::CouplerDesign),
    Mzi(mzi::MziDesign),
}

impl CellDesign {
    pub fn kind(&self) -> CellKind {
        match self {
            CellDesign::Geometric(_) => CellKind::Geometric,
            CellDesign::Coupler(_) => CellKind::Coupler,
            CellDesign::Mzi(_) => CellKind::Mzi,
        }
    }

    pub fn length_um(&self) -> f64 {
        match self {
            CellDesign::Geometric(r) => r.design.length_um,
            CellDesign::Coupler(k) => k.length_um,
            CellDesign::Mzi(m) => m.length_um,
        }
    }

    /// The 2 x 2 block on the rails.
    pub fn rail_block(&self) -> nalgebra::DMatrix<num_complex::Complex64> {
        match self {
            CellDesign::Geometric(r) => r.rail_block.clone(),
            CellDesign::Coupler(k) => k.transfer.clone(),
            CellDesign::Mzi(m) => m.transfer.clone(),
        }
    }
}

#[derive(Debug, thiserror::Error)]
pub enum DesignError {
    #[error(transparent)]
    Process(#[from] ProcessError),
    #[error(transparent)]
    Cell(#[from] geometric::CellError),
    #[error(transparent)]
    Sensitivity(#[from] Box<sensitivity::SensitivityError>),
}

impl From<sensitivity::SensitivityError> for DesignError {
    fn from(e: sensitivity::SensitivityError) -> Self {
        DesignError::Sensitivity(Box::new(e))
    }
}

/// The residual coupling at a geometric cell's ends, relative to its peak.
pub const DEFAULT_RESIDUAL: f64 = 1e-3;

/// Designs one cell of split `theta` on `process` (its law from the model
/// or table the process names).
pub fn design(
    kind: CellKind,
    theta: f64,
    process: &Process,
    rule: geometric::LengthRule,
) -> Result<(CellDesign, Characterisation), DesignError> {
    let c = characterise(process)?;
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
        CellKind::Mzi => CellDesign::Mzi(mzi::design(
            theta,
            &law.smooth,
            &law.fit,
            process.rules.min_gap_nm,
            process.rules.min_bend_radius_um,
            process.thermal.length_um,
        )?),
    };
    Ok((cell, c))
}
