//! What a process is: the guide, its materials, design rules, phase
//! shifters, losses, default tolerances and where its coupling law comes
//! from. Every number carries its unit in its name; every preset value has
//! its source beside it in `presets.rs`.

use super::coupling::CouplingTable;
use super::eim::Film;
use super::material::Material;
use super::solved::Solution;
use std::sync::Arc;

#[derive(Clone, Debug, PartialEq)]
pub struct Process {
    /// Preset name, or the name a process file gives.
    pub name: String,
    /// One line on what it is.
    pub summary: String,
    /// Where the process came from: `preset` or the file path.
    pub origin: String,
    pub film: Film,
    /// Width of every guide (rails and auxiliary guides), nm.
    pub width_nm: f64,
    /// Design wavelength, um.
    pub wavelength_um: f64,
    pub rules: DesignRules,
    pub thermal: ThermalShifter,
    pub passive: PassiveShifter,
    pub loss: Loss,
    pub tolerances: ProcessTolerances,
    pub coupling: CouplingSource,
    /// What the mask needs: layers, heater drawing, the rule deck.
    pub mask: MaskSpec,
    /// Source notes: (what, where it comes from).
    pub sources: Vec<(String, String)>,
}

/// A GDSII layer: number and datatype.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct GdsLayer {
    pub layer: u16,
    pub datatype: u16,
}

/// Where each kind of shape goes in layout.gds (docs/layout.md).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct LayerMap {
    /// Guide cores: rails, auxiliary guides and their tapers.
    pub core: GdsLayer,
    /// Heater metal of thermal phase shifters.
    pub heater: GdsLayer,
    /// Contacts at the heaters' ends.
    pub contact: GdsLayer,
    /// Text: cell ids and splits, port names.
    pub label: GdsLayer,
    /// The chip's outline (its length by its width).
    pub outline: GdsLayer,
}

impl Default for LayerMap {
    fn default() -> LayerMap {
        let l = |layer| GdsLayer { layer, datatype: 0 };
        LayerMap {
            core: l(1),
            heater: l(20),
            contact: l(21),
            label: l(100),
            outline: l(99),
        }
    }
}

/// The mask beyond the design rules: layers, heater drawing, and the rules
/// of the deck the drawn polygons are checked against.
#[derive(Clone, Debug, PartialEq)]
pub struct MaskSpec {
    pub layers: LayerMap,
    /// Width of a heater stripe over its guide, um.
    pub heater_width_um: f64,
    /// Side of the square contact at each end of a heater, um.
    pub contact_um: f64,
    /// Smallest distance from a heater to a guide it does not heat, um.
    pub heater_clearance_um: f64,
    /// Smallest distance between two heaters, um.
    pub heater_spacing_um: f64,
    /// Deck values that differ from the design rules (a foundry deck
    /// stricter than the rules the design was made to).
    pub deck: RuleDeck,
}

#[derive(Clone, Debug, Default, PartialEq)]
pub struct RuleDeck {
    pub min_gap_nm: Option<f64>,
    pub min_width_nm: Option<f64>,
    pub min_bend_radius_um: Option<f64>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct DesignRules {
    /// Smallest edge-to-edge gap between guides, nm.
    pub min_gap_nm: f64,
    /// Narrowest feature, nm.
    pub min_width_nm: f64,
    /// Tightest centre-line bend, um.
    pub min_bend_radius_um: f64,
    /// Centre-to-centre spacing of rails between cells, um.
    pub rail_pitch_um: f64,
}

/// A heater over a guide (thermo-optic phase shifter).
#[derive(Clone, Debug, PartialEq)]
pub struct ThermalShifter {
    pub length_um: f64,
    /// Electrical power for a phase of pi, mW.
    pub p_pi_mw: f64,
    /// Insertion loss, dB.
    pub loss_db: f64,
}

/// A fixed phase from a widened guide section.
#[derive(Clone, Debug, PartialEq)]
pub struct PassiveShifter {
    /// How much wider than the guide the section is, nm.
    pub width_step_nm: f64,
    /// Loss of the section with its tapers, dB.
    pub loss_db: f64,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Loss {
    pub propagation_db_per_cm: f64,
    /// Per 90 degree bend at the minimum radius, dB.
    pub bend_db: f64,
    pub crossing_db: f64,
}

/// One-sigma fabrication and operating errors (language.md's keys).
#[derive(Clone, Debug, PartialEq)]
pub struct ProcessTolerances {
    /// Die-level outward shift of every edge, nm.
    pub edge_bias_nm: f64,
    pub thickness_bias_nm: f64,
    /// Each edge of each guide of each cell, independently, nm.
    pub edge_local_nm: f64,
    /// Along-z edge roughness, nm, with its correlation length, um.
    pub roughness_nm: f64,
    pub correlation_um: f64,
    /// Phase-shifter error after setting, rad.
    pub phase_rad: f64,
    /// Laser wavelength error, nm.
    pub wavelength_nm: f64,
}

/// Where the coupling law comes from.
#[derive(Clone, Debug, PartialEq)]
pub enum CouplingSource {
    /// Computed by a waveguide model (`effective_index`) over these gaps.
    Model {
        model: String,
        gaps_nm: Vec<f64>,
        g_ref_nm: f64,
    },
    /// A measured or simulated table (one per wavelength).
    Table {
        tables: Vec<CouplingTable>,
        g_ref_nm: f64,
        /// Where it was read from.
        from: String,
    },
    /// A full-vector solution computed ahead of time ([`super::solved`]):
    /// the presets ship theirs; a process file may name a saved one.
    Solved {
        solution: Arc<Solution>,
        g_ref_nm: f64,
        /// `preset` for a shipped solution, else the file it was read from.
        from: String,
    },
}

impl CouplingSource {
    pub fn g_ref_nm(&self) -> f64 {
        match self {
            CouplingSource::Model { g_ref_nm, .. }
            | CouplingSource::Table { g_ref_nm, .. }
            | CouplingSource::Solved { g_ref_nm, .. } => *g_ref_nm,
        }
    }

    /// The gaps a model or a solution computes the law at (none for a
    /// table, whose gaps are its own).
    pub fn gaps_nm(&self) -> Option<&[f64]> {
        match self {
            CouplingSource::Model { gaps_nm, .. } => Some(gaps_nm),
            CouplingSource::Solved { solution, .. } => Some(&solution.gaps_nm),
            CouplingSource::Table { .. } => None,
        }
    }
}

/// The waveguide models a process may name.
pub const MODEL_NAMES: [&str; 2] = [super::solved::MODEL, "effective_index"];

impl Process {
    /// The same process with its law computed by `model` (a name of
    /// [`MODEL_NAMES`]) over the gaps it has; a table-based process keeps
    /// its table.
    pub fn with_model(mut self, model: &str) -> Process {
        if model == super::solved::MODEL && matches!(self.coupling, CouplingSource::Solved { .. }) {
            return self;
        }
        if let Some(gaps) = self.coupling.gaps_nm() {
            self.coupling = CouplingSource::Model {
                model: model.to_owned(),
                gaps_nm: gaps.to_vec(),
                g_ref_nm: self.coupling.g_ref_nm(),
            };
        }
        self
    }
}

/// Material names as process files write them.
pub fn material_by_name(name: &str) -> Option<Material> {
    Some(match name {
        "silicon" => Material::SiliconLi1980,
        "silica" => Material::SilicaMalitson1965,
        "silicon_nitride" => Material::NitrideLuke2015,
        "doped_silica" => Material::DopedSilica {
            index_step: DOPED_SILICA_STEP,
        },
        "air" => Material::Constant { index: 1.0 },
        _ => return None,
    })
}

pub const MATERIAL_NAMES: [&str; 5] = [
    "silicon",
    "silica",
    "silicon_nitride",
    "doped_silica",
    "air",
];

/// 0.75 % index contrast over fused silica at 1.55 um (common practice for
/// planar lightwave circuits): 0.0075 x 1.444.
pub const DOPED_SILICA_STEP: f64 = 0.0075 * 1.444;
