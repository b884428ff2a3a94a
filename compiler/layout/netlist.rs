//! `netlist.json`: the floorplan's components and their port connections
//! (docs/netlist.md; JSON Schema in docs/netlist.schema.json).
//!
//! The components and connections are first a petgraph graph (a node per
//! component, an edge per rail link from one component's output port to
//! the next one's input port on the same mode), so the netlist is checked to
//! be a chain per mode, without a cycle, before it is written. The document
//! holds enough to rebuild the nominal transfer matrix without trilane: each
//! component's matrix on its modes (cells: `rail_block`; single-rail
//! components: `10^(-loss_db/20) e^{i phase_rad}`; ports and terminators:
//! the identity), multiplied in `x_um` order; and enough to re-integrate
//! each cell from its geometry and the process's coupling law.

use super::floorplan::{Floorplan, Kind, Side, WaveguideRole};
use crate::cell::CellDesign;
use nalgebra::DMatrix;
use num_complex::Complex64;
use petgraph::graph::{DiGraph, NodeIndex};
use serde::Serialize;
use serde_json::{Value, json};

pub const FORMAT: &str = "trilane-netlist";
pub const VERSION: u32 = 1;

#[derive(Serialize)]
pub struct ComplexMatrix {
    pub re: Vec<Vec<f64>>,
    pub im: Vec<Vec<f64>>,
}

impl ComplexMatrix {
    pub fn of(m: &DMatrix<Complex64>) -> ComplexMatrix {
        ComplexMatrix {
            re: (0..m.nrows())
                .map(|i| (0..m.ncols()).map(|j| m[(i, j)].re).collect())
                .collect(),
            im: (0..m.nrows())
                .map(|i| (0..m.ncols()).map(|j| m[(i, j)].im).collect())
                .collect(),
        }
    }
}

#[derive(Serialize)]
pub struct Netlist {
    pub format: &'static str,
    pub version: u32,
    pub generator: String,
    pub chip: String,
    pub strategy: &'static str,
    pub mesh: &'static str,
    pub cell_kind: &'static str,
    pub phase_tuning: &'static str,
    pub process: Value,
    pub modes: Vec<WireMode>,
    pub length_um: f64,
    pub width_um: f64,
    pub components: Vec<WireComponent>,
    pub connections: Vec<Connection>,
    pub target_unitary: ComplexMatrix,
    /// The compiler's own product of the components (for comparison).
    pub transfer_matrix: ComplexMatrix,
}

#[derive(Serialize)]
pub struct WireMode {
    pub index: usize,
    pub name: String,
    pub y_um: f64,
}

#[derive(Serialize)]
pub struct WireComponent {
    pub id: String,
    pub kind: &'static str,
    pub modes: Vec<usize>,
    pub ports: Vec<String>,
    pub params: Params,
    pub x_um: f64,
    pub y_um: f64,
    pub length_um: f64,
    pub column: Option<usize>,
}

#[derive(Clone, Serialize, PartialEq, Debug)]
pub struct Endpoint {
    pub component: String,
    pub port: String,
}

#[derive(Clone, Serialize, PartialEq, Debug)]
pub struct Connection {
    pub mode: usize,
    pub from: Endpoint,
    pub to: Endpoint,
}

/// Port names: `in.<mode>` and `out.<mode>` for every mode a component
/// carries; ports have one (`out.<mode>` at the input edge, `in.<mode>` at
/// the output edge).
fn ports(kind: &Kind, modes: &[usize]) -> Vec<String> {
    match kind {
        Kind::Port { side: Side::Input } => vec![format!("out.{}", modes[0])],
        Kind::Port { side: Side::Output } => vec![format!("in.{}", modes[0])],
        Kind::Terminator { .. } => vec!["aux".into()],
        _ => modes
            .iter()
            .map(|m| format!("in.{m}"))
            .chain(modes.iter().map(|m| format!("out.{m}")))
            .collect(),
    }
}

/// A component's parameters, by kind (docs/netlist.md). Fields are in
/// alphabetical order, the order the document has always had; optional
/// ones are left out when they do not apply.
#[derive(Serialize)]
#[serde(untagged)]
pub enum Params {
    Port {
        mode_name: String,
        side: &'static str,
    },
    Waveguide {
        #[serde(skip_serializing_if = "Option::is_none")]
        dummy_bends: Option<usize>,
        #[serde(skip_serializing_if = "Option::is_none")]
        dummy_offset_um: Option<f64>,
        loss_db: f64,
        path_um: f64,
        phase_rad: f64,
        role: &'static str,
    },
    Bend {
        angle_rad: f64,
        loss_db: f64,
        offset_um: f64,
        path_um: f64,
        phase_rad: f64,
        radius_um: f64,
    },
    PhaseShifter {
        length_um: f64,
        loss_db: f64,
        phase_rad: f64,
        #[serde(skip_serializing_if = "Option::is_none")]
        power_mw: Option<f64>,
        tuning: &'static str,
        #[serde(skip_serializing_if = "Option::is_none")]
        widened_um: Option<f64>,
    },
    Crossing {
        element: Option<usize>,
        loss_db: f64,
        mesh_phi: f64,
        path_um: f64,
        phase_rad: f64,
        radius_um: f64,
        routing_swap: bool,
    },
    Terminator {
        side: &'static str,
        taper_um: f64,
        tip_width_nm: f64,
    },
    Geometric {
        aux_width_nm: f64,
        bend_nm_per_um2: f64,
        bend_per_m: f64,
        beta_per_um: f64,
        element: Option<usize>,
        end_gap_lower_nm: f64,
        end_gap_upper_nm: f64,
        gap_lower_nm: f64,
        gap_upper_nm: f64,
        lead: Lead,
        leakage: f64,
        length_um: f64,
        loss_db: f64,
        mesh_phi: f64,
        rail_block: ComplexMatrix,
        residual: f64,
        split_error: f64,
        swap: bool,
        theta: f64,
        width_nm: f64,
    },
    Coupler {
        bend_radius_um: f64,
        bend_reach_um: f64,
        element: Option<usize>,
        gap_nm: f64,
        lead: Lead,
        length_um: f64,
        loss_db: f64,
        mesh_phi: f64,
        rail_block: ComplexMatrix,
        straight_um: f64,
        swap: bool,
        theta: f64,
        width_nm: f64,
    },
    Mzi {
        arm_um: f64,
        coupler: MziCoupler,
        element: Option<usize>,
        lead: Lead,
        length_um: f64,
        loss_db: f64,
        mesh_phi: f64,
        phi: f64,
        power_mw: f64,
        rail_block: ComplexMatrix,
        swap: bool,
        theta: f64,
        width_nm: f64,
    },
}

#[derive(Serialize)]
pub struct Lead {
    pub bends: Vec<String>,
    pub radius_um: f64,
}

#[derive(Serialize)]
pub struct MziCoupler {
    pub bend_radius_um: f64,
    pub bend_reach_um: f64,
    pub gap_nm: f64,
    pub length_um: f64,
    pub rail_block: ComplexMatrix,
    pub straight_um: f64,
}

fn side_name(side: Side) -> &'static str {
    match side {
        Side::Input => "input",
        Side::Output => "output",
    }
}

fn params(
    c: &super::floorplan::Component,
    fp: &Floorplan,
    leads: &std::collections::BTreeMap<&str, Vec<&str>>,
) -> (&'static str, Params) {
    let lead = || Lead {
        bends: leads
            .get(c.id.as_str())
            .map(|v| v.iter().map(|s| (*s).to_owned()).collect())
            .unwrap_or_default(),
        radius_um: fp.process.min_bend_radius_um,
    };
    match &c.kind {
        Kind::Port { side } => (
            "port",
            Params::Port {
                mode_name: fp.modes[c.modes[0]].clone(),
                side: side_name(*side),
            },
        ),
        Kind::Waveguide {
            role,
            dummy_offset_um,
            dummy_bends,
        } => {
            let dummy = *role == WaveguideRole::Balance && *dummy_bends > 0;
            (
                "waveguide",
                Params::Waveguide {
                    dummy_bends: dummy.then_some(*dummy_bends),
                    dummy_offset_um: dummy.then_some(*dummy_offset_um),
                    loss_db: c.loss_db,
                    path_um: c.path_um,
                    phase_rad: c.phase_rad,
                    role: match role {
                        WaveguideRole::Straight => "straight",
                        WaveguideRole::Balance => "balance",
                    },
                },
            )
        }
        Kind::Bend {
            radius_um,
            offset_um,
            angle_rad,
        } => (
            "bend",
            Params::Bend {
                angle_rad: *angle_rad,
                loss_db: c.loss_db,
                offset_um: *offset_um,
                path_um: c.path_um,
                phase_rad: c.phase_rad,
                radius_um: *radius_um,
            },
        ),
        Kind::PhaseShifter {
            tuning,
            power_mw,
            widened_um,
        } => {
            let thermal = *tuning == super::floorplan::Tuning::Thermal;
            (
                "phase_shifter",
                Params::PhaseShifter {
                    length_um: c.length_um,
                    loss_db: c.loss_db,
                    phase_rad: c.phase_rad,
                    power_mw: thermal.then_some(*power_mw),
                    tuning: tuning.name(),
                    widened_um: (!thermal).then_some(*widened_um),
                },
            )
        }
        Kind::Crossing { phi, swap, element } => (
            "crossing",
            Params::Crossing {
                element: *element,
                loss_db: c.loss_db,
                mesh_phi: *phi,
                path_um: c.path_um,
                phase_rad: c.phase_rad,
                radius_um: fp.process.min_bend_radius_um,
                routing_swap: *swap,
            },
        ),
        Kind::Terminator { taper_um, side } => (
            "terminator",
            Params::Terminator {
                side: side_name(*side),
                taper_um: *taper_um,
                // The narrowest tip the process makes (mask.rs draws it).
                tip_width_nm: fp.process.min_width_nm,
            },
        ),
        Kind::Cell {
            cell,
            theta,
            phi,
            swap,
            element,
        } => {
            let rail_block = ComplexMatrix::of(&cell.rail_block());
            match &**cell {
                CellDesign::Geometric(r) => {
                    let d = &r.design;
                    let (gu, gl) = d.gaps_nm(0.0);
                    (
                        "geometric_cell",
                        Params::Geometric {
                            aux_width_nm: fp.guide_width_nm,
                            bend_nm_per_um2: d.bend_nm_per_um2,
                            bend_per_m: d.bend_per_m(),
                            beta_per_um: fp.beta_per_um,
                            element: *element,
                            end_gap_lower_nm: gl,
                            end_gap_upper_nm: gu,
                            gap_lower_nm: d.gap_lower_nm,
                            gap_upper_nm: d.gap_upper_nm,
                            lead: lead(),
                            leakage: r.quality.leakage,
                            length_um: d.length_um,
                            loss_db: c.loss_db,
                            mesh_phi: *phi,
                            rail_block,
                            residual: d.residual,
                            split_error: r.quality.split_error,
                            swap: *swap,
                            theta: *theta,
                            width_nm: fp.guide_width_nm,
                        },
                    )
                }
                CellDesign::Coupler(k) => (
                    "coupler",
                    Params::Coupler {
                        bend_radius_um: k.bend_radius_um,
                        bend_reach_um: k.bend_reach_um,
                        element: *element,
                        gap_nm: k.gap_nm,
                        lead: lead(),
                        length_um: k.length_um,
                        loss_db: c.loss_db,
                        mesh_phi: *phi,
                        rail_block,
                        straight_um: k.straight_um,
                        swap: *swap,
                        theta: *theta,
                        width_nm: fp.guide_width_nm,
                    },
                ),
                CellDesign::Mzi(z) => (
                    "mzi",
                    Params::Mzi {
                        arm_um: z.arm_um,
                        coupler: MziCoupler {
                            bend_radius_um: z.coupler.bend_radius_um,
                            bend_reach_um: z.coupler.bend_reach_um,
                            gap_nm: z.coupler.gap_nm,
                            length_um: z.coupler.length_um,
                            rail_block: ComplexMatrix::of(&z.coupler.transfer),
                            straight_um: z.coupler.straight_um,
                        },
                        element: *element,
                        lead: lead(),
                        length_um: z.length_um,
                        loss_db: c.loss_db,
                        mesh_phi: *phi,
                        phi: z.phase_rad,
                        power_mw: fp.process.p_pi_mw
                            * z.phase_rad.rem_euclid(std::f64::consts::TAU)
                            / std::f64::consts::PI,
                        rail_block,
                        swap: *swap,
                        theta: *theta,
                        width_nm: fp.guide_width_nm,
                    },
                ),
            }
        }
    }
}

/// Lead bends by the id of their cell (`<cell>.lead_in<m>` / `lead_out`).
fn leads_by_cell(fp: &Floorplan) -> std::collections::BTreeMap<&str, Vec<&str>> {
    let mut m: std::collections::BTreeMap<&str, Vec<&str>> = Default::default();
    for o in &fp.components {
        if let Kind::Bend { .. } = o.kind
            && let Some(i) = o.id.find(".lead_")
        {
            m.entry(&o.id[..i]).or_default().push(o.id.as_str());
        }
    }
    m
}

#[derive(Debug, thiserror::Error)]
pub enum NetlistError {
    #[error("mode {mode} is not one chain from its input port to its output port")]
    Broken { mode: usize },
    #[error("the connections hold a cycle")]
    Cycle,
}

/// The connection graph: node weights are indices into
/// `fp.components`, edges carry the mode.
pub fn graph(fp: &Floorplan) -> Result<DiGraph<usize, usize>, NetlistError> {
    let n = fp.modes.len();
    let mut g = DiGraph::<usize, usize>::new();
    let nodes: Vec<NodeIndex> = (0..fp.components.len()).map(|i| g.add_node(i)).collect();
    let mut last: Vec<Option<usize>> = vec![None; n];
    for (i, c) in fp.components.iter().enumerate() {
        if matches!(c.kind, Kind::Terminator { .. }) {
            continue;
        }
        for &m in &c.modes {
            if let Some(prev) = last[m] {
                g.add_edge(nodes[prev], nodes[i], m);
            } else if !matches!(c.kind, Kind::Port { side: Side::Input }) {
                return Err(NetlistError::Broken { mode: m });
            }
            last[m] = Some(i);
        }
    }
    for (m, l) in last.iter().enumerate() {
        match l {
            Some(i) if matches!(fp.components[*i].kind, Kind::Port { side: Side::Output }) => {}
            _ => return Err(NetlistError::Broken { mode: m }),
        }
    }
    petgraph::algo::toposort(&g, None).map_err(|_| NetlistError::Cycle)?;
    Ok(g)
}

pub fn netlist(fp: &Floorplan) -> Result<Netlist, NetlistError> {
    let g = graph(fp)?;
    let mut connections: Vec<Connection> = g
        .edge_indices()
        .map(|e| {
            let (a, b) = g.edge_endpoints(e).expect("an edge has ends");
            let m = g[e];
            Connection {
                mode: m,
                from: Endpoint {
                    component: fp.components[g[a]].id.clone(),
                    port: format!("out.{m}"),
                },
                to: Endpoint {
                    component: fp.components[g[b]].id.clone(),
                    port: format!("in.{m}"),
                },
            }
        })
        .collect();
    connections.sort_by_key(|c| c.mode);
    let p = &fp.process;
    let process = json!({
        "name": p.name,
        "wavelength_um": p.wavelength_um,
        "width_nm": p.width_nm,
        "thickness_nm": p.thickness_nm,
        "neff": p.neff,
        "group_index": p.group_index,
        "rail_pitch_um": fp.pitch_um,
        "min_gap_nm": p.min_gap_nm,
        "min_width_nm": p.min_width_nm,
        "min_bend_radius_um": p.min_bend_radius_um,
        "propagation_db_per_cm": p.propagation_db_per_cm,
        "bend_db": p.bend_db,
        "p_pi_mw": p.p_pi_mw,
        "coupling": {
            "model": p.model,
            "solver": match p.model.as_str() {
                "full_vector" => "full-vector finite-difference mode solver (transverse H, Richardson-extrapolated)",
                "effective_index" => "effective index method",
                _ => "a coupling table",
            },
            "from": p.from,
            "law": "ln k is a natural cubic spline of the gap through the table, continued as straight lines beyond its ends",
            "table": p.gaps_nm.iter().zip(&p.k_per_um).map(|(g, k)| json!({"gap_nm": g, "k_per_um": k})).collect::<Vec<_>>(),
            "fit": {"k_ref_per_um": p.k_ref_per_um, "g_ref_nm": p.g_ref_nm, "g_c_nm": p.g_c_nm, "fit_rms": p.fit_rms},
        },
    });
    let leads = leads_by_cell(fp);
    let components = fp
        .components
        .iter()
        .map(|c| {
            let (kind, params) = params(c, fp, &leads);
            WireComponent {
                id: c.id.clone(),
                kind,
                ports: ports(&c.kind, &c.modes),
                modes: c.modes.clone(),
                params,
                x_um: c.x_um,
                y_um: c.y_um,
                length_um: c.length_um,
                column: c.column,
            }
        })
        .collect();
    Ok(Netlist {
        format: FORMAT,
        version: VERSION,
        generator: format!("trilane {}", env!("CARGO_PKG_VERSION")),
        chip: fp.chip.clone(),
        strategy: fp.strategy,
        mesh: fp.mesh,
        cell_kind: fp.cell_kind.name(),
        phase_tuning: fp.tuning.name(),
        process,
        modes: fp
            .modes
            .iter()
            .enumerate()
            .map(|(i, name)| WireMode {
                index: i,
                name: name.clone(),
                y_um: fp.y_of(i),
            })
            .collect(),
        length_um: fp.length_um,
        width_um: fp.width_um,
        components,
        connections,
        target_unitary: ComplexMatrix::of(&fp.target),
        transfer_matrix: ComplexMatrix::of(&fp.transfer()),
    })
}

/// The netlist as pretty JSON text.
pub fn to_json(fp: &Floorplan) -> Result<String, NetlistError> {
    Ok(serde_json::to_string_pretty(&netlist(fp)?).expect("the netlist serialises") + "\n")
}
