//! Eigenvalues of a large sparse matrix nearest a shift: the Arnoldi method
//! on the shift-and-invert operator `(A - sigma I)^-1`.
//!
//! Eigenvalues lambda of A near sigma become the dominant eigenvalues
//! `theta = 1 / (lambda - sigma)` of the inverted operator, which the
//! Arnoldi process finds first (spectral transformation: Ericsson & Ruhe,
//! Math. Comp. 35, 1251, 1980; volume and page from memory). Each step
//! applies the inverse through one sparse LU factorisation of `A - sigma I`
//! (faer's LU with partial pivoting after a COLAMD column ordering),
//! orthogonalises by classical Gram-Schmidt twice (two passes keep the basis
//! orthogonal to rounding: Giraud, Langou, Rozloznik & van den Eshof,
//! Numer. Math. 101, 87, 2005), and the Ritz pairs come
//! from the small Hessenberg matrix with the usual residual estimate
//! `|h_{m+1,m}| |e_m^T y|` (Saad, Numerical Methods for Large Eigenvalue
//! Problems, 2nd ed., SIAM 2011, sections 6.2 and 7.1). A basis that has not
//! converged is restarted explicitly from the sum of the wanted Ritz
//! vectors, with a larger basis (Saad 2011, section 7.1). Every returned
//! pair carries its true residual `||A x - lambda x|| / ||x||`.

use faer::Mat;
use faer::prelude::Solve;
use faer::sparse::linalg::solvers::Lu;
use faer::sparse::{SparseColMat, Triplet};

use super::VectorError;
use super::operator::Csr;

/// Relative accuracy of converged Ritz values of the inverted operator.
pub const TOLERANCE: f64 = 1e-11;
/// Largest Krylov basis.
const MAX_BASIS: usize = 160;
/// Most restarts.
const MAX_RESTARTS: usize = 12;

/// An eigenpair of A.
#[derive(Clone, Debug)]
pub(crate) struct EigenPair {
    pub value: f64,
    pub vector: Vec<f64>,
    /// `||A x - lambda x|| / ||x||`.
    pub residual: f64,
}

/// The result of one search.
#[derive(Clone, Debug)]
pub(crate) struct EigenRun {
    /// The eigenpairs nearest the shift, nearest first.
    pub pairs: Vec<EigenPair>,
    /// Applications of the inverted operator (Arnoldi steps), restarts
    /// included.
    pub iterations: usize,
}

/// `(A - sigma I)^-1` through a sparse LU factorisation.
pub(crate) struct ShiftInvert<'a> {
    a: &'a Csr,
    shift: f64,
    lu: Lu<usize, f64>,
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn norm(a: &[f64]) -> f64 {
    dot(a, a).sqrt()
}

impl<'a> ShiftInvert<'a> {
    pub fn new(a: &'a Csr, shift: f64) -> Result<ShiftInvert<'a>, VectorError> {
        let triplets: Vec<Triplet<usize, usize, f64>> = a
            .shifted_triplets(shift)
            .into_iter()
            .map(|(r, c, v)| Triplet::new(r, c, v))
            .collect();
        let m = SparseColMat::<usize, f64>::try_new_from_triplets(a.n, a.n, &triplets)
            .map_err(|e| VectorError::Factorisation(format!("{e:?}")))?;
        let lu = m
            .sp_lu()
            .map_err(|e| VectorError::Factorisation(format!("{e:?}")))?;
        Ok(ShiftInvert { a, shift, lu })
    }

    /// `v <- (A - sigma I)^-1 v`.
    fn apply(&self, v: &mut [f64]) {
        let n = v.len();
        self.lu
            .solve_in_place(faer::MatMut::from_column_major_slice_mut(v, n, 1));
    }

    /// The eigenpairs of A nearest the shift, nearest first, from the start
    /// vector `v0`: the basis grows until `enough` accepts the converged
    /// pairs found so far (every Ritz pair nearer the shift converged too),
    /// `max_nev` pairs have converged, or the basis spans an invariant
    /// subspace. An error if none of these happens within the restarts.
    pub fn search(
        &self,
        v0: &[f64],
        max_nev: usize,
        enough: &mut dyn FnMut(&[EigenPair]) -> bool,
    ) -> Result<EigenRun, VectorError> {
        let n = self.a.n;
        if max_nev == 0 || max_nev > n {
            return Err(VectorError::NoConvergence(format!(
                "cannot find {max_nev} eigenvalues of a {n} x {n} matrix"
            )));
        }
        let m_max = MAX_BASIS.max(max_nev + 10).min(n);
        let mut start = v0.to_vec();
        let mut iterations = 0;
        let mut worst = f64::INFINITY;
        for _ in 0..=MAX_RESTARTS {
            let mut arn = Arnoldi::new(&start, m_max)?;
            let mut last_check = 0;
            let mut ritz;
            loop {
                let invariant = arn.step(self)?;
                iterations += 1;
                let k = arn.k;
                let due = k >= 4 && k - last_check >= (k / 6).max(3);
                if !(due || invariant || k == m_max) {
                    continue;
                }
                last_check = k;
                ritz = ritz_pairs(&arn.h, k)?;
                let beta = if invariant {
                    0.0
                } else {
                    arn.h[(k, k - 1)].abs()
                };
                // The converged prefix, nearest the shift first.
                let mut pairs = Vec::new();
                worst = 0.0;
                for r in ritz.iter().take(max_nev) {
                    let est = beta * r.last_abs / r.theta.abs();
                    let real = r.theta_im.abs() <= 1e-9 * r.theta.abs();
                    if !(real && est <= TOLERANCE) {
                        worst = if real { est } else { f64::INFINITY };
                        break;
                    }
                    let x = combine(&arn.basis, &r.y, n);
                    let value = self.shift + 1.0 / r.theta;
                    let residual = self.residual(&x, value);
                    pairs.push(EigenPair {
                        value,
                        vector: x,
                        residual,
                    });
                }
                // An invariant subspace holds every eigenvector the start
                // vector reaches: nothing more can be found.
                if pairs.len() >= max_nev || invariant || enough(&pairs) {
                    return Ok(EigenRun { pairs, iterations });
                }
                if k == m_max {
                    break;
                }
            }
            // Explicit restart from the leading Ritz vectors.
            start = vec![0.0; n];
            for r in ritz.iter().take(max_nev + 2) {
                let x = combine(&arn.basis, &r.y, n);
                let s = 1.0 / norm(&x).max(f64::MIN_POSITIVE);
                for (a, b) in start.iter_mut().zip(&x) {
                    *a += s * b;
                }
            }
            if norm(&start) == 0.0 {
                start = v0.to_vec();
            }
        }
        Err(VectorError::NoConvergence(format!(
            "the eigenvalues near the shift did not converge in {iterations} Arnoldi steps \
             (worst relative Ritz residual {worst:.1e}, tolerance {TOLERANCE:.0e})"
        )))
    }

    /// The `nev` eigenpairs nearest the shift.
    #[cfg(test)]
    pub fn nearest(&self, nev: usize, v0: &[f64]) -> Result<EigenRun, VectorError> {
        self.search(v0, nev, &mut |_| false)
    }

    /// `||A x - lambda x|| / ||x||`.
    fn residual(&self, x: &[f64], lambda: f64) -> f64 {
        let mut y = vec![0.0; x.len()];
        self.a.matvec(x, &mut y);
        let r: f64 = y
            .iter()
            .zip(x)
            .map(|(a, b)| (a - lambda * b).powi(2))
            .sum::<f64>()
            .sqrt();
        r / norm(x)
    }
}

/// An Arnoldi factorisation `Op V_k = V_{k+1} H` of the inverted operator,
/// grown one step at a time.
struct Arnoldi {
    basis: Vec<Vec<f64>>,
    h: Mat<f64>,
    k: usize,
}

impl Arnoldi {
    fn new(v0: &[f64], m: usize) -> Result<Arnoldi, VectorError> {
        let nv = norm(v0);
        if !(nv.is_finite() && nv > 0.0) {
            return Err(VectorError::NoConvergence("zero start vector".into()));
        }
        Ok(Arnoldi {
            basis: vec![v0.iter().map(|x| x / nv).collect()],
            h: Mat::<f64>::zeros(m + 1, m),
            k: 0,
        })
    }

    /// One step; true when the basis spans an invariant subspace (no new
    /// vector).
    fn step(&mut self, op: &ShiftInvert) -> Result<bool, VectorError> {
        let k = self.k;
        let mut w = self.basis[k].clone();
        op.apply(&mut w);
        let wn0 = norm(&w);
        if !wn0.is_finite() {
            return Err(VectorError::Factorisation(
                "the shifted matrix is numerically singular".into(),
            ));
        }
        let mut coef = vec![0.0; k + 1];
        // Classical Gram-Schmidt, twice.
        for _pass in 0..2 {
            let proj: Vec<f64> = self.basis.iter().map(|v| dot(v, &w)).collect();
            for (v, &p) in self.basis.iter().zip(&proj) {
                for (a, b) in w.iter_mut().zip(v) {
                    *a -= p * b;
                }
            }
            for (c, p) in coef.iter_mut().zip(proj) {
                *c += p;
            }
        }
        for (r, &c) in coef.iter().enumerate() {
            self.h[(r, k)] = c;
        }
        let wn = norm(&w);
        self.h[(k + 1, k)] = wn;
        self.k = k + 1;
        if wn <= 1e-14 * wn0 {
            return Ok(true);
        }
        self.basis.push(w.iter().map(|x| x / wn).collect());
        Ok(false)
    }
}

/// A Ritz pair of the Hessenberg matrix, its vector made real.
struct Ritz {
    theta: f64,
    theta_im: f64,
    /// The (real part of the phase-fixed) eigenvector, unit norm.
    y: Vec<f64>,
    /// `|e_k^T y|` of the complex unit eigenvector.
    last_abs: f64,
}

/// Eigenpairs of the leading k x k block of `h`, largest |theta| first.
fn ritz_pairs(h: &Mat<f64>, k: usize) -> Result<Vec<Ritz>, VectorError> {
    let hk = h.as_ref().submatrix(0, 0, k, k).to_owned();
    let evd = hk
        .eigen()
        .map_err(|e| VectorError::NoConvergence(format!("Hessenberg eigenproblem: {e:?}")))?;
    let (s, u) = (evd.S(), evd.U());
    let mut out: Vec<Ritz> = (0..k)
        .map(|j| {
            let z = s.column_vector()[j];
            let col: Vec<faer::c64> = (0..k).map(|r| u[(r, j)]).collect();
            let nrm = col.iter().map(|c| c.norm_sqr()).sum::<f64>().sqrt();
            // Phase: make the largest component real.
            let big = col
                .iter()
                .copied()
                .max_by(|a, b| a.norm_sqr().total_cmp(&b.norm_sqr()))
                .unwrap_or(faer::c64::new(1.0, 0.0));
            let ph = big.conj() / big.norm().max(f64::MIN_POSITIVE);
            let y: Vec<f64> = col.iter().map(|c| (c * ph).re / nrm).collect();
            Ritz {
                theta: z.re,
                theta_im: z.im,
                last_abs: col[k - 1].norm() / nrm,
                y,
            }
        })
        .collect();
    out.sort_by(|a, b| {
        let ma = a.theta.hypot(a.theta_im);
        let mb = b.theta.hypot(b.theta_im);
        mb.total_cmp(&ma)
    });
    Ok(out)
}

/// `sum_j y_j basis_j`.
fn combine(basis: &[Vec<f64>], y: &[f64], n: usize) -> Vec<f64> {
    let mut x = vec![0.0; n];
    for (v, &c) in basis.iter().zip(y) {
        for (a, b) in x.iter_mut().zip(v) {
            *a += c * b;
        }
    }
    x
}

/// A reproducible start vector with every component nonzero (a
/// xorshift sequence: Marsaglia, J. Stat. Softw. 8(14), 2003).
pub(crate) fn start_vector(n: usize) -> Vec<f64> {
    let mut s: u64 = 0x9E37_79B9_7F4A_7C15;
    (0..n)
        .map(|_| {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            0.5 + (s >> 11) as f64 / (1u64 << 53) as f64
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The n x n second-difference matrix tridiag(-1, 2, -1) in `Csr`.
    fn laplacian(n: usize) -> Csr {
        let mut indptr = vec![0];
        let (mut indices, mut values) = (Vec::new(), Vec::new());
        for r in 0..n {
            for (c, v) in [(r.wrapping_sub(1), -1.0), (r, 2.0), (r + 1, -1.0)] {
                if c < n {
                    indices.push(c);
                    values.push(v);
                }
            }
            indptr.push(indices.len());
        }
        Csr {
            n,
            indptr,
            indices,
            values,
        }
    }

    #[test]
    fn finds_the_eigenvalues_nearest_the_shift() {
        // tridiag(-1, 2, -1) of order n has eigenvalues
        // 2 - 2 cos(k pi / (n + 1)), k = 1..n (the discrete sine transform;
        // e.g. Strang, Computational Science and Engineering, 2007, 1.5).
        let n = 400;
        let a = laplacian(n);
        let exact: Vec<f64> = (1..=n)
            .map(|k| 2.0 - 2.0 * (k as f64 * std::f64::consts::PI / (n as f64 + 1.0)).cos())
            .collect();
        let shift = 1.2345;
        let mut want = exact.clone();
        want.sort_by(|x, y| (x - shift).abs().total_cmp(&(y - shift).abs()));
        let si = ShiftInvert::new(&a, shift).unwrap();
        let run = si.nearest(4, &start_vector(n)).unwrap();
        assert_eq!(run.pairs.len(), 4);
        for (p, w) in run.pairs.iter().zip(&want) {
            assert!((p.value - w).abs() < 1e-10, "{} vs {w}", p.value);
            assert!(p.residual < 1e-8, "residual {}", p.residual);
        }
        assert!(run.iterations > 0 && run.iterations < 400);
    }

    #[test]
    fn impossible_requests_are_errors() {
        let a = laplacian(5);
        let si = ShiftInvert::new(&a, 0.1).unwrap();
        assert!(si.nearest(0, &start_vector(5)).is_err());
        assert!(si.nearest(6, &start_vector(5)).is_err());
        assert!(si.nearest(1, &[0.0; 5]).is_err());
    }
}
