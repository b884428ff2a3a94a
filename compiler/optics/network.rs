//! Lowering a circuit to its linear-optical network: every operation becomes
//! a transfer matrix on the optical modes it touches, and the whole chip one
//! N x N matrix, N counting the ancilla modes the gate schemes need.
//!
//! Convention (docs/physics.md, section 1): `a_out = U a_in`, column j of U
//! is what mode j's input becomes; elements are met in the order of the
//! circuit's operations, so `U = E_K ... E_2 E_1`.
//!
//! Gate schemes on dual-rail qubits (rails `q.0` = |0>, `q.1` = |1>):
//! - single-qubit gates are their own 2 x 2 matrix on `(q.0, q.1)`: a single
//!   photon's amplitudes over the two rails transform as the logical state;
//! - `CZ`: the post-selected network of Ralph, Langford, Bell & White,
//!   Phys. Rev. A 65, 062324 (2002), with two vacuum ancilla modes;
//! - `CZ heralded`: the network of Knill, Phys. Rev. A 66, 052306 (2002), on
//!   the two |1> rails and two ancilla modes with one photon each, heralded
//!   on one photon in each;
//! - `CNOT` (and `CNOT heralded`): the CZ scheme between Hadamards on the
//!   target rails;
//! - `SWAP`: the two qubits' rails exchanged (a waveguide crossing).
//!
//! The mode elements are `rotate` = T(theta, phi) of Clements et al. (2016),
//! `split(c)` = the real block T(asin sqrt(c), 0), `phase(x)` = e^{ix} and the
//! `unitary` literals as written (row i = output mode i).

use crate::circuit::{Circuit, ModeId, ModeRole, OpKind, QubitGate};
use nalgebra::DMatrix;
use num_complex::Complex64;

/// Where a mode of the network comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ModeOrigin {
    /// Declared in the circuit (a rail, a free mode or an ancilla).
    Declared,
    /// Allocated for the gate scheme of operation `op` (index in
    /// `Circuit::ops`).
    Gate { op: usize },
}

#[derive(Clone, Debug, PartialEq)]
pub struct NetworkMode {
    /// `a.0`, `m0`, `h0`, or for allocated ancillas `cz1.v0` (vacuum mode 0
    /// of the first post-selected CZ) and `czh1.h0` (ancilla photon mode 0 of
    /// the first heralded CZ); a dot never appears in a declared name other
    /// than a rail's, and rail indices are digits, so these cannot clash.
    pub name: String,
    pub role: ModeRole,
    pub origin: ModeOrigin,
    /// Photons launched into this mode.
    pub photons_in: u32,
    /// Photons this mode must show at the output for the run to count.
    pub herald: Option<u32>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct NetworkQubit {
    pub name: String,
    /// `[q.0, q.1]`, indices into [`ModeNetwork::modes`].
    pub rails: [ModeId; 2],
}

/// One operation's transfer matrix on the modes it touches.
#[derive(Clone, Debug, PartialEq)]
pub struct Element {
    /// Index of the operation in `Circuit::ops`.
    pub op: usize,
    /// The modes, in the order of the matrix's rows and columns.
    pub modes: Vec<ModeId>,
    pub matrix: DMatrix<Complex64>,
}

/// The whole chip as a linear-optical network.
#[derive(Clone, Debug, PartialEq)]
pub struct ModeNetwork {
    pub chip: String,
    /// Every mode in physical order: the declared modes from the top of the
    /// chip, then the ancillas allocated by gate schemes, in the order their
    /// gates are met.
    pub modes: Vec<NetworkMode>,
    pub qubits: Vec<NetworkQubit>,
    pub elements: Vec<Element>,
    /// The N x N transfer matrix, N = `modes.len()`.
    pub unitary: DMatrix<Complex64>,
    /// Whether the chip ends in photon counting.
    pub detect: bool,
    /// Per qubit: counted at the end (`detect` names it), so phases on its
    /// outputs are unobservable.
    pub detected_qubits: Vec<bool>,
    /// Per mode: its output is counted, by `detect` (a detected qubit's
    /// rails, a detected mode) or by a herald, so a phase there is unseen.
    pub detected_modes: Vec<bool>,
    /// The scheme of each post-selected gate: op index and its qubits.
    pub post_selected: Vec<(usize, [usize; 2])>,
}

impl ModeNetwork {
    /// Photon number launched into every mode, in `modes` order.
    pub fn launch_occupation(&self) -> Vec<u32> {
        self.modes.iter().map(|m| m.photons_in).collect()
    }

    pub fn mode_names(&self) -> Vec<&str> {
        self.modes.iter().map(|m| m.name.as_str()).collect()
    }
}

fn c(re: f64) -> Complex64 {
    Complex64::new(re, 0.0)
}

/// The post-selected CZ on modes (c0, c1, t0, t1, v0, v1): Ralph et al.
/// (2002), the matrix of docs/physics.md with a = 1/sqrt(3), b = sqrt(2/3).
/// As printed it gives the logical map (1/3) diag(1, 1, -1, 1), a CZ after a
/// Z on the control; a phase of pi on the output of c1 (its row) fixes the
/// sign, so the map is (1/3) CZ exactly.
pub fn ralph_cz() -> DMatrix<Complex64> {
    let a = (1.0f64 / 3.0).sqrt();
    let b = (2.0f64 / 3.0).sqrt();
    #[rustfmt::skip]
    let rows = [
        [a, 0.0, 0.0, 0.0, b, 0.0],
        [0.0, -a, 0.0, b, 0.0, 0.0],
        [0.0, 0.0, a, 0.0, 0.0, b],
        [0.0, b, 0.0, a, 0.0, 0.0],
        [b, 0.0, 0.0, 0.0, -a, 0.0],
        [0.0, 0.0, b, 0.0, 0.0, -a],
    ];
    let mut m = DMatrix::from_fn(6, 6, |i, j| c(rows[i][j]));
    for j in 0..6 {
        m[(1, j)] = -m[(1, j)];
    }
    m
}

/// The heralded CZ on modes (c1, t1, h0, h1) with one photon in each of h0,
/// h1 in and out: Knill (2002), the matrix of docs/physics.md. Success 2/27,
/// logical map sqrt(2/27) CZ.
pub fn knill_cz() -> DMatrix<Complex64> {
    let s2 = 2.0f64.sqrt();
    let s6 = 6.0f64.sqrt();
    let p = (3.0 + s6).sqrt() / 3.0;
    let q = (3.0 - s6).sqrt() / 3.0;
    let r = ((3.0 + s6) / 2.0).sqrt() / 3.0;
    let t = (1.0 / 6.0 - 1.0 / (3.0 * s6)).sqrt();
    #[rustfmt::skip]
    let rows = [
        [-1.0 / 3.0, -s2 / 3.0, s2 / 3.0, 2.0 / 3.0],
        [s2 / 3.0, -1.0 / 3.0, -2.0 / 3.0, s2 / 3.0],
        [-p, q, -r, t],
        [-q, -p, -t, -r],
    ];
    DMatrix::from_fn(4, 4, |i, j| c(rows[i][j]))
}

/// The block T(theta, phi) of Clements et al., Optica 3, 1460 (2016).
pub fn rotation(theta: f64, phi: f64) -> DMatrix<Complex64> {
    let (s, co) = theta.sin_cos();
    let e = Complex64::from_polar(1.0, phi);
    DMatrix::from_row_slice(2, 2, &[e * co, c(-s), e * s, c(co)])
}

/// `split(c)`: the real block T(asin sqrt(c), 0), cross power c.
pub fn splitter(cross_fraction: f64) -> DMatrix<Complex64> {
    rotation(cross_fraction.clamp(0.0, 1.0).sqrt().asin(), 0.0)
}

/// Embeds `m` (on local modes `at`) into a `n x n` identity.
fn embed(n: usize, at: &[usize], m: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    let mut e = DMatrix::identity(n, n);
    for (i, &r) in at.iter().enumerate() {
        for (j, &col) in at.iter().enumerate() {
            e[(r, col)] = m[(i, j)];
        }
    }
    e
}

/// Lowers a validated circuit to its network.
pub fn network(circuit: &Circuit) -> ModeNetwork {
    let mut modes: Vec<NetworkMode> = circuit
        .modes
        .iter()
        .enumerate()
        .map(|(id, m)| NetworkMode {
            name: m.name.clone(),
            role: m.role,
            origin: ModeOrigin::Declared,
            photons_in: m.photons,
            herald: circuit
                .heralds
                .iter()
                .find(|h| h.mode == id)
                .map(|h| h.photons),
        })
        .collect();
    let qubits: Vec<NetworkQubit> = circuit
        .qubits
        .iter()
        .map(|q| NetworkQubit {
            name: q.name.clone(),
            rails: q.rails,
        })
        .collect();
    let mut elements = Vec::with_capacity(circuit.ops.len());
    let mut post_selected: Vec<(usize, [usize; 2])> = Vec::new();
    let (mut n_cz, mut n_czh) = (0usize, 0usize);
    let allocate = |modes: &mut Vec<NetworkMode>, name: String, op: usize, photons: u32| {
        modes.push(NetworkMode {
            name,
            role: ModeRole::Ancilla,
            origin: ModeOrigin::Gate { op },
            photons_in: photons,
            herald: (photons > 0).then_some(photons),
        });
        modes.len() - 1
    };
    for (index, op) in circuit.ops.iter().enumerate() {
        let (at, matrix) = match &op.kind {
            OpKind::Gate { gate, qubits: qs } => {
                let rails: Vec<[ModeId; 2]> = qs.iter().map(|&q| circuit.qubits[q].rails).collect();
                match gate {
                    QubitGate::Cz | QubitGate::Cnot => {
                        n_cz += 1;
                        let v0 = allocate(&mut modes, format!("cz{n_cz}.v0"), index, 0);
                        let v1 = allocate(&mut modes, format!("cz{n_cz}.v1"), index, 0);
                        let [c0, c1] = rails[0];
                        let [t0, t1] = rails[1];
                        let mut m = ralph_cz();
                        if *gate == QubitGate::Cnot {
                            m = hadamard_on(6, [2, 3], &m);
                        }
                        let pair = [qs[0], qs[1]];
                        post_selected.push((index, pair));
                        (vec![c0, c1, t0, t1, v0, v1], m)
                    }
                    QubitGate::CzHeralded | QubitGate::CnotHeralded => {
                        n_czh += 1;
                        let h0 = allocate(&mut modes, format!("czh{n_czh}.h0"), index, 1);
                        let h1 = allocate(&mut modes, format!("czh{n_czh}.h1"), index, 1);
                        let [c0, c1] = rails[0];
                        let [t0, t1] = rails[1];
                        // Knill's network on (c1, t1, h0, h1), identity on c0, t0.
                        let m = embed(6, &[1, 3, 4, 5], &knill_cz());
                        let m = if *gate == QubitGate::CnotHeralded {
                            hadamard_on(6, [2, 3], &m)
                        } else {
                            m
                        };
                        (vec![c0, c1, t0, t1, h0, h1], m)
                    }
                    QubitGate::Swap => {
                        let [a0, a1] = rails[0];
                        let [b0, b1] = rails[1];
                        let mut m = DMatrix::zeros(4, 4);
                        m[(0, 2)] = c(1.0);
                        m[(1, 3)] = c(1.0);
                        m[(2, 0)] = c(1.0);
                        m[(3, 1)] = c(1.0);
                        (vec![a0, a1, b0, b1], m)
                    }
                    single => (rails[0].to_vec(), single.matrix()),
                }
            }
            OpKind::Rotate {
                theta_rad,
                phi_rad,
                modes: m,
            } => (m.to_vec(), rotation(*theta_rad, *phi_rad)),
            OpKind::Split {
                cross_fraction,
                modes: m,
            } => (m.to_vec(), splitter(*cross_fraction)),
            OpKind::Phase { phase_rad, mode } => (
                vec![*mode],
                DMatrix::from_element(1, 1, Complex64::from_polar(1.0, *phase_rad)),
            ),
            OpKind::Unitary { modes: m, matrix } => (m.clone(), matrix.clone()),
        };
        elements.push(Element {
            op: index,
            modes: at,
            matrix,
        });
    }
    let n = modes.len();
    let (detected_qubits, detected_modes) = detected(circuit, &modes);
    let mut unitary = DMatrix::identity(n, n);
    for e in &elements {
        apply_rows(&mut unitary, e);
    }
    ModeNetwork {
        chip: circuit.name.clone(),
        modes,
        qubits,
        elements,
        unitary,
        detect: circuit.detect.is_some(),
        detected_qubits,
        detected_modes,
        post_selected,
    }
}

/// Which qubits and which of `modes` are counted at the outputs.
pub fn detected(circuit: &Circuit, modes: &[NetworkMode]) -> (Vec<bool>, Vec<bool>) {
    let mut qubits = vec![false; circuit.qubits.len()];
    let mut counted: Vec<bool> = modes.iter().map(|m| m.herald.is_some()).collect();
    if let Some(d) = &circuit.detect {
        for &q in &d.qubits {
            qubits[q] = true;
            for r in circuit.qubits[q].rails {
                counted[r] = true;
            }
        }
        for &m in &d.modes {
            counted[m] = true;
        }
    }
    (qubits, counted)
}

/// `u <- E u` for an element acting on a few rows: O(k N) per element.
pub fn apply_rows(u: &mut DMatrix<Complex64>, e: &Element) {
    let k = e.modes.len();
    let cols = u.ncols();
    let mut old = vec![Complex64::new(0.0, 0.0); k];
    for col in 0..cols {
        for (i, &r) in e.modes.iter().enumerate() {
            old[i] = u[(r, col)];
        }
        for (i, &r) in e.modes.iter().enumerate() {
            let mut acc = Complex64::new(0.0, 0.0);
            for (j, o) in old.iter().enumerate() {
                acc += e.matrix[(i, j)] * o;
            }
            u[(r, col)] = acc;
        }
    }
}

/// `(H on local modes at) * m * (H on at)`: a CZ scheme turned into a CNOT
/// by Hadamards on the target's rails before and after.
fn hadamard_on(n: usize, at: [usize; 2], m: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    let h = embed(n, &at, &QubitGate::H.matrix());
    &h * m * &h
}

#[cfg(test)]
mod tests {
    use super::*;

    fn unitarity(m: &DMatrix<Complex64>) -> f64 {
        (m.adjoint() * m - DMatrix::identity(m.nrows(), m.ncols())).norm()
    }

    #[test]
    fn scheme_matrices_are_unitary() {
        // checks.md: both scheme matrices are unitary (verified independently).
        assert!(unitarity(&ralph_cz()) < 1e-15);
        assert!(unitarity(&knill_cz()) < 1e-14);
        assert!(unitarity(&rotation(0.3, 1.1)) < 1e-15);
        assert!(unitarity(&splitter(2.0 / 3.0)) < 1e-15);
    }

    #[test]
    fn split_moves_the_stated_power_across() {
        let s = splitter(2.0 / 3.0);
        assert!((s[(1, 0)].norm_sqr() - 2.0 / 3.0).abs() < 1e-15);
        assert!((s[(0, 0)].norm_sqr() - 1.0 / 3.0).abs() < 1e-15);
    }
}
