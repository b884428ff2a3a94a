//! The gate library: standard qubit gates by their trade names and the
//! mode-level elements, with their operand counts and logical matrices.
//!
//! Matrices follow Nielsen & Chuang, Quantum Computation and Quantum
//! Information (2000), section 4.2: RX(t) = exp(-i t X/2) and likewise RY, RZ;
//! P(t) = diag(1, e^{it}); S = P(pi/2), T = P(pi/4). Qubit order in a
//! two-qubit matrix: the first operand is the most significant bit, so CNOT's
//! first operand is the control.

use nalgebra::DMatrix;
use num_complex::Complex64;

/// A standard qubit gate with its evaluated angle (radians).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum QubitGate {
    I,
    X,
    Y,
    Z,
    H,
    S,
    T,
    Sdg,
    Tdg,
    Rx(f64),
    Ry(f64),
    Rz(f64),
    P(f64),
    /// Post-selected CZ (Ralph et al. 2002): succeeds 1 time in 9, seen only
    /// at the qubit outputs.
    Cz,
    /// Heralded CZ (Knill 2002): two ancilla photons and two detectors
    /// announce success, 2 times in 27. Written `CZ heralded`.
    CzHeralded,
    /// CZ between Hadamards on the target; post-selected.
    Cnot,
    /// CNOT with the heralded CZ inside. Written `CNOT heralded`.
    CnotHeralded,
    Swap,
}

/// What the library knows of a gate name before its arguments are seen.
pub struct GateSpec {
    pub name: &'static str,
    pub qubits: usize,
    pub angles: usize,
    pub summary: &'static str,
}

pub const GATES: [GateSpec; 16] = [
    GateSpec {
        name: "I",
        qubits: 1,
        angles: 0,
        summary: "identity",
    },
    GateSpec {
        name: "X",
        qubits: 1,
        angles: 0,
        summary: "Pauli X (bit flip)",
    },
    GateSpec {
        name: "Y",
        qubits: 1,
        angles: 0,
        summary: "Pauli Y",
    },
    GateSpec {
        name: "Z",
        qubits: 1,
        angles: 0,
        summary: "Pauli Z (phase flip)",
    },
    GateSpec {
        name: "H",
        qubits: 1,
        angles: 0,
        summary: "Hadamard",
    },
    GateSpec {
        name: "S",
        qubits: 1,
        angles: 0,
        summary: "phase pi/2",
    },
    GateSpec {
        name: "T",
        qubits: 1,
        angles: 0,
        summary: "phase pi/4",
    },
    GateSpec {
        name: "SDG",
        qubits: 1,
        angles: 0,
        summary: "inverse of S",
    },
    GateSpec {
        name: "TDG",
        qubits: 1,
        angles: 0,
        summary: "inverse of T",
    },
    GateSpec {
        name: "RX",
        qubits: 1,
        angles: 1,
        summary: "rotation about X",
    },
    GateSpec {
        name: "RY",
        qubits: 1,
        angles: 1,
        summary: "rotation about Y",
    },
    GateSpec {
        name: "RZ",
        qubits: 1,
        angles: 1,
        summary: "rotation about Z",
    },
    GateSpec {
        name: "P",
        qubits: 1,
        angles: 1,
        summary: "phase on |1>",
    },
    GateSpec {
        name: "CZ",
        qubits: 2,
        angles: 0,
        summary: "controlled Z (post-selected linear-optical)",
    },
    GateSpec {
        name: "CNOT",
        qubits: 2,
        angles: 0,
        summary: "controlled NOT, control first",
    },
    GateSpec {
        name: "SWAP",
        qubits: 2,
        angles: 0,
        summary: "exchange two qubits",
    },
];

/// A mode-level element: acts on optical modes, not on qubits.
pub struct ElementSpec {
    pub name: &'static str,
    pub modes: Option<usize>,
    pub args: &'static [&'static str],
}

pub const ELEMENTS: [ElementSpec; 4] = [
    ElementSpec {
        name: "rotate",
        modes: Some(2),
        args: &["theta", "phi"],
    },
    ElementSpec {
        name: "split",
        modes: Some(2),
        args: &["c"],
    },
    ElementSpec {
        name: "phase",
        modes: Some(1),
        args: &["x"],
    },
    ElementSpec {
        name: "unitary",
        modes: None,
        args: &[],
    },
];

pub fn gate_spec(name: &str) -> Option<&'static GateSpec> {
    GATES.iter().find(|g| g.name == name)
}

pub fn element_spec(name: &str) -> Option<&'static ElementSpec> {
    ELEMENTS.iter().find(|g| g.name == name)
}

impl QubitGate {
    /// The gate from its name and evaluated angles (already checked for count).
    pub fn from_name(name: &str, angles: &[f64]) -> Option<QubitGate> {
        let a = angles.first().copied().unwrap_or(0.0);
        Some(match name {
            "I" => QubitGate::I,
            "X" => QubitGate::X,
            "Y" => QubitGate::Y,
            "Z" => QubitGate::Z,
            "H" => QubitGate::H,
            "S" => QubitGate::S,
            "T" => QubitGate::T,
            "SDG" => QubitGate::Sdg,
            "TDG" => QubitGate::Tdg,
            "RX" => QubitGate::Rx(a),
            "RY" => QubitGate::Ry(a),
            "RZ" => QubitGate::Rz(a),
            "P" => QubitGate::P(a),
            "CZ" => QubitGate::Cz,
            "CNOT" => QubitGate::Cnot,
            "SWAP" => QubitGate::Swap,
            _ => return None,
        })
    }

    pub fn name(&self) -> &'static str {
        match self {
            QubitGate::I => "I",
            QubitGate::X => "X",
            QubitGate::Y => "Y",
            QubitGate::Z => "Z",
            QubitGate::H => "H",
            QubitGate::S => "S",
            QubitGate::T => "T",
            QubitGate::Sdg => "SDG",
            QubitGate::Tdg => "TDG",
            QubitGate::Rx(_) => "RX",
            QubitGate::Ry(_) => "RY",
            QubitGate::Rz(_) => "RZ",
            QubitGate::P(_) => "P",
            QubitGate::Cz => "CZ",
            QubitGate::CzHeralded => "CZ heralded",
            QubitGate::Cnot => "CNOT",
            QubitGate::CnotHeralded => "CNOT heralded",
            QubitGate::Swap => "SWAP",
        }
    }

    /// The heralded scheme of an entangling gate, if it has one.
    pub fn heralded(self) -> Option<QubitGate> {
        match self {
            QubitGate::Cz => Some(QubitGate::CzHeralded),
            QubitGate::Cnot => Some(QubitGate::CnotHeralded),
            _ => None,
        }
    }

    /// Whether the gate's linear-optical scheme needs post-selection on one
    /// photon per qubit at the end (vacuum ancillas, no herald).
    pub fn is_post_selected(self) -> bool {
        matches!(self, QubitGate::Cz | QubitGate::Cnot)
    }

    pub fn angle(&self) -> Option<f64> {
        match *self {
            QubitGate::Rx(a) | QubitGate::Ry(a) | QubitGate::Rz(a) | QubitGate::P(a) => Some(a),
            _ => None,
        }
    }

    pub fn qubit_count(&self) -> usize {
        match self {
            QubitGate::Cz
            | QubitGate::CzHeralded
            | QubitGate::Cnot
            | QubitGate::CnotHeralded
            | QubitGate::Swap => 2,
            _ => 1,
        }
    }

    /// The logical matrix (2x2 or 4x4).
    pub fn matrix(&self) -> DMatrix<Complex64> {
        let c = |re: f64, im: f64| Complex64::new(re, im);
        let z = c(0.0, 0.0);
        let o = c(1.0, 0.0);
        let m2 = |a, b, cc, d| DMatrix::from_row_slice(2, 2, &[a, b, cc, d]);
        let h = std::f64::consts::FRAC_1_SQRT_2;
        match *self {
            QubitGate::I => m2(o, z, z, o),
            QubitGate::X => m2(z, o, o, z),
            QubitGate::Y => m2(z, c(0.0, -1.0), c(0.0, 1.0), z),
            QubitGate::Z => m2(o, z, z, -o),
            QubitGate::H => m2(c(h, 0.0), c(h, 0.0), c(h, 0.0), c(-h, 0.0)),
            QubitGate::S => m2(o, z, z, c(0.0, 1.0)),
            QubitGate::Sdg => m2(o, z, z, c(0.0, -1.0)),
            QubitGate::T => m2(
                o,
                z,
                z,
                Complex64::from_polar(1.0, std::f64::consts::FRAC_PI_4),
            ),
            QubitGate::Tdg => m2(
                o,
                z,
                z,
                Complex64::from_polar(1.0, -std::f64::consts::FRAC_PI_4),
            ),
            QubitGate::Rx(t) => {
                let (s, co) = (t / 2.0).sin_cos();
                m2(c(co, 0.0), c(0.0, -s), c(0.0, -s), c(co, 0.0))
            }
            QubitGate::Ry(t) => {
                let (s, co) = (t / 2.0).sin_cos();
                m2(c(co, 0.0), c(-s, 0.0), c(s, 0.0), c(co, 0.0))
            }
            QubitGate::Rz(t) => m2(
                Complex64::from_polar(1.0, -t / 2.0),
                z,
                z,
                Complex64::from_polar(1.0, t / 2.0),
            ),
            QubitGate::P(t) => m2(o, z, z, Complex64::from_polar(1.0, t)),
            QubitGate::Cz | QubitGate::CzHeralded => {
                DMatrix::from_diagonal(&nalgebra::DVector::from_vec(vec![o, o, o, -o]))
            }
            QubitGate::Cnot | QubitGate::CnotHeralded => {
                let mut m = DMatrix::from_element(4, 4, z);
                m[(0, 0)] = o;
                m[(1, 1)] = o;
                m[(2, 3)] = o;
                m[(3, 2)] = o;
                m
            }
            QubitGate::Swap => {
                let mut m = DMatrix::from_element(4, 4, z);
                m[(0, 0)] = o;
                m[(1, 2)] = o;
                m[(2, 1)] = o;
                m[(3, 3)] = o;
                m
            }
        }
    }
}

/// Whether a square matrix is the identity up to a global phase, to `tol`
/// (largest entry deviation).
pub fn is_identity_up_to_phase(m: &DMatrix<Complex64>, tol: f64) -> bool {
    if m.nrows() != m.ncols() || m.nrows() == 0 {
        return false;
    }
    let g = m[(0, 0)];
    if (g.norm() - 1.0).abs() > tol {
        return false;
    }
    m.iter().enumerate().all(|(k, v)| {
        let (i, j) = (k % m.nrows(), k / m.nrows());
        let want = if i == j { g } else { Complex64::new(0.0, 0.0) };
        (v - want).norm() <= tol
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn named_gates_are_unitary_and_match_textbook_relations() {
        for spec in GATES.iter() {
            let g = QubitGate::from_name(spec.name, &[0.7]).unwrap();
            let m = g.matrix();
            let d = &m.adjoint() * &m - DMatrix::identity(m.nrows(), m.ncols());
            assert!(d.norm() < 1e-14, "{} is not unitary", spec.name);
            assert_eq!(m.nrows(), 1 << spec.qubits);
        }
        // Nielsen & Chuang (2000) eq. 4.4-4.6 and exercise 4.2: HXH = Z, S^2 = Z, T^2 = S.
        let h = QubitGate::H.matrix();
        assert!((&h * QubitGate::X.matrix() * &h - QubitGate::Z.matrix()).norm() < 1e-15);
        assert!((QubitGate::S.matrix().pow(2) - QubitGate::Z.matrix()).norm() < 1e-15);
        assert!((QubitGate::T.matrix().pow(2) - QubitGate::S.matrix()).norm() < 1e-15);
        // RZ(t) equals P(t) up to the global phase e^{-it/2}.
        let rz = QubitGate::Rz(0.3).matrix() * Complex64::from_polar(1.0, 0.15);
        assert!((rz - QubitGate::P(0.3).matrix()).norm() < 1e-15);
    }

    #[test]
    fn identity_detection_ignores_global_phase() {
        assert!(is_identity_up_to_phase(&QubitGate::Rz(0.0).matrix(), 1e-12));
        assert!(is_identity_up_to_phase(
            &QubitGate::Rx(2.0 * std::f64::consts::PI).matrix(),
            1e-12
        ));
        assert!(!is_identity_up_to_phase(
            &QubitGate::Rz(0.1).matrix(),
            1e-12
        ));
    }
}
