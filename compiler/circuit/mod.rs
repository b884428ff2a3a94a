//! Elaboration: the AST of one file to circuit IR, one [`Circuit`] per chip.
//!
//! # The circuit IR
//!
//! A [`Circuit`] is what one `chip` block means, with every name resolved,
//! every expression evaluated and every definition expanded. Later stages
//! read only this; they never see syntax.
//!
//! - **Modes** ([`Circuit::modes`]) are the optical modes of the chip in
//!   declaration order, which is their physical order from the top of the
//!   chip: `dualrail a, b` adds `a.0 a.1 b.0 b.1`, `mode m0` adds `m0`,
//!   `ancilla h0` adds `h0`. A [`ModeId`] indexes this list. Each mode records
//!   its role (rail of a qubit, free mode, ancilla) and its launched photon
//!   number. Ancilla modes that the optics stage allocates for its gate
//!   networks (the post-selected CZ's vacuum modes) are added there, not here.
//! - **Qubits** ([`Circuit::qubits`]) are dual-rail: qubit `q` owns the two
//!   adjacent rails `q.0` (logical |0>) and `q.1` (logical |1>). A
//!   [`QubitId`] indexes this list. `launch q = |1>` puts one photon in `q.1`;
//!   the default is |0>, one photon in `q.0`.
//! - **Operations** ([`Circuit::ops`]) are a flat list in the order light meets
//!   them: standard qubit gates with evaluated angles in radians
//!   ([`QubitGate`]), and the mode-level elements `rotate(theta, phi)`
//!   (the block T(theta, phi) of docs/physics.md, radians), `split(c)` (cross
//!   power fraction c in [0, 1]), `phase(x)` (radians) and `unitary` (a
//!   checked unitary matrix on the listed modes, row i = output mode i).
//!   Operands are distinct and of the right kind (qubits for gates, modes for
//!   elements). Each op keeps the span of the statement it came from and, if
//!   it came out of definitions, the spans of the calls that expanded it.
//! - **Heralds** name ancilla modes and the photon number seen at their
//!   outputs; **detection** lists the qubits (and modes) counted at the end.
//!   When `detect` is present it follows every operation, so output phases
//!   are unobservable.
//! - **Requirements** hold a metric, a comparison, the limit in the metric's
//!   internal unit (fractions as numbers, lengths in um, loss in dB, power in
//!   mW) and an optional yield level in (0, 1].
//! - **Tolerance overrides** are one-sigma values in internal units (lengths
//!   in um, the phase in rad); `None` keeps the process's value, `Some(0)`
//!   switches the source off.
//! - **Band**: wavelengths in um, `steps` >= 1 points from start to stop.
//! - **Process**: the preset name or the file path as written (relative paths
//!   are relative to the circuit file's folder); `None` means the default.
//!
//! Invariants checked by [`validate`]: every id in range; operands distinct;
//! unitary matrices unitary to 1e-9; angles finite; fractions in range;
//! heralds on ancillas; detection after the last operation.

mod elaborate;
pub mod expr;
pub mod gates;
pub mod matrix_file;
mod snapshot;
pub mod suggest;
pub mod units;
mod validate;

pub use elaborate::{FileLoader, KEYWORDS, NoFiles, Program, elaborate, unitarity_error};
pub use gates::QubitGate;
pub use snapshot::num as snapshot_num;
pub use validate::validate;

use crate::source::Span;
use nalgebra::DMatrix;
use num_complex::Complex64;

pub type ModeId = usize;
pub type QubitId = usize;

/// Tolerance for the unitarity of `unitary` matrices: largest entry of U†U - I.
pub const UNITARITY_TOL: f64 = 1e-9;

#[derive(Clone, Debug, PartialEq)]
pub struct Circuit {
    pub name: String,
    pub process: Option<ProcessRef>,
    pub qubits: Vec<Qubit>,
    pub modes: Vec<Mode>,
    pub ops: Vec<Op>,
    pub heralds: Vec<Herald>,
    pub detect: Option<Detect>,
    pub requirements: Vec<Requirement>,
    pub tolerances: Tolerances,
    pub band: Option<Band>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub enum ProcessRef {
    Preset { name: String, span: Span },
    File { path: String, span: Span },
}

#[derive(Clone, Debug, PartialEq)]
pub struct Qubit {
    pub name: String,
    /// `[q.0, q.1]`
    pub rails: [ModeId; 2],
    /// The launched logical value, 0 or 1.
    pub launch: u8,
    pub span: Span,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ModeRole {
    Rail { qubit: QubitId, index: u8 },
    Free,
    Ancilla,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Mode {
    /// `a.0`, `m0`, `h0`
    pub name: String,
    pub role: ModeRole,
    /// Photons launched into this mode.
    pub photons: u32,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Op {
    pub kind: OpKind,
    pub span: Span,
    /// Call sites of the definitions this op was expanded from, outermost first.
    pub expanded_from: Vec<Span>,
}

#[derive(Clone, Debug, PartialEq)]
pub enum OpKind {
    Gate {
        gate: QubitGate,
        qubits: Vec<QubitId>,
    },
    Rotate {
        theta_rad: f64,
        phi_rad: f64,
        modes: [ModeId; 2],
    },
    Split {
        cross_fraction: f64,
        modes: [ModeId; 2],
    },
    Phase {
        phase_rad: f64,
        mode: ModeId,
    },
    Unitary {
        modes: Vec<ModeId>,
        matrix: DMatrix<Complex64>,
    },
}

impl OpKind {
    /// The optical modes this op touches, rails of its qubits included.
    pub fn modes(&self, qubits: &[Qubit]) -> Vec<ModeId> {
        match self {
            OpKind::Gate { qubits: q, .. } => q.iter().flat_map(|&q| qubits[q].rails).collect(),
            OpKind::Rotate { modes, .. } | OpKind::Split { modes, .. } => modes.to_vec(),
            OpKind::Phase { mode, .. } => vec![*mode],
            OpKind::Unitary { modes, .. } => modes.clone(),
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Herald {
    pub mode: ModeId,
    pub photons: u32,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Detect {
    pub qubits: Vec<QubitId>,
    pub modes: Vec<ModeId>,
    pub span: Span,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Metric {
    /// Post-selected (or heralded) logical process fidelity, a fraction.
    Fidelity,
    /// Success probability of the real chip, a fraction.
    Success,
    /// Chip length, um.
    Length,
    /// Chip width, um.
    Width,
    /// Insertion loss, dB.
    Loss,
    /// Total heater power, mW.
    Power,
}

impl Metric {
    pub const ALL: [Metric; 6] = [
        Metric::Fidelity,
        Metric::Success,
        Metric::Length,
        Metric::Width,
        Metric::Loss,
        Metric::Power,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Metric::Fidelity => "fidelity",
            Metric::Success => "success",
            Metric::Length => "length",
            Metric::Width => "width",
            Metric::Loss => "loss",
            Metric::Power => "power",
        }
    }

    pub fn kind(self) -> units::Kind {
        match self {
            Metric::Fidelity | Metric::Success => units::Kind::Fraction,
            Metric::Length | Metric::Width => units::Kind::Length,
            Metric::Loss => units::Kind::Loss,
            Metric::Power => units::Kind::Power,
        }
    }

    /// The internal unit, for display.
    pub fn unit(self) -> &'static str {
        match self {
            Metric::Fidelity | Metric::Success => "",
            Metric::Length | Metric::Width => "um",
            Metric::Loss => "dB",
            Metric::Power => "mW",
        }
    }
}

pub use crate::syntax::ast::CmpOp;

#[derive(Clone, Debug, PartialEq)]
pub struct Requirement {
    pub metric: Metric,
    pub op: CmpOp,
    /// In the metric's internal unit.
    pub limit: f64,
    /// Fraction of fabricated chips that must meet it; `None` = nominal chip.
    pub yield_level: Option<f64>,
    pub span: Span,
}

/// One-sigma overrides of the process tolerances, internal units.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Tolerances {
    pub edge_bias_um: Option<f64>,
    pub thickness_bias_um: Option<f64>,
    pub edge_local_um: Option<f64>,
    pub roughness_um: Option<f64>,
    pub correlation_um: Option<f64>,
    pub phase_rad: Option<f64>,
    pub wavelength_um: Option<f64>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Band {
    pub start_um: f64,
    pub stop_um: f64,
    pub steps: u32,
    pub span: Span,
}

impl Band {
    /// The wavelengths of the grid, um.
    pub fn wavelengths_um(&self) -> Vec<f64> {
        if self.steps <= 1 {
            return vec![self.start_um];
        }
        let n = self.steps - 1;
        (0..self.steps)
            .map(|k| self.start_um + (self.stop_um - self.start_um) * f64::from(k) / f64::from(n))
            .collect()
    }
}

impl Circuit {
    pub fn mode_by_name(&self, name: &str) -> Option<ModeId> {
        self.modes.iter().position(|m| m.name == name)
    }

    pub fn qubit_by_name(&self, name: &str) -> Option<QubitId> {
        self.qubits.iter().position(|q| q.name == name)
    }

    /// Photon number launched into every mode, in mode order.
    pub fn launch_occupation(&self) -> Vec<u32> {
        self.modes.iter().map(|m| m.photons).collect()
    }
}
