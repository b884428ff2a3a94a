//! The floorplan: every component of the chip placed along the light's
//! path, and the phase shifters set so that the chip does what the mesh
//! says (physics.md section 5).
//!
//! Geometry (x along the light, y up, mode 0 the top rail):
//! - rails at the process pitch P, mode i at y = (N - 1 - i) P;
//! - a column is a phase section (one shifter per rail that needs a phase;
//!   omitted when none does), the lead-in S-bends that bring a cell's rails
//!   from the pitch to the cell's entry separation, the cells, and the
//!   lead-out S-bends back to the pitch; a final phase section ends the chip;
//! - an S-bend of lateral offset d is two circular arcs of the process's
//!   minimum bend radius R, each turning by alpha = acos(1 - d / 2R): it
//!   covers 2 R sin(alpha) of x on a path 2 R alpha long;
//! - a geometric cell's auxiliary guide lies midway between its rails, and
//!   ends in a taper on both sides (a terminator) inside the lead regions;
//! - cells shorter than the column's longest are centred and padded with
//!   straight rail; idle rails carry balancing sections (module `balance`).
//!
//! Phases: a rail that bends travels further than one that runs straight,
//! by `2 R alpha - 2 R sin(alpha)` per S-bend, so it is delayed by
//! `beta (path - x-length)` (beta = 2 pi n_eff / lambda); every component's
//! `phase_rad` is the phase of its transfer, `e^{i phase_rad}`, relative to
//! a straight rail of its x-length: minus that delay (amplitudes go as
//! e^{i(omega t - beta z)}, the convention of the cells' dA/dz = -i H A).
//! The phase screens are then solved along the mesh: a cell's realised rail
//! block, leads included, is `R = diag(e^{ia}, e^{ib}) S(theta) diag(1,
//! e^{ic})` (S real), so the block T(theta, phi) = S(theta)
//! diag(e^{i phi}, 1) needs (phi, -c) in the screen before it and leaves (-a, -b) for the
//! next screen on its rails; the idle rails' phases and the mesh's own
//! phases are carried along each rail to its next screen. Each screen may
//! then drop a common phase (a global phase of the chip), chosen to minimise
//! the heater power, and every phase is wrapped into [0, 2 pi).
//!
//! The chip's transfer matrix (`transfer`) is the product of the
//! components' own matrices in x order, the rule netlist.json documents.

// Loops over mode numbers index several per-mode tables at once.
#![allow(clippy::needless_range_loop)]

use crate::cell::{CellDesign, CellKind};
use crate::compile::cells::{CellMesh, CellOp, PlacedCell, PlacedCrossing};
use crate::process::law::Characterisation;
use crate::process::spec::Process;
use nalgebra::DMatrix;
use num_complex::Complex64;
use std::f64::consts::{PI, TAU};
use std::sync::Arc;

/// Taper length of an auxiliary guide's termination, um (a tip over about
/// ten micrometres: common practice for a low-reflection end).
pub const TAPER_UM: f64 = 10.0;
/// Straight rail before the first and after the last section, um.
pub const EDGE_RUN_UM: f64 = 10.0;
/// Loss differences below this are not balanced, dB.
pub const BALANCE_TOL_DB: f64 = 1e-6;
/// Phases below this are no phase shifter.
pub const PHASE_TOL: f64 = 1e-9;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Tuning {
    Thermal,
    Passive,
}

impl Tuning {
    pub fn name(self) -> &'static str {
        match self {
            Tuning::Thermal => "thermal",
            Tuning::Passive => "passive",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Side {
    Input,
    Output,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum WaveguideRole {
    /// Plain straight rail (edge runs, pads, idle rails of a phase section).
    Straight,
    /// A balancing section: matched loss (and, in a cell column, the cell
    /// rails' S-bend path) on an idle rail.
    Balance,
}

#[derive(Clone, Debug)]
pub enum Kind {
    Port {
        side: Side,
    },
    Waveguide {
        role: WaveguideRole,
        /// Lateral excursion of a balancing section's dummy bends, um.
        dummy_offset_um: f64,
        /// Bends a balancing section holds.
        dummy_bends: usize,
    },
    /// An S-bend: two arcs, lateral offset `offset_um` (towards -y when
    /// negative), at the end of which the rail has moved.
    Bend {
        radius_um: f64,
        offset_um: f64,
        angle_rad: f64,
    },
    PhaseShifter {
        tuning: Tuning,
        power_mw: f64,
        /// Passive shifters: the widened length within the section, um.
        widened_um: f64,
    },
    Cell {
        cell: Arc<CellDesign>,
        theta: f64,
        phi: f64,
        swap: bool,
        element: Option<usize>,
    },
    /// A waveguide crossing: the two rails exchange places through S-bends
    /// of one pitch that cross at the middle.
    Crossing {
        phi: f64,
        swap: bool,
        element: Option<usize>,
    },
    /// An auxiliary guide's tapered end (no effect on the rails).
    Terminator {
        taper_um: f64,
        side: Side,
    },
}

#[derive(Clone, Debug)]
pub struct Component {
    pub id: String,
    pub kind: Kind,
    /// Upper first.
    pub modes: Vec<usize>,
    pub x_um: f64,
    /// Rail centre (one mode) or the midpoint of the two rails.
    pub y_um: f64,
    pub length_um: f64,
    /// Path length along the guide(s), um (>= length_um in bends).
    pub path_um: f64,
    /// Propagation phase relative to a straight rail of the same x-length
    /// (phase shifters: the set phase), rad.
    pub phase_rad: f64,
    /// Power loss, dB (propagation over the path and the component's own).
    pub loss_db: f64,
    pub column: Option<usize>,
}

impl Component {
    /// The component's transfer on its modes.
    pub fn matrix(&self) -> DMatrix<Complex64> {
        let a = 10f64.powf(-self.loss_db / 20.0);
        match &self.kind {
            Kind::Cell { cell, .. } => cell.rail_block().map(|z| z * a),
            Kind::Crossing { .. } => crossing_matrix(self.phase_rad).map(|z| z * a),
            Kind::Terminator { .. } => DMatrix::identity(self.modes.len(), self.modes.len()),
            Kind::Port { .. } => DMatrix::identity(1, 1),
            _ => DMatrix::from_element(1, 1, Complex64::from_polar(a, self.phase_rad)),
        }
    }
}

/// One column of the per-column table.
#[derive(Clone, Debug, PartialEq)]
pub struct ColumnRow {
    pub index: usize,
    pub x_um: f64,
    pub length_um: f64,
    pub phase_section_um: f64,
    pub lead_um: f64,
    pub cell_um: f64,
    pub cells: usize,
    /// Crossings (full swaps and the local strategy's routing swaps).
    pub swaps: usize,
    pub phase_shifters: usize,
    pub heater_power_mw: f64,
}

/// What the netlist says of the process the chip was built on.
#[derive(Clone, Debug)]
pub struct ProcessInfo {
    pub name: String,
    pub wavelength_um: f64,
    pub width_nm: f64,
    pub thickness_nm: f64,
    pub neff: f64,
    pub group_index: f64,
    /// `full_vector`, `effective_index` or `table`.
    pub model: String,
    /// Where the law came from (a shipped solution, a file, this run).
    pub from: String,
    /// The law's knots: ln k is a natural cubic spline through them, with
    /// straight continuations beyond the ends (process/coupling.rs).
    pub gaps_nm: Vec<f64>,
    pub k_per_um: Vec<f64>,
    pub k_ref_per_um: f64,
    pub g_ref_nm: f64,
    pub g_c_nm: f64,
    pub fit_rms: f64,
    pub min_gap_nm: f64,
    pub min_bend_radius_um: f64,
    pub min_width_nm: f64,
    pub propagation_db_per_cm: f64,
    pub bend_db: f64,
    pub p_pi_mw: f64,
    /// Layers, heater drawing and rule deck of layout.gds.
    pub mask: crate::process::spec::MaskSpec,
    /// Width step of a passive phase shifter's widened section, nm.
    pub passive_step_nm: f64,
}

impl ProcessInfo {
    pub fn of(p: &Process, c: &Characterisation) -> ProcessInfo {
        let law = c.law();
        let fig = c.mode.as_ref();
        ProcessInfo {
            name: p.name.clone(),
            wavelength_um: p.wavelength_um,
            width_nm: p.width_nm,
            thickness_nm: p.film.thickness_um * 1e3,
            neff: fig.map_or(f64::NAN, |f| f.neff),
            group_index: fig.map_or(f64::NAN, |f| f.group_index),
            model: c.model.clone(),
            from: crate::report::process::solution_origin(p, c),
            gaps_nm: law.table.gaps_nm.clone(),
            k_per_um: law.table.k_per_um.clone(),
            k_ref_per_um: law.fit.k_ref_per_um,
            g_ref_nm: law.fit.g_ref_nm,
            g_c_nm: law.fit.g_c_nm,
            fit_rms: law.fit.fit_rms,
            min_gap_nm: p.rules.min_gap_nm,
            min_bend_radius_um: p.rules.min_bend_radius_um,
            min_width_nm: p.rules.min_width_nm,
            propagation_db_per_cm: p.loss.propagation_db_per_cm,
            bend_db: p.loss.bend_db,
            p_pi_mw: p.thermal.p_pi_mw,
            mask: p.mask.clone(),
            passive_step_nm: p.passive.width_step_nm,
        }
    }
}

#[derive(Clone, Debug)]
pub struct Floorplan {
    pub chip: String,
    pub process: ProcessInfo,
    pub strategy: &'static str,
    pub mesh: &'static str,
    /// What the chip should do (the network's unitary), mode order.
    pub target: DMatrix<Complex64>,
    pub modes: Vec<String>,
    pub pitch_um: f64,
    pub guide_width_nm: f64,
    pub tuning: Tuning,
    pub cell_kind: CellKind,
    /// Sorted by x, then by mode.
    pub components: Vec<Component>,
    pub columns: Vec<ColumnRow>,
    /// The final phase section (after the last column).
    pub final_section: ColumnRow,
    pub length_um: f64,
    pub width_um: f64,
    pub heater_power_mw: f64,
    pub beta_per_um: f64,
    /// Loss of every mode's path with and without its balancing sections, dB.
    pub path_loss_db: Vec<f64>,
    pub path_loss_unbalanced_db: Vec<f64>,
    /// Rails whose S-bend would have to move outwards (the cell's end gap
    /// does not fit in the pitch): (component id, offset um).
    pub outward_bends: Vec<(String, f64)>,
}

impl Floorplan {
    pub fn footprint_mm2(&self) -> f64 {
        self.length_um * self.width_um * 1e-6
    }

    pub fn y_of(&self, mode: usize) -> f64 {
        rail_y(self.modes.len(), mode, self.pitch_um)
    }

    /// The product of the components' matrices in x order.
    pub fn transfer(&self) -> DMatrix<Complex64> {
        self.transfer_with(&[])
    }

    /// The transfer with the rail blocks of some cells replaced (component
    /// index, block before the component's loss): a fabricated chip.
    pub fn transfer_with(&self, blocks: &[(usize, DMatrix<Complex64>)]) -> DMatrix<Complex64> {
        let n = self.modes.len();
        let mut u = DMatrix::<Complex64>::identity(n, n);
        let by_component: std::collections::HashMap<usize, &DMatrix<Complex64>> =
            blocks.iter().map(|(k, b)| (*k, b)).collect();
        for (i, c) in self.components.iter().enumerate() {
            if c.modes.is_empty() || matches!(c.kind, Kind::Terminator { .. } | Kind::Port { .. }) {
                continue;
            }
            let m = match by_component.get(&i) {
                Some(b) => b.map(|z| z * 10f64.powf(-c.loss_db / 20.0)),
                None => c.matrix(),
            };
            apply_rows(&mut u, &c.modes, &m);
        }
        u
    }
}

fn apply_rows(u: &mut DMatrix<Complex64>, modes: &[usize], m: &DMatrix<Complex64>) {
    let k = modes.len();
    let mut old = vec![Complex64::new(0.0, 0.0); k];
    for col in 0..u.ncols() {
        for (i, &r) in modes.iter().enumerate() {
            old[i] = u[(r, col)];
        }
        for (i, &r) in modes.iter().enumerate() {
            let mut acc = Complex64::new(0.0, 0.0);
            for (j, o) in old.iter().enumerate() {
                acc += m[(i, j)] * o;
            }
            u[(r, col)] = acc;
        }
    }
}

pub fn rail_y(n: usize, mode: usize, pitch: f64) -> f64 {
    (n - 1 - mode) as f64 * pitch
}

/// An S-bend of lateral offset `d` and radius `r`: (x-length, path, angle).
pub fn s_bend(d_um: f64, r_um: f64) -> (f64, f64, f64) {
    let d = d_um.abs();
    if d < 1e-12 {
        return (0.0, 0.0, 0.0);
    }
    if d >= 2.0 * r_um {
        // Two quarter arcs and a straight run across.
        return (2.0 * r_um, PI * r_um + (d - 2.0 * r_um), PI / 2.0);
    }
    let alpha = (1.0 - d / (2.0 * r_um)).acos();
    (2.0 * r_um * alpha.sin(), 2.0 * r_um * alpha, alpha)
}

/// A cell's rails' centre-to-centre separation from the column's axis at
/// the cell's ends: (upper, lower), um from the midpoint between the rails.
pub(crate) fn entry_offsets_um(d: &CellDesign, width_nm: f64) -> (f64, f64) {
    let w = width_nm * 1e-3;
    match d {
        CellDesign::Geometric(r) => {
            let (gu, gl) = r.design.gaps_nm(0.0);
            (w + gu * 1e-3, w + gl * 1e-3)
        }
        CellDesign::Coupler(k) => {
            let half = (w + k.gap_nm * 1e-3 + 2.0 * rise_um(k)) / 2.0;
            (half, half)
        }
        CellDesign::Mzi(m) => {
            let half = (w + m.coupler.gap_nm * 1e-3 + 2.0 * rise_um(&m.coupler)) / 2.0;
            (half, half)
        }
    }
}

/// How far each guide of a coupler has moved at the end of its bends, um.
fn rise_um(k: &crate::cell::coupler::CouplerDesign) -> f64 {
    k.bend_reach_um * k.bend_reach_um / k.bend_radius_um / 2.0
}

/// A crossing's transfer: the rails exchanged, both with the phase of
/// their (equal) bent paths.
pub fn crossing_matrix(phase_rad: f64) -> DMatrix<Complex64> {
    let e = Complex64::from_polar(1.0, phase_rad);
    let z = Complex64::new(0.0, 0.0);
    DMatrix::from_row_slice(2, 2, &[z, e, e, z])
}

/// The realised block's phases: R ~ diag(e^{ia}, e^{ib}) S diag(1, e^{ic}).
fn block_phases(r: &DMatrix<Complex64>) -> (f64, f64, f64) {
    let b = r[(1, 0)].arg();
    if r[(0, 0)].norm() < 1e-4 {
        // theta = pi/2: only a + c is defined; take c = 0.
        ((-r[(0, 1)]).arg(), b, 0.0)
    } else {
        let a = r[(0, 0)].arg();
        (a, b, (-r[(0, 1)]).arg() - a)
    }
}

/// Per-column geometry, before placement.
struct ColumnGeometry {
    cells: Vec<PlacedCell>,
    crossings: Vec<PlacedCrossing>,
    /// Loss every rail of the column has (balancing sections make up the
    /// difference), dB, propagation apart.
    target_loss_db: f64,
    lead_um: f64,
    cell_um: f64,
    /// Per mode: lead-in and lead-out offsets (um, towards the cell axis)
    /// of rails in a cell; None for idle rails.
    offsets: Vec<Option<(f64, f64)>>,
    /// Per mode: the phase the column's leads and balancing add to the rail
    /// (rails in cells: lead-in, lead-out separately).
    lead_phase: Vec<(f64, f64)>,
    balance_offset_um: f64,
}

#[derive(Debug, thiserror::Error)]
pub enum PlaceError {
    #[error("the process has no mode figures to set the phases with")]
    NoMode,
}

/// Places a realised mesh on the process: the floorplan of cli.md.
#[allow(clippy::too_many_arguments)]
pub fn place(
    chip: &str,
    mode_names: &[String],
    target: &DMatrix<Complex64>,
    mesh: &CellMesh,
    p: &Process,
    c: &Characterisation,
    tuning: Tuning,
    free_output_phase: &[bool],
) -> Result<Floorplan, PlaceError> {
    let n = mesh.mesh.modes;
    let fig = c.mode.as_ref().ok_or(PlaceError::NoMode)?;
    let beta = TAU * fig.neff / p.wavelength_um;
    let pitch = p.rules.rail_pitch_um;
    let radius = p.rules.min_bend_radius_um;
    let depth = mesh.mesh.depth;
    let bend_phase = |d: f64| {
        let (x, path, _) = s_bend(d, radius);
        -beta * (path - x)
    };
    // 1. Column geometry.
    let mut cols: Vec<ColumnGeometry> = (0..depth)
        .map(|_| ColumnGeometry {
            cells: Vec::new(),
            crossings: Vec::new(),
            target_loss_db: 0.0,
            lead_um: 0.0,
            cell_um: 0.0,
            offsets: vec![None; n],
            lead_phase: vec![(0.0, 0.0); n],
            balance_offset_um: 0.0,
        })
        .collect();
    for op in &mesh.ops {
        match op {
            CellOp::Cell(cell) => cols[cell.column].cells.push(cell.clone()),
            CellOp::Crossing(x) => cols[x.column].crossings.push(*x),
            CellOp::Phase { .. } => {}
        }
    }
    let (cross_x, cross_path, _) = s_bend(pitch, radius);
    let crossing_phase = -beta * (cross_path - cross_x);
    let crossing_loss = p.loss.crossing_db + p.loss.bend_db;
    for col in &mut cols {
        let mut max_d: f64 = 0.0;
        for cell in &col.cells {
            let (eu, el) = entry_offsets_um(&cell.design, p.width_nm);
            let (du, dl) = (pitch / 2.0 - eu, pitch / 2.0 - el);
            col.offsets[cell.upper] = Some((du, du));
            col.offsets[cell.upper + 1] = Some((dl, dl));
            for d in [du, dl] {
                col.lead_um = col.lead_um.max(s_bend(d, radius).0);
                max_d = max_d.max(d.abs());
            }
            col.cell_um = col.cell_um.max(cell.design.length_um());
            if matches!(*cell.design, CellDesign::Geometric(_)) {
                // The auxiliary guide's tapers fit in the leads, their tips
                // the heater clearance away from the phase sections beside
                // (the mask's design-rule check found them 0.42 um from a
                // heater when they started right at the section's end).
                col.lead_um = col.lead_um.max(TAPER_UM + p.mask.heater_clearance_um);
            }
        }
        col.balance_offset_um = max_d;
        let mut busy = vec![false; n];
        for x in &col.crossings {
            col.cell_um = col.cell_um.max(cross_x);
            busy[x.upper] = true;
            busy[x.upper + 1] = true;
            col.target_loss_db = col.target_loss_db.max(crossing_loss);
        }
        if !col.cells.is_empty() {
            col.target_loss_db = col.target_loss_db.max(2.0 * p.loss.bend_db);
        }
        for m in 0..n {
            col.lead_phase[m] = match col.offsets[m] {
                Some((din, dout)) => (bend_phase(din), bend_phase(dout)),
                None if busy[m] => (0.0, 0.0),
                None if !col.cells.is_empty() => {
                    let b = bend_phase(max_d);
                    (b, b)
                }
                None => (0.0, 0.0),
            };
        }
    }
    // 2. Phase screens along the mesh.
    let mut screens = vec![vec![0.0f64; n]; depth + 1];
    let mut pending = vec![0.0f64; n];
    let mut cursor = vec![0usize; n];
    let idle = |cols: &[ColumnGeometry], m: usize, from: usize, to: usize| -> f64 {
        (from..to)
            .filter(|&k| {
                cols[k].offsets[m].is_none()
                    && !cols[k]
                        .crossings
                        .iter()
                        .any(|x| x.upper == m || x.upper + 1 == m)
            })
            .map(|k| cols[k].lead_phase[m].0 + cols[k].lead_phase[m].1)
            .sum()
    };
    for op in &mesh.ops {
        match op {
            CellOp::Phase { mode, phase_rad } => pending[*mode] += phase_rad,
            CellOp::Cell(cell) => {
                let (u, l, k) = (cell.upper, cell.upper + 1, cell.column);
                for m in [u, l] {
                    pending[m] -= idle(&cols, m, cursor[m], k);
                    cursor[m] = k + 1;
                }
                let r = effective_block(&cell.design, cols[k].lead_phase[u], cols[k].lead_phase[l]);
                let (a, b, cc) = block_phases(&r);
                screens[k][u] += pending[u] + cell.phi;
                screens[k][l] += pending[l] - cc;
                pending[u] = -a;
                pending[l] = -b;
            }
            CellOp::Crossing(x) => {
                // A crossing commutes with phases (it swaps them), so it
                // needs no screen: with R = e^{i psi} X and the pending
                // phases (p_u, p_l) before it, T(pi/2, phi) diag(p_u, p_l)
                // = diag(-e^{i (p_l - psi)}, e^{i (phi + p_u - psi)}) R.
                let (u, l, k) = (x.upper, x.upper + 1, x.column);
                for m in [u, l] {
                    pending[m] -= idle(&cols, m, cursor[m], k);
                    cursor[m] = k + 1;
                }
                let (pu, pl) = (pending[u], pending[l]);
                pending[u] = pl - crossing_phase + PI;
                pending[l] = x.phi + pu - crossing_phase;
            }
        }
    }
    for m in 0..n {
        screens[depth][m] += pending[m] - idle(&cols, m, cursor[m], depth);
        // Photon counters cannot see a phase on the mode they count.
        if free_output_phase.get(m).copied().unwrap_or(false) {
            screens[depth][m] = 0.0;
        }
    }
    let p_pi = p.thermal.p_pi_mw;
    for s in screens.iter_mut() {
        settle(s, tuning);
    }
    // 3. Placement.
    let mut comps: Vec<Component> = Vec::new();
    let alpha_db_per_um = p.loss.propagation_db_per_cm * 1e-4;
    let y = |m: usize| rail_y(n, m, pitch);
    let mut x = 0.0;
    for m in 0..n {
        comps.push(Component {
            id: format!("in{m}"),
            kind: Kind::Port { side: Side::Input },
            modes: vec![m],
            x_um: 0.0,
            y_um: y(m),
            length_um: 0.0,
            path_um: 0.0,
            phase_rad: 0.0,
            loss_db: 0.0,
            column: None,
        });
        comps.push(straight(
            format!("edge_in{m}"),
            m,
            0.0,
            y(m),
            EDGE_RUN_UM,
            alpha_db_per_um,
            None,
            WaveguideRole::Straight,
            0.0,
        ));
    }
    x += EDGE_RUN_UM;
    let dn_dw = fig.dneff_dw_per_nm;
    let k0 = TAU / p.wavelength_um;
    let passive_rate = k0 * dn_dw * p.passive.width_step_nm; // rad/um
    let section = |screen: &[f64]| -> f64 {
        if screen.iter().all(|ph| ph.abs() < PHASE_TOL) {
            return 0.0;
        }
        match tuning {
            Tuning::Thermal => p.thermal.length_um,
            Tuning::Passive => screen
                .iter()
                .fold(0.0f64, |a, ph| a.max(delay(*ph) / passive_rate))
                .max(1.0),
        }
    };
    let ps_loss = match tuning {
        Tuning::Thermal => p.thermal.loss_db,
        Tuning::Passive => p.passive.loss_db,
    };
    let mut rows = Vec::new();
    let push_section = |comps: &mut Vec<Component>,
                        screen: &[f64],
                        x: f64,
                        column: Option<usize>,
                        tag: &str|
     -> (f64, usize, f64) {
        let len = section(screen);
        if len == 0.0 {
            return (0.0, 0, 0.0);
        }
        let (mut count, mut power) = (0, 0.0);
        for m in 0..n {
            let ph = screen[m];
            if ph.abs() >= PHASE_TOL {
                let pw = match tuning {
                    Tuning::Thermal => p_pi * delay(ph) / PI,
                    Tuning::Passive => 0.0,
                };
                count += 1;
                power += pw;
                comps.push(Component {
                    id: format!("{tag}.ps{m}"),
                    kind: Kind::PhaseShifter {
                        tuning,
                        power_mw: pw,
                        widened_um: match tuning {
                            Tuning::Thermal => 0.0,
                            Tuning::Passive => delay(ph) / passive_rate,
                        },
                    },
                    modes: vec![m],
                    x_um: x,
                    y_um: y(m),
                    length_um: len,
                    path_um: len,
                    phase_rad: ph,
                    loss_db: ps_loss + alpha_db_per_um * len,
                    column,
                });
            } else {
                let mut s = straight(
                    format!("{tag}.ps_idle{m}"),
                    m,
                    x,
                    y(m),
                    len,
                    alpha_db_per_um,
                    column,
                    WaveguideRole::Balance,
                    0.0,
                );
                s.loss_db += ps_loss;
                if ps_loss == 0.0 {
                    s.kind = Kind::Waveguide {
                        role: WaveguideRole::Straight,
                        dummy_offset_um: 0.0,
                        dummy_bends: 0,
                    };
                }
                comps.push(s);
            }
        }
        (len, count, power)
    };
    let mut total_power = 0.0;
    let mut outward = Vec::new();
    for (k, col) in cols.iter().enumerate() {
        let x0 = x;
        let tag = format!("c{k}");
        let (ps_len, ps_count, ps_power) = push_section(&mut comps, &screens[k], x, Some(k), &tag);
        total_power += ps_power;
        x += ps_len;
        let (lead, cell_len) = (col.lead_um, col.cell_um);
        let region = 2.0 * lead + cell_len;
        let first_in_region = comps.len();
        if region > 0.0 {
            let mut in_cell = vec![false; n];
            for cell in &col.cells {
                let (u, l) = (cell.upper, cell.upper + 1);
                in_cell[u] = true;
                in_cell[l] = true;
                let ctag = format!("{tag}.cell{u}");
                let yc = (y(u) + y(l)) / 2.0;
                let len = cell.design.length_um();
                let pad = (cell_len - len) / 2.0;
                for (m, sign) in [(u, -1.0), (l, 1.0)] {
                    let (din, dout) = col.offsets[m].expect("a cell's rails have offsets");
                    for (which, d, xs) in [("in", din, x), ("out", dout, x + lead + cell_len)] {
                        let (bx, path, angle) = s_bend(d, radius);
                        if d < 0.0 {
                            outward.push((format!("{ctag}.lead_{which}{m}"), d));
                        }
                        let (x_bend, x_pad) = if which == "in" {
                            (xs + lead - bx, xs)
                        } else {
                            (xs, xs + bx)
                        };
                        if lead - bx > 1e-12 {
                            comps.push(straight(
                                format!("{ctag}.pad_{which}{m}"),
                                m,
                                x_pad,
                                y(m),
                                lead - bx,
                                alpha_db_per_um,
                                Some(k),
                                WaveguideRole::Straight,
                                0.0,
                            ));
                        }
                        if bx > 0.0 {
                            // Lead-in moves towards the axis, lead-out away.
                            let towards = if which == "in" { sign } else { -sign };
                            comps.push(Component {
                                id: format!("{ctag}.lead_{which}{m}"),
                                kind: Kind::Bend {
                                    radius_um: radius,
                                    offset_um: towards * d,
                                    angle_rad: angle,
                                },
                                modes: vec![m],
                                x_um: x_bend,
                                y_um: y(m),
                                length_um: bx,
                                path_um: path,
                                phase_rad: -beta * (path - bx),
                                loss_db: p.loss.bend_db + alpha_db_per_um * path,
                                column: Some(k),
                            });
                        }
                    }
                    if pad > 1e-12 {
                        for (side, xp) in [("a", x + lead), ("b", x + lead + pad + len)] {
                            comps.push(straight(
                                format!("{ctag}.pad{side}{m}"),
                                m,
                                xp,
                                y(m),
                                pad,
                                alpha_db_per_um,
                                Some(k),
                                WaveguideRole::Straight,
                                0.0,
                            ));
                        }
                    }
                }
                // An MZI's arm holds a thermal shifter: its loss on both
                // rails (the lower arm balanced against the upper).
                let own = match &*cell.design {
                    CellDesign::Mzi(_) => p.thermal.loss_db,
                    _ => 0.0,
                };
                let loss = alpha_db_per_um * len + own;
                comps.push(Component {
                    id: ctag.clone(),
                    kind: Kind::Cell {
                        cell: cell.design.clone(),
                        theta: cell.theta,
                        phi: cell.phi,
                        swap: cell.swap,
                        element: cell.element,
                    },
                    modes: vec![u, l],
                    x_um: x + lead + pad,
                    y_um: yc,
                    length_um: len,
                    path_um: len,
                    phase_rad: 0.0,
                    loss_db: loss,
                    column: Some(k),
                });
                if let CellDesign::Geometric(_) = *cell.design {
                    for (side, xt) in [
                        (Side::Input, x + lead + pad - TAPER_UM),
                        (Side::Output, x + lead + pad + len),
                    ] {
                        comps.push(Component {
                            id: format!(
                                "{ctag}.term_{}",
                                if side == Side::Input { "in" } else { "out" }
                            ),
                            kind: Kind::Terminator {
                                taper_um: TAPER_UM,
                                side,
                            },
                            modes: vec![u, l],
                            x_um: xt,
                            y_um: yc,
                            length_um: TAPER_UM,
                            path_um: TAPER_UM,
                            phase_rad: 0.0,
                            loss_db: 0.0,
                            column: Some(k),
                        });
                    }
                }
                if let CellDesign::Mzi(mz) = &*cell.design {
                    total_power += p_pi * delay(mz.phase_rad) / PI;
                }
            }
            for xc in &col.crossings {
                let (u, l) = (xc.upper, xc.upper + 1);
                in_cell[u] = true;
                in_cell[l] = true;
                let xtag = format!("{tag}.cross{u}");
                let before = lead + (cell_len - cross_x) / 2.0;
                let deficit = col.target_loss_db - crossing_loss;
                for m in [u, l] {
                    if before > 1e-12 || deficit > 1e-12 {
                        let role = if deficit > 1e-12 {
                            WaveguideRole::Balance
                        } else {
                            WaveguideRole::Straight
                        };
                        let mut s = straight(
                            format!("{xtag}.pad_in{m}"),
                            m,
                            x,
                            y(m),
                            before,
                            alpha_db_per_um,
                            Some(k),
                            role,
                            0.0,
                        );
                        s.loss_db += deficit.max(0.0);
                        comps.push(s);
                    }
                    if before > 1e-12 {
                        comps.push(straight(
                            format!("{xtag}.pad_out{m}"),
                            m,
                            x + before + cross_x,
                            y(m),
                            before,
                            alpha_db_per_um,
                            Some(k),
                            WaveguideRole::Straight,
                            0.0,
                        ));
                    }
                }
                comps.push(Component {
                    id: xtag,
                    kind: Kind::Crossing {
                        phi: xc.phi,
                        swap: xc.swap,
                        element: xc.element,
                    },
                    modes: vec![u, l],
                    x_um: x + before,
                    y_um: (y(u) + y(l)) / 2.0,
                    length_um: cross_x,
                    path_um: cross_path,
                    phase_rad: crossing_phase,
                    loss_db: crossing_loss + alpha_db_per_um * cross_path,
                    column: Some(k),
                });
            }
            // Cell rails short of the column's loss (a crossing beside them).
            let cell_deficit = col.target_loss_db - 2.0 * p.loss.bend_db;
            if cell_deficit > 1e-12 {
                for cell in &col.cells {
                    for m in [cell.upper, cell.upper + 1] {
                        let mut s = straight(
                            format!("{tag}.cell{}.bal{m}", cell.upper),
                            m,
                            x,
                            y(m),
                            0.0,
                            alpha_db_per_um,
                            Some(k),
                            WaveguideRole::Balance,
                            0.0,
                        );
                        s.loss_db = cell_deficit;
                        comps.push(s);
                    }
                }
            }
            for m in 0..n {
                if in_cell[m] {
                    continue;
                }
                let (pa, pb) = col.lead_phase[m];
                if col.cells.is_empty() && col.crossings.is_empty() {
                    comps.push(straight(
                        format!("{tag}.idle{m}"),
                        m,
                        x,
                        y(m),
                        region,
                        alpha_db_per_um,
                        Some(k),
                        WaveguideRole::Straight,
                        0.0,
                    ));
                } else {
                    let mut s = straight(
                        format!("{tag}.bal{m}"),
                        m,
                        x,
                        y(m),
                        region,
                        alpha_db_per_um,
                        Some(k),
                        WaveguideRole::Balance,
                        pa + pb,
                    );
                    let bends = if col.cells.is_empty() { 0 } else { 2 };
                    let (bx, path, _) = s_bend(col.balance_offset_um, radius);
                    s.path_um = region + bends as f64 * (path - bx);
                    s.loss_db = col.target_loss_db + alpha_db_per_um * s.path_um;
                    s.kind = Kind::Waveguide {
                        role: WaveguideRole::Balance,
                        dummy_offset_um: if bends > 0 {
                            col.balance_offset_um
                        } else {
                            0.0
                        },
                        dummy_bends: bends,
                    };
                    comps.push(s);
                }
            }
        }
        if region > 0.0 {
            let mut extra = Vec::new();
            top_up(&mut comps[first_in_region..], n, &mut extra);
            for (m, deficit) in extra {
                let mut s = straight(
                    format!("{tag}.topup{m}"),
                    m,
                    x,
                    y(m),
                    0.0,
                    0.0,
                    Some(k),
                    WaveguideRole::Balance,
                    0.0,
                );
                s.loss_db = deficit;
                comps.push(s);
            }
        }
        x += region;
        rows.push(ColumnRow {
            index: k,
            x_um: x0,
            length_um: x - x0,
            phase_section_um: ps_len,
            lead_um: lead,
            cell_um: cell_len,
            cells: col.cells.len(),
            swaps: col.crossings.len(),
            phase_shifters: ps_count,
            heater_power_mw: ps_power,
        });
    }
    let xf = x;
    let (fl, fc, fp) = push_section(&mut comps, &screens[depth], x, None, "out");
    total_power += fp;
    x += fl;
    let final_section = ColumnRow {
        index: depth,
        x_um: xf,
        length_um: fl,
        phase_section_um: fl,
        lead_um: 0.0,
        cell_um: 0.0,
        cells: 0,
        swaps: 0,
        phase_shifters: fc,
        heater_power_mw: fp,
    };
    for m in 0..n {
        comps.push(straight(
            format!("edge_out{m}"),
            m,
            x,
            y(m),
            EDGE_RUN_UM,
            alpha_db_per_um,
            None,
            WaveguideRole::Straight,
            0.0,
        ));
    }
    x += EDGE_RUN_UM;
    for m in 0..n {
        comps.push(Component {
            id: format!("out{m}"),
            kind: Kind::Port { side: Side::Output },
            modes: vec![m],
            x_um: x,
            y_um: y(m),
            length_um: 0.0,
            path_um: 0.0,
            phase_rad: 0.0,
            loss_db: 0.0,
            column: None,
        });
    }
    comps.sort_by(|a, b| {
        a.x_um
            .total_cmp(&b.x_um)
            .then(a.modes.first().cmp(&b.modes.first()))
            .then(a.length_um.total_cmp(&b.length_um))
    });
    let mut loss = vec![0.0; n];
    let mut unbalanced = vec![0.0; n];
    for cpt in &comps {
        for &m in &cpt.modes {
            if matches!(cpt.kind, Kind::Terminator { .. }) {
                continue;
            }
            let own = rail_loss_db(cpt, m);
            loss[m] += own;
            let is_balance = matches!(
                cpt.kind,
                Kind::Waveguide {
                    role: WaveguideRole::Balance,
                    ..
                }
            );
            unbalanced[m] += if is_balance {
                alpha_db_per_um * cpt.length_um
            } else {
                own
            };
        }
    }
    Ok(Floorplan {
        chip: chip.to_owned(),
        process: ProcessInfo::of(p, c),
        strategy: mesh.mesh.strategy.name(),
        mesh: crate::compile::mesh::layout_name(mesh.mesh.layout),
        target: target.clone(),
        modes: mode_names.to_vec(),
        pitch_um: pitch,
        guide_width_nm: p.width_nm,
        tuning,
        cell_kind: mesh.kind,
        components: comps,
        columns: rows,
        final_section,
        length_um: x,
        width_um: (n.saturating_sub(1)) as f64 * pitch + 2.0 * pitch,
        heater_power_mw: total_power,
        beta_per_um: beta,
        path_loss_db: loss,
        path_loss_unbalanced_db: unbalanced,
        outward_bends: outward,
    })
}

/// The loss a rail input sees in a component, dB (cells: what leaves the
/// rails into the auxiliary guide too).
fn rail_loss_db(c: &Component, m: usize) -> f64 {
    match &c.kind {
        Kind::Cell { cell, .. } => {
            let r = cell.rail_block();
            let j = if m == c.modes[0] { 0 } else { 1 };
            let kept = r[(0, j)].norm_sqr() + r[(1, j)].norm_sqr();
            c.loss_db - 10.0 * kept.log10()
        }
        Kind::Terminator { .. } | Kind::Port { .. } => 0.0,
        _ => c.loss_db,
    }
}

/// Makes every rail of one column's region lose the same: the rails below
/// the lossiest get the difference added to their balancing section, or,
/// where they have none, listed in `missing` for a section of their own.
fn top_up(region: &mut [Component], n: usize, missing: &mut Vec<(usize, f64)>) {
    let mut loss = vec![0.0; n];
    for c in region.iter() {
        for &m in &c.modes {
            loss[m] += rail_loss_db(c, m);
        }
    }
    let target = loss.iter().copied().fold(0.0, f64::max);
    for (m, l) in loss.iter().enumerate() {
        let deficit = target - l;
        // Below a micro-decibel (a cell's leakage differs from its
        // neighbour's by about that) no section is worth drawing.
        if deficit <= BALANCE_TOL_DB {
            continue;
        }
        let is_rail_section = |c: &Component, role: WaveguideRole| {
            c.modes == [m] && matches!(c.kind, Kind::Waveguide { role: r, .. } if r == role)
        };
        let pick = match region
            .iter()
            .position(|c| is_rail_section(c, WaveguideRole::Balance))
        {
            Some(i) => Some(i),
            None => region
                .iter()
                .position(|c| is_rail_section(c, WaveguideRole::Straight)),
        };
        match pick {
            Some(i) => {
                let b = &mut region[i];
                b.loss_db += deficit;
                if let Kind::Waveguide { role, .. } = &mut b.kind {
                    *role = WaveguideRole::Balance;
                }
            }
            None => missing.push((m, deficit)),
        }
    }
}

#[allow(clippy::too_many_arguments)]
fn straight(
    id: String,
    m: usize,
    x: f64,
    y: f64,
    len: f64,
    alpha_db_per_um: f64,
    column: Option<usize>,
    role: WaveguideRole,
    phase_rad: f64,
) -> Component {
    Component {
        id,
        kind: Kind::Waveguide {
            role,
            dummy_offset_um: 0.0,
            dummy_bends: 0,
        },
        modes: vec![m],
        x_um: x,
        y_um: y,
        length_um: len,
        path_um: len,
        phase_rad,
        loss_db: alpha_db_per_um * len,
        column,
    }
}

/// The cell's rail block with its lead bends' phases on each rail.
fn effective_block(d: &CellDesign, upper: (f64, f64), lower: (f64, f64)) -> DMatrix<Complex64> {
    let mut r = d.rail_block();
    let (li, lo) = ([upper.0, lower.0], [upper.1, lower.1]);
    for i in 0..2 {
        for j in 0..2 {
            r[(i, j)] *= Complex64::from_polar(1.0, lo[i] + li[j]);
        }
    }
    r
}

/// The optical delay, in [0, 2 pi), that gives the transfer e^{i phase}.
/// Amplitudes go as e^{i(omega t - beta z)} (the cells' coupled-mode
/// equations dA/dz = -i H A, Yariv 1973), so a longer optical path, a
/// heated guide (dn/dT > 0) or a widened one multiplies the field by
/// e^{-i delay}: a shifter set to transfer phase phi delays by -phi mod 2 pi.
pub fn delay(phase_rad: f64) -> f64 {
    let w = (-phase_rad).rem_euclid(TAU);
    if !(PHASE_TOL..=TAU - PHASE_TOL).contains(&w) {
        0.0
    } else {
        w
    }
}

/// Drops the common phase of a screen that minimises the heater power
/// (heaters and widened sections only delay, so each is set to a delay in
/// [0, 2 pi)), and wraps every phase into [0, 2 pi).
fn settle(screen: &mut [f64], tuning: Tuning) {
    let wrap = |x: f64| {
        let w = x.rem_euclid(TAU);
        if !(PHASE_TOL..=TAU - PHASE_TOL).contains(&w) {
            0.0
        } else {
            w
        }
    };
    let cost = |s: &[f64], d: f64| -> f64 { s.iter().map(|&ph| delay(ph - d)).sum() };
    let mut best = (cost(screen, 0.0), 0.0);
    if tuning == Tuning::Thermal || tuning == Tuning::Passive {
        for &cand in screen.iter() {
            let c = cost(screen, cand);
            if c < best.0 - 1e-12 {
                best = (c, cand);
            }
        }
    }
    for ph in screen.iter_mut() {
        *ph = wrap(*ph - best.1);
    }
}

/// A single rail's view used by tests and reports: the effective block of a
/// placed cell (exposed for the netlist tests).
pub fn cell_block_phases(r: &DMatrix<Complex64>) -> (f64, f64, f64) {
    block_phases(r)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_s_bend_of_two_arcs() {
        // Two arcs of radius R turning by alpha: offset 2R(1 - cos alpha),
        // x-length 2R sin alpha, path 2R alpha (circle geometry).
        let (x, path, a) = s_bend(1.0, 5.0);
        assert!((2.0 * 5.0 * (1.0 - a.cos()) - 1.0).abs() < 1e-12);
        assert!((x - 10.0 * a.sin()).abs() < 1e-12);
        assert!(path > x && (path - 10.0 * a).abs() < 1e-12);
        assert_eq!(s_bend(0.0, 5.0), (0.0, 0.0, 0.0));
    }

    #[test]
    fn block_phases_rebuild_the_block() {
        for theta in [0.3, 1.0, std::f64::consts::FRAC_PI_2] {
            let s = crate::compile::mesh::block_matrix(theta, 0.0);
            let (a, b, c) = (0.4, -1.2, 2.2);
            let r = DMatrix::from_fn(2, 2, |i, j| {
                Complex64::from_polar(1.0, [a, b][i] + [0.0, c][j]) * s[i][j]
            });
            let (a2, b2, c2) = block_phases(&r);
            let back = DMatrix::from_fn(2, 2, |i, j| {
                Complex64::from_polar(1.0, [a2, b2][i] + [0.0, c2][j]) * s[i][j]
            });
            assert!((back - r).norm() < 1e-12, "theta {theta}");
        }
    }

    #[test]
    fn settling_a_screen_keeps_differences_and_saves_power() {
        // A common phase is a global phase: the differences stay (mod 2 pi),
        // and the total delay the heaters must make falls.
        let mut s = vec![5.0, 5.5, 6.0];
        let before: Vec<f64> = s.clone();
        let delays = |s: &[f64]| s.iter().map(|&p| delay(p)).sum::<f64>();
        settle(&mut s, Tuning::Thermal);
        for i in 1..3 {
            let d = ((s[i] - s[0]) - (before[i] - before[0])).rem_euclid(TAU);
            assert!(d.min(TAU - d) < 1e-12, "{s:?}");
        }
        assert!(delays(&s) < delays(&before) - 0.8, "{s:?}");
        assert!(s.iter().all(|p| (0.0..TAU).contains(p)));
    }
}
