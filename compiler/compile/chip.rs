//! The chip build, whole: circuit passes, the mode network, a mesh by the
//! chosen strategy, cells for its blocks, the floorplan, and the nominal
//! chip's figures (physics.md section 7) from the floorplan's own transfer
//! matrix, loss included.
//!
//! `auto` builds both strategies and keeps the one with the better expected
//! fidelity under the process tolerances: a short Monte Carlo with a fixed
//! seed (`AUTO_SAMPLES` chips, each with a die-level edge bias and a local
//! error on every edge of every cell, normal with the process's one-sigma
//! values; the cells' rail blocks re-integrated for each, the phase
//! shifters left at their nominal settings). When the two means differ by
//! less than twice their combined standard error the fidelities count as
//! equal and the shorter chip wins.

use super::cells::{self, CellMesh};
use super::mesh::{self, Mesh, Strategy};
use crate::cell::geometric::LengthRule;
use crate::cell::roughness::RoughEdges;
use crate::cell::sensitivity::{self, Perturbation};
use crate::cell::{CellKind, DesignError};
use crate::circuit::Circuit;
use crate::layout::floorplan::{self, Floorplan, Kind, Tuning};
use crate::optics::decompose::{DecomposeError, Layout};
use crate::optics::logical;
use crate::optics::simulate::{self, FidelityKind};
use crate::optics::{ModeNetwork, network};
use crate::process::law::{Characterisation, ProcessError, characterise};
use crate::process::spec::Process;
use nalgebra::DMatrix;
use num_complex::Complex64;
use rayon::prelude::*;

pub const AUTO_SAMPLES: usize = 12;
pub const AUTO_SEED: u64 = 1;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StrategyChoice {
    Auto,
    Only(Strategy),
}

#[derive(Clone, Copy, Debug)]
pub struct BuildOptions {
    pub strategy: StrategyChoice,
    pub cell: CellKind,
    pub mesh: Layout,
    pub tuning: Tuning,
    pub rule: LengthRule,
}

impl Default for BuildOptions {
    fn default() -> Self {
        BuildOptions {
            strategy: StrategyChoice::Auto,
            cell: CellKind::Geometric,
            mesh: Layout::Rectangular,
            tuning: Tuning::Thermal,
            rule: LengthRule::Uniform,
        }
    }
}

#[derive(Debug, thiserror::Error)]
pub enum BuildError {
    #[error(transparent)]
    Process(#[from] ProcessError),
    #[error("the network cannot be meshed: {0}")]
    Decompose(#[from] DecomposeError),
    #[error("a cell cannot be designed: {0}")]
    Design(#[from] DesignError),
    #[error("the floorplan: {0}")]
    Place(#[from] floorplan::PlaceError),
    #[error("the tolerance Monte Carlo: {0}")]
    Sensitivity(#[from] Box<sensitivity::SensitivityError>),
}

/// The nominal chip's figures.
#[derive(Clone, Debug, PartialEq)]
pub struct Figures {
    /// `F_U` (loss-normalised; up to output phases when the chip ends in
    /// `detect`).
    pub mode_fidelity: f64,
    pub transmission: f64,
    /// The logical figures (None without qubits or out of reach).
    pub logical: Option<LogicalFigures>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct LogicalFigures {
    pub fidelity: f64,
    pub fidelity_kind: FidelityKind,
    /// Of the lossless network as written.
    pub scheme_success: f64,
    /// Of the compiled chip, loss included.
    pub success_probability: f64,
}

impl Figures {
    /// The figure a strategy is judged by: the logical fidelity where there
    /// is one, else the mode fidelity.
    pub fn merit(&self) -> f64 {
        self.logical
            .as_ref()
            .map_or(self.mode_fidelity, |l| l.fidelity)
    }
}

/// The tolerance Monte Carlo of one candidate.
#[derive(Clone, Debug, PartialEq)]
pub struct Tolerance {
    pub samples: usize,
    pub seed: u64,
    pub mean: f64,
    pub standard_error: f64,
    pub worst: f64,
}

/// One strategy, built.
#[derive(Clone, Debug)]
pub struct Candidate {
    pub strategy: Strategy,
    pub cells: CellMesh,
    pub floorplan: Floorplan,
    pub figures: Figures,
    pub tolerance: Option<Tolerance>,
}

#[derive(Clone, Debug)]
pub struct Build {
    pub circuit: Circuit,
    pub network: ModeNetwork,
    pub characterisation: Characterisation,
    pub chosen: Candidate,
    /// The other strategy, when `auto` built both.
    pub other: Option<Candidate>,
    pub strategy_reason: String,
    pub options: BuildOptions,
}

/// Builds a validated circuit's chip on process `p`.
pub fn build(circuit: &Circuit, p: &Process, o: BuildOptions) -> Result<Build, BuildError> {
    let (optimised, _) = super::optimise(circuit);
    let net = network(&optimised);
    let c = characterise(p)?;
    let ideal = simulate::logical_result(&optimised, &net).ok();
    let make = |s: Strategy| -> Result<Candidate, BuildError> {
        let m = match s {
            Strategy::Flat => mesh::flat(&net, o.mesh)?,
            Strategy::Local => mesh::local(&net, o.mesh)?,
        };
        candidate(&optimised, &net, ideal.as_ref(), m, p, &c, o)
    };
    let (chosen, other, reason) = match o.strategy {
        StrategyChoice::Only(s) => (
            make(s)?,
            None,
            format!("{} was asked for (--strategy {})", s.name(), s.name()),
        ),
        StrategyChoice::Auto => {
            let flat = mesh::flat(&net, o.mesh)?;
            let local = mesh::local(&net, o.mesh)?;
            if same_mesh(&flat, &local) {
                let cand = candidate(&optimised, &net, ideal.as_ref(), flat, p, &c, o)?;
                (cand, None, "the network is one element on adjacent rails, so flat and local give the same mesh".to_owned())
            } else {
                let mut f = candidate(&optimised, &net, ideal.as_ref(), flat, p, &c, o)?;
                let mut l = candidate(&optimised, &net, ideal.as_ref(), local, p, &c, o)?;
                f.tolerance = Some(tolerance(&f, &optimised, &net, ideal.as_ref(), p)?);
                l.tolerance = Some(tolerance(&l, &optimised, &net, ideal.as_ref(), p)?);
                let (keep, drop, why) = choose(f, l, &optimised);
                (keep, Some(drop), why)
            }
        }
    };
    Ok(Build {
        circuit: optimised,
        network: net,
        characterisation: c,
        chosen,
        other,
        strategy_reason: reason,
        options: o,
    })
}

fn same_mesh(a: &Mesh, b: &Mesh) -> bool {
    a.depth == b.depth
        && a.ops.len() == b.ops.len()
        && a.ops.iter().zip(&b.ops).all(|(x, y)| match (x, y) {
            (mesh::MeshOp::Block(p), mesh::MeshOp::Block(q)) => {
                p.upper == q.upper && p.theta == q.theta && p.phi == q.phi && p.column == q.column
            }
            (x, y) => x == y,
        })
}

/// A nominal requirement's value on a candidate chip, in the metric's
/// internal unit.
pub fn requirement_value(c: &Candidate, m: crate::circuit::Metric) -> f64 {
    use crate::circuit::Metric;
    match m {
        Metric::Fidelity => c.figures.merit(),
        Metric::Success => c
            .figures
            .logical
            .as_ref()
            .map_or(c.figures.transmission, |l| l.success_probability),
        Metric::Length => c.floorplan.length_um,
        Metric::Width => c.floorplan.width_um,
        Metric::Loss => -10.0 * c.figures.transmission.max(1e-300).log10(),
        Metric::Power => c.floorplan.heater_power_mw,
    }
}

/// Whether a requirement holds at `value`.
pub fn holds(op: crate::circuit::CmpOp, value: f64, limit: f64) -> bool {
    use crate::circuit::CmpOp;
    match op {
        CmpOp::AtLeast => value >= limit,
        CmpOp::AtMost => value <= limit,
        CmpOp::Above => value > limit,
        CmpOp::Below => value < limit,
    }
}

/// The circuit's nominal requirements (no yield level) a candidate misses.
fn misses(c: &Candidate, circuit: &Circuit) -> Vec<&'static str> {
    circuit
        .requirements
        .iter()
        .filter(|r| {
            r.yield_level.is_none() && !holds(r.op, requirement_value(c, r.metric), r.limit)
        })
        .map(|r| r.metric.name())
        .collect()
}

/// The rule: a chip that meets the circuit's nominal requirements first
/// (fewer missed); then the better mean fidelity under the tolerances,
/// unless the difference is within twice the combined standard error; then
/// the shorter chip.
fn choose(f: Candidate, l: Candidate, circuit: &Circuit) -> (Candidate, Candidate, String) {
    let (mf, ml) = (misses(&f, circuit), misses(&l, circuit));
    if mf.len() != ml.len() {
        let list = |m: &[&str]| {
            if m.is_empty() {
                "none".to_owned()
            } else {
                m.join(", ")
            }
        };
        let why = format!(
            "{} meets more of the circuit's requirements on the nominal chip (flat misses {}; local misses {})",
            if mf.len() < ml.len() { "flat" } else { "local" },
            list(&mf),
            list(&ml)
        );
        return if mf.len() < ml.len() {
            (f, l, why)
        } else {
            (l, f, why)
        };
    }
    let (tf, tl) = (
        f.tolerance.clone().expect("run"),
        l.tolerance.clone().expect("run"),
    );
    let diff = tf.mean - tl.mean;
    let noise = 2.0 * (tf.standard_error.powi(2) + tl.standard_error.powi(2)).sqrt();
    let figs = format!(
        "mean fidelity under the tolerances ({} chips, seed {}): flat {:.6}, local {:.6}; length flat {:.0} um, local {:.0} um",
        tf.samples, tf.seed, tf.mean, tl.mean, f.floorplan.length_um, l.floorplan.length_um
    );
    if diff.abs() > noise {
        if diff > 0.0 {
            (
                f,
                l,
                format!("flat has the better expected fidelity; {figs}"),
            )
        } else {
            (
                l,
                f,
                format!("local has the better expected fidelity; {figs}"),
            )
        }
    } else if f.floorplan.length_um <= l.floorplan.length_um {
        (
            f,
            l,
            format!(
                "the fidelities agree within twice their standard error, and flat is shorter; {figs}"
            ),
        )
    } else {
        (
            l,
            f,
            format!(
                "the fidelities agree within twice their standard error, and local is shorter; {figs}"
            ),
        )
    }
}

fn candidate(
    circuit: &Circuit,
    net: &ModeNetwork,
    ideal: Option<&simulate::LogicalResult>,
    m: Mesh,
    p: &Process,
    c: &Characterisation,
    o: BuildOptions,
) -> Result<Candidate, BuildError> {
    let strategy = m.strategy;
    let cm = cells::realise(&m, o.cell, o.rule, p, c)?;
    let names: Vec<String> = net.modes.iter().map(|m| m.name.clone()).collect();
    // With photon counting at the end, a phase on a counted mode is
    // invisible, and so is one on an ancilla nobody watches (a pattern's
    // amplitude uses only the rows of the modes that hold its photons).
    let free: Vec<bool> = (0..names.len())
        .map(|m| {
            net.detect
                && (net.detected_modes[m] || net.modes[m].role == crate::circuit::ModeRole::Ancilla)
        })
        .collect();
    let fp = floorplan::place(
        &circuit.name,
        &names,
        &net.unitary,
        &cm,
        p,
        c,
        o.tuning,
        &free,
    )?;
    let figures = figures(net, ideal, &fp.transfer());
    Ok(Candidate {
        strategy,
        cells: cm,
        floorplan: fp,
        figures,
        tolerance: None,
    })
}

/// `F_U`, or with the output phases free when the chip ends in `detect`
/// (docs/physics.md): `(sum_i |sum_j conj(T_ij) U_ij|)^2 / (N Tr U^dag U)`.
pub fn mode_fidelity(
    target: &DMatrix<Complex64>,
    u: &DMatrix<Complex64>,
    detect: bool,
) -> (f64, f64) {
    let (f, t) = logical::mode_fidelity(target, u);
    if !detect {
        return (f, t);
    }
    let n = u.ncols() as f64;
    let norm: f64 = u.iter().map(|z| z.norm_sqr()).sum();
    if norm <= 0.0 {
        return (0.0, 0.0);
    }
    let s: f64 = (0..u.nrows())
        .map(|i| {
            (0..u.ncols())
                .map(|j| target[(i, j)].conj() * u[(i, j)])
                .sum::<Complex64>()
                .norm()
        })
        .sum();
    (s * s / (n * norm), t)
}

/// The figures of a chip of transfer `u` (the network's modes).
pub fn figures(
    net: &ModeNetwork,
    ideal: Option<&simulate::LogicalResult>,
    u: &DMatrix<Complex64>,
) -> Figures {
    let (mode_fidelity, transmission) = mode_fidelity(&net.unitary, u, net.detect);
    let logical = ideal.and_then(|r| {
        let mut chip = net.clone();
        chip.unitary = u.clone();
        let map = logical::logical_map(&chip).ok()?;
        let fidelity = if net.detect {
            logical::detect_fidelity_of(r.target.matrix(), &map.matrix, &net.detected_qubits)
        } else {
            logical::process_fidelity(r.target.matrix(), &map.matrix)
        };
        Some(LogicalFigures {
            fidelity,
            fidelity_kind: r.fidelity_kind,
            scheme_success: r.scheme_success,
            success_probability: logical::success_probability(&map.matrix),
        })
    });
    Figures {
        mode_fidelity,
        transmission,
        logical,
    }
}

/// The short tolerance Monte Carlo of `auto` (module doc).
fn tolerance(
    cand: &Candidate,
    _circuit: &Circuit,
    net: &ModeNetwork,
    ideal: Option<&simulate::LogicalResult>,
    p: &Process,
) -> Result<Tolerance, BuildError> {
    let t = &p.tolerances;
    let fp = &cand.floorplan;
    let cells: Vec<usize> = fp
        .components
        .iter()
        .enumerate()
        .filter(|(_, c)| matches!(c.kind, Kind::Cell { .. }))
        .map(|(i, _)| i)
        .collect();
    let merits: Vec<f64> = (0..AUTO_SAMPLES)
        .into_par_iter()
        .map(|s| -> Result<f64, BuildError> {
            let mut rng = sensitivity::sample_rng(AUTO_SEED, s);
            let bias = t.edge_bias_nm * rng.normal();
            let mut blocks = Vec::with_capacity(cells.len());
            for &i in &cells {
                let Kind::Cell { cell, .. } = &fp.components[i].kind else {
                    unreachable!("filtered to cells")
                };
                let mut rough = RoughEdges::sample(0.0, t.correlation_um, &mut rng);
                for e in rough.edges.iter_mut() {
                    e.offset_nm = t.edge_local_nm * rng.normal();
                }
                let e = Perturbation {
                    edge_bias_nm: bias,
                    rough: Some(std::sync::Arc::new(rough)),
                    ..Default::default()
                };
                let r = sensitivity::respond(cell, p, &e, &cell.rail_block()).map_err(Box::new)?;
                blocks.push((i, r.rail_block));
            }
            let u = fp.transfer_with(&blocks);
            Ok(figures(net, ideal, &u).merit())
        })
        .collect::<Result<_, _>>()?;
    let n = merits.len() as f64;
    let mean = merits.iter().sum::<f64>() / n;
    let var = merits.iter().map(|m| (m - mean).powi(2)).sum::<f64>() / (n - 1.0).max(1.0);
    Ok(Tolerance {
        samples: AUTO_SAMPLES,
        seed: AUTO_SEED,
        mean,
        standard_error: (var / n).sqrt(),
        worst: merits.iter().copied().fold(f64::INFINITY, f64::min),
    })
}
