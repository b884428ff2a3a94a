//! Mesh strategies: a chip's mode network as two-mode blocks
//! T(theta, phi) on adjacent rails and single-mode phases, in propagation
//! order, each block in a column.
//!
//! - `flat`: the whole network's N x N unitary decomposed as one mesh,
//!   rectangular (Clements et al., Optica 3, 1460, 2016) or triangular
//!   (Reck et al., PRL 73, 58, 1994); `optics::decompose`.
//! - `local`: every element of the network (a gate's scheme, a `rotate`, a
//!   `unitary` literal) decomposed on its own modes. The elements form a
//!   dependency graph (petgraph): an edge from each element to the next one
//!   that shares a rail of its window (the rails from its top to its bottom
//!   mode). The graph's topological layers give the emission order, and the
//!   blocks are placed as soon as their rails are free, so gates on
//!   disjoint rails share columns. An element whose modes are not adjacent
//!   (a CZ scheme's vacuum ancillas sit below every qubit) is brought
//!   together by swap blocks (T(pi/2, 0), a full cross) that move the rails
//!   in between out of the way, and the same swaps in reverse put them back;
//!   the element's own mesh is solved for between the two swap networks, so
//!   the signs the swaps leave are absorbed exactly.
//!
//! The mesh's product (`Mesh::matrix`) equals the network's unitary to
//! rounding; the tests check it for every strategy and layout.

use crate::optics::ModeNetwork;
use crate::optics::decompose::{self, DecomposeError, Layout};
use nalgebra::DMatrix;
use num_complex::Complex64;
use petgraph::graph::{DiGraph, NodeIndex};
use std::f64::consts::FRAC_PI_2;

/// How the network becomes a mesh (cli.md `--strategy`; `auto` is chosen
/// in `compile::chip`, by building both).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Strategy {
    Flat,
    Local,
}

impl Strategy {
    pub fn name(self) -> &'static str {
        match self {
            Strategy::Flat => "flat",
            Strategy::Local => "local",
        }
    }
}

pub fn layout_name(l: Layout) -> &'static str {
    match l {
        Layout::Rectangular => "rectangular",
        Layout::Triangular => "triangular",
    }
}

/// One two-mode block on modes (upper, upper + 1), Clements's T(theta, phi).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MeshBlock {
    pub upper: usize,
    pub theta: f64,
    pub phi: f64,
    /// Column from 0 at the input.
    pub column: usize,
    /// A swap block of the local strategy's routing (theta = pi/2).
    pub swap: bool,
    /// The network element it comes from (local strategy).
    pub element: Option<usize>,
}

#[derive(Clone, Copy, Debug, PartialEq)]
pub enum MeshOp {
    Block(MeshBlock),
    /// e^{i phase} on one mode.
    Phase {
        mode: usize,
        phase_rad: f64,
    },
}

/// Where one network element went in a local mesh.
#[derive(Clone, Debug, PartialEq)]
pub struct ElementSpan {
    pub element: usize,
    /// Topological layer in the dependency graph.
    pub layer: usize,
    /// First and last column of its blocks (None: phases only).
    pub columns: Option<(usize, usize)>,
    pub blocks: usize,
    pub swaps: usize,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Mesh {
    pub modes: usize,
    pub strategy: Strategy,
    pub layout: Layout,
    /// In propagation order.
    pub ops: Vec<MeshOp>,
    /// Number of columns.
    pub depth: usize,
    /// Local strategy only: each element's place.
    pub elements: Vec<ElementSpan>,
}

impl Mesh {
    pub fn blocks(&self) -> impl Iterator<Item = &MeshBlock> {
        self.ops.iter().filter_map(|o| match o {
            MeshOp::Block(b) => Some(b),
            MeshOp::Phase { .. } => None,
        })
    }

    /// The product of the ops, the first op applied first.
    pub fn matrix(&self) -> DMatrix<Complex64> {
        let mut u = DMatrix::<Complex64>::identity(self.modes, self.modes);
        for op in &self.ops {
            match op {
                MeshOp::Block(b) => apply_block(&mut u, b.upper, &block_matrix(b.theta, b.phi)),
                MeshOp::Phase { mode, phase_rad } => {
                    let e = Complex64::from_polar(1.0, *phase_rad);
                    for j in 0..self.modes {
                        u[(*mode, j)] *= e;
                    }
                }
            }
        }
        u
    }
}

pub fn block_matrix(theta: f64, phi: f64) -> [[Complex64; 2]; 2] {
    decompose::Block {
        upper: 0,
        theta,
        phi,
        column: 0,
    }
    .matrix()
}

/// Rows (m, m+1) of `u` replaced by `t` times them.
pub fn apply_block(u: &mut DMatrix<Complex64>, m: usize, t: &[[Complex64; 2]; 2]) {
    for j in 0..u.ncols() {
        let (a, b) = (u[(m, j)], u[(m + 1, j)]);
        u[(m, j)] = t[0][0] * a + t[0][1] * b;
        u[(m + 1, j)] = t[1][0] * a + t[1][1] * b;
    }
}

fn decompose_with(
    u: &DMatrix<Complex64>,
    layout: Layout,
) -> Result<decompose::Decomposition, DecomposeError> {
    match layout {
        Layout::Rectangular => decompose::rectangular(u),
        Layout::Triangular => decompose::triangular(u),
    }
}

/// The whole network as one mesh.
pub fn flat(net: &ModeNetwork, layout: Layout) -> Result<Mesh, DecomposeError> {
    let d = decompose_with(&net.unitary, layout)?;
    let mut ops: Vec<MeshOp> = d
        .blocks
        .iter()
        .map(|b| {
            MeshOp::Block(MeshBlock {
                upper: b.upper,
                theta: b.theta,
                phi: b.phi,
                column: b.column,
                swap: false,
                element: None,
            })
        })
        .collect();
    push_phases(&mut ops, 0, &d.output_phases);
    Ok(Mesh {
        modes: net.unitary.nrows(),
        strategy: Strategy::Flat,
        layout,
        depth: d.depth(),
        ops,
        elements: Vec::new(),
    })
}

fn push_phases(ops: &mut Vec<MeshOp>, offset: usize, phases: &[f64]) {
    for (i, &p) in phases.iter().enumerate() {
        if p.abs() > 1e-15 {
            ops.push(MeshOp::Phase {
                mode: offset + i,
                phase_rad: p,
            });
        }
    }
}

/// The rails an element's mesh touches: from its top to its bottom mode.
fn window(modes: &[usize]) -> (usize, usize) {
    let lo = *modes.iter().min().expect("an element acts on a mode");
    let hi = *modes.iter().max().expect("an element acts on a mode");
    (lo, hi)
}

/// The dependency graph of the network's elements and each element's
/// layer (longest path from an element with no predecessor).
pub fn dependency_layers(net: &ModeNetwork) -> (DiGraph<usize, usize>, Vec<usize>) {
    let n = net.unitary.nrows();
    let mut g = DiGraph::<usize, usize>::new();
    let nodes: Vec<NodeIndex> = (0..net.elements.len()).map(|i| g.add_node(i)).collect();
    let mut last: Vec<Option<usize>> = vec![None; n];
    for (i, e) in net.elements.iter().enumerate() {
        let (lo, hi) = window(&e.modes);
        let mut preds: Vec<usize> = (lo..=hi).filter_map(|m| last[m]).collect();
        preds.sort_unstable();
        preds.dedup();
        for p in preds {
            g.add_edge(nodes[p], nodes[i], 0);
        }
        for slot in last.iter_mut().take(hi + 1).skip(lo) {
            *slot = Some(i);
        }
    }
    let order = petgraph::algo::toposort(&g, None).expect("edges run forward in circuit order");
    let mut layer = vec![0usize; net.elements.len()];
    for v in order {
        let i = g[v];
        for w in g.neighbors_directed(v, petgraph::Direction::Outgoing) {
            let j = g[w];
            layer[j] = layer[j].max(layer[i] + 1);
        }
    }
    (g, layer)
}

/// Each element decomposed on its own rails, routed with swap blocks where
/// its modes are not adjacent, scheduled from the dependency graph.
pub fn local(net: &ModeNetwork, layout: Layout) -> Result<Mesh, DecomposeError> {
    let n = net.unitary.nrows();
    let (_, layer) = dependency_layers(net);
    let mut order: Vec<usize> = (0..net.elements.len()).collect();
    order.sort_by_key(|&i| (layer[i], i));
    let mut ops = Vec::new();
    let mut next_free = vec![0usize; n];
    let mut spans = Vec::new();
    for i in order {
        let e = &net.elements[i];
        let local_ops = expand_element(&e.modes, &e.matrix, layout)?;
        let (mut first, mut last, mut blocks, mut swaps) = (usize::MAX, 0, 0, 0);
        for op in local_ops {
            match op {
                MeshOp::Block(mut b) => {
                    let c = next_free[b.upper].max(next_free[b.upper + 1]);
                    b.column = c;
                    b.element = Some(i);
                    next_free[b.upper] = c + 1;
                    next_free[b.upper + 1] = c + 1;
                    first = first.min(c);
                    last = last.max(c);
                    blocks += 1;
                    swaps += b.swap as usize;
                    ops.push(MeshOp::Block(b));
                }
                p @ MeshOp::Phase { .. } => ops.push(p),
            }
        }
        spans.push(ElementSpan {
            element: i,
            layer: layer[i],
            columns: (blocks > 0).then_some((first, last)),
            blocks,
            swaps,
        });
    }
    spans.sort_by_key(|s| s.element);
    Ok(Mesh {
        modes: n,
        strategy: Strategy::Local,
        layout,
        depth: next_free.iter().copied().max().unwrap_or(0),
        ops,
        elements: spans,
    })
}

/// One element (`matrix` row i = output on `modes[i]`) as mesh ops with
/// global mode numbers and columns still unset.
fn expand_element(
    modes: &[usize],
    matrix: &DMatrix<Complex64>,
    layout: Layout,
) -> Result<Vec<MeshOp>, DecomposeError> {
    let k = modes.len();
    if k == 1 {
        return Ok(vec![MeshOp::Phase {
            mode: modes[0],
            phase_rad: matrix[(0, 0)].arg(),
        }]);
    }
    let (lo, hi) = window(modes);
    let w = hi - lo + 1;
    // The element on its whole window, identity on the rails in between.
    let mut g = DMatrix::<Complex64>::identity(w, w);
    for (a, &ma) in modes.iter().enumerate() {
        for (b, &mb) in modes.iter().enumerate() {
            g[(ma - lo, mb - lo)] = matrix[(a, b)];
        }
    }
    // Swaps that bring the element's modes to the top of the window in
    // their rail order (a stable bubble), the rails in between below.
    let mut at: Vec<usize> = (0..w).collect(); // at[position] = window rail
    let member: Vec<bool> = (0..w).map(|r| modes.contains(&(r + lo))).collect();
    let mut swaps: Vec<usize> = Vec::new(); // upper position of each swap
    let mut target = 0;
    for pos in 0..w {
        if member[at[pos]] {
            let mut p = pos;
            while p > target {
                at.swap(p - 1, p);
                swaps.push(p - 1);
                p -= 1;
            }
            target += 1;
        }
    }
    let swap_t = block_matrix(FRAC_PI_2, 0.0);
    let mut a = DMatrix::<Complex64>::identity(w, w);
    for &s in &swaps {
        apply_block(&mut a, s, &swap_t);
    }
    // Back: the same transpositions in reverse order.
    let mut b = DMatrix::<Complex64>::identity(w, w);
    for &s in swaps.iter().rev() {
        apply_block(&mut b, s, &swap_t);
    }
    // g = b * middle * a, the signed permutations inverted by their adjoints.
    let middle = b.adjoint() * &g * a.adjoint();
    let core = middle.view((0, 0), (k, k)).into_owned();
    let d = decompose_with(&core, layout)?;
    let mut ops = Vec::new();
    let swap_op = |s: usize| {
        MeshOp::Block(MeshBlock {
            upper: lo + s,
            theta: FRAC_PI_2,
            phi: 0.0,
            column: 0,
            swap: true,
            element: None,
        })
    };
    ops.extend(swaps.iter().map(|&s| swap_op(s)));
    for blk in &d.blocks {
        ops.push(MeshOp::Block(MeshBlock {
            upper: lo + blk.upper,
            theta: blk.theta,
            phi: blk.phi,
            column: 0,
            swap: false,
            element: None,
        }));
    }
    push_phases(&mut ops, lo, &d.output_phases);
    // The rails in between carry the swaps' signs.
    let signs: Vec<f64> = (k..w).map(|p| middle[(p, p)].arg()).collect();
    push_phases(&mut ops, lo + k, &signs);
    ops.extend(swaps.iter().rev().map(|&s| swap_op(s)));
    Ok(ops)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::optics::network::{Element, ModeNetwork};

    fn frobenius(a: &DMatrix<Complex64>, b: &DMatrix<Complex64>) -> f64 {
        (a - b).norm()
    }

    fn net_of(n: usize, elements: Vec<Element>) -> ModeNetwork {
        let mut u = DMatrix::identity(n, n);
        for e in &elements {
            crate::optics::network::apply_rows(&mut u, e);
        }
        ModeNetwork {
            chip: "t".into(),
            modes: Vec::new(),
            qubits: Vec::new(),
            elements,
            unitary: u,
            detect: false,
            detected_qubits: Vec::new(),
            detected_modes: Vec::new(),
            post_selected: Vec::new(),
        }
    }

    fn random_element(modes: Vec<usize>, seed: u64) -> Element {
        let k = modes.len();
        Element {
            op: 0,
            matrix: crate::optics::random::haar_unitary(
                k,
                &mut crate::optics::random::SplitMix64::new(seed),
            ),
            modes,
        }
    }

    #[test]
    fn every_strategy_reproduces_the_network() {
        // Reconstruction to rounding (physics.md section 2 asks < 1e-12 of
        // a decomposition; a few products here, so 1e-11).
        let net = net_of(
            7,
            vec![
                random_element(vec![0, 1], 1),
                random_element(vec![0, 1, 2, 3, 5, 6], 2), // not adjacent
                random_element(vec![4, 2], 3),             // reversed order, gap
                random_element(vec![3], 4),
                random_element(vec![6, 5, 4, 3, 2, 1, 0], 5),
            ],
        );
        for layout in [Layout::Rectangular, Layout::Triangular] {
            for mesh in [flat(&net, layout).unwrap(), local(&net, layout).unwrap()] {
                let err = frobenius(&mesh.matrix(), &net.unitary);
                assert!(err < 1e-11, "{:?} {:?}: {err:e}", mesh.strategy, layout);
                // Columns are consistent: no two blocks of a column share a rail,
                // and a rail's blocks come in increasing columns.
                let mut last = [None; 7];
                for b in mesh.blocks() {
                    for m in [b.upper, b.upper + 1] {
                        assert!(last[m].is_none_or(|c| c < b.column));
                        last[m] = Some(b.column);
                    }
                    assert!(b.column < mesh.depth);
                }
            }
        }
    }

    #[test]
    fn routing_uses_swaps_only_where_rails_are_not_adjacent() {
        // Modes {0, 1, 4}: mode 4 must pass rails 3 and 2, two swaps there
        // and two back; a 3-mode element then needs 3 blocks.
        let net = net_of(5, vec![random_element(vec![0, 1, 4], 9)]);
        let m = local(&net, Layout::Rectangular).unwrap();
        assert_eq!(m.elements[0].swaps, 4);
        assert_eq!(m.elements[0].blocks, 4 + 3);
        let adjacent = net_of(5, vec![random_element(vec![1, 2, 3], 9)]);
        assert_eq!(
            local(&adjacent, Layout::Rectangular).unwrap().elements[0].swaps,
            0
        );
    }

    #[test]
    fn gates_on_disjoint_rails_share_columns() {
        // Two 2-mode elements on (0,1) and (2,3), then one on (1,2): the
        // first two sit in column 0 (layer 0), the third in column 1.
        let net = net_of(
            4,
            vec![
                random_element(vec![0, 1], 1),
                random_element(vec![2, 3], 2),
                random_element(vec![1, 2], 3),
            ],
        );
        let (_, layers) = dependency_layers(&net);
        assert_eq!(layers, vec![0, 0, 1]);
        let m = local(&net, Layout::Rectangular).unwrap();
        assert_eq!(m.depth, 2);
        assert_eq!(m.elements[0].columns, Some((0, 0)));
        assert_eq!(m.elements[1].columns, Some((0, 0)));
        assert_eq!(m.elements[2].columns, Some((1, 1)));
    }
}
