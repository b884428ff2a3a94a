//! Linear optics: permanents and mesh decompositions (the start of the
//! optics stage; the circuit-to-network lowering and the logical maps follow).
//!
//! Convention (docs/physics.md, section 1): a network acts on field
//! amplitudes, `a_out = U a_in`; column j of U is what mode j's input becomes.

pub mod decompose;
pub mod permanent;
pub mod random;
