//! The compile stage: circuit passes now; mesh strategies (flat, local) and
//! the mapping of mesh blocks to cells follow with the chip build.

pub mod passes;

pub use passes::{PassReport, optimise};
