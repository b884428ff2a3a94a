//! The layout stage: the floorplan (floorplan.rs: every component placed,
//! the phase shifters set from the geometry), and its exports: the
//! component netlist (netlist.rs, `netlist.json`) and the floorplan picture
//! (svg.rs, `floorplan.svg`). The exporters take a `Floorplan` and nothing
//! else.

pub mod floorplan;
pub mod netlist;
pub mod svg;

pub use floorplan::{Floorplan, Tuning, place};
