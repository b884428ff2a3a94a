//! The cells that realise two-mode rotations. So far: the coupled-mode
//! integrator (integrate.rs), the geometric cell's analytic design
//! (geometric.rs) and its refinement against the process's real coupling
//! curve with path detuning (refine.rs). The coupler and MZI baselines, the
//! sensitivity analysis and `trilane cell` follow.

pub mod geometric;
pub mod integrate;
pub mod refine;
