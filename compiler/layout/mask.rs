//! The mask: every component of the floorplan drawn as polygons, one
//! structure per distinct component (identical cells, bends and straights
//! share one), instanced at the components' places; written as `layout.gds`
//! (gds.rs) and handed to the design-rule checks (drc.rs) as drawn.
//!
//! Drawing (docs/layout.md; x along the light, y up, micrometres):
//! - a guide is a strip: its two edges sampled pairwise across it;
//! - straight guides are rectangles; an S-bend is two circular arcs of the
//!   floorplan's radius (floorplan.rs), its edges offset by half the width
//!   along the normal, sampled so that no chord leaves the true edge by more
//!   than [`ARC_DEVIATION_UM`] (chord sagitta `r (1 - cos(dphi / 2))`);
//! - a geometric cell's rails follow the design's exact parabolas: the
//!   inner edge at the designed gap `g(z) = g_min + b (z - L/2)^2` from the
//!   auxiliary guide at every z, the outer edge one guide width above it
//!   (the cross-sections the coupled-mode model integrates are taken at
//!   fixed z; the width across the path is `w cos(alpha)`, 0.06 % less at
//!   the cells' end slopes of 0.034 rad), sampled to [`CELL_DEVIATION_UM`]
//!   (chord sagitta of the parabola, `b h^2 / 4` for a chord of length h),
//!   with a vertex at the cell's centre, where the gap is smallest;
//! - a directional coupler's guides follow the parabolas `x^2 / 2R` its
//!   coupling model integrates (cell/coupler.rs), which have the bend
//!   radius R at their vertex and more elsewhere;
//! - auxiliary guides end in linear tapers to the process's minimum width;
//! - a thermal phase shifter is a heater stripe over its guide with a
//!   square contact at each end; a passive one a section widened by the
//!   process's width step over its widened length, centred.
//!
//! Coordinates are written on a 1 nm grid. Design-rule checks run on the
//! exact shapes before that rounding; the rounding moves a vertex by at most
//! 0.5 nm.

use super::drc::{MaskLayer, Point, Shape};
use super::floorplan::{Floorplan, Kind, Side, Tuning, WaveguideRole, s_bend};
use super::gds::{GdsError, GdsWriter};
use crate::cell::CellDesign;
use std::collections::BTreeMap;

/// Largest distance of a drawn bend edge from the true arc, um.
pub const ARC_DEVIATION_UM: f64 = 1e-3;
/// Largest distance of a drawn cell rail edge from its parabola, um: finer
/// than the bends, since a cell's coupling follows its gaps exponentially.
pub const CELL_DEVIATION_UM: f64 = 1e-4;

/// One drawn shape in its structure's coordinates.
#[derive(Clone, Debug, PartialEq)]
pub struct Drawn {
    pub layer: MaskLayer,
    pub polygon: Vec<Point>,
    /// A guide strip (drc.rs: edges paired across the guide).
    pub strip: bool,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Structure {
    pub name: String,
    pub shapes: Vec<Drawn>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Instance {
    pub structure: usize,
    /// Index into the floorplan's components.
    pub component: usize,
    pub origin: Point,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Label {
    pub at: Point,
    pub height_um: f64,
    pub text: String,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Mask {
    pub top: String,
    pub structures: Vec<Structure>,
    pub instances: Vec<Instance>,
    pub labels: Vec<Label>,
    /// The chip's outline: its length by its width.
    pub outline: [Point; 4],
}

/// A strip from two edges sampled pairwise (same length, start to end).
fn strip(layer: MaskLayer, left: Vec<Point>, right: Vec<Point>) -> Drawn {
    let mut polygon = left;
    polygon.extend(right.into_iter().rev());
    Drawn {
        layer,
        polygon,
        strip: true,
    }
}

fn rect(layer: MaskLayer, x0: f64, x1: f64, y0: f64, y1: f64) -> Drawn {
    Drawn {
        layer,
        polygon: vec![[x0, y0], [x1, y0], [x1, y1], [x0, y1]],
        strip: false,
    }
}

fn straight(len: f64, w: f64) -> Drawn {
    strip(
        MaskLayer::Core,
        vec![[0.0, w / 2.0], [len, w / 2.0]],
        vec![[0.0, -w / 2.0], [len, -w / 2.0]],
    )
}

/// Centre-line points and tangent angles of an S-bend of lateral offset
/// `d` (signed) and radius `r` from (x0, y0), as floorplan.rs lays it.
fn s_bend_centre(x0: f64, y0: f64, d: f64, r: f64, w: f64) -> Vec<(Point, f64)> {
    let (bx, _, alpha) = s_bend(d, r);
    let s = d.signum();
    let outer = r + w / 2.0;
    let dphi = 2.0 * (1.0 - ARC_DEVIATION_UM / outer).acos();
    let n = ((alpha / dphi).ceil() as usize).max(1);
    let mut pts = Vec::new();
    for k in 0..=n {
        let p = alpha * k as f64 / n as f64;
        pts.push(([x0 + r * p.sin(), y0 + s * r * (1.0 - p.cos())], s * p));
    }
    if d.abs() >= 2.0 * r {
        // Two quarter arcs with a straight run across between them.
        pts.push(([x0 + r, y0 + d - s * r], s * alpha));
    }
    for k in (0..n).rev() {
        let p = alpha * k as f64 / n as f64;
        pts.push((
            [x0 + bx - r * p.sin(), y0 + d - s * r * (1.0 - p.cos())],
            s * p,
        ));
    }
    pts
}

fn offset_strip(centre: &[(Point, f64)], w: f64) -> Drawn {
    let h = w / 2.0;
    let edge = |sign: f64| -> Vec<Point> {
        centre
            .iter()
            .map(|&([x, y], t)| [x - sign * h * t.sin(), y + sign * h * t.cos()])
            .collect()
    };
    strip(MaskLayer::Core, edge(1.0), edge(-1.0))
}

/// Samples of [0, len] so that a parabola of curvature `kappa` (1/um) has
/// chords within `dev` of it (sagitta kappa h^2 / 8), an even count so the
/// middle is a sample.
fn parabola_samples(len: f64, kappa: f64, dev: f64) -> Vec<f64> {
    let h = if kappa > 0.0 {
        (8.0 * dev / kappa).sqrt()
    } else {
        len
    };
    let mut n = ((len / h).ceil() as usize).max(2);
    n += n % 2;
    (0..=n).map(|k| len * k as f64 / n as f64).collect()
}

/// A rail whose inner edge is `inner(z)` from the axis (um, signed by
/// `side`: +1 above, -1 below), the outer edge a width beyond.
fn rail(zs: &[f64], inner: &dyn Fn(f64) -> f64, side: f64, w: f64) -> Drawn {
    let near: Vec<Point> = zs.iter().map(|&z| [z, side * inner(z)]).collect();
    let far: Vec<Point> = zs.iter().map(|&z| [z, side * (inner(z) + w)]).collect();
    if side > 0.0 {
        strip(MaskLayer::Core, far, near)
    } else {
        strip(MaskLayer::Core, near, far)
    }
}

fn heater(len: f64, y: f64, fp: &Floorplan) -> Vec<Drawn> {
    let m = &fp.process.mask;
    let (hw, c) = (m.heater_width_um, m.contact_um.min(len / 2.0));
    vec![
        rect(MaskLayer::Heater, 0.0, len, y - hw / 2.0, y + hw / 2.0),
        rect(MaskLayer::Contact, 0.0, c, y - c / 2.0, y + c / 2.0),
        rect(MaskLayer::Contact, len - c, len, y - c / 2.0, y + c / 2.0),
    ]
}

/// A coupler's two guides from z0, inner edges at `g/2 + x^2 / 2R`.
fn coupler_guides(k: &crate::cell::coupler::CouplerDesign, z0: f64, w: f64) -> Vec<Drawn> {
    let (reach, straight_um, r) = (k.bend_reach_um, k.straight_um, k.bend_radius_um);
    let bend = parabola_samples(reach, 1.0 / r, ARC_DEVIATION_UM);
    let mut zs: Vec<f64> = bend.clone();
    zs.extend(bend.iter().map(|z| z + reach + straight_um).skip(1));
    let inner = |z: f64| {
        let x = crate::cell::coupler::beyond_straight_um(z, reach, straight_um);
        k.gap_nm * 1e-3 / 2.0 + x * x / (2.0 * r)
    };
    let zs_local: Vec<f64> = zs.iter().map(|z| z + z0).collect();
    let shifted = |z: f64| inner(z - z0);
    vec![
        rail(&zs_local, &shifted, 1.0, w),
        rail(&zs_local, &shifted, -1.0, w),
    ]
}

/// The shapes of one component in its own coordinates (origin at its
/// `x_um`, `y_um`), and the key that tells identical ones apart.
fn draw(fp: &Floorplan, i: usize) -> Option<(String, &'static str, Vec<Drawn>)> {
    let c = &fp.components[i];
    let w = fp.guide_width_nm * 1e-3;
    let r = fp.process.min_bend_radius_um;
    let bits = |x: f64| format!("{:016x}", x.to_bits());
    let len = c.length_um;
    Some(match &c.kind {
        Kind::Port { .. } => return None,
        Kind::Waveguide {
            role,
            dummy_offset_um,
            dummy_bends,
        } => {
            if len <= 0.0 {
                return None;
            }
            if *role == WaveguideRole::Balance && *dummy_bends > 0 && *dummy_offset_um > 0.0 {
                // Out by the offset and back, the path the balance has.
                let d = -dummy_offset_um;
                let (bx, _, _) = s_bend(d, r);
                let down = offset_strip(&s_bend_centre(0.0, 0.0, d, r, w), w);
                let run = strip(
                    MaskLayer::Core,
                    vec![[bx, d + w / 2.0], [len - bx, d + w / 2.0]],
                    vec![[bx, d - w / 2.0], [len - bx, d - w / 2.0]],
                );
                let up = offset_strip(&s_bend_centre(len - bx, d, -d, r, w), w);
                let key = format!("balance {} {}", bits(len), bits(*dummy_offset_um));
                (key, "balance", vec![down, run, up])
            } else {
                (format!("wg {}", bits(len)), "wg", vec![straight(len, w)])
            }
        }
        Kind::Bend { offset_um, .. } => {
            let key = format!("bend {}", bits(*offset_um));
            let centre = s_bend_centre(0.0, 0.0, *offset_um, r, w);
            (key, "bend", vec![offset_strip(&centre, w)])
        }
        Kind::PhaseShifter {
            tuning: Tuning::Thermal,
            ..
        } => {
            let mut shapes = vec![straight(len, w)];
            shapes.extend(heater(len, 0.0, fp));
            (format!("heater {}", bits(len)), "heater", shapes)
        }
        Kind::PhaseShifter {
            tuning: Tuning::Passive,
            widened_um,
            ..
        } => {
            let wide = widened_um.clamp(0.0, len);
            let (a, b) = ((len - wide) / 2.0, (len + wide) / 2.0);
            let big = w + fp.process.passive_step_nm * 1e-3;
            let edge = |s: f64| -> Vec<Point> {
                vec![
                    [0.0, s * w / 2.0],
                    [a, s * w / 2.0],
                    [a, s * big / 2.0],
                    [b, s * big / 2.0],
                    [b, s * w / 2.0],
                    [len, s * w / 2.0],
                ]
            };
            let key = format!("passive {} {}", bits(len), bits(wide));
            (
                key,
                "passive",
                vec![strip(MaskLayer::Core, edge(1.0), edge(-1.0))],
            )
        }
        Kind::Terminator { taper_um, side } => {
            let tip = fp.process.min_width_nm * 1e-3;
            let (w0, w1) = if *side == Side::Input {
                (tip, w)
            } else {
                (w, tip)
            };
            let shape = strip(
                MaskLayer::Core,
                vec![[0.0, w0 / 2.0], [*taper_um, w1 / 2.0]],
                vec![[0.0, -w0 / 2.0], [*taper_um, -w1 / 2.0]],
            );
            let (key, prefix) = if *side == Side::Input {
                (format!("taper_in {}", bits(*taper_um)), "taper_in")
            } else {
                (format!("taper_out {}", bits(*taper_um)), "taper_out")
            };
            (key, prefix, vec![shape])
        }
        Kind::Crossing { .. } => {
            let p = fp.pitch_um;
            let a = offset_strip(&s_bend_centre(0.0, p / 2.0, -p, r, w), w);
            let b = offset_strip(&s_bend_centre(0.0, -p / 2.0, p, r, w), w);
            (format!("crossing {}", bits(p)), "crossing", vec![a, b])
        }
        Kind::Cell { cell, .. } => match &**cell {
            CellDesign::Geometric(refined) => {
                let d = &refined.design;
                let l = d.length_um;
                let zs = parabola_samples(l, 2.0 * d.bend_nm_per_um2 * 1e-3, CELL_DEVIATION_UM);
                let upper = |z: f64| w / 2.0 + d.gaps_nm(z).0 * 1e-3;
                let lower = |z: f64| w / 2.0 + d.gaps_nm(z).1 * 1e-3;
                let shapes = vec![
                    rail(&zs, &upper, 1.0, w),
                    straight(l, w),
                    rail(&zs, &lower, -1.0, w),
                ];
                let key = format!(
                    "geometric {} {} {} {}",
                    bits(d.gap_upper_nm),
                    bits(d.gap_lower_nm),
                    bits(d.bend_nm_per_um2),
                    bits(l)
                );
                (key, "geometric", shapes)
            }
            CellDesign::Coupler(k) => {
                let key = format!(
                    "coupler {} {} {}",
                    bits(k.gap_nm),
                    bits(k.straight_um),
                    bits(k.bend_reach_um)
                );
                (key, "coupler", coupler_guides(k, 0.0, w))
            }
            CellDesign::Mzi(z) => {
                let k = &z.coupler;
                // The arms keep the couplers' end separation, where the
                // lead bends meet them (floorplan.rs).
                let half = super::floorplan::entry_offsets_um(cell, fp.guide_width_nm).0;
                let mut shapes = coupler_guides(k, 0.0, w);
                let x0 = k.length_um;
                for s in [1.0, -1.0] {
                    shapes.push(strip(
                        MaskLayer::Core,
                        vec![
                            [x0, s * half + w / 2.0],
                            [x0 + z.arm_um, s * half + w / 2.0],
                        ],
                        vec![
                            [x0, s * half - w / 2.0],
                            [x0 + z.arm_um, s * half - w / 2.0],
                        ],
                    ));
                }
                for mut h in heater(z.arm_um, half, fp) {
                    for p in &mut h.polygon {
                        p[0] += x0;
                    }
                    shapes.push(h);
                }
                shapes.extend(coupler_guides(k, x0 + z.arm_um, w));
                let key = format!(
                    "mzi {} {} {} {}",
                    bits(k.gap_nm),
                    bits(k.straight_um),
                    bits(z.arm_um),
                    bits(k.bend_reach_um)
                );
                (key, "mzi", shapes)
            }
        },
    })
}

/// A GDSII structure name: letters, digits and `_` only.
fn gds_name(s: &str) -> String {
    let mut out: String = s
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect();
    out.truncate(32);
    out
}

/// The floorplan's mask.
pub fn mask(fp: &Floorplan) -> Mask {
    let mut structures: Vec<Structure> = Vec::new();
    let mut by_key: BTreeMap<String, usize> = BTreeMap::new();
    let mut counts: BTreeMap<&'static str, usize> = BTreeMap::new();
    let mut instances = Vec::new();
    let mut labels = Vec::new();
    let label_h = fp.pitch_um / 6.0;
    let mut cur: Vec<f64> = (0..fp.modes.len()).map(|m| fp.y_of(m)).collect();
    for (i, c) in fp.components.iter().enumerate() {
        match &c.kind {
            Kind::Port { side } => {
                let name = fp.modes.get(c.modes[0]).cloned().unwrap_or_default();
                let dx = if *side == Side::Input {
                    0.5
                } else {
                    -0.5 - label_h * 0.6 * name.len() as f64
                };
                labels.push(Label {
                    at: [c.x_um + dx, c.y_um + fp.pitch_um / 4.0],
                    height_um: label_h,
                    text: name,
                });
            }
            Kind::Cell { theta, .. } => {
                labels.push(Label {
                    at: [c.x_um, c.y_um],
                    height_um: label_h,
                    text: format!("{} theta={theta:.6}", c.id),
                });
            }
            _ => {}
        }
        // A rail's own y: the floorplan gives single-rail components the
        // rail's pitch position; between a cell's leads the rail is where
        // its bends took it.
        let y = match (&c.kind, c.modes.as_slice()) {
            (Kind::Cell { .. } | Kind::Crossing { .. } | Kind::Terminator { .. }, _) => c.y_um,
            (_, [m]) => cur[*m],
            _ => c.y_um,
        };
        if let (Kind::Bend { offset_um, .. }, [m]) = (&c.kind, c.modes.as_slice()) {
            cur[*m] += offset_um;
        }
        let Some((key, prefix, shapes)) = draw(fp, i) else {
            continue;
        };
        let s = *by_key.entry(key).or_insert_with(|| {
            let n = counts.entry(prefix).or_insert(0);
            *n += 1;
            structures.push(Structure {
                name: format!("{prefix}_{n}"),
                shapes,
            });
            structures.len() - 1
        });
        instances.push(Instance {
            structure: s,
            component: i,
            origin: [c.x_um, y],
        });
    }
    let n = fp.modes.len() as f64;
    let (y0, y1) = (-fp.pitch_um, n * fp.pitch_um);
    Mask {
        top: gds_name(&format!("chip_{}", fp.chip)),
        structures,
        instances,
        labels,
        outline: [[0.0, y0], [fp.length_um, y0], [fp.length_um, y1], [0.0, y1]],
    }
}

impl Mask {
    /// Every shape in chip coordinates, for the design-rule checks; the
    /// two arms of a crossing share an overlap group.
    pub fn flat(&self, fp: &Floorplan) -> Vec<Shape> {
        let mut out = Vec::new();
        for (k, inst) in self.instances.iter().enumerate() {
            let crossing = matches!(fp.components[inst.component].kind, Kind::Crossing { .. });
            for d in &self.structures[inst.structure].shapes {
                out.push(Shape {
                    layer: d.layer,
                    polygon: d
                        .polygon
                        .iter()
                        .map(|p| [p[0] + inst.origin[0], p[1] + inst.origin[1]])
                        .collect(),
                    strip: d.strip,
                    component: inst.component,
                    overlap_group: crossing.then_some(k),
                });
            }
        }
        out
    }

    /// Shapes per layer (structures counted once per instance).
    pub fn shape_counts(&self) -> BTreeMap<MaskLayer, usize> {
        let mut m = BTreeMap::new();
        for inst in &self.instances {
            for d in &self.structures[inst.structure].shapes {
                *m.entry(d.layer).or_insert(0) += 1;
            }
        }
        m
    }
}

fn nm(p: Point) -> (i64, i64) {
    ((p[0] * 1e3).round() as i64, (p[1] * 1e3).round() as i64)
}

/// `layout.gds`: a library in micrometres on a 1 nm grid, the structures
/// first, then the top structure with the outline, the instances and the
/// labels.
pub fn to_gds(m: &Mask, fp: &Floorplan) -> Result<Vec<u8>, GdsError> {
    let layers = &fp.process.mask.layers;
    let layer_of = |l: MaskLayer| match l {
        MaskLayer::Core => layers.core,
        MaskLayer::Heater => layers.heater,
        MaskLayer::Contact => layers.contact,
        MaskLayer::Label => layers.label,
        MaskLayer::Outline => layers.outline,
    };
    let mut w = GdsWriter::new(&gds_name(&format!("trilane_{}", fp.chip)), 1e-3, 1e-9)?;
    for s in &m.structures {
        w.begin_structure(&s.name);
        for d in &s.shapes {
            let l = layer_of(d.layer);
            let pts: Vec<(i64, i64)> = d.polygon.iter().map(|&p| nm(p)).collect();
            w.boundary(l.layer, l.datatype, &pts)?;
        }
        w.end_structure();
    }
    w.begin_structure(&m.top);
    let o = layers.outline;
    let pts: Vec<(i64, i64)> = m.outline.iter().map(|&p| nm(p)).collect();
    w.boundary(o.layer, o.datatype, &pts)?;
    for inst in &m.instances {
        w.sref(&m.structures[inst.structure].name, nm(inst.origin))?;
    }
    let t = layers.label;
    for l in &m.labels {
        w.text(t.layer, t.datatype, nm(l.at), l.height_um, &l.text)?;
    }
    w.end_structure();
    Ok(w.finish())
}

/// The rules the drawn polygons are checked against: the process's rule
/// deck where it sets a value, else the design rules the chip was made to.
pub fn rules(fp: &Floorplan) -> super::drc::Rules {
    let p = &fp.process;
    let deck = &p.mask.deck;
    super::drc::Rules {
        min_gap_um: deck.min_gap_nm.unwrap_or(p.min_gap_nm) * 1e-3,
        min_width_um: deck.min_width_nm.unwrap_or(p.min_width_nm) * 1e-3,
        min_bend_radius_um: deck.min_bend_radius_um.unwrap_or(p.min_bend_radius_um),
        heater_clearance_um: p.mask.heater_clearance_um,
        heater_spacing_um: p.mask.heater_spacing_um,
    }
}

/// What the report says of the mask.
#[derive(Clone, Debug, PartialEq)]
pub struct MaskCheck {
    pub structures: usize,
    pub instances: usize,
    pub shapes: BTreeMap<MaskLayer, usize>,
    pub labels: usize,
    pub gds_bytes: usize,
    pub rules: super::drc::Rules,
    /// None when the checks were switched off (`--drc off`).
    pub drc: Option<super::drc::Summary>,
}

impl MaskCheck {
    /// Shapes drawn on `layer`, every instance counted.
    pub fn count(&self, layer: MaskLayer) -> usize {
        self.shapes.get(&layer).copied().unwrap_or(0)
    }

    pub fn violations(&self) -> &[super::drc::Violation] {
        self.drc.as_ref().map_or(&[], |s| s.violations.as_slice())
    }
}

/// The mask of `fp`, its GDSII stream and, unless `check` is false, the
/// design-rule checks on its polygons (the two run side by side).
pub fn build(fp: &Floorplan, check: bool) -> Result<(Vec<u8>, MaskCheck), GdsError> {
    let m = mask(fp);
    let r = rules(fp);
    let (gds, drc) = rayon::join(
        || to_gds(&m, fp),
        || check.then(|| super::drc::check(&m.flat(fp), &r)),
    );
    let gds = gds?;
    let report = MaskCheck {
        structures: m.structures.len() + 1,
        instances: m.instances.len(),
        shapes: m.shape_counts(),
        labels: m.labels.len(),
        gds_bytes: gds.len(),
        rules: r,
        drc,
    };
    Ok((gds, report))
}
