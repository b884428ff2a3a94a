//! The `build` reports: `report.txt` (read by a person) and `report.json`
//! (cli.md's fields, docs/json.md), with the circuit's requirements checked
//! on the nominal chip.

use crate::circuit::{Metric, Requirement};
use crate::compile::chip::{Build, Candidate};
use crate::layout::drc::MaskLayer;
use crate::layout::floorplan::{ColumnRow, Floorplan, Kind};
use crate::layout::mask::MaskCheck;
use crate::source::Source;
use serde::Serialize;
use std::fmt::Write;

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RequirementCheck {
    pub what: String,
    pub op: &'static str,
    pub limit: f64,
    pub unit: &'static str,
    /// Nominal chip's value; None when the requirement needs the budget.
    pub value: Option<f64>,
    /// None: not checked by `build` (a yield requirement).
    pub ok: Option<bool>,
    pub yield_level: Option<f64>,
    pub line: usize,
    pub note: Option<String>,
}

/// Insertion loss of the chip, dB: `-10 log10` of its transmission.
pub fn insertion_loss_db(transmission: f64) -> f64 {
    -10.0 * transmission.max(1e-300).log10()
}

pub fn check_requirements(b: &Build, src: &Source) -> Vec<RequirementCheck> {
    let c = &b.chosen;
    b.circuit
        .requirements
        .iter()
        .map(|r: &Requirement| {
            let (line, _) = src.line_col(r.span.start);
            let value = crate::compile::chip::requirement_value(c, r.metric);
            let (value, ok, note) = if r.yield_level.is_some() {
                (
                    None,
                    None,
                    Some("a yield requirement: checked by the fidelity budget over fabricated chips, not by build".to_owned()),
                )
            } else {
                let ok = crate::compile::chip::holds(r.op, value, r.limit);
                let note = (!ok).then(|| miss_text(r, value));
                (Some(value), Some(ok), note)
            };
            RequirementCheck {
                what: r.metric.name().to_owned(),
                op: r.op.as_str(),
                limit: r.limit,
                unit: r.metric.unit(),
                value,
                ok,
                yield_level: r.yield_level,
                line,
                note,
            }
        })
        .collect()
}

fn miss_text(r: &Requirement, value: f64) -> String {
    let by = (value - r.limit).abs();
    match r.metric {
        Metric::Fidelity | Metric::Success => format!(
            "misses by {} ({:.1} % of the limit)",
            sig(by),
            100.0 * by / r.limit.abs().max(1e-300)
        ),
        _ => format!("misses by {} {}", sig(by), r.metric.unit()),
    }
}

fn sig(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else if x.abs() >= 1e-3 && x.abs() < 1e5 {
        format!("{:.4}", x)
            .trim_end_matches('0')
            .trim_end_matches('.')
            .to_owned()
    } else {
        format!("{x:.3e}")
    }
}

#[derive(Serialize)]
pub struct JsonColumn {
    pub index: usize,
    pub x_um: f64,
    pub length_um: f64,
    pub phase_section_um: f64,
    pub lead_um: f64,
    pub cell_um: f64,
    pub cells: usize,
    pub crossings: usize,
    pub phase_shifters: usize,
    pub heater_power_mw: f64,
}

fn column(r: &ColumnRow) -> JsonColumn {
    JsonColumn {
        index: r.index,
        x_um: r.x_um,
        length_um: r.length_um,
        phase_section_um: r.phase_section_um,
        lead_um: r.lead_um,
        cell_um: r.cell_um,
        cells: r.cells,
        crossings: r.swaps,
        phase_shifters: r.phase_shifters,
        heater_power_mw: r.heater_power_mw,
    }
}

#[derive(Serialize)]
pub struct JsonTolerance {
    pub samples: usize,
    pub seed: u64,
    pub mean_fidelity: f64,
    pub standard_error: f64,
    pub worst_fidelity: f64,
}

#[derive(Serialize)]
pub struct JsonAlternative {
    pub strategy: &'static str,
    pub cells: usize,
    pub length_um: f64,
    pub nominal_fidelity: f64,
    pub tolerance: Option<JsonTolerance>,
}

#[derive(Serialize)]
pub struct JsonBuild {
    pub chip: String,
    pub process: String,
    pub coupling_model: String,
    pub strategy: &'static str,
    pub strategy_reason: String,
    pub cell_kind: &'static str,
    pub mesh: &'static str,
    pub phase_tuning: &'static str,
    pub cell_length: &'static str,
    pub modes: usize,
    pub mode_names: Vec<String>,
    pub cells: usize,
    pub distinct_cell_designs: usize,
    pub crossings: usize,
    pub phase_only_blocks: usize,
    pub theta_min: f64,
    pub phase_shifters: usize,
    pub length_um: f64,
    pub width_um: f64,
    pub footprint_mm2: f64,
    pub heater_power_mw: f64,
    pub mode_fidelity: f64,
    pub process_fidelity: Option<f64>,
    pub fidelity_kind: Option<&'static str>,
    pub scheme_success: Option<f64>,
    pub success_probability: Option<f64>,
    pub transmission: f64,
    pub insertion_loss_db: f64,
    pub path_loss_db: Vec<f64>,
    pub path_loss_spread_db: f64,
    pub path_loss_spread_without_balancing_db: f64,
    pub outward_bends: usize,
    pub tolerance: Option<JsonTolerance>,
    pub alternative: Option<JsonAlternative>,
    pub columns: Vec<JsonColumn>,
    pub final_phase_section: JsonColumn,
    pub requirements: Vec<RequirementCheck>,
    pub mask: JsonMask,
    pub outputs: Vec<String>,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct JsonMask {
    pub structures: usize,
    pub instances: usize,
    pub core_shapes: usize,
    pub heater_shapes: usize,
    pub contact_shapes: usize,
    pub labels: usize,
    pub gds_bytes: usize,
    pub drc: JsonDrc,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct JsonDrc {
    /// `passed`, `failed` or `off`.
    pub status: &'static str,
    pub min_gap_nm: f64,
    pub min_width_nm: f64,
    pub min_bend_radius_um: f64,
    pub heater_clearance_um: f64,
    pub heater_spacing_um: f64,
    pub shapes: usize,
    pub guides: usize,
    pub violations: Vec<JsonViolation>,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct JsonViolation {
    pub rule: &'static str,
    pub component: String,
    pub other: Option<String>,
    pub x_um: f64,
    pub y_um: f64,
    pub measured_um: f64,
    pub limit_um: f64,
}

fn drc_status(m: &MaskCheck) -> &'static str {
    match &m.drc {
        None => "off",
        Some(s) if s.violations.is_empty() => "passed",
        Some(_) => "failed",
    }
}

/// The mask's account for report.json.
pub fn mask_json(m: &MaskCheck, fp: &Floorplan) -> JsonMask {
    let count = |l| m.count(l);
    let id = |i: usize| {
        fp.components
            .get(i)
            .map_or_else(String::new, |c| c.id.clone())
    };
    JsonMask {
        structures: m.structures,
        instances: m.instances,
        core_shapes: count(MaskLayer::Core),
        heater_shapes: count(MaskLayer::Heater),
        contact_shapes: count(MaskLayer::Contact),
        labels: m.labels,
        gds_bytes: m.gds_bytes,
        drc: JsonDrc {
            status: drc_status(m),
            min_gap_nm: m.rules.min_gap_um * 1e3,
            min_width_nm: m.rules.min_width_um * 1e3,
            min_bend_radius_um: m.rules.min_bend_radius_um,
            heater_clearance_um: m.rules.heater_clearance_um,
            heater_spacing_um: m.rules.heater_spacing_um,
            shapes: m.drc.as_ref().map_or(0, |s| s.shapes),
            guides: m.drc.as_ref().map_or(0, |s| s.guides),
            violations: m
                .violations()
                .iter()
                .map(|v| JsonViolation {
                    rule: v.rule.name(),
                    component: id(v.component),
                    other: v.other.map(id),
                    x_um: v.x_um,
                    y_um: v.y_um,
                    measured_um: v.measured_um,
                    limit_um: v.limit_um,
                })
                .collect(),
        },
    }
}

/// One violation as a line: rule, what was measured against what, where.
pub fn violation_text(v: &crate::layout::drc::Violation, fp: &Floorplan) -> String {
    let id = |i: usize| fp.components.get(i).map_or("?", |c| c.id.as_str());
    let what = match v.other {
        Some(o) if o != v.component => format!("{} and {}", id(v.component), id(o)),
        Some(_) => format!("between two guides of {}", id(v.component)),
        None => id(v.component).to_owned(),
    };
    let measured = if v.rule == crate::layout::drc::Rule::Overlap {
        "the guides overlap".to_owned()
    } else {
        format!("{:.4} um < {:.4} um", v.measured_um, v.limit_um)
    };
    format!(
        "{}: {measured}, {what} at x = {:.3} um, y = {:.3} um",
        v.rule.name(),
        v.x_um,
        v.y_um
    )
}

/// Violations the text report lists (report.json lists all).
pub const VIOLATIONS_SHOWN: usize = 20;

fn spread(v: &[f64]) -> f64 {
    let max = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let min = v.iter().copied().fold(f64::INFINITY, f64::min);
    if v.is_empty() { 0.0 } else { max - min }
}

fn tolerance(c: &Candidate) -> Option<JsonTolerance> {
    c.tolerance.as_ref().map(|t| JsonTolerance {
        samples: t.samples,
        seed: t.seed,
        mean_fidelity: t.mean,
        standard_error: t.standard_error,
        worst_fidelity: t.worst,
    })
}

fn phase_shifters(c: &Candidate) -> usize {
    c.floorplan
        .components
        .iter()
        .filter(|k| matches!(k.kind, Kind::PhaseShifter { .. }))
        .count()
}

pub fn to_json(
    b: &Build,
    checks: &[RequirementCheck],
    mask: &MaskCheck,
    outputs: &[String],
) -> JsonBuild {
    let c = &b.chosen;
    let fp = &c.floorplan;
    let l = c.figures.logical.as_ref();
    JsonBuild {
        chip: b.circuit.name.clone(),
        process: fp.process.name.clone(),
        coupling_model: fp.process.model.clone(),
        strategy: c.strategy.name(),
        strategy_reason: b.strategy_reason.clone(),
        cell_kind: c.cells.kind.name(),
        mesh: fp.mesh,
        phase_tuning: fp.tuning.name(),
        cell_length: match b.options.rule {
            crate::cell::geometric::LengthRule::Uniform => "uniform",
            crate::cell::geometric::LengthRule::Shortest => "shortest",
        },
        modes: fp.modes.len(),
        mode_names: fp.modes.clone(),
        cells: c.cells.cells().count(),
        distinct_cell_designs: c.cells.distinct_designs,
        crossings: c.cells.crossings,
        phase_only_blocks: c.cells.phase_only_blocks,
        theta_min: c.cells.theta_min,
        phase_shifters: phase_shifters(c),
        length_um: fp.length_um,
        width_um: fp.width_um,
        footprint_mm2: fp.footprint_mm2(),
        heater_power_mw: fp.heater_power_mw,
        mode_fidelity: c.figures.mode_fidelity,
        process_fidelity: l.map(|l| l.fidelity),
        fidelity_kind: l.map(|l| l.fidelity_kind.as_str()),
        scheme_success: l.map(|l| l.scheme_success),
        success_probability: l.map(|l| l.success_probability),
        transmission: c.figures.transmission,
        insertion_loss_db: insertion_loss_db(c.figures.transmission),
        path_loss_db: fp.path_loss_db.clone(),
        path_loss_spread_db: spread(&fp.path_loss_db),
        path_loss_spread_without_balancing_db: spread(&fp.path_loss_unbalanced_db),
        outward_bends: fp.outward_bends.len(),
        tolerance: tolerance(c),
        alternative: b.other.as_ref().map(|o| JsonAlternative {
            strategy: o.strategy.name(),
            cells: o.cells.cells().count(),
            length_um: o.floorplan.length_um,
            nominal_fidelity: o.figures.merit(),
            tolerance: tolerance(o),
        }),
        columns: fp.columns.iter().map(column).collect(),
        final_phase_section: column(&fp.final_section),
        requirements: checks.to_vec(),
        mask: mask_json(mask, fp),
        outputs: outputs.to_vec(),
    }
}

fn infidelity(f: f64) -> String {
    format!("1 - {:.2e}", (1.0 - f).max(0.0))
}

/// `report.txt`.
pub fn to_text(
    b: &Build,
    checks: &[RequirementCheck],
    mask: &MaskCheck,
    outputs: &[String],
) -> String {
    let c = &b.chosen;
    let fp = &c.floorplan;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "chip {} on {} ({} coupling law, {})",
        b.circuit.name, fp.process.name, fp.process.model, fp.process.from
    );
    let _ = writeln!(
        s,
        "  strategy   {}: {}",
        c.strategy.name(),
        b.strategy_reason
    );
    let _ = writeln!(
        s,
        "  mesh       {}, {} cells, {} phase shifters, cell length {}",
        fp.mesh,
        c.cells.kind.name(),
        fp.tuning.name(),
        match b.options.rule {
            crate::cell::geometric::LengthRule::Uniform => "uniform",
            crate::cell::geometric::LengthRule::Shortest => "shortest",
        }
    );
    let _ = writeln!(
        s,
        "  modes      {} ({})",
        fp.modes.len(),
        fp.modes.join(", ")
    );
    let _ = writeln!(
        s,
        "  parts      {} cells ({} distinct designs), {} crossings, {} phase shifters; {} blocks below theta {:.0e} made phases only",
        c.cells.cells().count(),
        c.cells.distinct_designs,
        c.cells.crossings,
        phase_shifters(c),
        c.cells.phase_only_blocks,
        c.cells.theta_min
    );
    let _ = writeln!(
        s,
        "  size       {:.1} um long, {:.1} um wide, {:.4} mm2; {} columns",
        fp.length_um,
        fp.width_um,
        fp.footprint_mm2(),
        fp.columns.len()
    );
    let _ = writeln!(
        s,
        "  heaters    {:.1} mW in all for the nominal phases",
        fp.heater_power_mw
    );
    let _ = writeln!(s, "\nnominal chip (loss included)");
    let _ = writeln!(
        s,
        "  mode fidelity       {}   (F_U{}, loss-normalised)",
        infidelity(c.figures.mode_fidelity),
        if b.network.detect {
            ", output phases free"
        } else {
            ""
        }
    );
    let loss = insertion_loss_db(c.figures.transmission);
    let _ = writeln!(
        s,
        "  transmission        {:.4}   ({:.2} dB insertion loss)",
        c.figures.transmission, loss
    );
    if let Some(l) = &c.figures.logical {
        let _ = writeln!(
            s,
            "  process fidelity    {}   ({})",
            infidelity(l.fidelity),
            l.fidelity_kind.as_str()
        );
        let _ = writeln!(
            s,
            "  success             {:.5} on the chip   (scheme as written: {:.5})",
            l.success_probability, l.scheme_success
        );
    }
    let _ = writeln!(
        s,
        "  path loss           {:.3} dB on every mode (spread {:.1e} dB; without the balancing sections it would spread by {:.3} dB)",
        fp.path_loss_db.iter().sum::<f64>() / fp.path_loss_db.len().max(1) as f64,
        spread(&fp.path_loss_db),
        spread(&fp.path_loss_unbalanced_db)
    );
    if !fp.outward_bends.is_empty() {
        let _ = writeln!(
            s,
            "  note                {} cell rails start farther from the auxiliary guide than half the pitch: their lead S-bends move outwards",
            fp.outward_bends.len()
        );
    }
    if let Some(t) = &c.tolerance {
        let _ = writeln!(
            s,
            "  under tolerances    mean {:.6} +- {:.1e}, worst {:.6} ({} chips, seed {}, edge bias and local edge errors; phase shifters at nominal)",
            t.mean, t.standard_error, t.worst, t.samples, t.seed
        );
    }
    if let Some(o) = &b.other {
        let _ = writeln!(
            s,
            "  not chosen          {}: {} cells, {:.1} um, nominal {}{}",
            o.strategy.name(),
            o.cells.cells().count(),
            o.floorplan.length_um,
            infidelity(o.figures.merit()),
            o.tolerance
                .as_ref()
                .map(|t| format!(", under tolerances mean {:.6}", t.mean))
                .unwrap_or_default()
        );
    }
    let _ = writeln!(s, "\ncolumns");
    let _ = writeln!(
        s,
        "  {:>4} {:>9} {:>9} {:>8} {:>7} {:>8} {:>6} {:>6} {:>7} {:>9}",
        "col",
        "x um",
        "length",
        "phase",
        "leads",
        "cells um",
        "cells",
        "cross",
        "heaters",
        "power mW"
    );
    for r in fp.columns.iter().chain(std::iter::once(&fp.final_section)) {
        let _ = writeln!(
            s,
            "  {:>4} {:>9.1} {:>9.1} {:>8.1} {:>7.1} {:>8.1} {:>6} {:>6} {:>7} {:>9.1}",
            if r.index == fp.columns.len() {
                "out".to_string()
            } else {
                r.index.to_string()
            },
            r.x_um,
            r.length_um,
            r.phase_section_um,
            2.0 * r.lead_um,
            r.cell_um,
            r.cells,
            r.swaps,
            r.phase_shifters,
            r.heater_power_mw
        );
    }
    let _ = writeln!(s, "\nrequirements (nominal chip)");
    if checks.is_empty() {
        let _ = writeln!(s, "  none in the circuit");
    }
    for r in checks {
        let limit = format!("{} {} {}", r.what, r.op, sig(r.limit));
        let unit = if r.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", r.unit)
        };
        match (r.ok, r.value) {
            (Some(ok), Some(v)) => {
                let v_text = match r.unit {
                    "" => format!("{v:.6}"),
                    _ => format!("{v:.1}"),
                };
                let _ = writeln!(
                    s,
                    "  {:<4} line {:<3} {limit}{unit}: {}{unit}{}",
                    if ok { "ok" } else { "FAIL" },
                    r.line,
                    v_text,
                    r.note
                        .as_ref()
                        .map(|n| format!(" ({n})"))
                        .unwrap_or_default()
                );
            }
            _ => {
                let _ = writeln!(
                    s,
                    "  --   line {:<3} {limit}{unit} at {:.0}% yield: not checked here (needs the fidelity budget over fabricated chips)",
                    r.line,
                    100.0 * r.yield_level.unwrap_or(0.0),
                );
            }
        }
    }
    let count = |l| mask.count(l);
    let _ = writeln!(
        s,
        "\nmask: {} structures, {} instances; {} core shapes, {} heaters, {} contacts, {} labels; layout.gds {} bytes",
        mask.structures,
        mask.instances,
        count(MaskLayer::Core),
        count(MaskLayer::Heater),
        count(MaskLayer::Contact),
        mask.labels,
        mask.gds_bytes
    );
    let r = &mask.rules;
    let rules = format!(
        "min gap {} nm, min width {} nm, min bend radius {} um, heater clearance {} um, heater spacing {} um",
        r.min_gap_um * 1e3,
        r.min_width_um * 1e3,
        r.min_bend_radius_um,
        r.heater_clearance_um,
        r.heater_spacing_um
    );
    match &mask.drc {
        None => {
            let _ = writeln!(
                s,
                "  design rules NOT CHECKED (--drc off): the layout may break {rules}"
            );
        }
        Some(d) if d.violations.is_empty() => {
            let _ = writeln!(
                s,
                "  design rules passed on the drawn polygons ({} shapes, {} guides): {rules}",
                d.shapes, d.guides
            );
        }
        Some(d) => {
            let _ = writeln!(
                s,
                "  design rules FAILED: {} violations on the drawn polygons ({rules})",
                d.violations.len()
            );
            for v in d.violations.iter().take(VIOLATIONS_SHOWN) {
                let _ = writeln!(s, "    {}", violation_text(v, fp));
            }
            if d.violations.len() > VIOLATIONS_SHOWN {
                let _ = writeln!(
                    s,
                    "    ... and {} more (all in report.json)",
                    d.violations.len() - VIOLATIONS_SHOWN
                );
            }
        }
    }
    if !outputs.is_empty() {
        let _ = writeln!(s, "\nwritten: {}", outputs.join(", "));
    }
    s
}
