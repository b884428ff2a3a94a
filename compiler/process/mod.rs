//! The process model: materials, the waveguide mode solver (effective index
//! method), the coupling law and its fits, process files and presets.

pub mod coupling;
pub mod eim;
pub mod file;
pub mod law;
pub mod material;
pub mod presets;
pub mod slab;
pub mod spec;
pub mod table;
