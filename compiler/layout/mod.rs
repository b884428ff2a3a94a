//! The layout stage: the floorplan (floorplan.rs: every component placed,
//! the phase shifters set from the geometry), and its exports: the
//! component netlist (netlist.rs, `netlist.json`) and the floorplan picture
//! (svg.rs, `floorplan.svg`), the mask (mask.rs: the polygons, written as
//! `layout.gds` by gds.rs) and the design-rule checks on those polygons
//! (drc.rs). The exporters take a `Floorplan` and nothing
//! else.

pub mod drc;
pub mod floorplan;
pub mod gds;
pub mod mask;
pub mod netlist;
pub mod svg;

pub use floorplan::{Floorplan, Tuning, place};
