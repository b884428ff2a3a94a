//! The cells that realise two-mode rotations. Today: the coupled-mode
//! integrator the cells are designed and checked with. Synthesis of the
//! geometric cell, the coupler and MZI baselines and the sensitivity
//! analysis follow.

pub mod geometric;
pub mod integrate;
