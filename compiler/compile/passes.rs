//! Circuit passes that shorten a chip without changing what it does:
//!
//! 1. **merge**: consecutive single-qubit gates on one qubit (no other
//!    operation on its rails in between) become one 2 x 2 element on its
//!    rails, the product of the gates;
//! 2. **identities**: operations whose mode matrix is the identity (to
//!    1e-12 in every entry) go. Only the exact mode-level identity counts: a
//!    gate that is the identity up to a global phase, such as `RZ(2 pi)` =
//!    -I, still puts a phase on every photon in its rails, and in a scheme
//!    with post-selection those rails can hold zero or two photons, so the
//!    phase is not global there;
//! 3. **output phases**, only when the chip ends in `detect`: diagonal
//!    operations (phases, `Z`, `S`, `T`, `RZ`, `P`, diagonal `unitary`) with
//!    no later operation on any of their modes, all of whose modes are
//!    counted (rails of detected qubits, detected modes, heralded ancillas).
//!    Photon counting multiplies each detection pattern's amplitude by a
//!    phase and so cannot see them (docs/physics.md section 4).
//!
//! Every pass reports what it changed, with the source spans.

use crate::circuit::{Circuit, ModeRole, Op, OpKind, QubitGate};
use crate::optics::network;
use crate::source::Span;
use nalgebra::DMatrix;
use num_complex::Complex64;

/// Entries within this of the identity count as the identity.
pub const IDENTITY_TOL: f64 = 1e-12;

/// What one pass did to one operation (or group).
#[derive(Clone, Debug, PartialEq)]
pub struct Change {
    pub what: String,
    /// The statements involved, in source order.
    pub spans: Vec<Span>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct PassResult {
    /// `merge`, `identities`, `output-phases`.
    pub pass: &'static str,
    pub changes: Vec<Change>,
    /// Operations before and after the pass.
    pub ops_before: usize,
    pub ops_after: usize,
}

#[derive(Clone, Debug, PartialEq, Default)]
pub struct PassReport {
    pub passes: Vec<PassResult>,
}

/// Runs the three passes in order.
pub fn optimise(circuit: &Circuit) -> (Circuit, PassReport) {
    let mut c = circuit.clone();
    let mut report = PassReport::default();
    for (pass, run) in [
        ("merge", merge as fn(&Circuit, &mut Vec<Change>) -> Vec<Op>),
        ("identities", drop_identities),
        ("output-phases", drop_output_phases),
    ] {
        let before = c.ops.len();
        let mut changes = Vec::new();
        c.ops = run(&c, &mut changes);
        report.passes.push(PassResult {
            pass,
            changes,
            ops_before: before,
            ops_after: c.ops.len(),
        });
    }
    (c, report)
}

/// A short text for an operation: `H on a`, `phase(0.5) on m1`.
pub fn describe(c: &Circuit, op: &Op) -> String {
    let q = |i: usize| c.qubits[i].name.as_str();
    let m = |i: usize| c.modes[i].name.as_str();
    let n = crate::circuit::snapshot_num;
    match &op.kind {
        OpKind::Gate { gate, qubits } => {
            let args = gate
                .angle()
                .map(|a| format!("({})", n(a)))
                .unwrap_or_default();
            let names: Vec<&str> = qubits.iter().map(|&i| q(i)).collect();
            let (head, tail) = match gate.name().split_once(' ') {
                Some((h, t)) => (h, format!(" {t}")),
                None => (gate.name(), String::new()),
            };
            format!("{head}{args}{tail} on {}", names.join(", "))
        }
        OpKind::Rotate {
            theta_rad,
            phi_rad,
            modes,
        } => format!(
            "rotate({}, {}) on {}, {}",
            n(*theta_rad),
            n(*phi_rad),
            m(modes[0]),
            m(modes[1])
        ),
        OpKind::Split {
            cross_fraction,
            modes,
        } => format!(
            "split({}) on {}, {}",
            n(*cross_fraction),
            m(modes[0]),
            m(modes[1])
        ),
        OpKind::Phase { phase_rad, mode } => format!("phase({}) on {}", n(*phase_rad), m(*mode)),
        OpKind::Unitary { modes, .. } => {
            let names: Vec<&str> = modes.iter().map(|&i| m(i)).collect();
            format!("unitary on {}", names.join(", "))
        }
    }
}

/// The mode-level matrix of an op that acts on declared modes only (every op
/// but the two-qubit entangling schemes, which need ancillas), with its modes.
fn local_matrix(c: &Circuit, op: &Op) -> Option<(Vec<usize>, DMatrix<Complex64>)> {
    Some(match &op.kind {
        OpKind::Gate { gate, qubits } => {
            if gate.qubit_count() != 1 {
                return None;
            }
            (c.qubits[qubits[0]].rails.to_vec(), gate.matrix())
        }
        OpKind::Rotate {
            theta_rad,
            phi_rad,
            modes,
        } => (modes.to_vec(), network::rotation(*theta_rad, *phi_rad)),
        OpKind::Split {
            cross_fraction,
            modes,
        } => (modes.to_vec(), network::splitter(*cross_fraction)),
        OpKind::Phase { phase_rad, mode } => (
            vec![*mode],
            DMatrix::from_element(1, 1, Complex64::from_polar(1.0, *phase_rad)),
        ),
        OpKind::Unitary { modes, matrix } => (modes.clone(), matrix.clone()),
    })
}

/// The qubit of a single-qubit gate, or of a 2 x 2 unitary written on the
/// two rails of one qubit in rail order (what `merge` produces).
fn single_qubit(c: &Circuit, op: &Op) -> Option<usize> {
    match &op.kind {
        OpKind::Gate { gate, qubits } if gate.qubit_count() == 1 => Some(qubits[0]),
        OpKind::Unitary { modes, .. } if modes.len() == 2 => match c.modes[modes[0]].role {
            ModeRole::Rail { qubit, index: 0 } if c.qubits[qubit].rails[1] == modes[1] => {
                Some(qubit)
            }
            _ => None,
        },
        _ => None,
    }
}

fn merge(c: &Circuit, changes: &mut Vec<Change>) -> Vec<Op> {
    let mut out: Vec<Op> = Vec::with_capacity(c.ops.len());
    // Index in `out` of the last op on each mode, and the source ops merged
    // into each output op.
    let mut last_on_mode: Vec<Option<usize>> = vec![None; c.modes.len()];
    let mut merged_from: Vec<Vec<Span>> = Vec::new();
    let mut merged_what: Vec<Vec<usize>> = Vec::new();
    for (k, op) in c.ops.iter().enumerate() {
        let modes = op.kind.modes(&c.qubits);
        if let OpKind::Gate { gate, qubits } = &op.kind
            && gate.qubit_count() == 1
        {
            let q = qubits[0];
            let [r0, r1] = c.qubits[q].rails;
            if let (Some(i), Some(j)) = (last_on_mode[r0], last_on_mode[r1])
                && i == j
                && single_qubit(c, &out[i]) == Some(q)
            {
                let prev = local_matrix(c, &out[i])
                    .expect("single-qubit ops have one")
                    .1;
                let product = gate.matrix() * prev;
                out[i].kind = OpKind::Unitary {
                    modes: vec![r0, r1],
                    matrix: product,
                };
                merged_from[i].push(op.span);
                merged_what[i].push(k);
                continue;
            }
        }
        let at = out.len();
        for m in modes {
            last_on_mode[m] = Some(at);
        }
        merged_what.push(vec![k]);
        merged_from.push(vec![op.span]);
        out.push(op.clone());
    }
    for (i, spans) in merged_from.into_iter().enumerate() {
        if spans.len() > 1 {
            let q = single_qubit(c, &out[i]).expect("merged ops are single-qubit");
            changes.push(Change {
                what: format!(
                    "merged {} gates on {} into one: {}",
                    spans.len(),
                    c.qubits[q].name,
                    merged_what[i]
                        .iter()
                        .map(|&k| describe(c, &c.ops[k]))
                        .collect::<Vec<_>>()
                        .join("; ")
                ),
                spans,
            });
        }
    }
    out
}

fn is_identity(m: &DMatrix<Complex64>) -> bool {
    m.iter().enumerate().all(|(k, v)| {
        let (i, j) = (k % m.nrows(), k / m.nrows());
        let want = if i == j { 1.0 } else { 0.0 };
        (v - Complex64::new(want, 0.0)).norm() <= IDENTITY_TOL
    })
}

fn is_diagonal(m: &DMatrix<Complex64>) -> bool {
    m.iter().enumerate().all(|(k, v)| {
        let (i, j) = (k % m.nrows(), k / m.nrows());
        i == j || v.norm() <= IDENTITY_TOL
    })
}

fn drop_identities(c: &Circuit, changes: &mut Vec<Change>) -> Vec<Op> {
    c.ops
        .iter()
        .filter(|op| {
            let identity = local_matrix(c, op).is_some_and(|(_, m)| is_identity(&m))
                && !matches!(
                    op.kind,
                    OpKind::Gate {
                        gate: QubitGate::Swap,
                        ..
                    }
                );
            if identity {
                changes.push(Change {
                    what: format!("dropped {}: the identity", describe(c, op)),
                    spans: vec![op.span],
                });
            }
            !identity
        })
        .cloned()
        .collect()
}

fn drop_output_phases(c: &Circuit, changes: &mut Vec<Change>) -> Vec<Op> {
    if c.detect.is_none() {
        return c.ops.clone();
    }
    // Only outputs that are counted hide their phases: a qubit that `detect`
    // does not name leaves the chip coherent, phases and all.
    let herald_modes: Vec<usize> = c.heralds.iter().map(|h| h.mode).collect();
    let counted = |m: usize| -> bool {
        let d = c.detect.as_ref().expect("checked above");
        herald_modes.contains(&m)
            || d.modes.contains(&m)
            || matches!(c.modes[m].role, ModeRole::Rail { qubit, .. } if d.qubits.contains(&qubit))
    };
    let mut touched_later = vec![false; c.modes.len()];
    let mut keep = vec![true; c.ops.len()];
    for (k, op) in c.ops.iter().enumerate().rev() {
        let modes = op.kind.modes(&c.qubits);
        let diagonal = local_matrix(c, op).is_some_and(|(_, m)| is_diagonal(&m));
        if diagonal && modes.iter().all(|&m| !touched_later[m] && counted(m)) {
            keep[k] = false;
        } else {
            for m in modes {
                touched_later[m] = true;
            }
        }
    }
    let mut dropped: Vec<&Op> = Vec::new();
    let out = c
        .ops
        .iter()
        .zip(&keep)
        .filter_map(|(op, &k)| {
            if !k {
                dropped.push(op);
            }
            k.then(|| op.clone())
        })
        .collect();
    for op in dropped {
        changes.push(Change {
            what: format!(
                "dropped {}: an output phase, which photon counting cannot see",
                describe(c, op)
            ),
            spans: vec![op.span],
        });
    }
    out
}
