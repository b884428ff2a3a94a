//! trilane: a compiler from dual-rail photonic quantum circuits to chips.
//!
//! The pipeline, one stage per folder, each a function from one typed value
//! to the next:
//!
//! 1. `syntax::parse`     source text -> [`syntax::Ast`] (pest grammar, spans)
//! 2. `circuit::elaborate` AST -> [`circuit::Circuit`] per chip (names,
//!    units, definitions expanded), then `circuit::validate`
//! 3. `optics::network`  circuit -> [`optics::ModeNetwork`]: every operation
//!    as a transfer matrix on its modes, gate schemes with their helper
//!    modes; `optics::logical` and `optics::amplitude` read it (the logical
//!    map by permanents, fidelities, photon statistics), and
//!    `optics::simulate` is what `trilane simulate` computes
//! 4. `compile::optimise`  circuit -> circuit: the passes (merge, identities,
//!    output phases), each reporting what it removed
//! 5. `process::law::characterise` a `Process` (preset or TOML file) through
//!    a `WaveguideModel` -> its mode figures and coupling law
//! 6. `cell::design`      one cell (geometric, coupler, MZI) on that law
//! 7. `compile::chip::build` circuit + process -> the chip: `compile::mesh`
//!    (flat or local `Mesh`), `compile::cells::realise` (`CellMesh`),
//!    `layout::place` (`Floorplan`), the nominal figures; `auto` builds both
//!    strategies and chooses
//! 8. exporters of the `Floorplan`: `layout::netlist`, `layout::svg`,
//!    `layout::mask` (the polygons, written by `layout::gds`, checked by
//!    `layout::drc`)
//! 9. `report`            text tables, JSON wire types, figures
//!
//! The fidelity budget follows (see README.md for what works today).
//!
//! The core takes text and values and returns values; only `main.rs` touches
//! the file system, and diagnostics are data until `diagnostic::render`.

pub mod cell;
pub mod circuit;
pub mod compile;
pub mod diagnostic;
pub mod layout;
pub mod optics;
pub mod process;
pub mod report;
pub mod source;
pub mod syntax;

use circuit::{FileLoader, Program};
use diagnostic::Diagnostics;
use source::Source;

/// The front end, whole: parse, elaborate, validate, and make sure every
/// chip's process exists and reads cleanly.
pub fn check(source: &Source, files: &dyn FileLoader) -> Result<Program, Diagnostics> {
    let ast = syntax::parse(source)?;
    let program = circuit::elaborate(&ast, files)?;
    let mut problems = Diagnostics::new();
    for c in &program.circuits {
        if let Err(d) = process::resolve(c.process.as_ref(), files) {
            problems.push(d);
        }
    }
    if problems.has_errors() {
        let mut all = program.warnings;
        all.extend(problems);
        return Err(all.sorted());
    }
    Ok(program)
}
