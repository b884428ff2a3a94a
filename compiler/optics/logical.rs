//! The logical map of a whole network and the fidelities of docs/physics.md
//! section 7.
//!
//! The logical map `V` (2^n x 2^n, unnormalised) has the entries
//! `V[y, x] = <y, heralds | U | x, ancillas>`: the amplitude that logical
//! input x (one photon per qubit, in the rail of its bit, with every ancilla
//! photon launched) leaves as logical output y with every herald showing its
//! count and every other mode empty. Post-selection on one photon per qubit
//! and heralding are both this one conditioning. It is computed by permanents
//! from the network's N x N matrix, never by composing per-gate maps, so
//! schemes that do not compose show what they really do.
//!
//! Bit order: the first qubit is the most significant bit; basis label "01"
//! is the first qubit in |0> and the second in |1> (Nielsen & Chuang 2000).
//!
//! Fidelities (physics.md section 7):
//! `F_pro = |Tr(V_t^dag V)|^2 / (d Tr(V^dag V))`, success `Tr(V^dag V) / d`,
//! and, when the chip ends in photon counting,
//! `F_detect = (sum_y |sum_x conj(V_t[y, x]) V[y, x]|)^2 / (d Tr(V^dag V))`,
//! the process fidelity maximised over diagonal output phases. The average
//! gate fidelity is `(d F_pro + 1) / (d + 1)` (Nielsen, Phys. Lett. A 303,
//! 249, 2002). Mode fidelity `F_U = |Tr(U_t^dag U)|^2 / (N Tr(U^dag U))`.

use super::amplitude::{AmplitudeError, permanent_of};
use super::network::ModeNetwork;
use super::permanent::{self, PermanentError};
#[cfg(test)]
use crate::circuit::QubitGate;
use crate::circuit::{Circuit, ModeRole, OpKind};
use nalgebra::DMatrix;
use num_complex::Complex64;
use rayon::prelude::*;

/// Largest register a logical map is computed for (d = 1024).
pub const MAX_LOGICAL_QUBITS: usize = 10;

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LogicalError {
    #[error("the chip has no qubits, so it has no logical map")]
    NoQubits,
    #[error(
        "the logical map of {qubits} qubits has {d} x {d} entries; it is computed up to {MAX_LOGICAL_QUBITS} qubits",
        d = 1u64 << .qubits.min(&63)
    )]
    TooManyQubits { qubits: usize },
    #[error(
        "the chip launches {launched} photons, but the qubits and heralds account for {accounted}: \
         the others would leave in modes nobody watches, so the logical map is not a pure map"
    )]
    UnaccountedPhotons { launched: u32, accounted: u32 },
    #[error(
        "the logical map needs {} permanents of {photons} x {photons}, about {} steps, beyond the limit of {}",
        super::amplitude::count_text(*entries),
        super::amplitude::count_text(*steps),
        super::amplitude::count_text(super::amplitude::MAX_WORK_STEPS)
    )]
    TooMuchWork {
        entries: f64,
        photons: usize,
        steps: f64,
    },
    #[error(transparent)]
    Amplitude(#[from] AmplitudeError),
}

impl From<PermanentError> for LogicalError {
    fn from(e: PermanentError) -> Self {
        LogicalError::Amplitude(e.into())
    }
}

/// The conditioned logical map of a network.
#[derive(Clone, Debug, PartialEq)]
pub struct LogicalMap {
    pub qubits: usize,
    /// `"00"`, `"01"`, ... in index order.
    pub basis: Vec<String>,
    /// `V[y, x]`, unnormalised.
    pub matrix: DMatrix<Complex64>,
}

/// The basis labels of n qubits, first qubit most significant.
pub fn basis_labels(n: usize) -> Vec<String> {
    (0..1usize << n)
        .map(|x| {
            (0..n)
                .map(|q| if x >> (n - 1 - q) & 1 == 1 { '1' } else { '0' })
                .collect()
        })
        .collect()
}

/// The occupation of logical basis state `x`, with `fixed` holding the
/// photon numbers of the non-rail modes.
fn logical_occupation(net: &ModeNetwork, x: usize, fixed: &[u32]) -> Vec<u32> {
    let n = net.qubits.len();
    let mut occ = fixed.to_vec();
    for (q, qb) in net.qubits.iter().enumerate() {
        let bit = (x >> (n - 1 - q)) & 1;
        occ[qb.rails[bit]] = 1;
    }
    occ
}

/// The logical map of the whole network (module doc).
pub fn logical_map(net: &ModeNetwork) -> Result<LogicalMap, LogicalError> {
    logical_map_of(net, &net.unitary)
}

/// The logical map of `net`'s modes, qubits, ancillas and heralds with the
/// transfer matrix `u` in place of the network's own (a compiled or
/// perturbed chip, loss included).
pub fn logical_map_of(
    net: &ModeNetwork,
    u: &DMatrix<Complex64>,
) -> Result<LogicalMap, LogicalError> {
    let n = net.qubits.len();
    if n == 0 {
        return Err(LogicalError::NoQubits);
    }
    if n > MAX_LOGICAL_QUBITS {
        return Err(LogicalError::TooManyQubits { qubits: n });
    }
    let is_rail = |m: &super::network::NetworkMode| matches!(m.role, ModeRole::Rail { .. });
    // Modes that no element ever links to a qubit's rails are a separate
    // experiment on the same chip: their photons neither enter nor leave the
    // qubits' network, so they are left out of the conditioning.
    let linked = linked_to_rails(net);
    let input_fixed: Vec<u32> = net
        .modes
        .iter()
        .zip(&linked)
        .map(|(m, &l)| if is_rail(m) || !l { 0 } else { m.photons_in })
        .collect();
    let output_fixed: Vec<u32> = net
        .modes
        .iter()
        .zip(&linked)
        .map(|(m, &l)| {
            if is_rail(m) || !l {
                0
            } else {
                m.herald.unwrap_or(0)
            }
        })
        .collect();
    let launched: u32 = input_fixed.iter().sum::<u32>() + n as u32;
    let accounted: u32 = output_fixed.iter().sum::<u32>() + n as u32;
    if launched != accounted {
        return Err(LogicalError::UnaccountedPhotons {
            launched,
            accounted,
        });
    }
    let photons = launched as usize;
    if photons > permanent::MAX_PHOTONS {
        return Err(PermanentError::TooLarge {
            n: photons,
            limit: permanent::MAX_PHOTONS,
        }
        .into());
    }
    let d = 1usize << n;
    let entries = (d * d) as f64;
    let steps = entries * permanent::glynn_steps(photons).max(1.0);
    if steps > super::amplitude::MAX_WORK_STEPS {
        return Err(LogicalError::TooMuchWork {
            entries,
            photons,
            steps,
        });
    }
    let photon_list = |occ: &[u32]| -> Vec<usize> {
        occ.iter()
            .enumerate()
            .flat_map(|(m, &k)| std::iter::repeat_n(m, k as usize))
            .collect()
    };
    // Rails hold 0 or 1 photon, so the factorials are those of the fixed modes.
    let norm: f64 = input_fixed
        .iter()
        .chain(&output_fixed)
        .map(|&k| (1..=k).map(f64::from).product::<f64>())
        .product::<f64>()
        .sqrt();
    let columns: Vec<Result<Vec<Complex64>, PermanentError>> = (0..d)
        .into_par_iter()
        .map(|x| {
            let cols = photon_list(&logical_occupation(net, x, &input_fixed));
            (0..d)
                .map(|y| {
                    let rows = photon_list(&logical_occupation(net, y, &output_fixed));
                    Ok(permanent_of(u, &rows, &cols)? / norm)
                })
                .collect()
        })
        .collect();
    let mut matrix = DMatrix::zeros(d, d);
    for (x, col) in columns.into_iter().enumerate() {
        for (y, v) in col?.into_iter().enumerate() {
            matrix[(y, x)] = v;
        }
    }
    Ok(LogicalMap {
        qubits: n,
        basis: basis_labels(n),
        matrix,
    })
}

/// Which modes some chain of elements connects to a qubit rail (a
/// union-find over the elements' modes).
pub fn linked_to_rails(net: &ModeNetwork) -> Vec<bool> {
    let n = net.modes.len();
    let mut parent: Vec<usize> = (0..n).collect();
    fn root(p: &mut [usize], mut i: usize) -> usize {
        while p[i] != i {
            p[i] = p[p[i]];
            i = p[i];
        }
        i
    }
    for e in &net.elements {
        if let Some((&first, rest)) = e.modes.split_first() {
            for &m in rest {
                let (a, b) = (root(&mut parent, first), root(&mut parent, m));
                parent[a] = b;
            }
        }
    }
    let mut rail_roots = std::collections::BTreeSet::new();
    for q in &net.qubits {
        for r in q.rails {
            rail_roots.insert(root(&mut parent, r));
        }
    }
    (0..n)
        .map(|m| rail_roots.contains(&root(&mut parent, m)))
        .collect()
}

fn trace_inner(a: &DMatrix<Complex64>, b: &DMatrix<Complex64>) -> Complex64 {
    // Tr(a^dag b) = sum conj(a_ij) b_ij
    a.iter().zip(b.iter()).map(|(x, y)| x.conj() * y).sum()
}

/// `Tr(V^dag V) / d`: the success probability of a logical map.
pub fn success_probability(v: &DMatrix<Complex64>) -> f64 {
    trace_inner(v, v).re / v.ncols() as f64
}

/// `F_pro = |Tr(V_t^dag V)|^2 / (d Tr(V^dag V))`; 0 for a map that never
/// succeeds.
pub fn process_fidelity(target: &DMatrix<Complex64>, v: &DMatrix<Complex64>) -> f64 {
    let norm = trace_inner(v, v).re * v.ncols() as f64;
    if norm <= 0.0 {
        return 0.0;
    }
    // Rounding can lift a perfect map a few ulps above 1.
    (trace_inner(target, v).norm_sqr() / norm).min(1.0)
}

/// `F_detect`: the process fidelity maximised over diagonal output phases,
/// every qubit counted at the end.
pub fn detect_fidelity(target: &DMatrix<Complex64>, v: &DMatrix<Complex64>) -> f64 {
    let n = v.nrows().trailing_zeros() as usize;
    detect_fidelity_of(target, v, &vec![true; n])
}

/// The process fidelity maximised over the output phases that counting
/// `detected` qubits cannot see: phases that depend only on the detected
/// qubits' output bits. With every qubit detected this is physics.md's
/// `F_detect = (sum_y |sum_x conj(V_t[y, x]) V[y, x]|)^2 / (d Tr(V^dag V))`;
/// with none, `F_pro`. Rows y are grouped by their detected bits, and each
/// group's overlap enters with its modulus.
pub fn detect_fidelity_of(
    target: &DMatrix<Complex64>,
    v: &DMatrix<Complex64>,
    detected: &[bool],
) -> f64 {
    let norm = trace_inner(v, v).re * v.ncols() as f64;
    if norm <= 0.0 {
        return 0.0;
    }
    let n = detected.len();
    let mask: usize = (0..n)
        .filter(|&q| detected[q])
        .map(|q| 1usize << (n - 1 - q))
        .sum();
    let mut groups = std::collections::BTreeMap::<usize, Complex64>::new();
    for y in 0..v.nrows() {
        let overlap: Complex64 = (0..v.ncols())
            .map(|x| target[(y, x)].conj() * v[(y, x)])
            .sum();
        *groups.entry(y & mask).or_default() += overlap;
    }
    let s: f64 = groups.values().map(|z| z.norm()).sum();
    (s * s / norm).min(1.0)
}

/// `(d F + 1) / (d + 1)` (Nielsen 2002).
pub fn average_gate_fidelity(process_fidelity: f64, d: usize) -> f64 {
    (d as f64 * process_fidelity + 1.0) / (d as f64 + 1.0)
}

/// Loss-normalised mode fidelity `F_U` and transmission `Tr(U^dag U) / N`.
pub fn mode_fidelity(target: &DMatrix<Complex64>, u: &DMatrix<Complex64>) -> (f64, f64) {
    let n = u.ncols() as f64;
    let t = trace_inner(u, u).re;
    if t <= 0.0 {
        return (0.0, 0.0);
    }
    (trace_inner(target, u).norm_sqr() / (n * t), t / n)
}

/// What a chip is meant to do to its qubits.
#[derive(Clone, Debug, PartialEq)]
pub enum Target {
    /// The product of its gates (mode elements that act within one qubit's
    /// rails count as single-qubit gates; elements on free modes alone are
    /// not part of the qubits' network).
    Gates(DMatrix<Complex64>),
    /// Some element leaves the qubits' rails or mixes two qubits, so the
    /// circuit says no logical gate: the target is the unitary closest to the
    /// ideal network's own logical map (its polar factor), and the fidelity
    /// then measures how far that map is from a unitary.
    ClosestUnitary(DMatrix<Complex64>),
}

impl Target {
    pub fn matrix(&self) -> &DMatrix<Complex64> {
        match self {
            Target::Gates(m) | Target::ClosestUnitary(m) => m,
        }
    }

    pub fn kind(&self) -> &'static str {
        match self {
            Target::Gates(_) => "gates",
            Target::ClosestUnitary(_) => "closest_unitary",
        }
    }
}

/// The 2 x 2 logical matrix of a mode element on the rails of one qubit,
/// with `swapped` when the rails are written `q.1, q.0`.
fn rail_local(m: DMatrix<Complex64>, swapped: bool) -> DMatrix<Complex64> {
    if !swapped {
        return m;
    }
    DMatrix::from_fn(2, 2, |i, j| m[(1 - i, 1 - j)])
}

/// The gate-level logical target of a circuit, if its operations are all
/// logical (module doc of [`Target`]). `None` for more than
/// [`MAX_LOGICAL_QUBITS`] qubits or when some element leaves the rails.
pub fn gate_target(circuit: &Circuit) -> Option<DMatrix<Complex64>> {
    let n = circuit.qubits.len();
    if n == 0 || n > MAX_LOGICAL_QUBITS {
        return None;
    }
    let d = 1usize << n;
    let mut t: DMatrix<Complex64> = DMatrix::identity(d, d);
    let rail_of = |m: usize| match circuit.modes[m].role {
        ModeRole::Rail { qubit, index } => Some((qubit, index)),
        _ => None,
    };
    for op in &circuit.ops {
        // Elements on free modes only are a separate experiment on the chip.
        if !matches!(op.kind, OpKind::Gate { .. })
            && op
                .kind
                .modes(&circuit.qubits)
                .iter()
                .all(|&m| rail_of(m).is_none())
        {
            continue;
        }
        let (qubits, g): (Vec<usize>, DMatrix<Complex64>) = match &op.kind {
            OpKind::Gate { gate, qubits } => (qubits.clone(), gate.matrix()),
            OpKind::Phase { phase_rad, mode } => {
                let (q, idx) = rail_of(*mode)?;
                let e = Complex64::from_polar(1.0, *phase_rad);
                let o = Complex64::new(1.0, 0.0);
                let diag = if idx == 0 { [e, o] } else { [o, e] };
                (
                    vec![q],
                    DMatrix::from_diagonal(&nalgebra::DVector::from_row_slice(&diag)),
                )
            }
            OpKind::Rotate { modes, .. } | OpKind::Split { modes, .. } => {
                let (q0, i0) = rail_of(modes[0])?;
                let (q1, _) = rail_of(modes[1])?;
                if q0 != q1 {
                    return None;
                }
                let m = match &op.kind {
                    OpKind::Rotate {
                        theta_rad, phi_rad, ..
                    } => super::network::rotation(*theta_rad, *phi_rad),
                    OpKind::Split { cross_fraction, .. } => {
                        super::network::splitter(*cross_fraction)
                    }
                    _ => unreachable!("matched above"),
                };
                (vec![q0], rail_local(m, i0 == 1))
            }
            OpKind::Unitary { modes, matrix } => {
                if modes.len() != 2 {
                    return None;
                }
                let (q0, i0) = rail_of(modes[0])?;
                let (q1, _) = rail_of(modes[1])?;
                if q0 != q1 {
                    return None;
                }
                (vec![q0], rail_local(matrix.clone(), i0 == 1))
            }
        };
        apply_gate(&mut t, n, &qubits, &g);
    }
    Some(t)
}

/// `t <- G t` for gate `g` on `qubits` (first operand most significant).
pub fn apply_gate(t: &mut DMatrix<Complex64>, n: usize, qubits: &[usize], g: &DMatrix<Complex64>) {
    let d = 1usize << n;
    let k = qubits.len();
    let shifts: Vec<usize> = qubits.iter().map(|&q| n - 1 - q).collect();
    let mask: usize = shifts.iter().map(|s| 1usize << s).sum();
    let sub = 1usize << k;
    let index = |base: usize, local: usize| -> usize {
        let mut i = base;
        for (b, s) in shifts.iter().enumerate() {
            if (local >> (k - 1 - b)) & 1 == 1 {
                i |= 1 << s;
            }
        }
        i
    };
    let mut buf = vec![Complex64::new(0.0, 0.0); sub];
    for col in 0..d {
        for base in (0..d).filter(|b| b & mask == 0) {
            for (l, slot) in buf.iter_mut().enumerate() {
                *slot = t[(index(base, l), col)];
            }
            for r in 0..sub {
                let mut acc = Complex64::new(0.0, 0.0);
                for (l, v) in buf.iter().enumerate() {
                    acc += g[(r, l)] * v;
                }
                t[(index(base, r), col)] = acc;
            }
        }
    }
}

/// The polar factor `W = U V^dag` of `M = U S V^dag`: the unitary closest to
/// M in the Frobenius norm (Higham, Accuracy and Stability of Numerical
/// Algorithms, 2002, section 8.1). `None` for a zero map.
pub fn closest_unitary(m: &DMatrix<Complex64>) -> Option<DMatrix<Complex64>> {
    if m.iter().all(|v| v.norm() == 0.0) {
        return None;
    }
    let svd = m.clone().svd(true, true);
    Some(svd.u? * svd.v_t?)
}

/// The target of a circuit whose ideal network has the logical map `ideal`.
pub fn target(circuit: &Circuit, ideal: &LogicalMap) -> Option<Target> {
    if let Some(t) = gate_target(circuit) {
        return Some(Target::Gates(t));
    }
    closest_unitary(&ideal.matrix).map(Target::ClosestUnitary)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn basis_labels_put_the_first_qubit_first() {
        assert_eq!(basis_labels(2), ["00", "01", "10", "11"]);
    }

    #[test]
    fn apply_gate_matches_the_kronecker_product() {
        // CNOT with the control second equals (H x H) CNOT (H x H)
        // (Nielsen & Chuang 2000, exercise 4.20).
        let mut a = DMatrix::identity(4, 4);
        apply_gate(&mut a, 2, &[1, 0], &QubitGate::Cnot.matrix());
        let mut b = DMatrix::identity(4, 4);
        for q in [0, 1] {
            apply_gate(&mut b, 2, &[q], &QubitGate::H.matrix());
        }
        apply_gate(&mut b, 2, &[0, 1], &QubitGate::Cnot.matrix());
        for q in [0, 1] {
            apply_gate(&mut b, 2, &[q], &QubitGate::H.matrix());
        }
        assert!((a - b).norm() < 1e-14);
    }

    #[test]
    fn partial_detection_hides_only_the_detected_qubits_phases() {
        // P(0.7) on the second qubit only: invisible when it is counted,
        // visible when only the first qubit is counted.
        let p = Complex64::from_polar(1.0, 0.7);
        let o = Complex64::new(1.0, 0.0);
        let v = DMatrix::from_diagonal(&nalgebra::DVector::from_vec(vec![o, p, o, p]));
        let id: DMatrix<Complex64> = DMatrix::identity(4, 4);
        assert!((detect_fidelity_of(&id, &v, &[true, true]) - 1.0).abs() < 1e-15);
        assert!((detect_fidelity_of(&id, &v, &[false, true]) - 1.0).abs() < 1e-15);
        let f = detect_fidelity_of(&id, &v, &[true, false]);
        assert!((f - process_fidelity(&id, &v)).abs() < 1e-15 && f < 0.9);
        assert!(
            (detect_fidelity_of(&id, &v, &[false, false]) - process_fidelity(&id, &v)).abs()
                < 1e-15
        );
    }

    #[test]
    fn detect_fidelity_ignores_output_phases_only() {
        let cz = QubitGate::Cz.matrix();
        let id: DMatrix<Complex64> = DMatrix::identity(4, 4);
        // CZ is I up to output phases: F_pro = |Tr CZ|^2 / 16 = 1/4, F_detect = 1.
        assert!((process_fidelity(&id, &cz) - 0.25).abs() < 1e-15);
        assert!((detect_fidelity(&id, &cz) - 1.0).abs() < 1e-15);
        let h = QubitGate::H.matrix();
        let id2: DMatrix<Complex64> = DMatrix::identity(2, 2);
        // H is not a phase away from I: F_detect = (2 / sqrt 2)^2 / 4 = 1/2.
        assert!((detect_fidelity(&id2, &h) - 0.5).abs() < 1e-15);
    }
}
