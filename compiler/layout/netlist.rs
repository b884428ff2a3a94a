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
use serde_json::{Map, Value, json};

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
    pub params: Map<String, Value>,
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

fn f(x: f64) -> Value {
    json!(x)
}

fn params(
    c: &super::floorplan::Component,
    fp: &Floorplan,
    leads: &std::collections::BTreeMap<&str, Vec<&str>>,
) -> (&'static str, Map<String, Value>) {
    let mut m = Map::new();
    let mut put = |k: &str, v: Value| {
        m.insert(k.to_owned(), v);
    };
    let kind = match &c.kind {
        Kind::Port { side } => {
            put(
                "side",
                json!(if *side == Side::Input {
                    "input"
                } else {
                    "output"
                }),
            );
            put("mode_name", json!(fp.modes[c.modes[0]]));
            "port"
        }
        Kind::Waveguide {
            role,
            dummy_offset_um,
            dummy_bends,
        } => {
            put(
                "role",
                json!(match role {
                    WaveguideRole::Straight => "straight",
                    WaveguideRole::Balance => "balance",
                }),
            );
            put("phase_rad", f(c.phase_rad));
            put("loss_db", f(c.loss_db));
            put("path_um", f(c.path_um));
            if *role == WaveguideRole::Balance && *dummy_bends > 0 {
                put("dummy_bends", json!(dummy_bends));
                put("dummy_offset_um", f(*dummy_offset_um));
            }
            "waveguide"
        }
        Kind::Bend {
            radius_um,
            offset_um,
            angle_rad,
        } => {
            put("radius_um", f(*radius_um));
            put("offset_um", f(*offset_um));
            put("angle_rad", f(*angle_rad));
            put("path_um", f(c.path_um));
            put("phase_rad", f(c.phase_rad));
            put("loss_db", f(c.loss_db));
            "bend"
        }
        Kind::PhaseShifter {
            tuning,
            power_mw,
            widened_um,
        } => {
            put("phase_rad", f(c.phase_rad));
            put("tuning", json!(tuning.name()));
            put("length_um", f(c.length_um));
            put("loss_db", f(c.loss_db));
            match tuning {
                super::floorplan::Tuning::Thermal => put("power_mw", f(*power_mw)),
                super::floorplan::Tuning::Passive => put("widened_um", f(*widened_um)),
            }
            "phase_shifter"
        }
        Kind::Crossing { phi, swap, element } => {
            put("mesh_phi", f(*phi));
            put("routing_swap", json!(swap));
            put("element", json!(element));
            put("phase_rad", f(c.phase_rad));
            put("loss_db", f(c.loss_db));
            put("path_um", f(c.path_um));
            put("radius_um", f(fp.process.min_bend_radius_um));
            "crossing"
        }
        Kind::Terminator { taper_um, side } => {
            put("taper_um", f(*taper_um));
            put(
                "side",
                json!(if *side == Side::Input {
                    "input"
                } else {
                    "output"
                }),
            );
            put("tip_width_nm", f(0.0));
            "terminator"
        }
        Kind::Cell {
            cell,
            theta,
            phi,
            swap,
            element,
        } => {
            put("theta", f(*theta));
            put("mesh_phi", f(*phi));
            put("swap", json!(swap));
            put("element", json!(element));
            put("loss_db", f(c.loss_db));
            put(
                "rail_block",
                serde_json::to_value(ComplexMatrix::of(&cell.rail_block())).expect("numbers"),
            );
            put("width_nm", f(fp.guide_width_nm));
            match &**cell {
                CellDesign::Geometric(r) => {
                    let d = &r.design;
                    put("gap_upper_nm", f(d.gap_upper_nm));
                    put("gap_lower_nm", f(d.gap_lower_nm));
                    put("bend_per_m", f(d.bend_per_m()));
                    put("bend_nm_per_um2", f(d.bend_nm_per_um2));
                    put("length_um", f(d.length_um));
                    put("residual", f(d.residual));
                    let (gu, gl) = d.gaps_nm(0.0);
                    put("end_gap_upper_nm", f(gu));
                    put("end_gap_lower_nm", f(gl));
                    put("aux_width_nm", f(fp.guide_width_nm));
                    put("beta_per_um", f(fp.beta_per_um));
                    put("split_error", f(r.quality.split_error));
                    put("leakage", f(r.quality.leakage));
                    put("lead", lead_of(c, fp, leads));
                    "geometric_cell"
                }
                CellDesign::Coupler(k) => {
                    put("gap_nm", f(k.gap_nm));
                    put("straight_um", f(k.straight_um));
                    put("bend_radius_um", f(k.bend_radius_um));
                    put("bend_reach_um", f(k.bend_reach_um));
                    put("length_um", f(k.length_um));
                    put("lead", lead_of(c, fp, leads));
                    "coupler"
                }
                CellDesign::Mzi(z) => {
                    put("phi", f(z.phase_rad));
                    put("arm_um", f(z.arm_um));
                    put("length_um", f(z.length_um));
                    put(
                        "power_mw",
                        f(
                            fp.process.p_pi_mw * z.phase_rad.rem_euclid(std::f64::consts::TAU)
                                / std::f64::consts::PI,
                        ),
                    );
                    put(
                        "coupler",
                        json!({
                            "gap_nm": z.coupler.gap_nm,
                            "straight_um": z.coupler.straight_um,
                            "bend_radius_um": z.coupler.bend_radius_um,
                            "bend_reach_um": z.coupler.bend_reach_um,
                            "length_um": z.coupler.length_um,
                            "rail_block": ComplexMatrix::of(&z.coupler.transfer),
                        }),
                    );
                    put("lead", lead_of(c, fp, leads));
                    "mzi"
                }
            }
        }
    };
    (kind, m)
}

/// The cell's lead-in and lead-out bends, by component id.
fn lead_of(
    c: &super::floorplan::Component,
    fp: &Floorplan,
    leads: &std::collections::BTreeMap<&str, Vec<&str>>,
) -> Value {
    let ids = leads.get(c.id.as_str()).cloned().unwrap_or_default();
    json!({ "bends": ids, "radius_um": fp.process.min_bend_radius_um })
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
