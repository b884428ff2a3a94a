//! The non-uniform rectangular grid of the full-vector solver and the
//! cross-section painted on it.
//!
//! Every material interface lies on a grid line, so each cell holds one
//! material (the permittivity at the cell's centre) and the solver's
//! interface averaging (see [`super::operator`]) sees the exact geometry.
//! Along each axis the grid is built from the interfaces outwards:
//!
//! - between the outermost interfaces (inside the cores and the gaps
//!   between them) the step is `edge_step_um` at every interface and grows
//!   by at most the ratio `growth` per cell towards `core_step_um`, its
//!   maximum. Nodes are placed at equal increments of the stretching
//!   function `s(d)` (d the distance to the nearer interface) that puts the
//!   cells `edge_step, edge_step growth, edge_step growth^2, ...` at each
//!   end and the uniform `core_step` once that is reached, the cell count
//!   rounded up: a smooth geometric grading;
//! - into each cladding the step starts at `edge_step_um` and grows
//!   geometrically by `growth` up to `cladding_step_um`, until the cladding
//!   is `margin` deep. The nodes near the guides therefore do not depend on
//!   the margin; a wavelength-dependent margin only moves the far wall.
//!
//! Fine near every interface in both directions means fine at the cores'
//! corners, where the field is singular. Refinement for convergence studies
//! splits every cell into `2^subdivide` equal cells, so the grids of a study
//! are nested.

use super::VectorError;

/// How to grid a cross-section. Lengths in um.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GridSpec {
    /// Step at every material interface (core edges and corners), um.
    pub edge_step_um: f64,
    /// Largest step between the outermost interfaces (inside the cores and
    /// the gaps between them), um.
    pub core_step_um: f64,
    /// Largest step in the claddings, um.
    pub cladding_step_um: f64,
    /// Largest ratio of neighbouring steps (>= 1).
    pub growth: f64,
    /// Cladding depth beyond the outermost interfaces on every side, um;
    /// `None` chooses [`super::DECAY_LENGTHS`] field decay lengths (0.8 to
    /// 8 um), from an effective index method estimate of the slowest
    /// decaying wanted mode.
    pub margin_um: Option<f64>,
    /// Split every cell into `2^subdivide` equal cells (0: as specified);
    /// for convergence studies.
    pub subdivide: u32,
}

impl Default for GridSpec {
    /// 10 nm in the cores and at every interface, graded by 1.2 per cell to
    /// 100 nm in the claddings.
    fn default() -> GridSpec {
        GridSpec {
            edge_step_um: 0.01,
            core_step_um: 0.01,
            cladding_step_um: 0.1,
            growth: 1.2,
            margin_um: None,
            subdivide: 0,
        }
    }
}

impl GridSpec {
    /// A coarse grid that is still accurate for 220 nm silicon strips (10 nm
    /// at the interfaces, 40 nm at most in the cores, 200 nm in the
    /// claddings, growth 1.3): about a tenth of the unknowns of the default.
    pub fn coarse() -> GridSpec {
        GridSpec {
            edge_step_um: 0.01,
            core_step_um: 0.04,
            cladding_step_um: 0.2,
            growth: 1.3,
            margin_um: None,
            subdivide: 0,
        }
    }

    /// The same grid with every cell split `levels` more times.
    pub fn refined(self, levels: u32) -> GridSpec {
        GridSpec {
            subdivide: self.subdivide + levels,
            ..self
        }
    }

    pub(crate) fn validate(&self) -> Result<(), VectorError> {
        let pos = |x: f64| x.is_finite() && x > 0.0;
        if !(pos(self.edge_step_um) && pos(self.core_step_um) && pos(self.cladding_step_um)) {
            return Err(VectorError::Grid(
                "grid steps must be positive and finite".into(),
            ));
        }
        if self.edge_step_um > self.core_step_um || self.core_step_um > self.cladding_step_um {
            return Err(VectorError::Grid(format!(
                "grid steps must grow outwards: edge {} <= core {} <= cladding {} um",
                self.edge_step_um, self.core_step_um, self.cladding_step_um
            )));
        }
        if !(self.growth.is_finite() && (1.0..=3.0).contains(&self.growth)) {
            return Err(VectorError::Grid(format!(
                "the grid growth ratio must lie in [1, 3], got {}",
                self.growth
            )));
        }
        if let Some(m) = self.margin_um
            && !pos(m)
        {
            return Err(VectorError::Grid(format!(
                "the cladding margin must be positive, got {m} um"
            )));
        }
        if self.subdivide > 6 {
            return Err(VectorError::Grid(format!(
                "at most 6 subdivisions (64 cells per cell), got {}",
                self.subdivide
            )));
        }
        Ok(())
    }
}

/// Fewest cells allowed across any feature (film, strip, gap) before
/// subdivision: below this the grid is too coarse to resolve it.
pub const MIN_CELLS_PER_FEATURE: usize = 4;

/// Most cells along one axis (after subdivision).
pub const MAX_AXIS_CELLS: usize = 20_000;

/// Nodes along one axis, built from its interfaces (sorted, at least one).
pub(crate) fn axis(
    interfaces: &[f64],
    spec: &GridSpec,
    margin: f64,
) -> Result<Vec<f64>, VectorError> {
    debug_assert!(interfaces.windows(2).all(|w| w[0] < w[1]) && !interfaces.is_empty());
    let (he, hc, hm, r) = (
        spec.edge_step_um,
        spec.core_step_um,
        spec.cladding_step_um,
        spec.growth,
    );
    let too_many = || {
        VectorError::Grid(format!(
            "grid too fine: more than {MAX_AXIS_CELLS} cells along one axis"
        ))
    };
    // Outward march into a cladding: steps from the interface.
    let mut outer = Vec::new();
    let (mut h, mut depth) = (he, 0.0);
    while depth < margin * (1.0 - 1e-12) {
        outer.push(h);
        depth += h;
        h = (h * r).min(hm);
        if outer.len() > MAX_AXIS_CELLS {
            return Err(too_many());
        }
    }
    let mut nodes = Vec::new();
    let first = interfaces[0];
    let mut x = first - outer.iter().sum::<f64>();
    nodes.push(x);
    for h in outer.iter().rev() {
        x += h;
        nodes.push(x);
    }
    // Exact interface position (no round-off drift).
    *nodes.last_mut().expect("nodes") = first;
    for w in interfaces.windows(2) {
        let inner = graded_interval(w[0], w[1], he, hc, r).ok_or_else(too_many)?;
        if inner.len() - 1 < MIN_CELLS_PER_FEATURE {
            return Err(VectorError::Grid(format!(
                "grid too coarse: the {hc} um core step gives {} cells across a {:.4} um feature; \
                 at least {MIN_CELLS_PER_FEATURE} are needed (use a step of at most {:.4} um)",
                inner.len() - 1,
                w[1] - w[0],
                (w[1] - w[0]) / MIN_CELLS_PER_FEATURE as f64
            )));
        }
        nodes.extend_from_slice(&inner[1..]);
    }
    let last = *interfaces.last().expect("interfaces");
    let mut x = last;
    for h in &outer {
        x += h;
        nodes.push(x);
    }
    if (nodes.len() - 1) << spec.subdivide > MAX_AXIS_CELLS {
        return Err(too_many());
    }
    Ok(subdivide(&nodes, spec.subdivide))
}

/// Nodes from `a` to `b` (both included) for the target step
/// `min(hc, he + (r - 1) d)`, `d` the distance to the nearer end.
fn graded_interval(a: f64, b: f64, he: f64, hc: f64, r: f64) -> Option<Vec<f64>> {
    let len = b - a;
    let g = r - 1.0;
    // Stretching function s(d) from one end, for d up to len / 2 (the
    // interval is symmetric): nodes at integer s are d_k = he (r^k - 1) / g,
    // cells he, he r, he r^2, ..., until the local step
    // (he + g d) ln(r) / g reaches hc at d_sat; uniform hc beyond.
    let uniform = g < 1e-9;
    let lr = r.ln();
    let d_sat = if uniform { 0.0 } else { (hc * g / lr - he) / g };
    let s_sat = if uniform {
        0.0
    } else {
        (1.0 + g * d_sat / he).ln() / lr
    };
    let h_uniform = if uniform { he } else { hc };
    let s_half = |d: f64| -> f64 {
        if !uniform && d <= d_sat {
            (1.0 + g * d / he).ln() / lr
        } else {
            s_sat + (d - d_sat) / h_uniform
        }
    };
    let total = 2.0 * s_half(len / 2.0);
    let n = (total * (1.0 - 1e-9)).ceil().max(1.0);
    if n > MAX_AXIS_CELLS as f64 {
        return None;
    }
    let n = n as usize;
    // Inverse of s_half.
    let inv = |s: f64| -> f64 {
        if !uniform && s <= s_sat {
            he * (r.powf(s) - 1.0) / g
        } else {
            d_sat + (s - s_sat) * h_uniform
        }
    };
    let nodes = (0..=n)
        .map(|k| {
            if k == 0 {
                return a;
            }
            if k == n {
                return b;
            }
            let s = total * k as f64 / n as f64;
            if s <= total / 2.0 {
                a + inv(s)
            } else {
                b - inv(total - s)
            }
        })
        .collect();
    Some(nodes)
}

/// Splits every cell into `2^levels` equal cells.
pub(crate) fn subdivide(nodes: &[f64], levels: u32) -> Vec<f64> {
    let parts = 1usize << levels;
    let mut out = Vec::with_capacity((nodes.len() - 1) * parts + 1);
    for w in nodes.windows(2) {
        for k in 0..parts {
            out.push(w[0] + (w[1] - w[0]) * k as f64 / parts as f64);
        }
    }
    out.push(*nodes.last().expect("nodes"));
    out
}

/// A rectangle of one permittivity.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Rect {
    pub x0: f64,
    pub x1: f64,
    pub y0: f64,
    pub y1: f64,
    pub eps: f64,
}

/// A cross-section: a background of `eps_below` (y < 0) and `eps_above`
/// (y > 0) with rectangles painted over it in order.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Section {
    pub eps_below: f64,
    pub eps_above: f64,
    pub rects: Vec<Rect>,
}

impl Section {
    pub fn eps_at(&self, x: f64, y: f64) -> f64 {
        let mut e = if y < 0.0 {
            self.eps_below
        } else {
            self.eps_above
        };
        for r in &self.rects {
            if x > r.x0 && x < r.x1 && y > r.y0 && y < r.y1 {
                e = r.eps;
            }
        }
        e
    }
}

/// A tensor-product grid with the permittivity of every cell.
#[derive(Clone, Debug)]
pub(crate) struct Grid {
    /// Node coordinates, um (`nx + 1` of them).
    pub x: Vec<f64>,
    /// Node coordinates, um (`ny + 1` of them).
    pub y: Vec<f64>,
    /// Relative permittivity of cell (i, j) at `eps[i * ny + j]`.
    pub eps: Vec<f64>,
}

impl Grid {
    pub fn new(x: Vec<f64>, y: Vec<f64>, section: &Section) -> Grid {
        let (nx, ny) = (x.len() - 1, y.len() - 1);
        let mut eps = Vec::with_capacity(nx * ny);
        for i in 0..nx {
            let xc = 0.5 * (x[i] + x[i + 1]);
            for j in 0..ny {
                let yc = 0.5 * (y[j] + y[j + 1]);
                eps.push(section.eps_at(xc, yc));
            }
        }
        Grid { x, y, eps }
    }

    pub fn nx(&self) -> usize {
        self.x.len() - 1
    }

    pub fn ny(&self) -> usize {
        self.y.len() - 1
    }

    pub fn cell_eps(&self, i: usize, j: usize) -> f64 {
        self.eps[i * self.ny() + j]
    }
}

/// Smallest and largest step of an axis.
pub(crate) fn step_range(nodes: &[f64]) -> (f64, f64) {
    nodes
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold((f64::INFINITY, 0.0f64), |(lo, hi), h| {
            (lo.min(h), hi.max(h))
        })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn steps(nodes: &[f64]) -> Vec<f64> {
        nodes.windows(2).map(|w| w[1] - w[0]).collect()
    }

    #[test]
    fn interfaces_are_nodes_and_steps_obey_the_spec() {
        let spec = GridSpec::coarse();
        let ifs = [-0.6, -0.1, 0.1, 0.6];
        let x = axis(&ifs, &spec, 1.2).unwrap();
        for f in ifs {
            assert!(x.contains(&f), "{f} is not a node");
        }
        let h = steps(&x);
        assert!(h.iter().all(|&s| s > 0.0));
        // Inside: at most the core step; outside: at most the cladding step.
        for (k, w) in x.windows(2).enumerate() {
            let inside = w[0] >= ifs[0] - 1e-12 && w[1] <= ifs[3] + 1e-12;
            let cap = if inside {
                spec.core_step_um
            } else {
                spec.cladding_step_um
            };
            assert!(h[k] <= cap * (1.0 + 1e-9), "step {} at {}", h[k], w[0]);
        }
        // Graded: neighbouring steps differ by at most the growth ratio
        // (plus the rounding of the cell count, a few per cent).
        for p in h.windows(2) {
            let ratio = (p[1] / p[0]).max(p[0] / p[1]);
            assert!(ratio <= spec.growth * 1.1, "ratio {ratio}");
        }
        // The edge step is what the interfaces see.
        let at = x.iter().position(|&n| n == 0.1).unwrap();
        assert!(h[at - 1] <= spec.edge_step_um * 1.01 && h[at] <= spec.edge_step_um * 1.01);
        // The cladding reaches the margin.
        assert!(x[0] <= -1.8 && *x.last().unwrap() >= 1.8);
    }

    #[test]
    fn the_grid_near_the_guides_does_not_depend_on_the_margin() {
        let spec = GridSpec::coarse();
        let a = axis(&[0.0, 0.22], &spec, 1.0).unwrap();
        let b = axis(&[0.0, 0.22], &spec, 1.7).unwrap();
        let near = |v: &[f64]| -> Vec<f64> {
            v.iter()
                .copied()
                .filter(|x| (-0.9..=1.1).contains(x))
                .collect()
        };
        assert_eq!(near(&a), near(&b));
    }

    #[test]
    fn subdivision_nests_the_grids() {
        let x = axis(&[0.0, 0.5], &GridSpec::coarse(), 1.0).unwrap();
        let x2 = subdivide(&x, 1);
        assert_eq!(x2.len(), 2 * (x.len() - 1) + 1);
        for (k, &n) in x.iter().enumerate() {
            assert_eq!(x2[2 * k], n);
        }
    }

    #[test]
    fn too_coarse_or_invalid_specs_are_errors() {
        let spec = GridSpec {
            core_step_um: 0.1,
            edge_step_um: 0.1,
            ..GridSpec::coarse()
        };
        assert!(matches!(
            axis(&[0.0, 0.22], &spec, 1.0),
            Err(VectorError::Grid(_))
        ));
        for bad in [
            GridSpec {
                edge_step_um: 0.0,
                ..GridSpec::default()
            },
            GridSpec {
                core_step_um: f64::NAN,
                ..GridSpec::default()
            },
            GridSpec {
                edge_step_um: 0.05,
                core_step_um: 0.01,
                ..GridSpec::default()
            },
            GridSpec {
                growth: 0.9,
                ..GridSpec::default()
            },
            GridSpec {
                margin_um: Some(-1.0),
                ..GridSpec::default()
            },
            GridSpec {
                subdivide: 9,
                ..GridSpec::default()
            },
        ] {
            assert!(bad.validate().is_err(), "{bad:?}");
        }
    }
}
