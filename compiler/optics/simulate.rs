//! `simulate`: what the ideal network of a chip does (lossless, the scheme as
//! written): its logical map with success and fidelity, and the output
//! statistics of one launch state, or one detection pattern's amplitude.

use super::amplitude::{self, AmplitudeError, Outcome};
use super::logical::{self, LogicalError, LogicalMap, Target};
use super::network::{ModeNetwork, network};
use crate::circuit::OpKind;
use crate::circuit::{Circuit, ModeRole, QubitGate};
use crate::compile::{PassReport, optimise};
use crate::diagnostic::Diagnostic;

/// Which fidelity a figure is (docs/physics.md section 7).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FidelityKind {
    /// `F_pro`, phases included.
    Process,
    /// `F_detect`: the chip ends in `detect`; the output phases of the
    /// counted qubits are free.
    UpToOutputPhases,
}

impl FidelityKind {
    pub fn as_str(self) -> &'static str {
        match self {
            FidelityKind::Process => "process",
            FidelityKind::UpToOutputPhases => "detect",
        }
    }
}

/// How the logical map is conditioned.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Conditioning {
    /// One photon per qubit at the outputs, nothing else watched.
    PostSelected,
    /// Heralds on ancilla modes, together with one photon per qubit.
    Heralded,
}

#[derive(Clone, Debug, PartialEq)]
pub struct LogicalResult {
    pub map: LogicalMap,
    pub target: Target,
    pub conditioning: Conditioning,
    /// `Tr(V^dag V) / d` of the ideal network: the scheme's success.
    pub scheme_success: f64,
    /// `F_pro`, or `F_detect` when the chip ends in `detect`.
    pub fidelity: f64,
    pub fidelity_kind: FidelityKind,
    /// `F_pro` with the output phases, whatever the chip ends in.
    pub process_fidelity_with_phases: f64,
    /// `(d F + 1) / (d + 1)` of `fidelity`.
    pub average_gate_fidelity: f64,
}

#[derive(Clone, Debug, PartialEq)]
pub enum Statistics {
    /// Every output pattern of the launch state, in enumeration order.
    Distribution(Vec<Outcome>),
    /// The one pattern asked for.
    Pattern(Outcome),
    /// The distribution is out of reach; the reason, which points to
    /// `--output`.
    OutOfReach(String),
}

#[derive(Clone, Debug, PartialEq)]
pub struct Simulation {
    pub network: ModeNetwork,
    /// Photons per mode of the launch state.
    pub launch: Vec<u32>,
    /// `Err` says why there is no logical map (no qubits, too large, not
    /// computed with `--output`).
    pub logical: Result<LogicalResult, String>,
    pub statistics: Statistics,
    /// What the compile passes would remove (the build uses them).
    pub passes: PassReport,
    pub warnings: Vec<Diagnostic>,
    /// Set when this is a compiled chip's network (`simulate --compiled`).
    pub compiled: Option<Compiled>,
}

/// A compiled chip beside its ideal network.
#[derive(Clone, Debug, PartialEq)]
pub struct Compiled {
    pub summary: String,
    /// The ideal network's logical result (target, scheme success, fidelity).
    pub ideal: Option<LogicalResult>,
    /// The ideal network's probability of each pattern of `statistics`.
    pub ideal_probability: Vec<f64>,
}

/// [`simulate_network`] of a compiled chip of transfer `chip_u` (loss
/// included) on the modes of the ideal network `ideal_net`: the logical
/// map of the chip measured against the ideal network's target, and the
/// ideal figures beside.
pub fn simulate_compiled(
    circuit: &Circuit,
    ideal_net: &ModeNetwork,
    chip_u: &nalgebra::DMatrix<num_complex::Complex64>,
    summary: String,
    launch: Option<&[u32]>,
    output: Option<&[u32]>,
) -> Result<Simulation, SimulateError> {
    let ideal = logical_result(circuit, ideal_net).ok();
    let mut net = ideal_net.clone();
    net.unitary = chip_u.clone();
    let mut sim = simulate_network(circuit, net, launch, output)?;
    if let (Ok(l), Some(i)) = (sim.logical.as_mut(), ideal.as_ref()) {
        l.target = i.target.clone();
        l.process_fidelity_with_phases =
            logical::process_fidelity(i.target.matrix(), &l.map.matrix);
        l.fidelity = if ideal_net.detect {
            logical::detect_fidelity_of(
                i.target.matrix(),
                &l.map.matrix,
                &ideal_net.detected_qubits,
            )
        } else {
            l.process_fidelity_with_phases
        };
        l.average_gate_fidelity = logical::average_gate_fidelity(l.fidelity, l.map.matrix.nrows());
    }
    let launch_occ = sim.launch.clone();
    let ideal_probability = match &sim.statistics {
        Statistics::Distribution(all) => all
            .iter()
            .map(|o| {
                amplitude::amplitude(&ideal_net.unitary, &launch_occ, &o.occupation)
                    .map_or(f64::NAN, |a| a.norm_sqr())
            })
            .collect(),
        Statistics::Pattern(o) => vec![
            amplitude::amplitude(&ideal_net.unitary, &launch_occ, &o.occupation)
                .map_or(f64::NAN, |a| a.norm_sqr()),
        ],
        Statistics::OutOfReach(_) => Vec::new(),
    };
    sim.compiled = Some(Compiled {
        summary,
        ideal,
        ideal_probability,
    });
    Ok(sim)
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SimulateError {
    #[error(transparent)]
    Amplitude(#[from] AmplitudeError),
}

/// The logical map of a network with its target and fidelities.
pub fn logical_result(circuit: &Circuit, net: &ModeNetwork) -> Result<LogicalResult, LogicalError> {
    let map = logical::logical_map(net)?;
    let target = match logical::target(circuit, &map) {
        Some(t) => t,
        None => {
            // A map that never succeeds has no closest unitary: fidelity 0
            // against the identity, success 0.
            let d = map.matrix.nrows();
            Target::ClosestUnitary(nalgebra::DMatrix::identity(d, d))
        }
    };
    let d = map.matrix.nrows();
    let scheme_success = logical::success_probability(&map.matrix);
    let full = logical::process_fidelity(target.matrix(), &map.matrix);
    let (fidelity, fidelity_kind) = if net.detect {
        (
            logical::detect_fidelity_of(target.matrix(), &map.matrix, &net.detected_qubits),
            FidelityKind::UpToOutputPhases,
        )
    } else {
        (full, FidelityKind::Process)
    };
    let heralded = net.modes.iter().any(|m| m.herald.is_some());
    Ok(LogicalResult {
        average_gate_fidelity: logical::average_gate_fidelity(fidelity, d),
        map,
        target,
        conditioning: if heralded {
            Conditioning::Heralded
        } else {
            Conditioning::PostSelected
        },
        scheme_success,
        fidelity,
        fidelity_kind,
        process_fidelity_with_phases: full,
    })
}

/// Simulates a validated circuit. `launch` replaces the circuit's launch
/// state (photons per network mode); `output` asks for one pattern instead
/// of the whole distribution, and then the logical map is not computed.
pub fn simulate(
    circuit: &Circuit,
    launch: Option<&[u32]>,
    output: Option<&[u32]>,
) -> Result<Simulation, SimulateError> {
    simulate_network(circuit, network(circuit), launch, output)
}

/// [`simulate`] on the circuit's network built already (the command line
/// builds it first to read `--launch` and `--output` against its modes).
pub fn simulate_network(
    circuit: &Circuit,
    net: ModeNetwork,
    launch: Option<&[u32]>,
    output: Option<&[u32]>,
) -> Result<Simulation, SimulateError> {
    let launch = launch.map_or_else(|| net.launch_occupation(), <[u32]>::to_vec);
    let logical = if output.is_some() {
        Err("not computed when one output pattern is asked for".to_owned())
    } else {
        logical_result(circuit, &net).map_err(|e| e.to_string())
    };
    let statistics = match output {
        Some(out) => Statistics::Pattern(Outcome {
            occupation: out.to_vec(),
            amplitude: amplitude::amplitude(&net.unitary, &launch, out)?,
        }),
        None => match amplitude::distribution(&net.unitary, &launch) {
            Ok(d) => Statistics::Distribution(d),
            Err(e @ (AmplitudeError::TooManyPatterns { .. } | AmplitudeError::Permanent(_))) => {
                Statistics::OutOfReach(e.to_string())
            }
            Err(e) => return Err(e.into()),
        },
    };
    let (_, passes) = optimise(circuit);
    let warnings = cascade_warnings(circuit, &net, logical.as_ref().ok());
    Ok(Simulation {
        network: net,
        launch,
        logical,
        statistics,
        passes,
        warnings,
        compiled: None,
    })
}

/// The logical bit string of an output pattern: each qubit holds one photon
/// and every herald shows its count; `None` otherwise.
pub fn logical_label(net: &ModeNetwork, occupation: &[u32]) -> Option<String> {
    if net.qubits.is_empty() {
        return None;
    }
    for (m, mode) in net.modes.iter().enumerate() {
        if let Some(h) = mode.herald
            && occupation.get(m) != Some(&h)
        {
            return None;
        }
    }
    net.qubits
        .iter()
        .map(|q| match (occupation[q.rails[0]], occupation[q.rails[1]]) {
            (1, 0) => Some('0'),
            (0, 1) => Some('1'),
            _ => None,
        })
        .collect()
}

/// Reads `--launch a=1,b=0,m0=2`: a qubit takes a logical value (`0`, `1`,
/// `|0>`, `|1>`), any mode of the network (ancillas included) a photon
/// number. Unnamed modes keep the circuit's launch.
pub fn parse_launch(net: &ModeNetwork, text: &str) -> Result<Vec<u32>, String> {
    let mut occ = net.launch_occupation();
    for item in text.split(',').map(str::trim).filter(|s| !s.is_empty()) {
        let Some((name, value)) = item.split_once('=') else {
            return Err(format!(
                "`{item}` is not `name=value`: write `a=1` for a qubit or `m0=2` for a mode's photons"
            ));
        };
        let (name, value) = (name.trim(), value.trim());
        if let Some(q) = net.qubits.iter().find(|q| q.name == name) {
            let bit = match value {
                "0" | "|0>" => 0,
                "1" | "|1>" => 1,
                _ => {
                    return Err(format!(
                        "qubit `{name}` takes 0 or 1 (or |0>, |1>), not `{value}`"
                    ));
                }
            };
            occ[q.rails[0]] = u32::from(bit == 0);
            occ[q.rails[1]] = u32::from(bit == 1);
        } else if let Some(m) = net.modes.iter().position(|m| m.name == name) {
            if net.modes[m].role == ModeRole::Ancilla {
                let whose = match net.modes[m].origin {
                    super::network::ModeOrigin::Declared => "its `ancilla` declaration",
                    super::network::ModeOrigin::Gate { .. } => "the gate scheme that adds it",
                };
                return Err(format!(
                    "`{name}` is an ancilla: its photons are set by {whose}, and the logical map and heralds rely on them"
                ));
            }
            let n: u32 = value.parse().map_err(|_| {
                format!("mode `{name}` takes a photon number (0, 1, 2, ...), not `{value}`")
            })?;
            occ[m] = n;
        } else {
            let mut names: Vec<&str> = net.qubits.iter().map(|q| q.name.as_str()).collect();
            names.extend(net.mode_names());
            let hint = crate::circuit::suggest::nearest(name, names.iter().copied())
                .map(|s| format!("; did you mean `{s}`?"))
                .unwrap_or_default();
            return Err(format!(
                "`{name}` is neither a qubit nor a mode of chip {}{hint} (qubits: {}; modes: {})",
                net.chip,
                join_or_none(net.qubits.iter().map(|q| q.name.as_str())),
                join_or_none(net.mode_names().into_iter()),
            ));
        }
    }
    Ok(occ)
}

fn join_or_none<'a>(names: impl Iterator<Item = &'a str>) -> String {
    let v: Vec<&str> = names.collect();
    if v.is_empty() {
        "none".into()
    } else {
        v.join(" ")
    }
}

/// Reads `--output 1,0,2,...`: one photon number per network mode, in
/// `modes` order.
pub fn parse_output(net: &ModeNetwork, text: &str) -> Result<Vec<u32>, String> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let mut occ = Vec::with_capacity(parts.len());
    for p in &parts {
        occ.push(p.parse::<u32>().map_err(|_| {
            format!("`{p}` is not a photon number; --output takes one count per mode, like 1,0,1,0")
        })?);
    }
    if occ.len() != net.modes.len() {
        return Err(format!(
            "--output lists {} photon number{}, but chip {} has {} modes: {}",
            occ.len(),
            if occ.len() == 1 { "" } else { "s" },
            net.chip,
            net.modes.len(),
            net.mode_names().join(" ")
        ));
    }
    Ok(occ)
}

/// A one-line description of the gate schemes in a network, for reports:
/// "1 post-selected CZ (2 vacuum ancilla modes)".
pub fn scheme_summary(circuit: &Circuit) -> Vec<String> {
    let (mut ps, mut her) = (0usize, 0usize);
    for op in &circuit.ops {
        if let OpKind::Gate { gate, .. } = &op.kind {
            match gate {
                QubitGate::Cz | QubitGate::Cnot => ps += 1,
                QubitGate::CzHeralded | QubitGate::CnotHeralded => her += 1,
                _ => {}
            }
        }
    }
    let mut out = Vec::new();
    if ps > 0 {
        out.push(format!(
            "{ps} post-selected entangling gate{} ({} vacuum ancilla modes)",
            if ps == 1 { "" } else { "s" },
            2 * ps
        ));
    }
    if her > 0 {
        out.push(format!(
            "{her} heralded entangling gate{} ({} ancilla photons)",
            if her == 1 { "" } else { "s" },
            2 * her
        ));
    }
    let declared = circuit
        .modes
        .iter()
        .filter(|m| m.role == ModeRole::Ancilla)
        .count();
    if declared > 0 {
        out.push(format!(
            "{declared} declared ancilla mode{}",
            if declared == 1 { "" } else { "s" }
        ));
    }
    out
}

/// A warning on each post-selected gate that shares a qubit with an earlier
/// one: such gates need not compose (physics.md section 7). With the logical
/// map at hand the warning says whether they do here, comparing the whole
/// network's fidelity and success with (1/9)^k, what k composing gates give.
pub fn cascade_warnings(
    circuit: &Circuit,
    net: &ModeNetwork,
    logical: Option<&LogicalResult>,
) -> Vec<Diagnostic> {
    let mut out = Vec::new();
    let k = net.post_selected.len();
    let verdict = logical.map(|l| {
        let composed = (1.0f64 / 9.0).powi(k as i32);
        let holds = l.fidelity > 1.0 - 1e-9 && (l.scheme_success - composed).abs() < 1e-9 * composed;
        if holds {
            format!(
                "here they do: fidelity {:.6}, success {:.6} = (1/9)^{k}",
                l.fidelity, l.scheme_success
            )
        } else {
            format!(
                "here they do not: fidelity {:.6} and success {:.6}, where {k} composing gates would give 1 and (1/9)^{k} = {:.6}",
                l.fidelity, l.scheme_success, composed
            )
        }
    });
    for (n, &(index, pair)) in net.post_selected.iter().enumerate() {
        let earlier = net.post_selected[..n]
            .iter()
            .find(|(_, prev)| pair.iter().any(|q| prev.contains(q)));
        let Some(&(first, prev)) = earlier else {
            continue;
        };
        let q = pair
            .iter()
            .find(|q| prev.contains(q))
            .copied()
            .unwrap_or(pair[0]);
        let message = format!(
            "this post-selected gate shares qubit `{}` with an earlier one; post-selected gates need not compose{}",
            circuit.qubits[q].name,
            verdict
                .as_ref()
                .map(|v| format!(", and {v}"))
                .unwrap_or_default()
        );
        // Inside definitions, point at the call sites in the chip: the
        // statement in the definition is the same for both gates.
        let at = |op: usize| {
            let o = &circuit.ops[op];
            o.expanded_from.first().copied().unwrap_or(o.span)
        };
        let d = Diagnostic::warning(
            "cascaded-post-selection",
            message,
            at(index),
            "shares a qubit with an earlier post-selected gate",
        )
        .with_label(at(first), "earlier post-selected gate")
        .with_hint(
            "the logical map is computed from the whole network, so the figures are what the chip does; \
             `CZ heralded` (ancilla photons announce success) composes",
        );
        out.push(d);
    }
    out
}
