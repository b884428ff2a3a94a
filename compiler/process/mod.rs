//! The process model: materials, the waveguide mode solver (effective index
//! method), the coupling law and its fits, process files and presets.

pub mod material;
pub mod slab;
