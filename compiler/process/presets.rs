//! The built-in processes. Each value has its source beside it: a paper,
//! "from memory" (a typical figure of the trade, not confirmed in print), or
//! "common practice" (a rule of thumb). Couplings are never typed in here:
//! each preset's law is the full-vector solver's, solved ahead of time
//! (`solved/NAME.toml`, recomputed by `trilane process NAME --solve`).

use super::eim::Film;
use super::material::Material;
use super::spec::*;

pub const DEFAULT: &str = "si220_wire";
pub const NAMES: [&str; 3] = ["si220_wire", "sin400_strip", "silica_plc"];

fn src(what: &str, from: &str) -> (String, String) {
    (what.to_owned(), from.to_owned())
}

/// The preset of that name.
pub fn preset(name: &str) -> Option<Process> {
    Some(match name {
        "si220_wire" => si220_wire(),
        "sin400_strip" => sin400_strip(),
        "silica_plc" => silica_plc(),
        _ => return None,
    })
}

/// The preset's shipped full-vector solution (its gaps are the solution's).
fn solved(name: &str, g_ref_nm: f64) -> CouplingSource {
    CouplingSource::Solved {
        solution: super::solved::shipped(name).expect("every preset ships a solution"),
        g_ref_nm,
        from: "preset".into(),
    }
}

/// 220 nm silicon strip guides in oxide, 193 nm lithography.
fn si220_wire() -> Process {
    Process {
        name: "si220_wire".into(),
        summary: "500 x 220 nm silicon strip guides in silica, 1550 nm".into(),
        origin: "preset".into(),
        film: Film {
            core: Material::SiliconLi1980,
            lower: Material::SilicaMalitson1965,
            upper: Material::SilicaMalitson1965,
            thickness_um: 0.22,
        },
        width_nm: 500.0,
        wavelength_um: 1.55,
        rules: DesignRules {
            min_gap_nm: 100.0,
            min_width_nm: 150.0,
            min_bend_radius_um: 5.0,
            rail_pitch_um: 3.0,
        },
        thermal: ThermalShifter {
            length_um: 61.6,
            p_pi_mw: 24.8,
            loss_db: 0.23,
        },
        passive: PassiveShifter {
            width_step_nm: 100.0,
            loss_db: 0.02,
        },
        loss: Loss {
            propagation_db_per_cm: 2.0,
            bend_db: 0.01,
            crossing_db: 0.043,
        },
        tolerances: ProcessTolerances {
            edge_bias_nm: 2.0,
            thickness_bias_nm: 1.5,
            edge_local_nm: 0.7,
            roughness_nm: 0.5,
            correlation_um: 5.0,
            phase_rad: 0.01,
            wavelength_nm: 0.0,
        },
        coupling: solved("si220_wire", 200.0),
        mask: MaskSpec {
            layers: LayerMap::default(),
            heater_width_um: 2.0,
            contact_um: 2.0,
            heater_clearance_um: 0.5,
            heater_spacing_um: 0.8,
            deck: RuleDeck::default(),
        },
        sources: vec![
            src(
                "geometry",
                "500 x 220 nm single-mode strip at 1550 nm (common practice)",
            ),
            src("materials", "Li 1980 (Si), Malitson 1965 (SiO2)"),
            src(
                "minimum gap 100 nm, width 150 nm",
                "193 nm lithography (from memory)",
            ),
            src(
                "minimum bend radius 5 um",
                "common practice (bend loss of 0.013 dB per 90 deg at 2 um: Vlasov & McNab, Opt. Express 12, 1622, 2004)",
            ),
            src(
                "rail pitch 3 um",
                "common practice (coupling below 1e-6 rad/um)",
            ),
            src(
                "heater 61.6 um, P_pi 24.8 mW, 0.23 dB",
                "Harris et al., Opt. Express 22, 10487 (2014)",
            ),
            src("passive shifter", "from memory"),
            src(
                "propagation loss 2 dB/cm",
                "from memory (1-3 dB/cm typical; 3.6 dB/cm in Vlasov & McNab 2004)",
            ),
            src(
                "bend loss 0.01 dB at 5 um",
                "from memory (below Vlasov & McNab's 0.013 dB at 2 um)",
            ),
            src(
                "crossing 0.043 dB",
                "Johnson, Thompson & Sahin, Opt. Express 28, 12498 (2020)",
            ),
            src(
                "heater stripe 2 um, contacts 2 um, 0.5 um to another guide, 0.8 um between heaters",
                "from memory (metal heater rules of silicon photonics foundries)",
            ),
            src(
                "tolerances",
                "from memory: width sigma 1-2 nm within a die, thickness 1-3 nm (cf. Zortman et al., Opt. Express 18, 23598, 2010)",
            ),
        ],
    }
}

/// 400 nm LPCVD silicon nitride in oxide.
fn sin400_strip() -> Process {
    Process {
        name: "sin400_strip".into(),
        summary: "1000 x 400 nm silicon nitride strip guides in silica, 1550 nm".into(),
        origin: "preset".into(),
        film: Film {
            core: Material::NitrideLuke2015,
            lower: Material::SilicaMalitson1965,
            upper: Material::SilicaMalitson1965,
            thickness_um: 0.4,
        },
        width_nm: 1000.0,
        wavelength_um: 1.55,
        rules: DesignRules {
            min_gap_nm: 200.0,
            min_width_nm: 300.0,
            min_bend_radius_um: 60.0,
            rail_pitch_um: 8.0,
        },
        thermal: ThermalShifter {
            length_um: 1000.0,
            p_pi_mw: 40.0,
            loss_db: 0.05,
        },
        passive: PassiveShifter {
            width_step_nm: 200.0,
            loss_db: 0.01,
        },
        loss: Loss {
            propagation_db_per_cm: 0.3,
            bend_db: 0.005,
            crossing_db: 0.15,
        },
        tolerances: ProcessTolerances {
            edge_bias_nm: 5.0,
            thickness_bias_nm: 4.0,
            edge_local_nm: 2.0,
            roughness_nm: 1.0,
            correlation_um: 10.0,
            phase_rad: 0.01,
            wavelength_nm: 0.0,
        },
        coupling: solved("sin400_strip", 500.0),
        mask: MaskSpec {
            layers: LayerMap::default(),
            heater_width_um: 3.0,
            contact_um: 3.0,
            heater_clearance_um: 1.0,
            heater_spacing_um: 2.0,
            deck: RuleDeck::default(),
        },
        sources: vec![
            src("material", "Luke et al. 2015 (Si3N4), Malitson 1965 (SiO2)"),
            src(
                "geometry, rules, heater, heater drawing, loss, tolerances",
                "from memory (typical LPCVD nitride foundry figures)",
            ),
        ],
    }
}

/// Germanium-doped silica planar lightwave circuits, 0.75 % contrast.
fn silica_plc() -> Process {
    Process {
        name: "silica_plc".into(),
        summary: "6 x 6 um doped-silica channel guides, 0.75 % contrast, 1550 nm".into(),
        origin: "preset".into(),
        film: Film {
            core: Material::DopedSilica {
                index_step: DOPED_SILICA_STEP,
            },
            lower: Material::SilicaMalitson1965,
            upper: Material::SilicaMalitson1965,
            thickness_um: 6.0,
        },
        width_nm: 6000.0,
        wavelength_um: 1.55,
        rules: DesignRules {
            min_gap_nm: 1500.0,
            min_width_nm: 1500.0,
            min_bend_radius_um: 2000.0,
            rail_pitch_um: 30.0,
        },
        thermal: ThermalShifter {
            length_um: 3000.0,
            p_pi_mw: 350.0,
            loss_db: 0.02,
        },
        passive: PassiveShifter {
            width_step_nm: 1000.0,
            loss_db: 0.01,
        },
        loss: Loss {
            propagation_db_per_cm: 0.05,
            bend_db: 0.01,
            crossing_db: 0.1,
        },
        tolerances: ProcessTolerances {
            edge_bias_nm: 50.0,
            thickness_bias_nm: 50.0,
            edge_local_nm: 20.0,
            roughness_nm: 10.0,
            correlation_um: 100.0,
            phase_rad: 0.01,
            wavelength_nm: 0.0,
        },
        coupling: solved("silica_plc", 4000.0),
        mask: MaskSpec {
            layers: LayerMap::default(),
            heater_width_um: 10.0,
            contact_um: 10.0,
            heater_clearance_um: 5.0,
            heater_spacing_um: 5.0,
            deck: RuleDeck::default(),
        },
        sources: vec![
            src(
                "material",
                "Malitson 1965 (SiO2) plus a 0.75 % index step (common practice)",
            ),
            src(
                "geometry, rules, heater, heater drawing, loss, tolerances",
                "from memory (typical planar lightwave circuit figures)",
            ),
        ],
    }
}
