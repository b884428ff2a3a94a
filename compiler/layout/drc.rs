//! Design-rule checks on the drawn mask polygons.
//!
//! The checks run on the shapes exactly as the mask draws them (mask.rs,
//! `Mask::flat`), in chip coordinates (micrometres), before the GDSII writer
//! snaps them to its 1 nm grid. A measurement passes when it is at least the
//! limit minus 1e-6 um.
//!
//! What is checked:
//! - guides: Core strips whose start or end edges coincide (both endpoints
//!   within 1e-3 um) continue one guide (union-find); any other Core shape is
//!   a guide of its own. Shapes of one guide are never checked against each
//!   other, nor are shapes that share an overlap group;
//! - `min_width`: in every Core strip, the distance from each vertex to the
//!   edge polyline across the guide (nearest segment), and the lengths of
//!   the start and end edges;
//! - `overlap` / `min_gap`: Core shapes of different guides must not
//!   intersect, and their boundaries must be at least the gap apart;
//! - `min_bend_radius`: the circumradius of consecutive triples of a strip's
//!   centre points (midpoints of the vertex pairs across it), relative
//!   tolerance 1e-6; two consecutive pairs on one line across the guide (a
//!   width step) break the centre line there, as a one-sided step moves the
//!   centre sideways without bending the guide;
//! - `heater_clearance`: a heater sits on the guides whose Core shapes it
//!   touches or overlaps (closer than 1e-6 um); every Core shape of any
//!   other guide must keep the clearance from it;
//! - `heater_spacing`: different heaters must keep the spacing.
//!
//! Contact, Label and Outline shapes are not checked.
//!
//! Method (all of it on the polygons' boundaries):
//! - distance of two shapes: the smallest segment-to-segment distance over
//!   their edges (crossing segments are at distance 0);
//! - overlap (interiors meet), decided exactly: two edges cross
//!   transversally; or a piece of one boundary, split where it meets the
//!   other, runs strictly inside the other polygon (even-odd crossing-number
//!   test, M. Shimrat, "Algorithm 112: Position of point relative to
//!   polygon", Communications of the ACM 5(8), 1962 - citation from memory);
//!   or coincident edge pieces have both interiors on the same side; or,
//!   with the boundaries apart, a vertex of one lies inside the other;
//! - broad phase: a uniform grid of the shapes' bounding boxes, each grown by
//!   half the largest rule distance, stored as one array with per-cell
//!   offsets (count, prefix sum, fill), each pair reported once from the cell
//!   holding the low corner of the two boxes' overlap (C. Ericson,
//!   "Real-Time Collision Detection", Morgan Kaufmann 2005, ch. 7.1 "Uniform
//!   Grids"); within a pair, and along long strips for the width, edges are
//!   sorted along one axis and swept (spatial sorting, ibid. ch. 7);
//! - guides: union-find with path halving (R. E. Tarjan and J. van Leeuwen,
//!   "Worst-case analysis of set union algorithms", J. ACM 31(2), 1984 -
//!   from memory) over strips whose end edges match;
//! - bend radius: the circle through three points has `R = abc / (4 K)`,
//!   a, b, c the sides and K the area (the circumradius formula of
//!   elementary geometry).
//!
//! The output is ordered by (rule, component, other, x, y) and does not
//! depend on the order of the input shapes: the shapes are put in a
//! canonical order first, and no hash map is used.

use std::cmp::Ordering;

/// A point in chip coordinates, micrometres.
pub type Point = [f64; 2];

#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum MaskLayer {
    Core,
    Heater,
    Contact,
    Label,
    Outline,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Shape {
    pub layer: MaskLayer,
    /// Vertices in um, either orientation, the first not repeated at the end.
    pub polygon: Vec<Point>,
    /// A guide strip: `polygon` is one edge along the guide (n points, from the
    /// strip's start to its end) followed by the other edge reversed (n points),
    /// so vertex i and vertex 2n-1-i lie across the guide from each other.
    /// The start edge is (vertex 0, vertex 2n-1), the end edge (vertex n-1, vertex n).
    /// Consecutive pairs may repeat a point on one side (a width step drawn as
    /// two pairs at the same x); skip zero-length pieces where they would divide by zero.
    pub strip: bool,
    /// Index of the floorplan component that drew it (for the diagnostic).
    pub component: usize,
    /// Shapes with the same `Some(group)` may touch and overlap each other by
    /// design (the two arms of a waveguide crossing); never checked against each other.
    pub overlap_group: Option<usize>,
}

#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rules {
    /// Between cores of different guides.
    pub min_gap_um: f64,
    /// Core feature width.
    pub min_width_um: f64,
    /// Radius of curvature of guide centre lines.
    pub min_bend_radius_um: f64,
    /// Heater edge to any core of a guide the heater does not sit on.
    pub heater_clearance_um: f64,
    /// Heater to heater (different heater shapes).
    pub heater_spacing_um: f64,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Rule {
    Gap,
    Overlap,
    Width,
    BendRadius,
    HeaterClearance,
    HeaterSpacing,
}

impl Rule {
    pub fn name(&self) -> &'static str {
        match self {
            Rule::Gap => "min_gap",
            Rule::Overlap => "overlap",
            Rule::Width => "min_width",
            Rule::BendRadius => "min_bend_radius",
            Rule::HeaterClearance => "heater_clearance",
            Rule::HeaterSpacing => "heater_spacing",
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Violation {
    pub rule: Rule,
    /// The shape's component, and the other shape's component for two-shape rules.
    pub component: usize,
    pub other: Option<usize>,
    /// Where, in um (the worst point).
    pub x_um: f64,
    pub y_um: f64,
    /// What was measured and the limit, in um (0 measured for an overlap).
    pub measured_um: f64,
    pub limit_um: f64,
}

#[derive(Clone, Debug, PartialEq, Default)]
pub struct Summary {
    /// Shapes checked (the Core and Heater shapes of three or more vertices).
    pub shapes: usize,
    /// Guides the Core shapes form.
    pub guides: usize,
    /// Edges of the checked shapes (zero-length pieces not counted).
    pub edges: usize,
    pub violations: Vec<Violation>,
}

/// A measurement passes when it is at least `limit - PASS_TOL_UM`.
const PASS_TOL_UM: f64 = 1e-6;
/// Strip end edges closer than this (both endpoints) join one guide.
const END_MATCH_UM: f64 = 1e-3;
/// Centre points closer than this to the previous one are dropped.
const SAME_POINT_UM: f64 = 1e-9;
/// Boundaries closer than this touch (for the overlap decision).
const TOUCH_UM: f64 = 1e-9;
/// A heater closer than this to a core sits on its guide.
const SITS_ON_UM: f64 = 1e-6;
/// Relative tolerance of the bend radius.
const BEND_REL_TOL: f64 = 1e-6;
/// Boundary pieces shorter than this are not classified (overlap test).
const MIN_PIECE_UM: f64 = 1e-7;

// ---------------------------------------------------------------- geometry

fn sub(a: Point, b: Point) -> Point {
    [a[0] - b[0], a[1] - b[1]]
}

fn dot(a: Point, b: Point) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}

fn cross(a: Point, b: Point) -> f64 {
    a[0] * b[1] - a[1] * b[0]
}

fn norm(a: Point) -> f64 {
    (a[0] * a[0] + a[1] * a[1]).sqrt()
}

fn dist(a: Point, b: Point) -> f64 {
    norm(sub(a, b))
}

fn mid(a: Point, b: Point) -> Point {
    [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])]
}

fn lerp(a: Point, b: Point, t: f64) -> Point {
    [a[0] + (b[0] - a[0]) * t, a[1] + (b[1] - a[1]) * t]
}

/// The closest point of segment ab to p: (distance, point, parameter).
fn point_seg(p: Point, a: Point, b: Point) -> (f64, Point, f64) {
    let ab = sub(b, a);
    let l2 = dot(ab, ab);
    let t = if l2 > 0.0 {
        (dot(sub(p, a), ab) / l2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let q = lerp(a, b, t);
    (dist(p, q), q, t)
}

/// Squared distance from p to segment ab.
fn point_seg_d2(p: Point, a: Point, b: Point) -> f64 {
    let ab = sub(b, a);
    let ap = sub(p, a);
    let l2 = dot(ab, ab);
    let t = if l2 > 0.0 {
        (dot(ap, ab) / l2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let d = [ap[0] - ab[0] * t, ap[1] - ab[1] * t];
    dot(d, d)
}

/// Closest points of two segments: (distance, on a, on b, length over which
/// parallel segments face each other at that distance, else 0). For facing
/// parallel segments the points are the middle of the facing stretch.
fn seg_seg(a0: Point, a1: Point, b0: Point, b1: Point) -> (f64, Point, Point, f64) {
    let da = sub(a1, a0);
    let db = sub(b1, b0);
    let (la, lb) = (norm(da), norm(db));
    if la > 0.0 && lb > 0.0 {
        let cr = cross(da, db);
        if cr.abs() > 1e-12 * la * lb {
            let w = sub(b0, a0);
            let s = cross(w, db) / cr;
            let t = cross(w, da) / cr;
            if (0.0..=1.0).contains(&s) && (0.0..=1.0).contains(&t) {
                let p = lerp(a0, a1, s);
                return (0.0, p, p, 0.0);
            }
        } else {
            let u = [da[0] / la, da[1] / la];
            let (t0, t1) = (dot(sub(b0, a0), u), dot(sub(b1, a0), u));
            let lo = t0.min(t1).max(0.0);
            let hi = t0.max(t1).min(la);
            if hi > lo {
                let tm = 0.5 * (lo + hi);
                let pa = [a0[0] + u[0] * tm, a0[1] + u[1] * tm];
                let (d, pb, _) = point_seg(pa, b0, b1);
                return (d, pa, pb, hi - lo);
            }
        }
    }
    let mut best = {
        let (d, q, _) = point_seg(a0, b0, b1);
        (d, a0, q, 0.0)
    };
    let (d, q, _) = point_seg(a1, b0, b1);
    if d < best.0 {
        best = (d, a1, q, 0.0);
    }
    let (d, q, _) = point_seg(b0, a0, a1);
    if d < best.0 {
        best = (d, q, b0, 0.0);
    }
    let (d, q, _) = point_seg(b1, a0, a1);
    if d < best.0 {
        best = (d, q, b1, 0.0);
    }
    best
}

/// The crossing point of two segments whose interiors cross transversally
/// (each one's ends strictly on both sides of the other's line).
fn proper_cross(a0: Point, a1: Point, b0: Point, b1: Point) -> Option<Point> {
    let da = sub(a1, a0);
    let db = sub(b1, b0);
    let (la, lb) = (norm(da), norm(db));
    if la == 0.0 || lb == 0.0 {
        return None;
    }
    let sa0 = cross(db, sub(a0, b0)) / lb;
    let sa1 = cross(db, sub(a1, b0)) / lb;
    let sb0 = cross(da, sub(b0, a0)) / la;
    let sb1 = cross(da, sub(b1, a0)) / la;
    let split = |s: f64, t: f64| (s > TOUCH_UM && t < -TOUCH_UM) || (s < -TOUCH_UM && t > TOUCH_UM);
    if split(sa0, sa1) && split(sb0, sb1) {
        Some(lerp(a0, a1, sa0 / (sa0 - sa1)))
    } else {
        None
    }
}

/// Even-odd crossing-number point-in-polygon test.
fn inside(p: Point, poly: &[Point]) -> bool {
    let mut odd = false;
    let n = poly.len();
    for k in 0..n {
        let (a, b) = (poly[k], poly[(k + 1) % n]);
        if (a[1] > p[1]) != (b[1] > p[1]) {
            let x = a[0] + (b[0] - a[0]) * (p[1] - a[1]) / (b[1] - a[1]);
            if p[0] < x {
                odd = !odd;
            }
        }
    }
    odd
}

/// Radius of the circle through three points, `abc / (4 K)` with
/// `K = |cross| / 2`; infinite for collinear points.
fn circumradius(p0: Point, p1: Point, p2: Point) -> f64 {
    let k2 = cross(sub(p1, p0), sub(p2, p0)).abs();
    if k2 == 0.0 {
        return f64::INFINITY;
    }
    dist(p0, p1) * dist(p1, p2) * dist(p0, p2) / (2.0 * k2)
}

#[derive(Clone, Copy, Debug)]
struct BBox {
    lo: Point,
    hi: Point,
}

impl BBox {
    fn of(pts: &[Point]) -> BBox {
        let mut b = BBox {
            lo: [f64::INFINITY; 2],
            hi: [f64::NEG_INFINITY; 2],
        };
        for p in pts {
            b.lo = [b.lo[0].min(p[0]), b.lo[1].min(p[1])];
            b.hi = [b.hi[0].max(p[0]), b.hi[1].max(p[1])];
        }
        b
    }

    fn grow(&self, d: f64) -> BBox {
        BBox {
            lo: [self.lo[0] - d, self.lo[1] - d],
            hi: [self.hi[0] + d, self.hi[1] + d],
        }
    }

    /// Whether the boxes come within r of each other.
    fn within(&self, o: &BBox, r: f64) -> bool {
        let dx = (o.lo[0] - self.hi[0]).max(self.lo[0] - o.hi[0]).max(0.0);
        let dy = (o.lo[1] - self.hi[1]).max(self.lo[1] - o.hi[1]).max(0.0);
        dx <= r && dy <= r && dx * dx + dy * dy <= r * r
    }

    fn contains(&self, o: &BBox) -> bool {
        let t = TOUCH_UM;
        o.lo[0] >= self.lo[0] - t
            && o.lo[1] >= self.lo[1] - t
            && o.hi[0] <= self.hi[0] + t
            && o.hi[1] <= self.hi[1] + t
    }

    fn overlaps(&self, o: &BBox) -> bool {
        self.lo[0] <= o.hi[0]
            && o.lo[0] <= self.hi[0]
            && self.lo[1] <= o.hi[1]
            && o.lo[1] <= self.hi[1]
    }
}

#[derive(Clone, Copy, Debug)]
struct Seg {
    a: Point,
    b: Point,
}

impl Seg {
    fn new(a: Point, b: Point) -> Seg {
        Seg { a, b }
    }

    fn bb(&self) -> BBox {
        BBox {
            lo: [self.a[0].min(self.b[0]), self.a[1].min(self.b[1])],
            hi: [self.a[0].max(self.b[0]), self.a[1].max(self.b[1])],
        }
    }

    fn lo(&self, axis: usize) -> f64 {
        self.a[axis].min(self.b[axis])
    }

    fn hi(&self, axis: usize) -> f64 {
        self.a[axis].max(self.b[axis])
    }
}

/// Segments sorted by their low end along one axis, for range queries.
struct AxisIndex {
    ids: Vec<usize>,
    keys: Vec<f64>,
    max_ext: f64,
}

impl AxisIndex {
    fn new(seg: impl Fn(usize) -> Seg, ids: Vec<usize>, axis: usize) -> AxisIndex {
        let mut keyed: Vec<(f64, usize)> = ids.into_iter().map(|i| (seg(i).lo(axis), i)).collect();
        keyed.sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
        let max_ext = keyed
            .iter()
            .map(|&(lo, i)| seg(i).hi(axis) - lo)
            .fold(0.0, f64::max);
        let (keys, ids) = keyed.into_iter().unzip();
        AxisIndex { ids, keys, max_ext }
    }

    /// Candidates whose extent along the axis may meet [lo, hi].
    fn span(&self, lo: f64, hi: f64) -> &[usize] {
        let s = self.keys.partition_point(|&k| k < lo - self.max_ext);
        let e = s + self.keys[s..].iter().take_while(|&&k| k <= hi).count();
        &self.ids[s..e]
    }
}

// ---------------------------------------------------------------- shapes

struct Prep<'a> {
    shape: &'a Shape,
    bb: BBox,
    /// Edges of non-zero length.
    edges: usize,
    /// +1 counter-clockwise, -1 clockwise, 0 degenerate.
    orient: f64,
    /// Pairs across the strip (n), 0 when not a well-formed strip.
    pairs: usize,
    guide: usize,
}

impl<'a> Prep<'a> {
    /// One pass over the polygon: box, orientation, edge count.
    fn new(shape: &'a Shape) -> Prep<'a> {
        let p = &shape.polygon;
        let n = p.len();
        let mut bb = BBox {
            lo: [f64::INFINITY; 2],
            hi: [f64::NEG_INFINITY; 2],
        };
        let (mut area2, mut edges) = (0.0, 0);
        // (prev, q) runs over the edges, the closing one first.
        let mut prev = p.last().copied().unwrap_or_default();
        for &q in p {
            bb.lo = [bb.lo[0].min(q[0]), bb.lo[1].min(q[1])];
            bb.hi = [bb.hi[0].max(q[0]), bb.hi[1].max(q[1])];
            area2 += cross(prev, q);
            edges += usize::from(prev != q);
            prev = q;
        }
        let pairs = if shape.strip && n >= 4 && n.is_multiple_of(2) {
            n / 2
        } else {
            0
        };
        Prep {
            shape,
            bb,
            edges,
            orient: if area2 > 0.0 {
                1.0
            } else if area2 < 0.0 {
                -1.0
            } else {
                0.0
            },
            pairs,
            guide: usize::MAX,
        }
    }

    /// Edge k (from vertex k to the next); may have zero length.
    fn seg(&self, k: usize) -> Seg {
        let p = &self.shape.polygon;
        Seg::new(p[k], p[if k + 1 == p.len() { 0 } else { k + 1 }])
    }

    /// Indices of the non-zero edges whose boxes come within `reach` of `bb`.
    fn near(&self, bb: &BBox, reach: f64, out: &mut Vec<usize>) {
        out.clear();
        let n = if self.shape.polygon.len() >= 2 {
            self.shape.polygon.len()
        } else {
            0
        };
        out.extend((0..n).filter(|&k| {
            let s = self.seg(k);
            s.a != s.b && s.bb().within(bb, reach)
        }));
    }

    fn layer(&self) -> MaskLayer {
        self.shape.layer
    }

    /// (start edge, end edge) of a strip.
    fn ends(&self) -> [[Point; 2]; 2] {
        let (p, n) = (&self.shape.polygon, self.pairs);
        [[p[0], p[2 * n - 1]], [p[n - 1], p[n]]]
    }
}

/// An order of shapes that does not depend on their input order.
fn canonical(a: &Shape, b: &Shape) -> Ordering {
    a.layer
        .cmp(&b.layer)
        .then(a.component.cmp(&b.component))
        .then(a.overlap_group.cmp(&b.overlap_group))
        .then(a.strip.cmp(&b.strip))
        .then(a.polygon.len().cmp(&b.polygon.len()))
        .then_with(|| {
            for (p, q) in a.polygon.iter().zip(&b.polygon) {
                let o = p[0].total_cmp(&q[0]).then(p[1].total_cmp(&q[1]));
                if o != Ordering::Equal {
                    return o;
                }
            }
            Ordering::Equal
        })
}

/// Strip end edges are matched in columns of this width (x of the edge's
/// midpoint), wider than twice the matching distance.
const END_COLUMN_UM: f64 = 10.0 * END_MATCH_UM;

/// A strip's start or end edge, by the column of its midpoint.
struct End {
    col: i64,
    y: f64,
    /// `y` as an integer in `total_cmp` order, for a fast sort.
    ykey: u64,
    shape: u32,
    which: u32,
    edge: [Point; 2],
}

impl End {
    fn new(shape: usize, which: usize, edge: [Point; 2]) -> End {
        let m = mid(edge[0], edge[1]);
        End {
            col: (m[0] / END_COLUMN_UM).floor() as i64,
            y: m[1],
            ykey: {
                let b = m[1].to_bits();
                if b >> 63 == 1 { !b } else { b | (1 << 63) }
            },
            shape: shape as u32,
            which: which as u32,
            edge,
        }
    }
}

/// The Core and Heater shapes in canonical order: sorted by (layer,
/// component) as integers first, then runs of one component by the full
/// comparison. Shapes equal in every field are interchangeable, so an
/// unstable sort is fine.
fn canonical_order(shapes: &[Shape]) -> Vec<&Shape> {
    let mut keys: Vec<(MaskLayer, usize, usize)> = shapes
        .iter()
        .enumerate()
        .filter(|(_, s)| {
            matches!(s.layer, MaskLayer::Core | MaskLayer::Heater) && s.polygon.len() >= 3
        })
        .map(|(i, s)| (s.layer, s.component, i))
        .collect();
    keys.sort_unstable();
    let mut order: Vec<&Shape> = keys.iter().map(|k| &shapes[k.2]).collect();
    let mut start = 0;
    for run in keys.chunk_by(|a, b| (a.0, a.1) == (b.0, b.1)) {
        if run.len() > 1 {
            order[start..start + run.len()].sort_unstable_by(|a, b| canonical(a, b));
        }
        start += run.len();
    }
    order
}

fn find(parent: &mut [usize], mut i: usize) -> usize {
    while parent[i] != i {
        parent[i] = parent[parent[i]];
        i = parent[i];
    }
    i
}

/// Assigns `guide` to every Core shape (a union-find root); returns the
/// number of guides.
fn assign_guides(preps: &mut [Prep], mut ends: Vec<End>) -> usize {
    let mut parent: Vec<usize> = (0..preps.len()).collect();
    // Matching edges have midpoints within END_MATCH_UM of each other.
    // With the ends sorted by column, then y, an end's partners are in its
    // column or the next, within 2 END_MATCH_UM in y: one forward scan per
    // column and a two-pointer walk of the next.
    let r = 2.0 * END_MATCH_UM;
    ends.sort_unstable_by_key(|e| (e.col, e.ykey, e.shape, e.which));
    let close = |a: Point, b: Point| dist(a, b) <= END_MATCH_UM;
    let mut join = |x: &End, y: &End| {
        let (e, f) = (x.edge, y.edge);
        let same =
            (close(e[0], f[0]) && close(e[1], f[1])) || (close(e[0], f[1]) && close(e[1], f[0]));
        if x.shape != y.shape && same {
            let (ri, rj) = (
                find(&mut parent, x.shape as usize),
                find(&mut parent, y.shape as usize),
            );
            if ri != rj {
                parent[ri.max(rj)] = ri.min(rj);
            }
        }
    };
    let columns: Vec<&[End]> = ends.chunk_by(|a, b| a.col == b.col).collect();
    for (c, col) in columns.iter().enumerate() {
        for (k, x) in col.iter().enumerate() {
            for y in &col[k + 1..] {
                if y.y > x.y + r {
                    break;
                }
                join(x, y);
            }
        }
        if let Some(next) = columns.get(c + 1).filter(|n| n[0].col == col[0].col + 1) {
            let mut lo = 0;
            for x in col.iter() {
                while lo < next.len() && next[lo].y < x.y - r {
                    lo += 1;
                }
                for y in &next[lo..] {
                    if y.y > x.y + r {
                        break;
                    }
                    join(x, y);
                }
            }
        }
    }
    let mut roots = Vec::new();
    for (i, p) in preps.iter_mut().enumerate() {
        if p.layer() == MaskLayer::Core {
            let r = find(&mut parent, i);
            p.guide = r;
            roots.push(r);
        }
    }
    roots.sort_unstable();
    roots.dedup();
    roots.len()
}

// ---------------------------------------------------------------- one-shape rules

/// Distance from p to a polyline (a single point is a polyline too).
fn to_polyline(p: Point, line: &[Point]) -> f64 {
    if line.len() == 1 {
        return dist(p, line[0]);
    }
    line.windows(2)
        .map(|w| point_seg_d2(p, w[0], w[1]))
        .fold(f64::INFINITY, f64::min)
        .sqrt()
}

/// A long polyline's segments sorted by their low end along the strip's
/// longer axis, for the distance from points that mostly come in order
/// along it (a cursor walks to each query's first candidate).
struct Polyline {
    axis: usize,
    keys: Vec<f64>,
    segs: Vec<Seg>,
    max_ext: f64,
    cursor: usize,
}

impl Polyline {
    fn new(line: &[Point], axis: usize) -> Polyline {
        let mut segs: Vec<Seg> = line.windows(2).map(|w| Seg::new(w[0], w[1])).collect();
        segs.sort_by(|x, y| x.lo(axis).total_cmp(&y.lo(axis)));
        Polyline {
            axis,
            keys: segs.iter().map(|s| s.lo(axis)).collect(),
            max_ext: segs
                .iter()
                .map(|s| s.hi(axis) - s.lo(axis))
                .fold(0.0, f64::max),
            segs,
            cursor: 0,
        }
    }

    /// Distance from p, exact when below r (otherwise at least r).
    fn within(&mut self, p: Point, r: f64) -> f64 {
        let (lo, hi) = (p[self.axis] - r - self.max_ext, p[self.axis] + r);
        let mut s = self.cursor.min(self.keys.len());
        while s > 0 && self.keys[s - 1] >= lo {
            s -= 1;
        }
        while s < self.keys.len() && self.keys[s] < lo {
            s += 1;
        }
        self.cursor = s;
        let mut best = f64::INFINITY;
        for (k, seg) in self.keys[s..].iter().zip(&self.segs[s..]) {
            if *k > hi {
                break;
            }
            best = best.min(point_seg_d2(p, seg.a, seg.b));
        }
        best.sqrt()
    }
}

/// The narrowest place of a strip below `min_w`: (width, pair midpoint).
/// Short strips are measured against every opposite segment; long ones
/// through a sorted index, looking only as far as the rule.
fn strip_width(p: &[Point], n: usize, min_w: f64) -> Option<(f64, Point)> {
    let (side1, side2) = (&p[..n], &p[n..]);
    let mut long = if n > 16 {
        let bb = BBox::of(p);
        let axis = usize::from(bb.hi[1] - bb.lo[1] > bb.hi[0] - bb.lo[0]);
        Some((Polyline::new(side1, axis), Polyline::new(side2, axis)))
    } else {
        None
    };
    let r = min_w + PASS_TOL_UM;
    let mut worst: Option<(f64, Point)> = None;
    for i in 0..n {
        let (a, b) = (p[i], p[2 * n - 1 - i]);
        let mut w = match &mut long {
            Some((l1, l2)) => l2.within(a, r).min(l1.within(b, r)),
            None => to_polyline(a, side2).min(to_polyline(b, side1)),
        };
        if i == 0 || i == n - 1 {
            w = w.min(dist(a, b));
        }
        if w < min_w - PASS_TOL_UM && worst.is_none_or(|(ww, _)| w < ww) {
            worst = Some((w, mid(a, b)));
        }
    }
    worst
}

/// The tightest centre-line radius of a strip below `min_r`: (radius, point).
///
/// Consecutive pairs on one line across the guide (a width step drawn as two
/// pairs at the same x) break the centre line: a one-sided step moves the
/// centre sideways, which is no bend.
fn strip_bend(p: &[Point], n: usize, min_r: f64, run: &mut Vec<Point>) -> Option<(f64, Point)> {
    let limit = min_r * (1.0 - BEND_REL_TOL);
    let mut worst: Option<(f64, Point)> = None;
    run.clear();
    let mut flush = |run: &mut Vec<Point>| {
        for t in run.windows(3) {
            let r = circumradius(t[0], t[1], t[2]);
            if r < limit && worst.is_none_or(|(wr, _)| r < wr) {
                worst = Some((r, t[1]));
            }
        }
        run.clear();
    };
    for i in 0..n {
        let (a, b) = (p[i], p[2 * n - 1 - i]);
        let c = mid(a, b);
        if i > 0 {
            let (pa, pb) = (p[i - 1], p[2 * n - i]);
            let chord = sub(pb, pa);
            let l = norm(chord);
            let moved = dist(c, mid(pa, pb)) > SAME_POINT_UM;
            let on_line = |q: Point| (cross(chord, sub(q, pa)) / l).abs() <= SAME_POINT_UM;
            if moved && l > 0.0 && on_line(a) && on_line(b) {
                flush(run);
            }
        }
        if run.last().is_none_or(|&l| dist(l, c) > SAME_POINT_UM) {
            run.push(c);
        }
    }
    flush(run);
    worst
}

// ---------------------------------------------------------------- two-shape rules

/// How two shapes lie to each other, looking only within a distance.
enum Rel {
    /// Interiors overlap; a point where.
    Overlap(Point),
    /// Apart (or touching) by `d`, the closest points' midpoint `at`.
    Apart { d: f64, at: Point },
    /// Farther than the distance looked at.
    Far,
}

/// Buffers `relate` reuses from one pair to the next.
#[derive(Default)]
struct Scratch {
    na: Vec<usize>,
    nb: Vec<usize>,
    touching: Vec<(usize, usize)>,
}

fn relate(a: &Prep, b: &Prep, limit: f64, scratch: &mut Scratch) -> Rel {
    let reach = limit.max(0.0) + 2.0 * PASS_TOL_UM;
    let Scratch { na, nb, touching } = scratch;
    a.near(&b.bb, reach, na);
    b.near(&a.bb, reach, nb);
    touching.clear();
    let mut best = (f64::INFINITY, [0.0; 2], 0.0);
    // One edge pair; Some(point) when they cross.
    let mut visit = |ia: usize, ib: usize| -> Option<Point> {
        let (sa, sb) = (a.seg(ia), b.seg(ib));
        if !sa.bb().within(&sb.bb(), reach) {
            return None;
        }
        if let Some(p) = proper_cross(sa.a, sa.b, sb.a, sb.b) {
            return Some(p);
        }
        let (d, pa, pb, par) = seg_seg(sa.a, sa.b, sb.a, sb.b);
        if d <= TOUCH_UM {
            touching.push((ia, ib));
        }
        // Ties go to the longest facing stretch, at its middle.
        if d < best.0 - 1e-12 || (d <= best.0 + 1e-12 && par > best.2) {
            best = (d, mid(pa, pb), par);
        }
        None
    };
    if na.len() * nb.len() <= 256 {
        for &ia in na.iter() {
            for &ib in nb.iter() {
                if let Some(p) = visit(ia, ib) {
                    return Rel::Overlap(p);
                }
            }
        }
    } else {
        // Sweep the shorter list through an index of the longer, sorted
        // along the longer side of the region the two share.
        let (ga, gb) = (a.bb.grow(reach), b.bb.grow(reach));
        let w = ga.hi[0].min(gb.hi[0]) - ga.lo[0].max(gb.lo[0]);
        let h = ga.hi[1].min(gb.hi[1]) - ga.lo[1].max(gb.lo[1]);
        let axis = usize::from(h > w);
        let swap = na.len() > nb.len();
        let (walk, wp, ip, ids) = if swap {
            (&*nb, b, a, na.clone())
        } else {
            (&*na, a, b, nb.clone())
        };
        let index = AxisIndex::new(|k| ip.seg(k), ids, axis);
        for &k in walk {
            let e = wp.seg(k);
            for &m in index.span(e.lo(axis) - reach, e.hi(axis) + reach) {
                let (ia, ib) = if swap { (m, k) } else { (k, m) };
                if let Some(p) = visit(ia, ib) {
                    return Rel::Overlap(p);
                }
            }
        }
    }
    if !touching.is_empty() {
        if let Some(p) = touching_overlap(a, b, touching) {
            return Rel::Overlap(p);
        }
    } else {
        // Boundaries apart: overlap only if one holds the other.
        if b.bb.contains(&a.bb) && inside(a.shape.polygon[0], &b.shape.polygon) {
            return Rel::Overlap(a.shape.polygon[0]);
        }
        if a.bb.contains(&b.bb) && inside(b.shape.polygon[0], &a.shape.polygon) {
            return Rel::Overlap(b.shape.polygon[0]);
        }
    }
    if best.0 <= reach {
        Rel::Apart {
            d: best.0,
            at: best.1,
        }
    } else {
        Rel::Far
    }
}

/// Touching boundaries: does either interior reach into the other?
fn touching_overlap(a: &Prep, b: &Prep, touching: &[(usize, usize)]) -> Option<Point> {
    let mut ab = touching.to_vec();
    ab.sort_unstable();
    if let Some(p) = enters(a, b, &ab) {
        return Some(p);
    }
    let mut ba: Vec<(usize, usize)> = touching.iter().map(|&(i, j)| (j, i)).collect();
    ba.sort_unstable();
    enters(b, a, &ba)
}

/// Splits each edge of `p` that touches `q` (pairs (edge of p, edge of q),
/// sorted) where it meets `q`'s edges, and asks of each piece whether it runs
/// inside `q`, or along an edge of `q` with both interiors on one side.
fn enters(p: &Prep, q: &Prep, pairs: &[(usize, usize)]) -> Option<Point> {
    for group in pairs.chunk_by(|x, y| x.0 == y.0) {
        let e = p.seg(group[0].0);
        let d = sub(e.b, e.a);
        let len = norm(d);
        let mut ts = vec![0.0, 1.0];
        for &(_, k) in group {
            let f = q.seg(k);
            for end in [f.a, f.b] {
                let (dd, _, t) = point_seg(end, e.a, e.b);
                if dd <= TOUCH_UM {
                    ts.push(t);
                }
            }
            let fd = sub(f.b, f.a);
            let cr = cross(d, fd);
            if cr.abs() > 1e-12 * len * norm(fd) {
                let w = sub(f.a, e.a);
                let (s, u) = (cross(w, fd) / cr, cross(w, d) / cr);
                let slack = TOUCH_UM / norm(fd);
                if (0.0..=1.0).contains(&s) && u >= -slack && u <= 1.0 + slack {
                    ts.push(s);
                }
            }
        }
        ts.sort_by(f64::total_cmp);
        for w in ts.windows(2) {
            if (w[1] - w[0]) * len < MIN_PIECE_UM {
                continue;
            }
            let m = lerp(e.a, e.b, 0.5 * (w[0] + w[1]));
            let mut on = (f64::INFINITY, 0);
            for &(_, k) in group {
                let f = q.seg(k);
                let dd = point_seg(m, f.a, f.b).0;
                if dd < on.0 {
                    on = (dd, k);
                }
            }
            if on.0 <= TOUCH_UM {
                let f = q.seg(on.1);
                let fd = sub(f.b, f.a);
                let parallel = (cross(d, fd) / (len * norm(fd))).abs() <= 1e-6;
                // Interiors lie to the left of an edge of a counter-clockwise polygon.
                let (ne, nf) = (
                    [-d[1] * p.orient, d[0] * p.orient],
                    [-fd[1] * q.orient, fd[0] * q.orient],
                );
                if parallel && dot(ne, nf) > 0.0 {
                    return Some(m);
                }
            } else if inside(m, &q.shape.polygon) {
                return Some(m);
            }
        }
    }
    None
}

// ---------------------------------------------------------------- broad phase

/// A uniform grid of boxes (compressed rows: `start[c]..start[c + 1]` of
/// `items` are the boxes meeting cell c, in increasing index).
struct Grid {
    lo: Point,
    cell: f64,
    nx: usize,
    ny: usize,
    start: Vec<usize>,
    items: Vec<u32>,
}

impl Grid {
    fn new(boxes: &[BBox], min_cell: f64) -> Grid {
        let all = boxes.iter().fold(
            BBox {
                lo: [f64::INFINITY; 2],
                hi: [f64::NEG_INFINITY; 2],
            },
            |u, b| BBox {
                lo: [u.lo[0].min(b.lo[0]), u.lo[1].min(b.lo[1])],
                hi: [u.hi[0].max(b.hi[0]), u.hi[1].max(b.hi[1])],
            },
        );
        let (w, h) = (
            (all.hi[0] - all.lo[0]).max(0.0),
            (all.hi[1] - all.lo[1]).max(0.0),
        );
        let n = boxes.len().max(1);
        let mut cell = min_cell.max((w * h / n as f64).sqrt()).max(1e-3);
        let dims = |c: f64| {
            (
                ((w / c).ceil() as usize).max(1),
                ((h / c).ceil() as usize).max(1),
            )
        };
        let (mut nx, mut ny) = (1, 1);
        if w.is_finite() && h.is_finite() {
            // About as many cells as boxes, none smaller than the rules' reach.
            (nx, ny) = dims(cell);
            while nx.saturating_mul(ny) > 4 * n + 64 {
                cell *= 1.5;
                (nx, ny) = dims(cell);
            }
        }
        let mut g = Grid {
            lo: all.lo,
            cell,
            nx,
            ny,
            start: vec![0; nx * ny + 1],
            items: Vec::new(),
        };
        for b in boxes {
            let (x0, x1, y0, y1) = g.range(b);
            for cy in y0..=y1 {
                for cx in x0..=x1 {
                    g.start[cy * nx + cx + 1] += 1;
                }
            }
        }
        for c in 0..nx * ny {
            g.start[c + 1] += g.start[c];
        }
        let mut fill = g.start.clone();
        g.items = vec![0; g.start[nx * ny]];
        for (i, b) in boxes.iter().enumerate() {
            let (x0, x1, y0, y1) = g.range(b);
            for cy in y0..=y1 {
                for cx in x0..=x1 {
                    let c = cy * nx + cx;
                    g.items[fill[c]] = i as u32;
                    fill[c] += 1;
                }
            }
        }
        g
    }

    fn cx(&self, x: f64) -> usize {
        (((x - self.lo[0]) / self.cell).floor().max(0.0) as usize).min(self.nx - 1)
    }

    fn cy(&self, y: f64) -> usize {
        (((y - self.lo[1]) / self.cell).floor().max(0.0) as usize).min(self.ny - 1)
    }

    fn range(&self, b: &BBox) -> (usize, usize, usize, usize) {
        (
            self.cx(b.lo[0]),
            self.cx(b.hi[0]),
            self.cy(b.lo[1]),
            self.cy(b.hi[1]),
        )
    }

    /// Every pair (i < j) of boxes that meet, once.
    fn pairs(&self, boxes: &[BBox], mut f: impl FnMut(usize, usize)) {
        for cy in 0..self.ny {
            for cx in 0..self.nx {
                let c = cy * self.nx + cx;
                let here = &self.items[self.start[c]..self.start[c + 1]];
                for (k, &i) in here.iter().enumerate() {
                    let bi = &boxes[i as usize];
                    for &j in &here[k + 1..] {
                        let bj = &boxes[j as usize];
                        if !bi.overlaps(bj) {
                            continue;
                        }
                        // Report from the cell holding the overlap's low corner.
                        if self.cx(bi.lo[0].max(bj.lo[0])) != cx
                            || self.cy(bi.lo[1].max(bj.lo[1])) != cy
                        {
                            continue;
                        }
                        f(i as usize, j as usize);
                    }
                }
            }
        }
    }
}

// ---------------------------------------------------------------- check

/// Runs every check on the drawn shapes.
pub fn check(shapes: &[Shape], rules: &Rules) -> Summary {
    let order = canonical_order(shapes);
    // One pass over the shapes (each polygon read while it is in cache):
    // the one-shape rules, and the strips' ends for the guides.
    let mut out: Vec<Violation> = Vec::new();
    let mut preps: Vec<Prep> = Vec::with_capacity(order.len());
    let mut ends: Vec<End> = Vec::new();
    let mut run = Vec::new();
    for s in order {
        let p = Prep::new(s);
        if p.layer() == MaskLayer::Core && p.pairs > 0 {
            let poly = &s.polygon;
            if let Some((w, at)) = strip_width(poly, p.pairs, rules.min_width_um) {
                out.push(one(Rule::Width, &p, at, w, rules.min_width_um));
            }
            if let Some((r, at)) = strip_bend(poly, p.pairs, rules.min_bend_radius_um, &mut run) {
                out.push(one(Rule::BendRadius, &p, at, r, rules.min_bend_radius_um));
            }
            for (which, e) in p.ends().into_iter().enumerate() {
                ends.push(End::new(preps.len(), which, e));
            }
        }
        preps.push(p);
    }
    let guides = assign_guides(&mut preps, ends);

    let (gap, clear, spacing) = (
        rules.min_gap_um.max(0.0),
        rules.heater_clearance_um.max(0.0),
        rules.heater_spacing_um.max(0.0),
    );
    let pad = 0.5 * gap.max(clear).max(spacing) + 2.0 * PASS_TOL_UM;
    let boxes: Vec<BBox> = preps.iter().map(|p| p.bb.grow(pad)).collect();
    let grid = Grid::new(&boxes, 2.0 * pad);
    let mut cands: Vec<(usize, usize, f64)> = Vec::new();
    grid.pairs(&boxes, |i, j| {
        let (p, q) = (&preps[i], &preps[j]);
        if p.shape.overlap_group.is_some() && p.shape.overlap_group == q.shape.overlap_group {
            return;
        }
        let limit = match (p.layer(), q.layer()) {
            (MaskLayer::Core, MaskLayer::Core) if p.guide == q.guide => return,
            (MaskLayer::Core, MaskLayer::Core) => gap,
            (MaskLayer::Heater, MaskLayer::Heater) => spacing,
            _ => clear.max(SITS_ON_UM),
        };
        if p.bb.within(&q.bb, limit + 2.0 * PASS_TOL_UM) {
            cands.push((i, j, limit));
        }
    });
    cands.sort_unstable_by_key(|a| (a.0, a.1));

    // (heater, core, relation) for the clearance rule.
    let mut heated: Vec<(usize, usize, Rel)> = Vec::new();
    let mut scratch = Scratch::default();
    for &(i, j, limit) in &cands {
        let (p, q) = (&preps[i], &preps[j]);
        let rel = relate(p, q, limit, &mut scratch);
        match (p.layer(), q.layer()) {
            (MaskLayer::Core, MaskLayer::Core) => match rel {
                Rel::Overlap(at) => out.push(two(Rule::Overlap, p, q, at, 0.0, rules.min_gap_um)),
                Rel::Apart { d, at } if d < rules.min_gap_um - PASS_TOL_UM => {
                    out.push(two(Rule::Gap, p, q, at, d, rules.min_gap_um))
                }
                _ => {}
            },
            (MaskLayer::Heater, MaskLayer::Heater) => {
                let hit = match rel {
                    Rel::Overlap(at) => Some((0.0, at)),
                    Rel::Apart { d, at } => Some((d, at)),
                    Rel::Far => None,
                };
                if let Some((d, at)) = hit
                    && d < rules.heater_spacing_um - PASS_TOL_UM
                {
                    out.push(two(
                        Rule::HeaterSpacing,
                        p,
                        q,
                        at,
                        d,
                        rules.heater_spacing_um,
                    ));
                }
            }
            (MaskLayer::Heater, _) => heated.push((i, j, rel)),
            _ => heated.push((j, i, rel)),
        }
    }
    heated.sort_by_key(|&(h, c, _)| (h, c));
    for group in heated.chunk_by(|x, y| x.0 == y.0) {
        let heater = &preps[group[0].0];
        let mut sits: Vec<usize> = group
            .iter()
            .filter(|(_, _, rel)| match rel {
                Rel::Overlap(_) => true,
                Rel::Apart { d, .. } => *d < SITS_ON_UM,
                Rel::Far => false,
            })
            .map(|&(_, c, _)| preps[c].guide)
            .collect();
        sits.sort_unstable();
        for (_, c, rel) in group {
            let core = &preps[*c];
            if sits.binary_search(&core.guide).is_ok() {
                continue;
            }
            let hit = match rel {
                Rel::Overlap(at) => Some((0.0, *at)),
                Rel::Apart { d, at } => Some((*d, *at)),
                Rel::Far => None,
            };
            if let Some((d, at)) = hit
                && d < rules.heater_clearance_um - PASS_TOL_UM
            {
                out.push(two(
                    Rule::HeaterClearance,
                    heater,
                    core,
                    at,
                    d,
                    rules.heater_clearance_um,
                ));
            }
        }
    }

    out.sort_by(|a, b| {
        a.rule
            .cmp(&b.rule)
            .then(a.component.cmp(&b.component))
            .then(a.other.cmp(&b.other))
            .then(a.x_um.total_cmp(&b.x_um))
            .then(a.y_um.total_cmp(&b.y_um))
            .then(a.measured_um.total_cmp(&b.measured_um))
            .then(a.limit_um.total_cmp(&b.limit_um))
    });
    Summary {
        shapes: preps.len(),
        guides,
        edges: preps.iter().map(|p| p.edges).sum(),
        violations: out,
    }
}

fn one(rule: Rule, p: &Prep, at: Point, measured: f64, limit: f64) -> Violation {
    Violation {
        rule,
        component: p.shape.component,
        other: None,
        x_um: at[0],
        y_um: at[1],
        measured_um: measured,
        limit_um: limit,
    }
}

fn two(rule: Rule, p: &Prep, q: &Prep, at: Point, measured: f64, limit: f64) -> Violation {
    Violation {
        other: Some(q.shape.component),
        ..one(rule, p, at, measured, limit)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const RULES: Rules = Rules {
        min_gap_um: 0.1,
        min_width_um: 0.3,
        min_bend_radius_um: 1.0,
        heater_clearance_um: 1.0,
        heater_spacing_um: 0.8,
    };

    /// A strip from its two edges (start to end), drawn as mask.rs draws it.
    fn strip(left: Vec<Point>, right: Vec<Point>, component: usize) -> Shape {
        let mut polygon = left;
        polygon.extend(right.into_iter().rev());
        Shape {
            layer: MaskLayer::Core,
            polygon,
            strip: true,
            component,
            overlap_group: None,
        }
    }

    /// A straight strip along x from x0 to x1, centred on yc.
    fn straight(x0: f64, x1: f64, yc: f64, w: f64, component: usize) -> Shape {
        let h = w / 2.0;
        strip(
            vec![[x0, yc + h], [x1, yc + h]],
            vec![[x0, yc - h], [x1, yc - h]],
            component,
        )
    }

    /// A strip of width w along a centre line given by points and unit normals.
    fn along(centre: &[(Point, Point)], w: f64, component: usize) -> Shape {
        let h = w / 2.0;
        let edge = |s: f64| {
            centre
                .iter()
                .map(|&(c, n)| [c[0] + s * h * n[0], c[1] + s * h * n[1]])
                .collect()
        };
        strip(edge(1.0), edge(-1.0), component)
    }

    fn rect(layer: MaskLayer, x0: f64, x1: f64, y0: f64, y1: f64, component: usize) -> Shape {
        Shape {
            layer,
            polygon: vec![[x0, y0], [x1, y0], [x1, y1], [x0, y1]],
            strip: false,
            component,
            overlap_group: None,
        }
    }

    fn rules_with(f: impl FnOnce(&mut Rules)) -> Rules {
        let mut r = RULES;
        f(&mut r);
        r
    }

    fn of_rule(s: &Summary, rule: Rule) -> Vec<&Violation> {
        s.violations.iter().filter(|v| v.rule == rule).collect()
    }

    #[test]
    fn rule_names() {
        let names: Vec<&str> = [
            Rule::Gap,
            Rule::Overlap,
            Rule::Width,
            Rule::BendRadius,
            Rule::HeaterClearance,
            Rule::HeaterSpacing,
        ]
        .iter()
        .map(Rule::name)
        .collect();
        assert_eq!(
            names,
            [
                "min_gap",
                "overlap",
                "min_width",
                "min_bend_radius",
                "heater_clearance",
                "heater_spacing"
            ]
        );
    }

    #[test]
    fn gap_between_parallel_strips() {
        // Strip A spans y in [-0.25, 0.25], B is centred at 0.62 so it spans
        // [0.37, 0.87]: the edges face each other 0.12 apart over all of
        // x in [0, 10]. 0.12 >= 0.1 passes; against 0.15 it fails once, and
        // the closest stretch is the whole facing length, so the location is
        // its middle: x = 5, y = (0.25 + 0.37) / 2 = 0.31.
        let shapes = vec![
            straight(0.0, 10.0, 0.0, 0.5, 0),
            straight(0.0, 10.0, 0.62, 0.5, 1),
        ];
        let s = check(&shapes, &RULES);
        assert_eq!((s.shapes, s.guides, s.edges), (2, 2, 8));
        assert!(s.violations.is_empty(), "{:?}", s.violations);
        let s = check(&shapes, &rules_with(|r| r.min_gap_um = 0.15));
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!((v.rule, v.component, v.other), (Rule::Gap, 0, Some(1)));
        assert!((v.measured_um - 0.12).abs() < 1e-9, "{v:?}");
        assert!(
            (v.x_um - 5.0).abs() < 1e-9 && (v.y_um - 0.31).abs() < 1e-9,
            "{v:?}"
        );
        assert_eq!(v.limit_um, 0.15);
    }

    #[test]
    fn abutting_strips_are_one_guide_shifted_ones_overlap() {
        // B's start edge (x = 10) is A's end edge: one guide, never checked
        // against itself, so nothing is reported.
        let a = straight(0.0, 10.0, 0.0, 0.5, 0);
        let s = check(&[a.clone(), straight(10.0, 20.0, 0.0, 0.5, 1)], &RULES);
        assert_eq!(s.guides, 1);
        assert!(s.violations.is_empty(), "{:?}", s.violations);
        // Shifted back by 0.05 the edges no longer match (two guides) and
        // the strips share [9.95, 10] x [-0.25, 0.25]: no edge crosses another
        // transversally (they meet along collinear sides), so this is the
        // touching-boundary case of the overlap test.
        let s = check(&[a, straight(9.95, 19.95, 0.0, 0.5, 1)], &RULES);
        assert_eq!(s.guides, 2);
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!(
            (v.rule, v.measured_um, v.component, v.other),
            (Rule::Overlap, 0.0, 0, Some(1))
        );
        assert!((9.95 - 1e-9..=10.0 + 1e-9).contains(&v.x_um), "{v:?}");
    }

    #[test]
    fn guides_join_end_to_end_and_start_to_start() {
        // B is drawn from x = 20 back to x = 10, so its end edge meets A's
        // end edge (vertices in the other order); C's start edge meets B's
        // start edge at x = 20 within the 1e-3 um tolerance. One guide.
        let a = straight(0.0, 10.0, 0.0, 0.5, 0);
        let b = strip(
            vec![[20.0, -0.25], [10.0, -0.25]],
            vec![[20.0, 0.25], [10.0, 0.25]],
            1,
        );
        let c = straight(20.0005, 30.0, 0.0, 0.5, 2);
        let s = check(&[a, b, c], &RULES);
        assert_eq!(s.guides, 1);
        assert!(s.violations.is_empty(), "{:?}", s.violations);
    }

    #[test]
    fn degenerate_input() {
        // Nothing to check; shapes of fewer than three vertices and other
        // layers are skipped; a malformed strip (odd vertex count) is still
        // a polygon and a guide, with no width or bend check.
        assert_eq!(check(&[], &RULES), Summary::default());
        let line = Shape {
            polygon: vec![[0.0, 0.0], [1.0, 0.0]],
            ..straight(0.0, 1.0, 0.0, 0.5, 0)
        };
        let label = rect(MaskLayer::Label, 0.0, 1.0, 0.0, 1.0, 1);
        let odd = Shape {
            polygon: vec![[0.0, 5.0], [1.0, 5.0], [0.5, 5.01]],
            ..straight(0.0, 1.0, 5.0, 0.5, 2)
        };
        let s = check(&[line, label, odd], &RULES);
        assert_eq!((s.shapes, s.guides, s.edges), (1, 1, 3));
        assert!(s.violations.is_empty(), "{:?}", s.violations);
    }

    #[test]
    fn crossing_arms_in_an_overlap_group() {
        // A horizontal and a vertical arm cross at the origin; their edges
        // cross transversally. In one overlap group that is by design.
        let mut h = straight(-5.0, 5.0, 0.0, 0.5, 3);
        let mut v = strip(
            vec![[-0.25, -5.0], [-0.25, 5.0]],
            vec![[0.25, -5.0], [0.25, 5.0]],
            3,
        );
        let s = check(&[h.clone(), v.clone()], &RULES);
        assert_eq!(of_rule(&s, Rule::Overlap).len(), 1, "{:?}", s.violations);
        let o = of_rule(&s, Rule::Overlap)[0];
        assert!(
            o.x_um.abs() <= 0.25 + 1e-9 && o.y_um.abs() <= 0.25 + 1e-9,
            "{o:?}"
        );
        h.overlap_group = Some(7);
        v.overlap_group = Some(7);
        let s = check(&[h, v], &RULES);
        assert!(s.violations.is_empty(), "{:?}", s.violations);
    }

    #[test]
    fn contained_core_overlaps() {
        // A small core wholly inside another guide's core: no edges meet, so
        // only the containment test can see it; reported at its vertex.
        let big = rect(MaskLayer::Core, 0.0, 10.0, -1.0, 1.0, 0);
        let small = rect(MaskLayer::Core, 4.0, 5.0, -0.2, 0.2, 1);
        let s = check(&[big, small], &RULES);
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!((v.rule, v.x_um, v.y_um), (Rule::Overlap, 4.0, -0.2));
    }

    #[test]
    fn touching_side_by_side_is_a_zero_gap_not_an_overlap() {
        // Two guides sharing the line y = 0.25 with their interiors on
        // opposite sides: the boundaries touch but the interiors do not meet.
        let s = check(
            &[
                straight(0.0, 10.0, 0.0, 0.5, 0),
                straight(0.0, 10.0, 0.5, 0.5, 1),
            ],
            &RULES,
        );
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!(v.rule, Rule::Gap);
        assert!(v.measured_um.abs() < 1e-12, "{v:?}");
    }

    #[test]
    fn taper_tip_width() {
        // A linear taper from 0.5 um at x = 0 to 0.1 um at x = 10. The tip
        // vertex (10, 0.05) is 0.1 from the tip vertex across (the slanted
        // opposite edge's nearest point is its end), and the end edge is
        // 0.1 long, so the narrowest width is 0.1, at the tip pair's
        // midpoint (10, 0); 0.1 < 0.15 fails, 0.1 >= 0.1 passes.
        let taper = strip(
            vec![[0.0, 0.25], [10.0, 0.05]],
            vec![[0.0, -0.25], [10.0, -0.05]],
            2,
        );
        let s = check(
            std::slice::from_ref(&taper),
            &rules_with(|r| r.min_width_um = 0.15),
        );
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!((v.rule, v.component), (Rule::Width, 2));
        assert!((v.measured_um - 0.1).abs() < 1e-9, "{v:?}");
        assert!(
            (v.x_um - 10.0).abs() < 1e-12 && v.y_um.abs() < 1e-12,
            "{v:?}"
        );
        let s = check(&[taper], &rules_with(|r| r.min_width_um = 0.1));
        assert!(s.violations.is_empty(), "{:?}", s.violations);
    }

    #[test]
    fn width_is_measured_to_the_nearest_opposite_segment() {
        // The pairs of this 0.5 um strip are offset along it: the top edge
        // has vertices at x = 0, 5, 10 and the bottom edge at 0, 2, 10. The
        // paired vertex of (5, 0.25) is (2, -0.25), 3.04 away, but the width
        // is 0.5: no Width violation against 0.45.
        let s = strip(
            vec![[0.0, 0.25], [5.0, 0.25], [10.0, 0.25]],
            vec![[0.0, -0.25], [2.0, -0.25], [10.0, -0.25]],
            0,
        );
        let r = check(&[s], &rules_with(|r| r.min_width_um = 0.45));
        assert!(of_rule(&r, Rule::Width).is_empty(), "{:?}", r.violations);
    }

    fn arc(r: f64, w: f64, n: usize) -> Shape {
        let centre: Vec<(Point, Point)> = (0..=n)
            .map(|k| {
                let t = std::f64::consts::FRAC_PI_2 * k as f64 / n as f64;
                ([r * t.cos(), r * t.sin()], [t.cos(), t.sin()])
            })
            .collect();
        along(&centre, w, 4)
    }

    #[test]
    fn arc_bend_radius() {
        // The pairs lie on radii of one circle, so every centre point is on
        // the circle of radius 5 and every triple's circumradius is 5 (to
        // rounding): min 5 passes (relative tolerance 1e-6), min 6 fails
        // with measured 5. The width across is exactly 0.5 at each pair.
        let a = arc(5.0, 0.5, 400);
        let s = check(
            std::slice::from_ref(&a),
            &rules_with(|r| r.min_bend_radius_um = 5.0),
        );
        assert!(s.violations.is_empty(), "{:?}", s.violations);
        let s = check(&[a], &rules_with(|r| r.min_bend_radius_um = 6.0));
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!(v.rule, Rule::BendRadius);
        assert!((v.measured_um / 5.0 - 1.0).abs() < 1e-6, "{v:?}");
        assert!((v.x_um.hypot(v.y_um) - 5.0).abs() < 1e-9, "{v:?}");
    }

    #[test]
    fn parabola_bend_radius_at_vertex() {
        // y = b x^2 has curvature 2b at its vertex, radius 1/(2b) = 10 for
        // b = 0.05, and larger elsewhere. The circle through (-h, b h^2),
        // (0, 0), (h, b h^2) has radius (1 + b^2 h^2) / (2b): with h = 0.01
        // the relative error is b^2 h^2 = 2.5e-7, well within 1e-4.
        let b = 0.05;
        let centre: Vec<(Point, Point)> = (-500..=500)
            .map(|k| {
                let x = k as f64 * 0.01;
                let s = 2.0 * b * x;
                let l = s.hypot(1.0);
                ([x, b * x * x], [-s / l, 1.0 / l])
            })
            .collect();
        let p = along(&centre, 0.5, 5);
        let s = check(&[p], &rules_with(|r| r.min_bend_radius_um = 20.0));
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!(v.rule, Rule::BendRadius);
        assert!((v.measured_um * 2.0 * b - 1.0).abs() < 1e-4, "{v:?}");
        assert!(v.x_um.abs() < 0.011, "{v:?}");
    }

    #[test]
    fn one_sided_width_step_is_not_a_bend() {
        // A width step that keeps the top edge (its point repeats) moves the
        // centre sideways by 0.1 between two pairs at x = 5: no bend, and
        // the zero-length top piece must not divide by zero.
        let s = strip(
            vec![[0.0, 0.25], [5.0, 0.25], [5.0, 0.25], [10.0, 0.25]],
            vec![[0.0, -0.25], [5.0, -0.25], [5.0, -0.45], [10.0, -0.45]],
            0,
        );
        let r = check(&[s], &rules_with(|r| r.min_bend_radius_um = 100.0));
        assert!(r.violations.is_empty(), "{:?}", r.violations);
        assert_eq!(r.edges, 7);
    }

    #[test]
    fn heater_clearance_and_spacing() {
        // Rails 0.5 wide at y = 0 and y = 3 (3 um pitch); a heater 2 um wide
        // on the first (y in [-1, 1]) overlaps its rail, so it sits on that
        // guide. The other rail's near edge is at 2.75: clearance
        // 2.75 - 1 = 1.75, which passes 1.0 and fails 2.0, measured at the
        // midpoint of the facing stretch (x = 50, y = 1.875).
        let rails = vec![
            straight(0.0, 100.0, 0.0, 0.5, 0),
            straight(0.0, 100.0, 3.0, 0.5, 1),
        ];
        let h0 = rect(MaskLayer::Heater, 20.0, 80.0, -1.0, 1.0, 10);
        let mut shapes = rails.clone();
        shapes.push(h0.clone());
        let s = check(&shapes, &rules_with(|r| r.heater_clearance_um = 1.0));
        assert!(s.violations.is_empty(), "{:?}", s.violations);
        let s = check(&shapes, &rules_with(|r| r.heater_clearance_um = 2.0));
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!(
            (v.rule, v.component, v.other),
            (Rule::HeaterClearance, 10, Some(1))
        );
        assert!((v.measured_um - 1.75).abs() < 1e-9, "{v:?}");
        assert!(
            (v.x_um - 50.0).abs() < 1e-9 && (v.y_um - 1.875).abs() < 1e-9,
            "{v:?}"
        );
        // A second heater on the second rail, y in [2, 4]: the heaters are
        // 1.0 apart (spacing 0.8 passes, 1.2 fails); each keeps 1.75 from
        // the other's rail.
        shapes.push(rect(MaskLayer::Heater, 20.0, 80.0, 2.0, 4.0, 11));
        let s = check(&shapes, &rules_with(|r| r.heater_spacing_um = 0.8));
        assert!(s.violations.is_empty(), "{:?}", s.violations);
        let s = check(&shapes, &rules_with(|r| r.heater_spacing_um = 1.2));
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        let v = &s.violations[0];
        assert_eq!(
            (v.rule, v.component, v.other),
            (Rule::HeaterSpacing, 10, Some(11))
        );
        assert!((v.measured_um - 1.0).abs() < 1e-9, "{v:?}");
    }

    #[test]
    fn heater_over_a_contained_core() {
        // A rail drawn as short strips wholly inside the heater (their
        // boundaries 0.75 from the heater's): the heater still sits on that
        // guide through containment, so only the far rail is measured.
        let mut shapes: Vec<Shape> = (0..10)
            .map(|k| straight(10.0 * k as f64, 10.0 * (k + 1) as f64, 0.0, 0.5, k))
            .collect();
        shapes.push(straight(0.0, 100.0, 3.0, 0.5, 20));
        shapes.push(rect(MaskLayer::Heater, 0.0, 100.0, -1.0, 1.0, 30));
        let s = check(&shapes, &rules_with(|r| r.heater_clearance_um = 2.0));
        assert_eq!(s.guides, 2);
        assert_eq!(s.violations.len(), 1, "{:?}", s.violations);
        assert_eq!(s.violations[0].other, Some(20));
    }

    /// A small layout with one of each violation.
    fn mixed() -> Vec<Shape> {
        let mut v = vec![
            straight(0.0, 10.0, 0.0, 0.5, 0),
            straight(0.0, 10.0, 0.62, 0.5, 1),
            straight(10.0, 20.0, 0.0, 0.5, 2),
            straight(19.9, 30.0, 0.0, 0.5, 3),
            strip(
                vec![[30.0, 5.25], [40.0, 5.05]],
                vec![[30.0, 4.75], [40.0, 4.95]],
                4,
            ),
            rect(MaskLayer::Heater, 0.0, 10.0, 2.0, 4.0, 5),
            straight(0.0, 10.0, 3.0, 0.5, 6),
            rect(MaskLayer::Heater, 0.0, 10.0, 4.5, 6.5, 7),
            rect(MaskLayer::Contact, 0.0, 1.0, 0.0, 1.0, 8),
            arc(3.0, 0.5, 60),
        ];
        let a = v.last_mut().unwrap();
        a.component = 9;
        for p in &mut a.polygon {
            p[0] += 50.0;
            p[1] += 50.0;
        }
        for s in v.iter_mut().take(4) {
            s.polygon.reverse();
        }
        v
    }

    #[test]
    fn output_does_not_depend_on_input_order() {
        // The shapes are put in a canonical order before anything is
        // measured, so any permutation of the input gives the same list.
        let rules = Rules {
            min_gap_um: 0.15,
            min_width_um: 0.15,
            min_bend_radius_um: 4.0,
            heater_clearance_um: 2.0,
            heater_spacing_um: 1.0,
        };
        let base = mixed();
        let want = check(&base, &rules);
        let kinds: Vec<Rule> = want.violations.iter().map(|v| v.rule).collect();
        for r in [
            Rule::Gap,
            Rule::Overlap,
            Rule::Width,
            Rule::BendRadius,
            Rule::HeaterClearance,
            Rule::HeaterSpacing,
        ] {
            assert!(
                kinds.contains(&r),
                "{r:?} missing from {:?}",
                want.violations
            );
        }
        let mut seed: u64 = 0x2545_f491_4f6c_dd1d;
        for _ in 0..20 {
            let mut s = base.clone();
            for i in (1..s.len()).rev() {
                seed ^= seed << 13;
                seed ^= seed >> 7;
                seed ^= seed << 17;
                s.swap(i, (seed % (i as u64 + 1)) as usize);
            }
            assert_eq!(check(&s, &rules), want);
        }
    }

    /// A raised-cosine rail detour: offset `a (1 + cos(2 pi (x - xc) / l)) / 2`
    /// over x in [xc - l/2, xc + l/2], pairs vertical as mask.rs draws cell
    /// rails, so the ends meet straight rails edge to edge.
    fn detour(xc: f64, l: f64, y: f64, a: f64, n: usize, component: usize) -> Shape {
        let (mut top, mut bot) = (Vec::new(), Vec::new());
        for k in 0..=n {
            let x = xc - l / 2.0 + l * k as f64 / n as f64;
            let yc = y + a * (1.0 + (2.0 * std::f64::consts::PI * (x - xc) / l).cos()) / 2.0;
            top.push([x, yc + 0.25]);
            bot.push([x, yc - 0.25]);
        }
        strip(top, bot, component)
    }

    /// A synthetic 32-mode chip, 20 mm long: 32 rails at 3 um pitch, each
    /// of `strips` straight strips; 320 three-guide cells (rails k and k+1,
    /// k even, detour toward a middle strip to 0.1 um, each detour strip of
    /// `pairs` vertex pairs); a 100 um heater every 500 um on every rail.
    fn synthetic_chip(strips: usize, pairs: usize) -> Vec<Shape> {
        let len = 20000.0 / strips as f64;
        let cell_len = (40.0 / len).ceil() * len;
        let cell_at =
            |x: f64| (x % 1000.0) >= 200.0 - 1e-9 && (x % 1000.0) < 200.0 + cell_len - 1e-9;
        let mut shapes = Vec::new();
        let mut comp = 0;
        for k in 0..32 {
            let y = 3.0 * k as f64;
            for s in 0..strips {
                let x = len * s as f64;
                if !cell_at(x) {
                    shapes.push(straight(x, x + len, y, 0.5, comp));
                    comp += 1;
                }
            }
            for j in 0..40 {
                let x = 500.0 * j as f64 + 300.0;
                shapes.push(rect(
                    MaskLayer::Heater,
                    x,
                    x + 100.0,
                    y - 1.0,
                    y + 1.0,
                    comp,
                ));
                comp += 1;
            }
        }
        for k in (0..32).step_by(2) {
            let y = 3.0 * k as f64;
            for m in 0..20 {
                let xc = 1000.0 * m as f64 + 200.0 + cell_len / 2.0;
                shapes.push(detour(xc, cell_len, y, 0.9, pairs - 1, comp));
                shapes.push(straight(
                    xc - cell_len / 2.0,
                    xc + cell_len / 2.0,
                    y + 1.5,
                    0.5,
                    comp + 1,
                ));
                shapes.push(detour(xc, cell_len, y + 3.0, -0.9, pairs - 1, comp + 2));
                comp += 3;
            }
        }
        shapes
    }

    #[test]
    #[ignore = "timing: cargo test --release -- --ignored --nocapture"]
    fn timing_synthetic_32_mode_chip() {
        let rules = Rules {
            min_gap_um: 0.1,
            min_width_um: 0.3,
            min_bend_radius_um: 50.0,
            heater_clearance_um: 1.0,
            heater_spacing_um: 1.0,
        };
        // (strips per rail, pairs per detour): the brief's 2000 x 10 um
        // strips, and a chip of the real one's size (~15 000 shapes,
        // ~200 000 vertices).
        for (strips, pairs) in [(2000, 101), (400, 121)] {
            let shapes = synthetic_chip(strips, pairs);
            let vertices: usize = shapes.iter().map(|s| s.polygon.len()).sum();
            let mut times = Vec::new();
            let mut s = Summary::default();
            for _ in 0..7 {
                let t = std::time::Instant::now();
                s = check(&shapes, &rules);
                times.push(t.elapsed().as_secs_f64() * 1e3);
            }
            times.sort_by(f64::total_cmp);
            println!(
                "{} shapes, {vertices} vertices, {} guides, {} edges, {} violations: \
                 min {:.1} ms, median {:.1} ms of 7",
                s.shapes,
                s.guides,
                s.edges,
                s.violations.len(),
                times[0],
                times[3]
            );
            // 32 rails and 320 middle strips; every gap is exactly 0.1, every
            // heater 1.0 from its neighbours, 1.75 from the next rail.
            assert_eq!(s.guides, 32 + 320);
            assert!(
                s.violations.is_empty(),
                "{:?}",
                &s.violations[..s.violations.len().min(5)]
            );
            let tight = check(
                &shapes,
                &Rules {
                    min_gap_um: 0.11,
                    ..rules
                },
            );
            assert_eq!(of_rule(&tight, Rule::Gap).len(), 640);
        }
    }
}
