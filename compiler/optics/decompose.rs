//! Mesh decompositions of an N x N unitary into two-mode blocks.
//!
//! Block convention (Clements et al., "Optimal design for universal
//! multiport interferometers", Optica 3, 1460, 2016), on modes (m, m+1):
//!
//! ```text
//! T(theta, phi) = [[e^{i phi} cos theta, -sin theta],
//!                  [e^{i phi} sin theta,  cos theta]]
//! ```
//!
//! Any unitary is `U = D * T_K ... T_2 T_1` with K = N(N-1)/2 blocks and D a
//! diagonal phase screen; T_1 is the first block the light meets.
//!
//! - Rectangular (Clements 2016): elements are nulled along anti-diagonals,
//!   alternately by blocks multiplied from the right and from the left; the
//!   left ones are then moved through the diagonal (T^-1 D = D' T'), which
//!   gives a mesh of optical depth N.
//! - Triangular (Reck, Zeilinger, Bernstein & Bertani, "Experimental
//!   realization of any discrete unitary operator", PRL 73, 58, 1994): rows
//!   are nulled from the bottom with blocks from the right only; depth 2N-3.
//!
//! Each block is tagged with its column: the earliest layer in which both its
//! modes are free (as-soon-as-possible scheduling in propagation order).

use nalgebra::DMatrix;
use num_complex::Complex64;

/// The largest entry of U†U - I accepted as unitary.
pub const UNITARITY_TOL: f64 = 1e-9;

/// One two-mode block T(theta, phi) on modes (upper, upper + 1).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Block {
    pub upper: usize,
    pub theta: f64,
    pub phi: f64,
    /// Layer of the mesh, from 0 at the input.
    pub column: usize,
}

impl Block {
    /// The 2 x 2 matrix of the block.
    pub fn matrix(&self) -> [[Complex64; 2]; 2] {
        let (s, c) = self.theta.sin_cos();
        let e = Complex64::from_polar(1.0, self.phi);
        [
            [e * c, Complex64::new(-s, 0.0)],
            [e * s, Complex64::new(c, 0.0)],
        ]
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Layout {
    Rectangular,
    Triangular,
}

/// A unitary as blocks in propagation order and an output phase screen.
#[derive(Clone, Debug, PartialEq)]
pub struct Decomposition {
    pub modes: usize,
    pub layout: Layout,
    pub blocks: Vec<Block>,
    /// D = diag(e^{i phase}), applied after the last block.
    pub output_phases: Vec<f64>,
}

#[derive(Debug, thiserror::Error, PartialEq)]
pub enum DecomposeError {
    #[error("the matrix is {rows} x {cols}; a mesh realises square matrices")]
    NotSquare { rows: usize, cols: usize },
    #[error(
        "the matrix is not unitary: it leaves {deviation:.3e} off the diagonal of its mesh (largest entry)"
    )]
    NotUnitary { deviation: f64 },
}

impl Decomposition {
    /// Optical depth: the number of columns.
    pub fn depth(&self) -> usize {
        self.blocks.iter().map(|b| b.column + 1).max().unwrap_or(0)
    }

    /// The unitary the mesh realises, `D * T_K ... T_1`.
    pub fn matrix(&self) -> DMatrix<Complex64> {
        let mut u = DMatrix::<Complex64>::identity(self.modes, self.modes);
        for b in &self.blocks {
            apply_left(&mut u, b.upper, b.matrix(), 0);
        }
        for (i, p) in self.output_phases.iter().enumerate() {
            let e = Complex64::from_polar(1.0, *p);
            for j in 0..self.modes {
                u[(i, j)] *= e;
            }
        }
        u
    }
}

/// Rows (m, m+1) of `u` replaced by `t` times them, from column `from` on
/// (the columns before it are zero in both rows when nulling).
fn apply_left(u: &mut DMatrix<Complex64>, m: usize, t: [[Complex64; 2]; 2], from: usize) {
    // Column-major storage: walk the columns as slices, so the two entries
    // of each column sit side by side and no index is bounds-checked twice.
    let n = u.nrows();
    for col in u.as_mut_slice()[from * n..].chunks_exact_mut(n) {
        let pair = &mut col[m..m + 2];
        let (a, b) = (pair[0], pair[1]);
        pair[0] = t[0][0] * a + t[0][1] * b;
        pair[1] = t[1][0] * a + t[1][1] * b;
    }
}

/// Columns (m, m+1) of `u` replaced by them times the inverse of `t`, in
/// rows 0..=`last` (the rows below are zero in both columns when nulling).
fn apply_right_inverse(u: &mut DMatrix<Complex64>, m: usize, t: [[Complex64; 2]; 2], last: usize) {
    // T^-1 = T† for a unitary block.
    let inv = [
        [t[0][0].conj(), t[1][0].conj()],
        [t[0][1].conj(), t[1][1].conj()],
    ];
    let n = u.nrows();
    let (c0, c1) = u.as_mut_slice()[m * n..(m + 2) * n].split_at_mut(n);
    for (x, y) in c0[..=last].iter_mut().zip(&mut c1[..=last]) {
        let (a, b) = (*x, *y);
        *x = a * inv[0][0] + b * inv[1][0];
        *y = a * inv[0][1] + b * inv[1][1];
    }
}

/// The block that, applied as U T^-1 on columns (m, m+1), nulls U[r, m].
fn null_from_right(u: &DMatrix<Complex64>, r: usize, m: usize) -> Block {
    let (a, b) = (u[(r, m)], u[(r, m + 1)]);
    // (U T^-1)[r, m] = e^{-i phi} cos(theta) a - sin(theta) b = 0.
    let theta = a.norm().atan2(b.norm());
    let phi = if a.norm() == 0.0 || b.norm() == 0.0 {
        0.0
    } else {
        a.arg() - b.arg()
    };
    Block {
        upper: m,
        theta,
        phi,
        column: 0,
    }
}

/// The block that, applied as T U on rows (m, m+1), nulls U[m+1, col].
fn null_from_left(u: &DMatrix<Complex64>, m: usize, col: usize) -> Block {
    let (a, b) = (u[(m, col)], u[(m + 1, col)]);
    // (T U)[m+1, col] = e^{i phi} sin(theta) a + cos(theta) b = 0.
    let theta = b.norm().atan2(a.norm());
    let phi = if a.norm() == 0.0 || b.norm() == 0.0 {
        0.0
    } else {
        std::f64::consts::PI + b.arg() - a.arg()
    };
    Block {
        upper: m,
        theta,
        phi,
        column: 0,
    }
}

fn check_square(u: &DMatrix<Complex64>) -> Result<(), DecomposeError> {
    if u.nrows() != u.ncols() {
        return Err(DecomposeError::NotSquare {
            rows: u.nrows(),
            cols: u.ncols(),
        });
    }
    Ok(())
}

/// Unitarity, checked in O(N^2) after nulling: W = L U R has a zero lower
/// triangle, and an upper-triangular matrix is unitary exactly when it is
/// diagonal with unit-modulus entries; L and R are unitary, so this holds
/// exactly when U is unitary. (Forming U†U would cost O(N^3).)
fn check_nulled(w: &DMatrix<Complex64>) -> Result<(), DecomposeError> {
    let n = w.nrows();
    let mut dev: f64 = 0.0;
    for j in 0..n {
        for i in 0..n {
            let v = w[(i, j)];
            dev = dev.max(if i == j {
                (v.norm() - 1.0).abs()
            } else {
                v.norm()
            });
        }
    }
    if dev > UNITARITY_TOL {
        return Err(DecomposeError::NotUnitary { deviation: dev });
    }
    Ok(())
}

/// Assigns each block (in propagation order) the earliest free column.
fn schedule(blocks: &mut [Block], modes: usize) {
    let mut next_free = vec![0usize; modes];
    for b in blocks {
        let c = next_free[b.upper].max(next_free[b.upper + 1]);
        b.column = c;
        next_free[b.upper] = c + 1;
        next_free[b.upper + 1] = c + 1;
    }
}

fn output_phases(d: &DMatrix<Complex64>) -> Vec<f64> {
    (0..d.nrows()).map(|i| d[(i, i)].arg()).collect()
}

/// The rectangular decomposition (Clements et al. 2016): depth N.
pub fn rectangular(u: &DMatrix<Complex64>) -> Result<Decomposition, DecomposeError> {
    check_square(u)?;
    let n = u.nrows();
    let mut w = u.clone();
    let mut right: Vec<Block> = Vec::new();
    let mut left: Vec<Block> = Vec::new();
    for i in 0..n.saturating_sub(1) {
        if i % 2 == 0 {
            for j in 0..=i {
                let (r, m) = (n - 1 - j, i - j);
                let b = null_from_right(&w, r, m);
                // Entries below row r in columns m, m+1 lie on anti-diagonals
                // nulled before this one.
                apply_right_inverse(&mut w, m, b.matrix(), r);
                right.push(b);
            }
        } else {
            for j in 1..=i + 1 {
                let (m, col) = (n + j - i - 3, j - 1);
                let b = null_from_left(&w, m, col);
                // Entries left of `col` in rows m, m+1 are already nulled.
                apply_left(&mut w, m, b.matrix(), col);
                left.push(b);
            }
        }
    }
    // Now L_k ... L_1 U R_1 ... R_m = D, so U = L_1^-1 ... L_k^-1 D R_m ... R_1
    // (each R_j applied as its inverse above). Move every L^-1 through D:
    // T(theta, phi)^-1 diag(d1, d2) = diag(-e^{-i phi} d2, d2) T(theta, phi'),
    // e^{i phi'} = -d1/d2 (on modes m, m+1).
    check_nulled(&w)?;
    let mut d: Vec<Complex64> = (0..n).map(|i| w[(i, i)]).collect();
    let mut moved: Vec<Block> = Vec::with_capacity(left.len());
    for b in left.iter().rev() {
        let (d1, d2) = (d[b.upper], d[b.upper + 1]);
        let phi = (-d1 / d2).arg();
        d[b.upper] = -Complex64::from_polar(1.0, -b.phi) * d2;
        moved.push(Block {
            upper: b.upper,
            theta: b.theta,
            phi,
            column: 0,
        });
    }
    // U = D' T'_1 ... T'_k R_m ... R_1: in propagation order R_1 .. R_m, then
    // T'_k .. T'_1, which is the order `moved` was built in.
    let mut blocks = right;
    blocks.extend(moved);
    schedule(&mut blocks, n);
    let screen = DMatrix::from_diagonal(&nalgebra::DVector::from_vec(d));
    Ok(Decomposition {
        modes: n,
        layout: Layout::Rectangular,
        blocks,
        output_phases: output_phases(&screen),
    })
}

/// The triangular decomposition (Reck et al. 1994): depth 2N-3.
pub fn triangular(u: &DMatrix<Complex64>) -> Result<Decomposition, DecomposeError> {
    check_square(u)?;
    let n = u.nrows();
    let mut w = u.clone();
    let mut blocks = Vec::new();
    for r in (1..n).rev() {
        for m in 0..r {
            let b = null_from_right(&w, r, m);
            // Rows below r are nulled except on the diagonal, right of m + 1.
            apply_right_inverse(&mut w, m, b.matrix(), r);
            blocks.push(b);
        }
    }
    check_nulled(&w)?;
    // U R_1 ... R_K = D, so U = D R_K ... R_1: the light meets R_1 first.
    schedule(&mut blocks, n);
    Ok(Decomposition {
        modes: n,
        layout: Layout::Triangular,
        blocks,
        output_phases: output_phases(&w),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::optics::random::{SplitMix64, haar_unitary};

    fn frobenius(a: &DMatrix<Complex64>, b: &DMatrix<Complex64>) -> f64 {
        (a - b).norm()
    }

    // Counts and depths: N(N-1)/2 blocks, depth N (Clements 2016, N >= 3)
    // and 2N-3 (Reck 1994); reconstruction of Haar unitaries (Mezzadri 2007).
    #[test]
    fn haar_unitaries_reconstruct_with_the_published_counts_and_depths() {
        let mut rng = SplitMix64::new(2016);
        for n in [2usize, 3, 4, 5, 8, 13, 32] {
            let u = haar_unitary(n, &mut rng);
            let r = rectangular(&u).unwrap();
            let t = triangular(&u).unwrap();
            assert_eq!(r.blocks.len(), n * (n - 1) / 2);
            assert_eq!(t.blocks.len(), n * (n - 1) / 2);
            if n >= 3 {
                assert_eq!(r.depth(), n, "rectangular depth at N = {n}");
                assert_eq!(t.depth(), 2 * n - 3, "triangular depth at N = {n}");
            }
            assert!(
                frobenius(&r.matrix(), &u) < 1e-12,
                "rectangular N = {n}: {}",
                frobenius(&r.matrix(), &u)
            );
            assert!(
                frobenius(&t.matrix(), &u) < 1e-12,
                "triangular N = {n}: {}",
                frobenius(&t.matrix(), &u)
            );
        }
    }

    // The issue's bound: reconstruction error below 1e-12 (Frobenius) up to
    // N = 256, for both layouts.
    #[test]
    fn reconstruction_holds_to_256_modes() {
        let mut rng = SplitMix64::new(256);
        for n in [64usize, 256] {
            let u = haar_unitary(n, &mut rng);
            for d in [rectangular(&u).unwrap(), triangular(&u).unwrap()] {
                let err = frobenius(&d.matrix(), &u);
                assert!(err < 1e-12, "{:?} N = {n}: {err:.2e}", d.layout);
            }
        }
    }

    // Property test over seeds: every Haar unitary of 2..=24 modes.
    #[test]
    fn random_sizes_and_seeds() {
        for seed in 0..40u64 {
            let mut rng = SplitMix64::new(seed);
            let n = 2 + (rng.next_u64() % 23) as usize;
            let u = haar_unitary(n, &mut rng);
            let r = rectangular(&u).unwrap();
            assert!(frobenius(&r.matrix(), &u) < 1e-12);
            assert!(
                r.blocks
                    .iter()
                    .all(|b| (0.0..=std::f64::consts::FRAC_PI_2).contains(&b.theta))
            );
            let t = triangular(&u).unwrap();
            assert!(frobenius(&t.matrix(), &u) < 1e-12);
        }
    }

    #[test]
    fn permutations_and_the_identity_decompose_exactly() {
        let n = 5;
        let id = DMatrix::<Complex64>::identity(n, n);
        assert!(frobenius(&rectangular(&id).unwrap().matrix(), &id) < 1e-15);
        let mut p = DMatrix::<Complex64>::zeros(n, n);
        for i in 0..n {
            p[((i + 2) % n, i)] = Complex64::new(1.0, 0.0);
        }
        assert!(frobenius(&rectangular(&p).unwrap().matrix(), &p) < 1e-14);
        assert!(frobenius(&triangular(&p).unwrap().matrix(), &p) < 1e-14);
    }

    // The 3 x 3 discrete Fourier transform: the block angles are
    // {pi/4, acos(1/sqrt 3), pi/4} up to the order of the blocks
    // (checks.md, computed independently; phases depend on convention).
    #[test]
    fn dft3_angles() {
        let w = Complex64::from_polar(1.0, 2.0 * std::f64::consts::PI / 3.0);
        let s = 1.0 / 3f64.sqrt();
        let u = DMatrix::from_fn(3, 3, |i, j| w.powu((i * j) as u32) * s);
        let mut thetas: Vec<f64> = rectangular(&u)
            .unwrap()
            .blocks
            .iter()
            .map(|b| b.theta)
            .collect();
        thetas.sort_by(f64::total_cmp);
        let mut want = [
            std::f64::consts::FRAC_PI_4,
            std::f64::consts::FRAC_PI_4,
            s.acos(),
        ];
        want.sort_by(f64::total_cmp);
        for (a, b) in thetas.iter().zip(want) {
            assert!((a - b).abs() < 1e-12, "{thetas:?} vs {want:?}");
        }
    }

    #[test]
    fn refuses_what_no_mesh_realises() {
        let m = DMatrix::<Complex64>::from_element(2, 2, Complex64::new(0.9, 0.0));
        assert!(matches!(
            rectangular(&m),
            Err(DecomposeError::NotUnitary { .. })
        ));
        let r = DMatrix::<Complex64>::zeros(2, 3);
        assert!(matches!(
            triangular(&r),
            Err(DecomposeError::NotSquare { .. })
        ));
    }
}
