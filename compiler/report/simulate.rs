//! The `simulate` report: a readable table and the JSON document of
//! docs/json.md.

use super::{JsonComplex, JsonDiagnostic, JsonMatrix, complex_text, json_diagnostic};
use crate::optics::simulate::{Conditioning, Simulation, Statistics, logical_label};
use crate::source::Source;
use serde::Serialize;
use std::fmt::Write;

/// Patterns below this probability are left out of the distribution (they
/// are zero up to rounding: amplitudes are accurate to about 1e-15).
pub const PROBABILITY_CUTOFF: f64 = 1e-15;
/// Rows of the distribution the text table shows.
pub const TABLE_ROWS: usize = 32;
/// Largest logical map printed as a table (3 qubits).
pub const TABLE_MAP_QUBITS: usize = 3;

#[derive(Serialize)]
pub struct JsonSimulation {
    pub chip: String,
    /// `"ideal"`: the lossless network as written; `"compiled"`: the
    /// compiled nominal chip (`simulate --compiled`).
    pub network: &'static str,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub compiled: Option<JsonCompiled>,
    pub qubits: Vec<String>,
    pub modes: Vec<String>,
    pub mode_info: Vec<JsonMode>,
    pub launch: Vec<u32>,
    pub mode_unitary: JsonMatrix,
    pub logical_basis: Vec<String>,
    pub logical_map: Option<JsonMatrix>,
    /// Why there is no logical map, when there is none.
    pub logical_note: Option<String>,
    pub conditioning: Option<&'static str>,
    pub target_kind: Option<&'static str>,
    pub success_probability: Option<f64>,
    pub scheme_success: Option<f64>,
    pub process_fidelity: Option<f64>,
    pub fidelity_kind: Option<&'static str>,
    pub process_fidelity_with_phases: Option<f64>,
    pub average_gate_fidelity: Option<f64>,
    pub warnings: Vec<JsonDiagnostic>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub distribution: Option<Vec<JsonOutcome>>,
    /// Why there is no distribution (too many patterns), when there is none.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub distribution_note: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub distribution_patterns: Option<usize>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub distribution_cutoff: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub total_probability: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub occupation: Option<Vec<u32>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub logical: Option<Option<String>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub amplitude: Option<JsonComplex>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub probability: Option<f64>,
    pub passes: Vec<JsonPass>,
}

#[derive(Serialize)]
pub struct JsonCompiled {
    pub summary: String,
    pub ideal_success_probability: Option<f64>,
    pub ideal_process_fidelity: Option<f64>,
}

#[derive(Serialize)]
pub struct JsonMode {
    pub name: String,
    /// `rail`, `free`, `ancilla`.
    pub role: &'static str,
    /// `declared` or `gate` (allocated by a gate scheme).
    pub origin: &'static str,
    pub photons_in: u32,
    pub herald: Option<u32>,
}

#[derive(Serialize)]
pub struct JsonOutcome {
    pub occupation: Vec<u32>,
    pub logical: Option<String>,
    pub probability: f64,
    pub amplitude: JsonComplex,
    /// `simulate --compiled`: the ideal network's probability of the pattern.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ideal_probability: Option<f64>,
}

#[derive(Serialize)]
pub struct JsonPass {
    pub pass: &'static str,
    pub ops_before: usize,
    pub ops_after: usize,
    pub changes: Vec<JsonChange>,
}

#[derive(Serialize)]
pub struct JsonChange {
    pub what: String,
    pub line: usize,
    pub column: usize,
}

fn conditioning_text(c: Conditioning) -> &'static str {
    match c {
        Conditioning::PostSelected => "post-selected",
        Conditioning::Heralded => "heralded",
    }
}

pub fn to_json(sim: &Simulation, src: &Source) -> JsonSimulation {
    let net = &sim.network;
    let lr = sim.logical.as_ref().ok();
    let mut doc = JsonSimulation {
        chip: net.chip.clone(),
        network: if sim.compiled.is_some() {
            "compiled"
        } else {
            "ideal"
        },
        compiled: sim.compiled.as_ref().map(|c| JsonCompiled {
            summary: c.summary.clone(),
            ideal_success_probability: c.ideal.as_ref().map(|i| i.scheme_success),
            ideal_process_fidelity: c.ideal.as_ref().map(|i| i.fidelity),
        }),
        qubits: net.qubits.iter().map(|q| q.name.clone()).collect(),
        modes: net.modes.iter().map(|m| m.name.clone()).collect(),
        mode_info: net
            .modes
            .iter()
            .map(|m| JsonMode {
                name: m.name.clone(),
                role: match m.role {
                    crate::circuit::ModeRole::Rail { .. } => "rail",
                    crate::circuit::ModeRole::Free => "free",
                    crate::circuit::ModeRole::Ancilla => "ancilla",
                },
                origin: match m.origin {
                    crate::optics::network::ModeOrigin::Declared => "declared",
                    crate::optics::network::ModeOrigin::Gate { .. } => "gate",
                },
                photons_in: m.photons_in,
                herald: m.herald,
            })
            .collect(),
        launch: sim.launch.clone(),
        mode_unitary: (&net.unitary).into(),
        logical_basis: lr.map(|l| l.map.basis.clone()).unwrap_or_default(),
        logical_map: lr.map(|l| (&l.map.matrix).into()),
        logical_note: sim.logical.as_ref().err().cloned(),
        conditioning: lr.map(|l| conditioning_text(l.conditioning)),
        target_kind: lr.map(|l| l.target.kind()),
        success_probability: lr.map(|l| l.scheme_success),
        scheme_success: lr.map(|l| l.scheme_success),
        process_fidelity: lr.map(|l| l.fidelity),
        fidelity_kind: lr.map(|l| l.fidelity_kind.as_str()),
        process_fidelity_with_phases: lr.map(|l| l.process_fidelity_with_phases),
        average_gate_fidelity: lr.map(|l| l.average_gate_fidelity),
        warnings: sim
            .warnings
            .iter()
            .map(|d| json_diagnostic(d, src))
            .collect(),
        distribution: None,
        distribution_note: None,
        distribution_patterns: None,
        distribution_cutoff: None,
        total_probability: None,
        occupation: None,
        logical: None,
        amplitude: None,
        probability: None,
        passes: sim
            .passes
            .passes
            .iter()
            .map(|p| JsonPass {
                pass: p.pass,
                ops_before: p.ops_before,
                ops_after: p.ops_after,
                changes: p
                    .changes
                    .iter()
                    .map(|c| {
                        let (line, column) = src.line_col(c.spans.first().map_or(0, |s| s.start));
                        JsonChange {
                            what: c.what.clone(),
                            line,
                            column,
                        }
                    })
                    .collect(),
            })
            .collect(),
    };
    match &sim.statistics {
        Statistics::Distribution(all) => {
            doc.distribution = Some(
                all.iter()
                    .enumerate()
                    .filter(|(_, o)| o.probability() > PROBABILITY_CUTOFF)
                    .map(|(i, o)| JsonOutcome {
                        occupation: o.occupation.clone(),
                        logical: logical_label(net, &o.occupation),
                        probability: o.probability(),
                        amplitude: o.amplitude.into(),
                        ideal_probability: sim
                            .compiled
                            .as_ref()
                            .and_then(|c| c.ideal_probability.get(i).copied()),
                    })
                    .collect(),
            );
            doc.distribution_patterns = Some(all.len());
            doc.distribution_cutoff = Some(PROBABILITY_CUTOFF);
            doc.total_probability = Some(all.iter().map(|o| o.probability()).sum());
        }
        Statistics::OutOfReach(why) => doc.distribution_note = Some(why.clone()),
        Statistics::Pattern(o) => {
            doc.occupation = Some(o.occupation.clone());
            doc.logical = Some(logical_label(net, &o.occupation));
            doc.amplitude = Some(o.amplitude.into());
            doc.probability = Some(o.probability());
        }
    }
    doc
}

/// A probability in six decimals, or in scientific notation when small.
fn figure(x: f64) -> String {
    if x != 0.0 && x.abs() < 1e-3 {
        format!("{x:.6e}")
    } else {
        format!("{x:.6}")
    }
}

fn list(v: &[u32]) -> String {
    v.iter().map(u32::to_string).collect::<Vec<_>>().join(",")
}

/// The readable report.
pub fn to_text(sim: &Simulation, circuit: &crate::circuit::Circuit, src: &Source) -> String {
    let net = &sim.network;
    let mut s = String::new();
    match &sim.compiled {
        None => {
            let _ = writeln!(
                s,
                "chip {}: the ideal network (lossless, the scheme as written)",
                net.chip
            );
        }
        Some(c) => {
            let _ = writeln!(
                s,
                "chip {}: the compiled nominal chip (loss included): {}",
                net.chip, c.summary
            );
        }
    }
    let qn: Vec<&str> = net.qubits.iter().map(|q| q.name.as_str()).collect();
    let _ = writeln!(
        s,
        "  qubits   {}",
        if qn.is_empty() {
            "none".to_owned()
        } else {
            format!("{} ({})", qn.len(), qn.join(" "))
        }
    );
    let _ = writeln!(
        s,
        "  modes    {} ({})",
        net.modes.len(),
        net.mode_names().join(" ")
    );
    for line in crate::optics::simulate::scheme_summary(circuit) {
        let _ = writeln!(s, "  schemes  {line}");
    }
    let heralds: Vec<String> = net
        .modes
        .iter()
        .filter_map(|m| m.herald.map(|h| format!("{}={h}", m.name)))
        .collect();
    if !heralds.is_empty() {
        let _ = writeln!(s, "  heralds  {}", heralds.join(" "));
    }
    let _ = writeln!(s, "  launch   {}", list(&sim.launch));
    s.push('\n');

    match &sim.logical {
        Ok(l) => {
            let d = l.map.matrix.nrows();
            let _ = writeln!(
                s,
                "logical map V[out, in] ({d} x {d}), {} on one photon per qubit{}",
                conditioning_text(l.conditioning),
                if l.conditioning == Conditioning::Heralded {
                    " and the heralds"
                } else {
                    ""
                }
            );
            if l.map.qubits <= TABLE_MAP_QUBITS {
                let w = l
                    .map
                    .matrix
                    .iter()
                    .map(|z| complex_text(*z, 6).len())
                    .max()
                    .unwrap_or(1)
                    .max(l.map.qubits)
                    + 3;
                let _ = write!(s, "  {:<8}", "out\\in");
                for b in &l.map.basis {
                    let _ = write!(s, "{b:>w$}");
                }
                s.push('\n');
                for (y, b) in l.map.basis.iter().enumerate() {
                    let _ = write!(s, "  {b:<8}");
                    for x in 0..d {
                        let _ = write!(s, "{:>w$}", complex_text(l.map.matrix[(y, x)], 6));
                    }
                    s.push('\n');
                }
            } else {
                let _ = writeln!(s, "  (too wide to print; see --json)");
            }
            let target = match l.target.kind() {
                "gates" => "the product of the circuit's gates",
                _ => {
                    "the unitary closest to this map (the circuit has mode-level elements outside single qubits)"
                }
            };
            let _ = writeln!(s, "  target                  {target}");
            let ideal = sim.compiled.as_ref().and_then(|c| c.ideal.as_ref());
            if sim.compiled.is_some() {
                let _ = writeln!(
                    s,
                    "  success on the chip     {}   Tr(V^dag V) / {d}, loss included{}",
                    figure(l.scheme_success),
                    ideal
                        .map(|i| format!("; ideal network {}", figure(i.scheme_success)))
                        .unwrap_or_default()
                );
                if let Some(i) = ideal {
                    let _ = writeln!(s, "  ideal network fidelity  {:.6}", i.fidelity);
                }
            } else {
                let _ = writeln!(
                    s,
                    "  scheme success          {}   Tr(V^dag V) / {d}",
                    figure(l.scheme_success)
                );
            }
            match l.fidelity_kind {
                crate::optics::simulate::FidelityKind::UpToOutputPhases => {
                    let _ = writeln!(
                        s,
                        "  fidelity (detect)       {:.6}   up to output phases: the chip ends in detect",
                        l.fidelity
                    );
                    let _ = writeln!(
                        s,
                        "  with output phases      {:.6}",
                        l.process_fidelity_with_phases
                    );
                }
                crate::optics::simulate::FidelityKind::Process => {
                    let _ = writeln!(s, "  process fidelity        {:.6}", l.fidelity);
                }
            }
            let _ = writeln!(
                s,
                "  average gate fidelity   {:.6}",
                l.average_gate_fidelity
            );
        }
        Err(why) => {
            let _ = writeln!(s, "logical map: none ({why})");
        }
    }
    s.push('\n');

    match &sim.statistics {
        Statistics::Distribution(all) => {
            let mut shown: Vec<&crate::optics::amplitude::Outcome> =
                all.iter().filter(|o| o.probability() > 1e-12).collect();
            shown.sort_by(|a, b| b.probability().total_cmp(&a.probability()));
            let total: f64 = all.iter().map(|o| o.probability()).sum();
            let _ = writeln!(
                s,
                "output distribution of the launch state: {} pattern{}, {} above 1e-12, total {:.6}",
                all.len(),
                if all.len() == 1 { "" } else { "s" },
                shown.len(),
                total
            );
            let width = (net.modes.len() * 2).max(10);
            let ideal_of = |o: &crate::optics::amplitude::Outcome| -> Option<f64> {
                let c = sim.compiled.as_ref()?;
                let i = all.iter().position(|a| a.occupation == o.occupation)?;
                c.ideal_probability.get(i).copied()
            };
            let compiled = sim.compiled.is_some();
            let _ = writeln!(
                s,
                "  {:<width$}  {:<8}  {:>12}{}  amplitude",
                "occupation",
                "logical",
                "probability",
                if compiled {
                    format!("  {:>12}", "ideal")
                } else {
                    String::new()
                }
            );
            for o in shown.iter().take(TABLE_ROWS) {
                let _ = writeln!(
                    s,
                    "  {:<width$}  {:<8}  {:>12}{}  {}",
                    list(&o.occupation),
                    logical_label(net, &o.occupation).unwrap_or_else(|| "-".into()),
                    figure(o.probability()),
                    if compiled {
                        format!("  {:>12}", ideal_of(o).map(figure).unwrap_or_default())
                    } else {
                        String::new()
                    },
                    complex_text(o.amplitude, 6)
                );
            }
            if shown.len() > TABLE_ROWS {
                let _ = writeln!(s, "  ... {} more (all in --json)", shown.len() - TABLE_ROWS);
            }
            if !net.qubits.is_empty() {
                let p: f64 = all
                    .iter()
                    .filter(|o| logical_label(net, &o.occupation).is_some())
                    .map(|o| o.probability())
                    .sum();
                let _ = writeln!(
                    s,
                    "  logical outcomes        {}   (this launch state's success)",
                    figure(p)
                );
            }
        }
        Statistics::OutOfReach(why) => {
            let _ = writeln!(s, "output distribution: not computed ({why})");
        }
        Statistics::Pattern(o) => {
            let _ = writeln!(s, "output pattern {}", list(&o.occupation));
            if let Some(b) = logical_label(net, &o.occupation) {
                let _ = writeln!(s, "  logical      {b}");
            }
            let _ = writeln!(s, "  amplitude    {}", complex_text(o.amplitude, 9));
            let _ = writeln!(s, "  probability  {:.6e}", o.probability());
        }
    }

    let changes: usize = sim.passes.passes.iter().map(|p| p.changes.len()).sum();
    s.push('\n');
    if changes == 0 {
        let _ = writeln!(s, "compile passes: nothing to merge or drop");
    } else {
        let _ = writeln!(s, "compile passes (the chip build applies them):");
        for p in &sim.passes.passes {
            for c in &p.changes {
                let (line, col) = src.line_col(c.spans.first().map_or(0, |sp| sp.start));
                let _ = writeln!(s, "  {:<14} line {line}:{col}: {}", p.pass, c.what);
            }
        }
    }
    s
}
