//! The validation pass right after elaboration: the invariants of the IR
//! that later stages assume (see the module doc of `circuit`). Elaboration
//! already reports user errors where they are written; this pass re-checks
//! the finished circuit as a whole, so a circuit built through the API (not
//! from text) is held to the same rules.

use super::*;
use crate::diagnostic::{Diagnostic, Diagnostics};

pub fn validate(c: &Circuit) -> Diagnostics {
    let mut d = Diagnostics::new();
    let n = c.modes.len();
    let bad = |d: &mut Diagnostics, span: Span, msg: String| {
        d.push(Diagnostic::error("invalid-ir", msg, span, "here"))
    };
    for (qi, q) in c.qubits.iter().enumerate() {
        let ok = q.rails.iter().enumerate().all(|(k, &r)| {
            r < n
                && c.modes[r].role
                    == ModeRole::Rail {
                        qubit: qi,
                        index: k as u8,
                    }
        });
        if !ok || q.rails[1] != q.rails[0] + 1 {
            bad(
                &mut d,
                q.span,
                format!("qubit `{}` does not own two adjacent rails", q.name),
            );
        }
        if q.launch > 1 {
            bad(
                &mut d,
                q.span,
                format!("qubit `{}` is launched in |{}>", q.name, q.launch),
            );
        }
    }
    for op in &c.ops {
        let modes = op.kind.modes(&c.qubits);
        if modes.iter().any(|&m| m >= n) {
            bad(
                &mut d,
                op.span,
                "an operation names a mode that does not exist".into(),
            );
            continue;
        }
        let mut sorted = modes.clone();
        sorted.sort_unstable();
        sorted.dedup();
        if sorted.len() != modes.len() {
            bad(
                &mut d,
                op.span,
                "an operation acts twice on one mode".into(),
            );
        }
        match &op.kind {
            OpKind::Gate { gate, qubits } => {
                if qubits.len() != gate.qubit_count() || qubits.iter().any(|&q| q >= c.qubits.len())
                {
                    bad(
                        &mut d,
                        op.span,
                        format!("{} has the wrong qubits", gate.name()),
                    );
                }
                if gate.angle().is_some_and(|a| !a.is_finite()) {
                    bad(
                        &mut d,
                        op.span,
                        format!("{} has an angle that is not finite", gate.name()),
                    );
                }
            }
            OpKind::Rotate {
                theta_rad, phi_rad, ..
            } => {
                if !theta_rad.is_finite() || !phi_rad.is_finite() {
                    bad(
                        &mut d,
                        op.span,
                        "rotate has an angle that is not finite".into(),
                    );
                }
            }
            OpKind::Split { cross_fraction, .. } => {
                if !(0.0..=1.0).contains(cross_fraction) {
                    bad(
                        &mut d,
                        op.span,
                        format!("split fraction {cross_fraction} is outside [0, 1]"),
                    );
                }
            }
            OpKind::Phase { phase_rad, .. } => {
                if !phase_rad.is_finite() {
                    bad(&mut d, op.span, "phase is not finite".into());
                }
            }
            OpKind::Unitary { modes, matrix } => {
                if matrix.nrows() != modes.len() || matrix.ncols() != modes.len() {
                    bad(
                        &mut d,
                        op.span,
                        "the unitary's size does not match its modes".into(),
                    );
                } else if let Some(e) = elaborate::unitarity_error(matrix, op.span) {
                    d.push(e);
                }
            }
        }
    }
    for h in &c.heralds {
        if h.mode >= n || c.modes[h.mode].role != ModeRole::Ancilla {
            bad(
                &mut d,
                h.span,
                "a herald names a mode that is not an ancilla".into(),
            );
        }
    }
    if let Some(det) = &c.detect {
        if c.ops.iter().any(|op| {
            op.span.start > det.span.start
                && op
                    .expanded_from
                    .first()
                    .is_none_or(|s| s.start > det.span.start)
        }) {
            bad(&mut d, det.span, "an operation follows detection".into());
        }
        if det.qubits.iter().any(|&q| q >= c.qubits.len()) || det.modes.iter().any(|&m| m >= n) {
            bad(
                &mut d,
                det.span,
                "detection names a qubit or mode that does not exist".into(),
            );
        }
    }
    for r in &c.requirements {
        if !r.limit.is_finite() || r.yield_level.is_some_and(|y| !(y > 0.0 && y <= 1.0)) {
            bad(
                &mut d,
                r.span,
                format!("requirement on {} is out of range", r.metric.name()),
            );
        }
    }
    if let Some(b) = &c.band
        && !(b.start_um > 0.0 && b.stop_um >= b.start_um && b.steps >= 1)
    {
        bad(
            &mut d,
            b.span,
            "the band is not an increasing wavelength grid".into(),
        );
    }
    d
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::Source;

    fn circuit(text: &str) -> Circuit {
        let ast = crate::syntax::parse(&Source::new("t", text)).unwrap();
        elaborate(&ast, &NoFiles).unwrap().circuits.remove(0)
    }

    #[test]
    fn a_circuit_built_by_hand_is_checked_too() {
        let mut c = circuit("chip t { dualrail a, b  CZ on a, b }");
        assert!(validate(&c).is_empty());
        c.ops[0].kind = OpKind::Gate {
            gate: QubitGate::Cz,
            qubits: vec![0, 0],
        };
        assert!(validate(&c).has_errors());
        let mut c2 = circuit("chip t { mode m0, m1  split(0.5) on m0, m1 }");
        c2.ops[0].kind = OpKind::Split {
            cross_fraction: 1.5,
            modes: [0, 1],
        };
        assert!(validate(&c2).has_errors());
    }
}
