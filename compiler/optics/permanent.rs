//! Matrix permanents, for multi-photon amplitudes.
//!
//! A network `U` sends the Fock state with occupations `s` to the one with
//! occupations `t` with amplitude
//! `<T|U|S> = perm(U[T,S]) / sqrt(prod t_i! prod s_j!)`, where `U[T,S]` repeats
//! row `i` of `U` `t_i` times and column `j` `s_j` times (S. Scheel,
//! "Permanents in linear optical networks", arXiv:quant-ph/0406127, 2004;
//! S. Aaronson and A. Arkhipov, "The computational complexity of linear
//! optics", Theory of Computing 9, 143, 2013). So an `n`-photon amplitude
//! is the permanent of an `n x n` matrix:
//! `perm(A) = sum over permutations s of prod_i a[i][s(i)]`.
//!
//! Three methods live here:
//!
//! - [`permanent`], the production kernel: Glynn's formula
//!   (D. G. Glynn, "The permanent of a square matrix", European Journal of
//!   Combinatorics 31, 1887, 2010)
//!   `perm(A) = 2^-(n-1) sum_d (prod_k d_k) prod_j (sum_i d_i a[i][j])`
//!   over sign vectors `d` in `{+1,-1}^n` with `d_0 = +1`, visited in
//!   binary-reflected Gray-code order so that each step flips one sign and
//!   updates the `n` signed column sums in O(n): O(2^(n-1) n) in all.
//!   From [`PARALLEL_MIN_N`] on it runs on rayon's thread pool.
//! - [`permanent_ryser`]: Ryser's inclusion-exclusion formula
//!   (H. J. Ryser, *Combinatorial Mathematics*, Carus Mathematical
//!   Monographs 14, 1963), also in Gray-code order, O(2^n n). For cross-checks.
//! - [`permanent_by_definition`]: the sum over all `n!` permutations, for
//!   tests only (it refuses `n > 10`).
//!
//! How the Glynn kernel runs: rows 1 to 4 are the *inner* rows, whose 16
//! sign patterns are laid out as 16 lanes (their signed sums precomputed per
//! column), so one step of the Gray code over the other rows updates the
//! column sums once and then multiplies out 16 terms lane by lane, a loop
//! the compiler vectorizes (SSE2 everywhere on x86-64, and an AVX build of
//! the same code chosen at run time where the CPU has AVX, with identical
//! results). Matrices smaller than 5 x 5 are
//! padded with an identity block, which leaves the permanent unchanged
//! (`perm(A (+) I) = perm(A)` for the direct sum `A (+) I`).
//!
//! Numerics: the Gray-code sequence is cut into fixed blocks of
//! [`BLOCK_LEN`] terms. Each block recomputes its column sums from scratch at
//! its first Gray code, so rounding in the running sums cannot drift over
//! more than one block. Each lane adds its terms with a compensated sum
//! (Knuth's branch-free TwoSum, the Kahan-Babuska-Neumaier scheme without the
//! branch); the lanes, and then the blocks in order, are added with the same
//! compensated sum. The blocks and the order of every addition are the same
//! on one thread or many, so the result is bit-for-bit independent of the
//! thread count. The final division by `2^(n-1)` is exact.

use nalgebra::DMatrix;
use num_complex::Complex64;
use rayon::prelude::*;

/// The largest matrix (photon number) [`permanent`] and [`permanent_ryser`]
/// accept: at 30 the Glynn kernel does about `2^29 * 30 = 1.6e10` steps,
/// some seconds on one core.
pub const MAX_PHOTONS: usize = 30;

/// The largest matrix [`permanent_by_definition`] accepts (`10! = 3,628,800`
/// permutations).
pub const MAX_BY_DEFINITION: usize = 10;

/// From this size on, [`permanent`] splits its Gray-code blocks over rayon's
/// thread pool. Chosen by measurement on the 2-core development machine
/// (best wall-clock time of many runs, a 1-thread pool against a 2-thread
/// pool, the kernel forced parallel at every size, AVX build): n <= 11 is a
/// single block, so no gain; n = 12 and 13 (9 and 16 us) ranged from 0.85x
/// to 1.1x, where the pool's overhead eats the gain; n = 14 (33 us) 1.05x to
/// 1.4x; n = 15..=20 1.3x to 1.7x. `cargo bench --bench permanent` shows
/// the sizes around it.
pub const PARALLEL_MIN_N: usize = 14;

/// Terms per block (`2^10`), the unit of parallel work. Each block starts
/// from its own Gray code with an O(n^2) recomputation of the column sums,
/// an overhead of about `n / (16 * 64)` of the block's work (under 3% up to
/// `n = 30`).
pub const BLOCK_LEN: u64 = 1 << 10;

/// Rows 1..=INNER_ROWS are enumerated as lanes (see the module doc).
const INNER_ROWS: usize = 4;
/// `2^INNER_ROWS` lanes, one term each per Gray-code step.
const LANES: usize = 1 << INNER_ROWS;
/// The smallest size the kernel runs on; smaller matrices are padded.
const KERNEL_MIN_N: usize = INNER_ROWS + 1;

/// Glynn kernel steps (one column's update and product factor) per second
/// on one core, for the time estimate in [`PermanentError::TooLarge`]
/// (measured: a 20 x 20 permanent, `2^19 * 20` such steps, in 3 to 4 ms of
/// CPU time with AVX, 7 to 11 ms with SSE2 only, that is 1e9 to 3.5e9 steps
/// a second; the estimate takes a middle value).
const STEPS_PER_SECOND: f64 = 2.0e9;

/// Why a permanent was not computed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum PermanentError {
    /// The permanent is defined for square matrices only.
    #[error("the permanent needs a square matrix, but this one is {rows} x {cols}")]
    NotSquare { rows: usize, cols: usize },
    /// More photons than [`MAX_PHOTONS`]: refused at once instead of running
    /// for half a minute (31) to far longer than a lifetime (60 and more).
    #[error(
        "a {n} x {n} permanent ({n} photons) is beyond the limit of {limit}: \
         it needs about 2^{} x {n} = {} steps, {} on one core",
        n.saturating_sub(1),
        sci(glynn_steps(*n)),
        human_duration(glynn_steps(*n) / STEPS_PER_SECOND)
    )]
    TooLarge { n: usize, limit: usize },
    /// The definition (a sum over `n!` permutations) is for tests only.
    #[error(
        "the permanent by definition sums {n}! permutations and is limited to \
         {limit} x {limit} matrices; use `permanent` for a {n} x {n} one"
    )]
    DefinitionTooLarge { n: usize, limit: usize },
}

/// `2^(n-1) * n`, as a float so that it cannot overflow.
pub fn glynn_steps(n: usize) -> f64 {
    let exp = i32::try_from(n.saturating_sub(1)).unwrap_or(i32::MAX);
    2f64.powi(exp) * n as f64
}

/// A large count in short scientific notation, `1.7e10`.
fn sci(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.1e}")
    } else {
        "more than 1e308".to_string()
    }
}

/// Seconds as a person would say them: `33 s`, `18 minutes`, `3.1 days`.
fn human_duration(secs: f64) -> String {
    const MINUTE: f64 = 60.0;
    const HOUR: f64 = 60.0 * MINUTE;
    const DAY: f64 = 24.0 * HOUR;
    const YEAR: f64 = 365.25 * DAY;
    // The age of the universe, about 13.8e9 years.
    const UNIVERSE: f64 = 13.8e9 * YEAR;
    if !secs.is_finite() || secs > 1e6 * UNIVERSE {
        "far longer than the age of the universe".to_string()
    } else if secs < MINUTE {
        format!("about {secs:.0} s")
    } else if secs < HOUR {
        format!("about {:.0} minutes", secs / MINUTE)
    } else if secs < DAY {
        format!("about {:.1} hours", secs / HOUR)
    } else if secs < YEAR {
        format!("about {:.1} days", secs / DAY)
    } else if secs < 1e4 * YEAR {
        format!("about {:.0} years", secs / YEAR)
    } else if secs < UNIVERSE {
        format!("about {:.1e} years", secs / YEAR)
    } else {
        format!(
            "about {:.1e} years ({:.1e} times the age of the universe)",
            secs / YEAR,
            secs / UNIVERSE
        )
    }
}

/// The matrix's size if it is square.
fn square_size(m: &DMatrix<Complex64>) -> Result<usize, PermanentError> {
    let (rows, cols) = m.shape();
    if rows == cols {
        Ok(rows)
    } else {
        Err(PermanentError::NotSquare { rows, cols })
    }
}

/// A compensated sum (Kahan-Babuska-Neumaier, with Knuth's branch-free
/// TwoSum for the rounding error of each addition).
#[derive(Clone, Copy, Default)]
struct CompensatedSum {
    sum: f64,
    carry: f64,
}

impl CompensatedSum {
    #[inline(always)]
    fn add(&mut self, x: f64) {
        let (sum, err) = two_sum(self.sum, x);
        self.sum = sum;
        self.carry += err;
    }

    fn total(self) -> f64 {
        self.sum + self.carry
    }
}

/// `a + b` and its rounding error, exactly: `a + b = sum + err` (Knuth,
/// The Art of Computer Programming, vol. 2, section 4.2.2).
#[inline(always)]
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let sum = a + b;
    let b_virtual = sum - a;
    let err = (a - (sum - b_virtual)) + (b - b_virtual);
    (sum, err)
}

/// A compensated sum of complex numbers.
#[derive(Clone, Copy, Default)]
struct ComplexSum {
    re: CompensatedSum,
    im: CompensatedSum,
}

impl ComplexSum {
    fn add(&mut self, z: Complex64) {
        self.re.add(z.re);
        self.im.add(z.im);
    }

    fn total(self) -> Complex64 {
        Complex64::new(self.re.total(), self.im.total())
    }
}

/// The matrix laid out for the Glynn kernel.
///
/// Sign vectors are split as `d = (d_0 = +1, inner, outer)`: the inner
/// signs `d_1..d_4` are lane `l` (bit `r - 1` of `l` set means `d_r = -1`),
/// and the outer signs `d_5..d_(n-1)` are a Gray code `g` (bit `b` set means
/// `d_(b+5) = -1`). The column sums are `v_j + c_l,j`, with `v_j` over rows 0
/// and 5.. (updated per Gray-code step) and `c_l,j` over the inner rows
/// (fixed).
struct GlynnTable {
    n: usize,
    /// `a[i][j]` at `i * n + j`, real and imaginary parts apart.
    re: Vec<f64>,
    im: Vec<f64>,
    /// `c_l,j = sum_{r=1..=4} d_r(l) a[r][j]` at `[j][l]`.
    inner_re: Vec<[f64; LANES]>,
    inner_im: Vec<[f64; LANES]>,
    /// `prod_{r=1..=4} d_r(l)`, the inner part of each lane's term sign.
    inner_sign: [f64; LANES],
}

impl GlynnTable {
    /// `m` must be square with at least [`KERNEL_MIN_N`] rows.
    fn new(m: &DMatrix<Complex64>) -> Self {
        let n = m.nrows();
        debug_assert!(n >= KERNEL_MIN_N && m.ncols() == n);
        let mut re = vec![0.0; n * n];
        let mut im = vec![0.0; n * n];
        for i in 0..n {
            for j in 0..n {
                re[i * n + j] = m[(i, j)].re;
                im[i * n + j] = m[(i, j)].im;
            }
        }
        let mut inner_re = vec![[0.0; LANES]; n];
        let mut inner_im = vec![[0.0; LANES]; n];
        let mut inner_sign = [1.0; LANES];
        for (l, sign) in inner_sign.iter_mut().enumerate() {
            if l.count_ones() % 2 == 1 {
                *sign = -1.0;
            }
            for j in 0..n {
                let (mut sr, mut si) = (0.0, 0.0);
                for r in 1..=INNER_ROWS {
                    if (l >> (r - 1)) & 1 == 1 {
                        sr -= re[r * n + j];
                        si -= im[r * n + j];
                    } else {
                        sr += re[r * n + j];
                        si += im[r * n + j];
                    }
                }
                inner_re[j][l] = sr;
                inner_im[j][l] = si;
            }
        }
        GlynnTable {
            n,
            re,
            im,
            inner_re,
            inner_im,
            inner_sign,
        }
    }

    /// The sum of the signed terms for outer Gray-code indices
    /// `first..first + len` (each with all [`LANES`] inner patterns).
    ///
    /// On x86-64 CPUs with AVX this runs an AVX build of the same code
    /// (about 2.5x faster than the SSE2 baseline, measured on the 20 x 20
    /// bench). Both builds do the same IEEE operations in the same order per
    /// lane (Rust never fuses a multiply and an add on its own), so they give
    /// the same bits; a test checks it.
    fn block(&self, first: u64, len: u64) -> Complex64 {
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx") {
                // SAFETY: `block_avx` needs AVX and nothing else, and the CPU
                // was just found to have it.
                return unsafe { self.block_avx(first, len) };
            }
        }
        self.block_kernel(first, len)
    }

    /// [`Self::block_kernel`] compiled for AVX.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx")]
    fn block_avx(&self, first: u64, len: u64) -> Complex64 {
        self.block_kernel(first, len)
    }

    /// The kernel proper, inlined into each build of [`Self::block`].
    #[inline(always)]
    fn block_kernel(&self, first: u64, len: u64) -> Complex64 {
        let n = self.n;
        let gray = first ^ (first >> 1);
        // Outer column sums at the block's first Gray code, from scratch.
        let mut vr = vec![0.0; n];
        let mut vi = vec![0.0; n];
        for i in std::iter::once(0).chain(KERNEL_MIN_N..n) {
            let minus = i > 0 && (gray >> (i - KERNEL_MIN_N)) & 1 == 1;
            let (rr, ri) = (&self.re[i * n..][..n], &self.im[i * n..][..n]);
            for j in 0..n {
                if minus {
                    vr[j] -= rr[j];
                    vi[j] -= ri[j];
                } else {
                    vr[j] += rr[j];
                    vi[j] += ri[j];
                }
            }
        }
        let mut outer_sign = if gray.count_ones().is_multiple_of(2) {
            1.0
        } else {
            -1.0
        };
        // Per lane: the running product and the compensated sums.
        let mut pr = [0.0; LANES];
        let mut pi = [0.0; LANES];
        let mut sum_re = [0.0; LANES];
        let mut carry_re = [0.0; LANES];
        let mut sum_im = [0.0; LANES];
        let mut carry_im = [0.0; LANES];
        let inner_sign = &self.inner_sign;
        for k in first..first + len {
            if k > first {
                // Gray code k-1 -> k flips bit trailing_zeros(k), the sign
                // of row bit + 5, which changes each v_j by -+2 a[row][j].
                let bit = k.trailing_zeros();
                let row = bit as usize + KERNEL_MIN_N;
                let now_minus = ((k ^ (k >> 1)) >> bit) & 1 == 1;
                let step = if now_minus { -2.0 } else { 2.0 };
                let (rr, ri) = (&self.re[row * n..][..n], &self.im[row * n..][..n]);
                for (v, a) in vr.iter_mut().zip(rr) {
                    *v += step * a;
                }
                for (v, a) in vi.iter_mut().zip(ri) {
                    *v += step * a;
                }
                outer_sign = -outer_sign;
            }
            pr.fill(1.0);
            pi.fill(0.0);
            let columns = vr
                .iter()
                .zip(&vi)
                .zip(self.inner_re.iter().zip(&self.inner_im));
            for ((&x, &y), (cr, ci)) in columns {
                for l in 0..LANES {
                    let (xr, xi) = (x + cr[l], y + ci[l]);
                    let (a, b) = (pr[l], pi[l]);
                    pr[l] = a * xr - b * xi;
                    pi[l] = a * xi + b * xr;
                }
            }
            for l in 0..LANES {
                let s = outer_sign * inner_sign[l];
                let (t, e) = two_sum(sum_re[l], s * pr[l]);
                sum_re[l] = t;
                carry_re[l] += e;
                let (t, e) = two_sum(sum_im[l], s * pi[l]);
                sum_im[l] = t;
                carry_im[l] += e;
            }
        }
        let mut acc = ComplexSum::default();
        for l in 0..LANES {
            acc.add(Complex64::new(sum_re[l], sum_im[l]));
            acc.add(Complex64::new(carry_re[l], carry_im[l]));
        }
        acc.total()
    }
}

/// The permanent of a square complex matrix: Glynn's formula in Gray-code
/// order (see the module doc), on rayon's thread pool from
/// [`PARALLEL_MIN_N`] on.
///
/// A 0 x 0 matrix has permanent 1. Errors: [`PermanentError::NotSquare`],
/// and [`PermanentError::TooLarge`] above [`MAX_PHOTONS`] (returned at once).
pub fn permanent(m: &DMatrix<Complex64>) -> Result<Complex64, PermanentError> {
    let n = checked_size(m)?;
    Ok(glynn(m, n, n >= PARALLEL_MIN_N))
}

/// Size checks shared by the Gray-code methods.
fn checked_size(m: &DMatrix<Complex64>) -> Result<usize, PermanentError> {
    let n = square_size(m)?;
    if n > MAX_PHOTONS {
        return Err(PermanentError::TooLarge {
            n,
            limit: MAX_PHOTONS,
        });
    }
    Ok(n)
}

/// Glynn's formula for an `n x n` matrix with `n <= MAX_PHOTONS`, serial
/// or over the pool. Both paths compute the same blocks and add them in the
/// same order.
fn glynn(m: &DMatrix<Complex64>, n: usize, parallel: bool) -> Complex64 {
    match n {
        0 => return Complex64::new(1.0, 0.0),
        1 => return m[(0, 0)],
        _ => {}
    }
    if n < KERNEL_MIN_N {
        // perm(A (+) I) = perm(A): pad with an identity block.
        let padded = DMatrix::from_fn(KERNEL_MIN_N, KERNEL_MIN_N, |i, j| match (i < n, j < n) {
            (true, true) => m[(i, j)],
            (false, false) if i == j => Complex64::new(1.0, 0.0),
            _ => Complex64::new(0.0, 0.0),
        });
        return glynn(&padded, KERNEL_MIN_N, false);
    }
    let table = GlynnTable::new(m);
    let outer_steps: u64 = 1 << (n - KERNEL_MIN_N);
    let block_len = outer_steps.min(BLOCK_LEN / LANES as u64);
    let blocks = outer_steps / block_len;
    let block = |b: u64| table.block(b * block_len, block_len);
    let sums: Vec<Complex64> = if parallel {
        (0..blocks).into_par_iter().map(block).collect()
    } else {
        (0..blocks).map(block).collect()
    };
    let mut acc = ComplexSum::default();
    for s in sums {
        acc.add(s);
    }
    // Exact: a division by a power of two.
    acc.total() / 2f64.powi((n - 1) as i32)
}

/// The permanent by Ryser's formula,
/// `perm(A) = (-1)^n sum_{S subset of columns} (-1)^|S| prod_i sum_{j in S} a[i][j]`,
/// with the subsets in Gray-code order (one column in or out per step,
/// O(n) to update the row sums), serial, O(2^n n). For cross-checks.
///
/// Same errors and limit as [`permanent`].
pub fn permanent_ryser(m: &DMatrix<Complex64>) -> Result<Complex64, PermanentError> {
    let n = checked_size(m)?;
    if n == 0 {
        return Ok(Complex64::new(1.0, 0.0));
    }
    // Row sums over the current subset; the empty subset's term is 0.
    let mut rows = vec![Complex64::new(0.0, 0.0); n];
    let mut acc = ComplexSum::default();
    let mut in_set = vec![false; n];
    let mut size = 0usize;
    for k in 1u64..(1u64 << n) {
        let j = k.trailing_zeros() as usize;
        in_set[j] = !in_set[j];
        if in_set[j] {
            size += 1;
            for (i, r) in rows.iter_mut().enumerate() {
                *r += m[(i, j)];
            }
        } else {
            size -= 1;
            for (i, r) in rows.iter_mut().enumerate() {
                *r -= m[(i, j)];
            }
        }
        let prod = rows.iter().product::<Complex64>();
        if (n - size).is_multiple_of(2) {
            acc.add(prod);
        } else {
            acc.add(-prod);
        }
    }
    Ok(acc.total())
}

/// The permanent from its definition, the sum over all `n!` permutations
/// `s` of `prod_i a[i][s(i)]`. For tests: it refuses `n > 10`
/// ([`PermanentError::DefinitionTooLarge`]). A 0 x 0 matrix gives 1.
pub fn permanent_by_definition(m: &DMatrix<Complex64>) -> Result<Complex64, PermanentError> {
    let n = square_size(m)?;
    if n > MAX_BY_DEFINITION {
        return Err(PermanentError::DefinitionTooLarge {
            n,
            limit: MAX_BY_DEFINITION,
        });
    }
    // Depth-first over permutations, row by row: `s(row)` is chosen among
    // the unused columns, and `prefix` is the product over rows < `row`.
    fn go(m: &DMatrix<Complex64>, row: usize, used: u32, prefix: Complex64, acc: &mut ComplexSum) {
        let n = m.nrows();
        if row == n {
            acc.add(prefix);
            return;
        }
        for col in 0..n {
            if used & (1 << col) == 0 {
                go(m, row + 1, used | (1 << col), prefix * m[(row, col)], acc);
            }
        }
    }
    let mut acc = ComplexSum::default();
    go(m, 0, 0, Complex64::new(1.0, 0.0), &mut acc);
    Ok(acc.total())
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::{Duration, Instant};

    fn c(re: f64) -> Complex64 {
        Complex64::new(re, 0.0)
    }

    /// `|got - want| <= tol * |want|`, or `<= tol` when `want` is 0.
    fn close(got: Complex64, want: Complex64, tol: f64) -> bool {
        let scale = if want.norm() == 0.0 { 1.0 } else { want.norm() };
        (got - want).norm() <= tol * scale
    }

    fn assert_close(got: Complex64, want: Complex64, tol: f64, what: &str) {
        assert!(
            close(got, want, tol),
            "{what}: got {got}, want {want} (relative error {:.2e})",
            (got - want).norm() / want.norm()
        );
    }

    /// SplitMix64 (S. Vigna's reference constants; G. L. Steele, D. Lea and
    /// C. H. Flood, "Fast splittable pseudorandom number generators",
    /// OOPSLA 2014), seeded, so the tests are deterministic.
    struct SplitMix64(u64);

    impl SplitMix64 {
        fn next_u64(&mut self) -> u64 {
            self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut z = self.0;
            z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            z ^ (z >> 31)
        }

        /// Uniform in [-1, 1).
        fn unit(&mut self) -> f64 {
            (self.next_u64() >> 11) as f64 / (1u64 << 52) as f64 - 1.0
        }
    }

    fn random_matrix(n: usize, seed: u64) -> DMatrix<Complex64> {
        let mut rng = SplitMix64(seed);
        DMatrix::from_fn(n, n, |_, _| Complex64::new(rng.unit(), rng.unit()))
    }

    fn all_methods(m: &DMatrix<Complex64>) -> [Complex64; 3] {
        [
            permanent(m).unwrap(),
            permanent_ryser(m).unwrap(),
            permanent_by_definition(m).unwrap(),
        ]
    }

    // perm(J_n) = n! for the all-ones matrix J_n: every one of the n!
    // permutations contributes 1 (textbook identity, e.g. H. Minc,
    // Permanents, 1978, ch. 1).
    #[test]
    fn all_ones_gives_factorial() {
        let mut fact = 1.0;
        for n in 1..=10 {
            fact *= n as f64;
            let j = DMatrix::from_element(n, n, c(1.0));
            assert_close(permanent(&j).unwrap(), c(fact), 1e-12, "Glynn J_n");
            assert_close(permanent_ryser(&j).unwrap(), c(fact), 1e-12, "Ryser J_n");
            if n <= 8 {
                assert_close(
                    permanent_by_definition(&j).unwrap(),
                    c(fact),
                    1e-12,
                    "definition J_n",
                );
            }
        }
        // The definition at its limit, once.
        let j = DMatrix::from_element(10, 10, c(1.0));
        assert_close(
            permanent_by_definition(&j).unwrap(),
            c(fact),
            1e-12,
            "definition J_10",
        );
    }

    // perm(J_n - I_n) counts the permutations without a fixed point: the
    // derangement numbers 0, 1, 2, 9, 44, 265, 1854 (OEIS A000166).
    #[test]
    fn ones_minus_identity_gives_derangements() {
        let derangements = [0.0, 1.0, 2.0, 9.0, 44.0, 265.0, 1854.0];
        for (k, &d) in derangements.iter().enumerate() {
            let n = k + 1;
            let m = DMatrix::from_fn(n, n, |i, j| c(if i == j { 0.0 } else { 1.0 }));
            for (got, name) in all_methods(&m)
                .into_iter()
                .zip(["Glynn", "Ryser", "definition"])
            {
                assert_close(got, c(d), 1e-12, &format!("{name} J_{n} - I"));
            }
        }
    }

    // Worked by hand from the definition:
    // perm([[1,2],[3,4]]) = 1*4 + 2*3 = 10;
    // perm([[1,2,3],[4,5,6],[7,8,9]]) = 1*5*9 + 1*6*8 + 2*4*9 + 2*6*7
    //   + 3*4*8 + 3*5*7 = 45 + 48 + 72 + 84 + 96 + 105 = 450.
    #[test]
    fn small_integer_matrices() {
        let two = DMatrix::from_row_slice(2, 2, &[c(1.0), c(2.0), c(3.0), c(4.0)]);
        let three =
            DMatrix::from_row_slice(3, 3, &(1..=9).map(|x| c(x as f64)).collect::<Vec<_>>());
        for got in all_methods(&two) {
            assert_eq!(got, c(10.0));
        }
        for got in all_methods(&three) {
            assert_eq!(got, c(450.0));
        }
    }

    // perm of a 0 x 0 matrix is the empty product, 1 (the one permutation of
    // the empty set); perm of a 1 x 1 matrix is its entry.
    #[test]
    fn empty_and_one_by_one() {
        let empty = DMatrix::<Complex64>::zeros(0, 0);
        for got in all_methods(&empty) {
            assert_eq!(got, c(1.0));
        }
        let one = DMatrix::from_element(1, 1, Complex64::new(0.3, -0.7));
        for got in all_methods(&one) {
            assert_eq!(got, Complex64::new(0.3, -0.7));
        }
    }

    // Glynn (2010), Ryser (1963) and the definition are three independent
    // formulas for the same number; on seeded random complex matrices they
    // agree to 1e-12 relative.
    #[test]
    fn glynn_ryser_and_definition_agree_on_random_matrices() {
        for n in 1..=8 {
            for seed in 0..3 {
                let m = random_matrix(n, 1000 * n as u64 + seed);
                let [glynn, ryser, def] = all_methods(&m);
                assert_close(glynn, def, 1e-12, &format!("Glynn vs definition, n = {n}"));
                assert_close(ryser, def, 1e-12, &format!("Ryser vs definition, n = {n}"));
            }
        }
    }

    // Glynn (2010) against Ryser (1963) for n = 9..=14, past the
    // definition's reach: the sizes where the Gray code outgrows one block
    // of BLOCK_LEN terms (n = 12 has two, n = 14 eight).
    #[test]
    fn glynn_and_ryser_agree_up_to_fourteen() {
        for n in 9..=14 {
            let m = random_matrix(n, 77 + n as u64);
            assert_close(
                permanent(&m).unwrap(),
                permanent_ryser(&m).unwrap(),
                1e-12,
                &format!("Glynn vs Ryser, n = {n}"),
            );
        }
    }

    // The parallel path cuts the same Gray-code blocks as the serial one
    // (module doc), so on a 16 x 16 matrix (32 blocks) the two agree to
    // 1e-12 relative (in fact bit for bit), and both agree with Ryser.
    #[test]
    fn parallel_path_equals_serial_path() {
        let n = 16;
        let m = random_matrix(n, 16);
        let serial = glynn(&m, n, false);
        let parallel = glynn(&m, n, true);
        assert_close(parallel, serial, 1e-12, "parallel vs serial");
        assert_eq!(
            parallel, serial,
            "the result should not depend on the thread count"
        );
        assert_eq!(permanent(&m).unwrap(), parallel);
        assert_close(
            serial,
            permanent_ryser(&m).unwrap(),
            1e-11,
            "Glynn vs Ryser, n = 16",
        );
    }

    // An exact reference. The SplitMix64 entries are dyadic rationals
    // k / 2^52, so 2^52 A has Gaussian-integer entries and the permanent can
    // be evaluated exactly in big-integer arithmetic (done once, outside
    // this code, with Python's integers; rounded to f64 below). Glynn in f64
    // is within 1e-14 relative of it; Ryser, whose inclusion-exclusion
    // cancels harder, was measured about 1.5e-11 off here and gets 1e-10.
    #[test]
    fn glynn_matches_exact_arithmetic() {
        let exact = [
            (
                12,
                89,
                Complex64::new(-65.42809502776261, 97.20685303174083),
            ),
            (
                16,
                93,
                Complex64::new(61523.806158639534, -47671.66862983948),
            ),
        ];
        for (n, seed, want) in exact {
            let m = random_matrix(n, seed);
            assert_close(
                permanent(&m).unwrap(),
                want,
                1e-14,
                &format!("Glynn, n = {n}"),
            );
            assert_close(
                permanent_ryser(&m).unwrap(),
                want,
                1e-10,
                &format!("Ryser, n = {n}"),
            );
        }
    }

    // The AVX build of the block kernel and the portable (SSE2) build do the
    // same operations in the same order, so they agree bit for bit (see
    // GlynnTable::block); checked on every block of a 14 x 14 matrix.
    #[cfg(target_arch = "x86_64")]
    #[test]
    fn avx_and_portable_kernels_agree_bit_for_bit() {
        if !std::arch::is_x86_feature_detected!("avx") {
            return;
        }
        let table = GlynnTable::new(&random_matrix(14, 14));
        let len = BLOCK_LEN / LANES as u64;
        for b in 0..(1u64 << (14 - KERNEL_MIN_N)) / len {
            // SAFETY: the CPU has AVX, checked above.
            let avx = unsafe { table.block_avx(b * len, len) };
            assert_eq!(avx, table.block_kernel(b * len, len), "block {b}");
        }
    }

    // Beyond MAX_PHOTONS the kernel refuses at once instead of running for
    // minutes; the message says how long it would have taken.
    #[test]
    fn too_large_is_refused_quickly() {
        let m = DMatrix::from_element(31, 31, c(1.0));
        let start = Instant::now();
        let err = permanent(&m).unwrap_err();
        assert!(start.elapsed() < Duration::from_millis(100));
        assert_eq!(err, PermanentError::TooLarge { n: 31, limit: 30 });
        let text = err.to_string();
        assert!(
            text.contains("31 x 31") && text.contains("limit of 30"),
            "{text}"
        );
        assert!(text.contains("on one core"), "{text}");
        assert_eq!(permanent_ryser(&m).unwrap_err(), err);

        let huge = PermanentError::TooLarge { n: 200, limit: 30 }.to_string();
        assert!(huge.contains("age of the universe"), "{huge}");

        let eleven = DMatrix::from_element(11, 11, c(1.0));
        assert_eq!(
            permanent_by_definition(&eleven).unwrap_err(),
            PermanentError::DefinitionTooLarge { n: 11, limit: 10 }
        );
    }

    // The permanent is defined for square matrices only.
    #[test]
    fn non_square_is_an_error() {
        let m = DMatrix::from_element(2, 3, c(1.0));
        let want = PermanentError::NotSquare { rows: 2, cols: 3 };
        assert_eq!(permanent(&m).unwrap_err(), want);
        assert_eq!(permanent_ryser(&m).unwrap_err(), want);
        assert_eq!(permanent_by_definition(&m).unwrap_err(), want);
        assert_eq!(
            want.to_string(),
            "the permanent needs a square matrix, but this one is 2 x 3"
        );
        let tall = DMatrix::<Complex64>::zeros(3, 0);
        assert!(matches!(
            permanent(&tall),
            Err(PermanentError::NotSquare { rows: 3, cols: 0 })
        ));
    }
}
