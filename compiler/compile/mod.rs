//! The compile stage: circuit passes (passes.rs), mesh strategies
//! (mesh.rs: flat, local) and the mapping of mesh blocks to designed cells
//! (cells.rs), with the `auto` choice between strategies (chip.rs).

pub mod cells;
pub mod chip;
pub mod mesh;
pub mod passes;

pub use passes::{PassReport, optimise};
