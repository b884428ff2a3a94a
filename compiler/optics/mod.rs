//! Linear optics: the circuit as a network of modes, its multi-photon
//! amplitudes and conditioned logical map, fidelities, permanents and mesh
//! decompositions.
//!
//! Convention (docs/physics.md, section 1): a network acts on field
//! amplitudes, `a_out = U a_in`; column j of U is what mode j's input becomes.
//!
//! Entry point: [`network`] lowers a validated `Circuit` to a
//! [`ModeNetwork`]; [`logical::logical_map`] and
//! [`amplitude::distribution`] read it.

pub mod amplitude;
pub mod decompose;
pub mod logical;
pub mod network;
pub mod permanent;
pub mod random;
pub mod simulate;

pub use network::{ModeNetwork, network};
