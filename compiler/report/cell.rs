//! The `cell` report: a readable summary and its JSON document
//! (docs/json.md).

use super::{JsonMatrix, complex_text};
use crate::cell::CellDesign;
use crate::cell::sensitivity::{MonteCarlo, SensitivityRow, WidthRow};
use crate::process::law::Characterisation;
use crate::process::spec::Process;
use serde::Serialize;
use std::fmt::Write;

#[derive(Serialize)]
pub struct JsonLaw {
    pub model: String,
    pub k_ref_per_um: f64,
    pub g_ref_nm: f64,
    pub g_c_nm: f64,
    pub fit_rms: f64,
}

#[derive(Serialize)]
pub struct JsonAnalytic {
    pub gap_upper_nm: f64,
    pub gap_lower_nm: f64,
    pub bend_per_m: f64,
    pub length_um: f64,
    /// Null when the cell was polished from a design cache.
    pub split_error: Option<f64>,
    pub leakage: Option<f64>,
}

#[derive(Serialize)]
pub struct JsonGeometric {
    pub kind: &'static str,
    pub process: String,
    pub theta: f64,
    pub cross_power: f64,
    pub gap_upper_nm: f64,
    pub gap_lower_nm: f64,
    pub bend_per_m: f64,
    pub length_um: f64,
    pub width_nm: f64,
    pub residual: f64,
    pub coupling: JsonLaw,
    /// 3 x 3, order (upper rail, auxiliary, lower rail).
    pub transfer: JsonMatrix,
    pub rail_block: JsonMatrix,
    pub leakage: f64,
    pub split_error: f64,
    pub out_phases_rad: [f64; 2],
    pub in_phase_lower_rad: f64,
    pub refinement_iterations: usize,
    /// Whether split error and leakage are within the 1e-6 targets.
    pub targets_met: bool,
    /// Why not, when they are not.
    pub note: Option<String>,
    pub analytic: JsonAnalytic,
}

#[derive(Serialize)]
pub struct JsonCoupler {
    pub kind: &'static str,
    pub process: String,
    pub theta: f64,
    pub cross_power: f64,
    pub gap_nm: f64,
    pub straight_um: f64,
    pub bend_radius_um: f64,
    pub bend_reach_um: f64,
    pub length_um: f64,
    pub width_nm: f64,
    pub coupling: JsonLaw,
    pub rail_block: JsonMatrix,
    pub analytic_straight_um: f64,
}

#[derive(Serialize)]
pub struct JsonMzi {
    pub kind: &'static str,
    pub process: String,
    pub theta: f64,
    pub cross_power: f64,
    /// Each of the two 50:50 couplers.
    pub coupler: JsonCoupler,
    pub phase_rad: f64,
    pub arm_um: f64,
    pub length_um: f64,
    pub width_nm: f64,
    pub rail_block: JsonMatrix,
}

fn coupler_json(
    d: &crate::cell::coupler::CouplerDesign,
    p: &Process,
    c: &Characterisation,
) -> JsonCoupler {
    JsonCoupler {
        kind: "coupler",
        process: p.name.clone(),
        theta: d.theta,
        cross_power: d.theta.sin().powi(2),
        gap_nm: d.gap_nm,
        straight_um: d.straight_um,
        bend_radius_um: d.bend_radius_um,
        bend_reach_um: d.bend_reach_um,
        length_um: d.length_um,
        width_nm: p.width_nm,
        coupling: law(c),
        rail_block: (&d.transfer).into(),
        analytic_straight_um: d.analytic_straight_um,
    }
}

const TARGETS_NOTE: &str = "the two gaps cannot reach the 1e-6 targets here: the rails' path detuning against the straight auxiliary guide shifts the bright state's phase from pi, which a full swap (theta near pi/2) cannot hide; the error left is physical, not numerical";

fn law(c: &Characterisation) -> JsonLaw {
    let l = c.law();
    JsonLaw {
        model: c.model.clone(),
        k_ref_per_um: l.fit.k_ref_per_um,
        g_ref_nm: l.fit.g_ref_nm,
        g_c_nm: l.fit.g_c_nm,
        fit_rms: l.fit.fit_rms,
    }
}

#[derive(Serialize)]
pub struct JsonResponse {
    pub split_error: f64,
    pub leakage: f64,
    pub infidelity: f64,
    /// With the neighbouring phase shifters re-tuned.
    pub calibrated_infidelity: f64,
    pub deviation: f64,
}

#[derive(Serialize)]
pub struct JsonSensitivity {
    pub source: &'static str,
    pub sigma: String,
    pub cell: JsonResponse,
    pub comparison_kind: &'static str,
    pub comparison: JsonResponse,
    /// The linearised prediction at one sigma (absent for roughness).
    pub first_order: Option<JsonFirstOrder>,
    pub comparison_first_order: Option<JsonFirstOrder>,
}

fn response(r: &crate::cell::sensitivity::Response) -> JsonResponse {
    JsonResponse {
        split_error: r.split_error,
        leakage: r.leakage,
        infidelity: (1.0 - r.fidelity).max(0.0),
        calibrated_infidelity: (1.0 - r.calibrated_fidelity).max(0.0),
        deviation: r.deviation,
    }
}

fn kind_name(cell: &CellDesign) -> &'static str {
    cell.kind().name()
}

/// Everything `trilane cell` shows.
pub struct CellReport<'a> {
    pub cell: &'a CellDesign,
    pub comparison: &'a CellDesign,
    pub process: &'a Process,
    pub characterisation: &'a Characterisation,
    pub sensitivity: &'a [SensitivityRow],
    /// The Monte Carlo of (cell, comparison).
    pub monte_carlo: Option<(MonteCarlo, MonteCarlo)>,
    pub widths: &'a [WidthRow],
    /// Where the sweep figure was written.
    pub sweep_file: Option<String>,
}

#[derive(Serialize)]
pub struct JsonFirstOrder {
    pub split_error: f64,
    pub infidelity: f64,
    pub calibrated_infidelity: f64,
}

#[derive(Serialize)]
pub struct JsonMonteCarlo {
    pub samples: usize,
    pub seed: u64,
    pub infidelity_mean: f64,
    pub infidelity_median: f64,
    pub infidelity_p95: f64,
    pub split_error_rms: f64,
    pub leakage_mean: f64,
    pub calibrated_infidelity_mean: f64,
}

impl From<&MonteCarlo> for JsonMonteCarlo {
    fn from(m: &MonteCarlo) -> Self {
        JsonMonteCarlo {
            samples: m.samples,
            seed: m.seed,
            infidelity_mean: m.infidelity_mean,
            infidelity_median: m.infidelity_median,
            infidelity_p95: m.infidelity_p95,
            split_error_rms: m.split_error_rms,
            leakage_mean: m.leakage_mean,
            calibrated_infidelity_mean: m.calibrated_infidelity_mean,
        }
    }
}

#[derive(Serialize)]
pub struct JsonWidthRow {
    pub width_nm: f64,
    pub length_um: f64,
    pub comparison_length_um: f64,
    pub monte_carlo: JsonMonteCarlo,
    pub comparison_monte_carlo: JsonMonteCarlo,
}

pub fn to_json(r: &CellReport) -> String {
    let comparison_kind = kind_name(r.comparison);
    let first = |f: &crate::cell::sensitivity::FirstOrder| JsonFirstOrder {
        split_error: f.split_error,
        infidelity: f.infidelity,
        calibrated_infidelity: f.calibrated_infidelity,
    };
    let rows: Vec<JsonSensitivity> = r
        .sensitivity
        .iter()
        .map(|row| JsonSensitivity {
            source: row.source,
            sigma: row.sigma_text.clone(),
            cell: response(&row.cell),
            comparison_kind,
            comparison: response(&row.comparison),
            first_order: row.first_order.as_ref().map(|(a, _)| first(a)),
            comparison_first_order: row.first_order.as_ref().map(|(_, b)| first(b)),
        })
        .collect();
    let mut value = cell_json(r.cell, r.process, r.characterisation);
    value["sensitivity"] = serde_json::to_value(rows).expect("the report serialises");
    value["comparison_kind"] = serde_json::Value::from(comparison_kind);
    value["comparison_length_um"] = serde_json::Value::from(r.comparison.length_um());
    if let Some((a, b)) = &r.monte_carlo {
        value["monte_carlo"] =
            serde_json::to_value(JsonMonteCarlo::from(a)).expect("the report serialises");
        value["comparison_monte_carlo"] =
            serde_json::to_value(JsonMonteCarlo::from(b)).expect("the report serialises");
    }
    if !r.widths.is_empty() {
        let w: Vec<JsonWidthRow> = r
            .widths
            .iter()
            .map(|w| JsonWidthRow {
                width_nm: w.width_nm,
                length_um: w.cell_length_um,
                comparison_length_um: w.comparison_length_um,
                monte_carlo: (&w.cell).into(),
                comparison_monte_carlo: (&w.comparison).into(),
            })
            .collect();
        value["width_trade"] = serde_json::to_value(w).expect("the report serialises");
    }
    if let Some(f) = &r.sweep_file {
        value["sweep_file"] = serde_json::Value::from(f.clone());
    }
    serde_json::to_string_pretty(&value).expect("the report serialises") + "\n"
}

fn cell_json(cell: &CellDesign, p: &Process, c: &Characterisation) -> serde_json::Value {
    let text = match cell {
        CellDesign::Geometric(r) => serde_json::to_value(JsonGeometric {
            kind: "geometric",
            process: p.name.clone(),
            theta: r.design.theta,
            cross_power: r.design.theta.sin().powi(2),
            gap_upper_nm: r.design.gap_upper_nm,
            gap_lower_nm: r.design.gap_lower_nm,
            bend_per_m: r.design.bend_per_m(),
            length_um: r.design.length_um,
            width_nm: p.width_nm,
            residual: r.design.residual,
            coupling: law(c),
            transfer: (&r.transfer).into(),
            rail_block: (&r.rail_block).into(),
            leakage: r.quality.leakage,
            split_error: r.quality.split_error,
            out_phases_rad: r.out_phases_rad,
            in_phase_lower_rad: r.in_phase_lower_rad,
            refinement_iterations: r.iterations,
            targets_met: r.quality.split_error < crate::cell::refine::SPLIT_TARGET
                && r.quality.leakage < crate::cell::refine::LEAKAGE_TARGET,
            note: (r.quality.split_error >= crate::cell::refine::SPLIT_TARGET
                || r.quality.leakage >= crate::cell::refine::LEAKAGE_TARGET)
                .then(|| TARGETS_NOTE.to_owned()),
            analytic: JsonAnalytic {
                gap_upper_nm: r.analytic.gap_upper_nm,
                gap_lower_nm: r.analytic.gap_lower_nm,
                bend_per_m: r.analytic.bend_per_m(),
                length_um: r.analytic.length_um,
                split_error: r.analytic_quality.as_ref().map(|q| q.split_error),
                leakage: r.analytic_quality.as_ref().map(|q| q.leakage),
            },
        }),
        CellDesign::Coupler(d) => serde_json::to_value(coupler_json(d, p, c)),
        CellDesign::Mzi(m) => serde_json::to_value(JsonMzi {
            kind: "mzi",
            process: p.name.clone(),
            theta: m.theta,
            cross_power: m.theta.sin().powi(2),
            coupler: coupler_json(&m.coupler, p, c),
            phase_rad: m.phase_rad,
            arm_um: m.arm_um,
            length_um: m.length_um,
            width_nm: p.width_nm,
            rail_block: (&m.transfer).into(),
        }),
    };
    text.expect("the report serialises")
}

fn matrix_lines(m: &nalgebra::DMatrix<num_complex::Complex64>, indent: &str) -> String {
    let mut s = String::new();
    for i in 0..m.nrows() {
        let row: Vec<String> = (0..m.ncols())
            .map(|j| format!("{:>22}", complex_text(m[(i, j)], 7)))
            .collect();
        let _ = writeln!(s, "{indent}{}", row.join(""));
    }
    s
}

pub fn to_text(r: &CellReport) -> String {
    let (cell, p, c, sensitivity, comparison) = (
        r.cell,
        r.process,
        r.characterisation,
        r.sensitivity,
        r.comparison,
    );
    let mut s = String::new();
    let l = c.law();
    match cell {
        CellDesign::Geometric(r) => {
            let d = &r.design;
            let _ = writeln!(
                s,
                "geometric cell, theta {:.6} rad (cross power {:.6}), on {} ({} law)",
                d.theta,
                d.theta.sin().powi(2),
                p.name,
                c.model
            );
            let _ = writeln!(
                s,
                "  minimum gaps  upper rail {:.2} nm, lower rail {:.2} nm (process minimum {} nm)",
                d.gap_upper_nm, d.gap_lower_nm, p.rules.min_gap_nm
            );
            if d.gap_lower_nm.min(d.gap_upper_nm) < p.rules.min_gap_nm - 0.005 {
                let _ = writeln!(
                    s,
                    "  WARNING       the refined gap is below the process minimum of {} nm: this cell breaks the design rule",
                    p.rules.min_gap_nm
                );
            }
            let _ = writeln!(
                s,
                "  bending       b = {:.1} /m on both rails (parabolic paths)",
                d.bend_per_m()
            );
            let _ = writeln!(
                s,
                "  length        {:.2} um (the coupling envelope falls to {:.0e} of its peak at the ends)",
                d.length_um, d.residual
            );
            let _ = writeln!(s, "  guides        {:.0} nm wide", p.width_nm);
            let _ = writeln!(s, "  rail block    (upper, lower rail)");
            s.push_str(&matrix_lines(&r.rail_block, "    "));
            let _ = writeln!(
                s,
                "  split error   {:.1e} (largest modulus difference from S(theta))",
                r.quality.split_error
            );
            let _ = writeln!(
                s,
                "  leakage       {:.1e} (largest power left in the auxiliary guide)",
                r.quality.leakage
            );
            if r.quality.split_error >= crate::cell::refine::SPLIT_TARGET
                || r.quality.leakage >= crate::cell::refine::LEAKAGE_TARGET
            {
                let _ = writeln!(s, "  NOTE          {TARGETS_NOTE}");
            }
            let _ = writeln!(
                s,
                "  phases        out upper {:.6}, out lower {:.6}, in lower {:.6} rad (for the neighbouring phase shifters)",
                r.out_phases_rad[0], r.out_phases_rad[1], r.in_phase_lower_rad
            );
            let missed = r.analytic_quality.as_ref().map_or_else(
                || "not integrated (polished from a cache)".to_owned(),
                |q| {
                    format!(
                        "split error {:.1e}, leakage {:.1e}",
                        q.split_error, q.leakage
                    )
                },
            );
            let _ = writeln!(
                s,
                "  analytic      gaps {:.2} / {:.2} nm from the exponential fit (g_c {:.1} nm): {missed}; refined in {} Newton steps on the smooth law, path detuning included",
                r.analytic.gap_upper_nm, r.analytic.gap_lower_nm, l.fit.g_c_nm, r.iterations
            );
        }
        CellDesign::Coupler(d) => {
            let _ = writeln!(
                s,
                "directional coupler, theta {:.6} rad (cross power {:.6}), on {} ({} law)",
                d.theta,
                d.theta.sin().powi(2),
                p.name,
                c.model
            );
            let _ = writeln!(s, "  gap           {:.1} nm", d.gap_nm);
            let _ = writeln!(
                s,
                "  length        {:.2} um: straight {:.2} um plus bends of radius {} um followed {:.2} um each side",
                d.length_um, d.straight_um, d.bend_radius_um, d.bend_reach_um
            );
            let _ = writeln!(s, "  rail block");
            s.push_str(&matrix_lines(&d.transfer, "    "));
            let _ = writeln!(
                s,
                "  analytic      straight {:.2} um from the exponential fit; refined on the smooth law",
                d.analytic_straight_um
            );
        }
        CellDesign::Mzi(m) => {
            let d = &m.coupler;
            let _ = writeln!(
                s,
                "Mach-Zehnder interferometer, theta {:.6} rad (cross power {:.6}), on {} ({} law)",
                m.theta,
                m.theta.sin().powi(2),
                p.name,
                c.model
            );
            let _ = writeln!(
                s,
                "  couplers      two 50:50 couplers at {:.1} nm, {:.2} um each (straight {:.2} um, bends of radius {} um)",
                d.gap_nm, d.length_um, d.straight_um, d.bend_radius_um
            );
            let _ = writeln!(
                s,
                "  phase         {:.6} rad on the upper arm, a {:.0} um thermal phase shifter",
                m.phase_rad, m.arm_um
            );
            let _ = writeln!(s, "  length        {:.2} um", m.length_um);
            let _ = writeln!(s, "  rail block");
            s.push_str(&matrix_lines(&m.transfer, "    "));
        }
    }
    if !sensitivity.is_empty() {
        let _ = writeln!(
            s,
            "\nsensitivity at one sigma of {}'s tolerances, each source alone",
            p.name
        );
        for r in sensitivity {
            let _ = writeln!(s, "  {:<30} {}", r.source, r.sigma_text);
        }
        let (a, b) = (kind_name(cell), kind_name(comparison));
        let _ = writeln!(s, "\n  {:<30} {:<62} {}", "", format!("{a} (this cell)"), b);
        let _ = writeln!(
            s,
            "  {:<30} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9}   {:>9} {:>9} {:>9} {:>9}",
            "source",
            "split",
            "(linear)",
            "leakage",
            "1-F",
            "(linear)",
            "cal 1-F",
            "split",
            "(linear)",
            "1-F",
            "cal 1-F"
        );
        let lin = |x: Option<f64>, signed: bool| match x {
            Some(v) if signed => format!("{v:+.2e}"),
            Some(v) => format!("{v:.2e}"),
            None => "-".to_owned(),
        };
        for r in sensitivity {
            let f1 = r.first_order.as_ref().map(|f| &f.0);
            let f2 = r.first_order.as_ref().map(|f| &f.1);
            let _ = writeln!(
                s,
                "  {:<30} {:>+9.2e} {:>9} {:>9.2e} {:>9.2e} {:>9} {:>9.2e}   {:>+9.2e} {:>9} {:>9.2e} {:>9.2e}",
                r.source,
                r.cell.split_error,
                lin(f1.map(|f| f.split_error), true),
                r.cell.leakage,
                (1.0 - r.cell.fidelity).max(0.0),
                lin(f1.map(|f| f.infidelity), false),
                (1.0 - r.cell.calibrated_fidelity).max(0.0),
                r.comparison.split_error,
                lin(f2.map(|f| f.split_error), true),
                (1.0 - r.comparison.fidelity).max(0.0),
                (1.0 - r.comparison.calibrated_fidelity).max(0.0),
            );
        }
        let _ = writeln!(
            s,
            "  split: change of the cross power. 1-F: loss-normalised infidelity against the cell's own nominal block, as fabricated;"
        );
        let _ = writeln!(
            s,
            "  cal 1-F: with the neighbouring phase shifters re-tuned after fabrication (a split cannot be re-tuned). (linear): the"
        );
        let _ = writeln!(
            s,
            "  first-order prediction from dR/dx at one sigma. roughness: rms split / mean figures over its realisations."
        );
    }
    if let Some((m1, m2)) = &r.monte_carlo {
        let _ = writeln!(
            s,
            "\nMonte Carlo, {} fabricated cells each (seed {}; die bias, thickness, every edge's local error and roughness drawn together)",
            m1.samples, m1.seed
        );
        let _ = writeln!(
            s,
            "  {:<12} {:>11} {:>11} {:>11} {:>13} {:>11} {:>11}",
            "", "1-F mean", "median", "95th pct", "cal 1-F mean", "split rms", "leakage"
        );
        for (name, m) in [(kind_name(cell), m1), (kind_name(comparison), m2)] {
            let _ = writeln!(
                s,
                "  {:<12} {:>11.2e} {:>11.2e} {:>11.2e} {:>13.2e} {:>11.2e} {:>11.2e}",
                name,
                m.infidelity_mean,
                m.infidelity_median,
                m.infidelity_p95,
                m.calibrated_infidelity_mean,
                m.split_error_rms,
                m.leakage_mean
            );
        }
    }
    if !r.widths.is_empty() {
        let _ = writeln!(
            s,
            "\nwidth trade (both cells redesigned for each guide width; Monte Carlo as above)"
        );
        let _ = writeln!(
            s,
            "  {:>8} {:>12} {:>12} {:>12}   {:>12} {:>12} {:>12}",
            "width nm",
            format!("{} um", &kind_name(cell)[..3]),
            "1-F mean",
            "cal 1-F",
            format!("{} um", &kind_name(comparison)[..3]),
            "1-F mean",
            "cal 1-F"
        );
        for w in r.widths {
            let _ = writeln!(
                s,
                "  {:>8.0} {:>12.2} {:>12.2e} {:>12.2e}   {:>12.2} {:>12.2e} {:>12.2e}",
                w.width_nm,
                w.cell_length_um,
                w.cell.infidelity_mean,
                w.cell.calibrated_infidelity_mean,
                w.comparison_length_um,
                w.comparison.infidelity_mean,
                w.comparison.calibrated_infidelity_mean
            );
        }
    }
    if let Some(f) = &r.sweep_file {
        let _ = writeln!(s, "\nsweep figure written to {f}");
    }
    if c.model == "effective_index" {
        let _ = writeln!(
            s,
            "  note          the effective index method overstates silicon couplings (about half at 200 nm): on real silicon this cell is too short; design on a measured table (--process FILE) for tape-out"
        );
    }
    s
}
