//! Multi-photon amplitudes and output distributions of a linear network.
//!
//! For input occupation S and output occupation T (photon numbers per mode),
//! `<T|U|S> = perm(U[T, S]) / sqrt(prod_i t_i! prod_j s_j!)`, where `U[T, S]`
//! repeats row i of U t_i times and column j s_j times (Scheel, "Permanents
//! in linear optical networks", quant-ph/0406127, 2004; Aaronson & Arkhipov,
//! Theory of Computing 9, 143, 2013). Permanents come from
//! [`super::permanent`].

use super::permanent::{self, PermanentError};
use nalgebra::DMatrix;
use num_complex::Complex64;
use rayon::prelude::*;

/// Largest number of output patterns a full distribution enumerates.
pub const MAX_PATTERNS: u64 = 2_000_000;
/// Largest total work (patterns x Glynn steps) a full distribution or a
/// logical map takes on: about a few seconds on two cores.
pub const MAX_WORK_STEPS: f64 = 8.0e9;

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum AmplitudeError {
    #[error(transparent)]
    Permanent(#[from] PermanentError),
    #[error("the occupation lists {got} modes, but the network has {want}")]
    WrongLength { got: usize, want: usize },
    #[error(
        "the full output distribution of {photons} photons in {modes} modes has {} patterns, \
         beyond the limit of {}; ask for one pattern with --output",
        crate::optics::amplitude::count_text(*patterns),
        crate::optics::amplitude::count_text(*limit)
    )]
    TooManyPatterns {
        photons: u32,
        modes: usize,
        patterns: f64,
        limit: f64,
    },
}

pub(crate) fn count_text(x: f64) -> String {
    if x < 1e6 {
        format!("{x:.0}")
    } else {
        format!("{x:.2e}")
    }
}

fn factorial(n: u32) -> f64 {
    (1..=n).map(f64::from).product()
}

/// The mode of every photon, each mode repeated by its photon number.
fn photon_modes(occupation: &[u32]) -> Vec<usize> {
    occupation
        .iter()
        .enumerate()
        .flat_map(|(m, &k)| std::iter::repeat_n(m, k as usize))
        .collect()
}

/// `<output|U|input>` for occupations in mode order.
pub fn amplitude(
    u: &DMatrix<Complex64>,
    input: &[u32],
    output: &[u32],
) -> Result<Complex64, AmplitudeError> {
    let n = u.nrows();
    for occ in [input, output] {
        if occ.len() != n {
            return Err(AmplitudeError::WrongLength {
                got: occ.len(),
                want: n,
            });
        }
    }
    let cols = photon_modes(input);
    let rows = photon_modes(output);
    if rows.len() != cols.len() {
        return Ok(Complex64::new(0.0, 0.0));
    }
    let norm = input
        .iter()
        .chain(output)
        .map(|&k| factorial(k))
        .product::<f64>()
        .sqrt();
    Ok(permanent_of(u, &rows, &cols)? / norm)
}

/// `perm(U[rows, cols])`, with a direct sum for the few-photon sizes that a
/// logical map evaluates by the thousand.
pub(crate) fn permanent_of(
    u: &DMatrix<Complex64>,
    rows: &[usize],
    cols: &[usize],
) -> Result<Complex64, PermanentError> {
    let m = |i: usize, j: usize| u[(rows[i], cols[j])];
    Ok(match rows.len() {
        0 => Complex64::new(1.0, 0.0),
        1 => m(0, 0),
        2 => m(0, 0) * m(1, 1) + m(0, 1) * m(1, 0),
        3 => {
            m(0, 0) * (m(1, 1) * m(2, 2) + m(1, 2) * m(2, 1))
                + m(0, 1) * (m(1, 0) * m(2, 2) + m(1, 2) * m(2, 0))
                + m(0, 2) * (m(1, 0) * m(2, 1) + m(1, 1) * m(2, 0))
        }
        k => {
            let sub = DMatrix::from_fn(k, k, m);
            permanent::permanent(&sub)?
        }
    })
}

/// The number of ways to place `photons` photons in `modes` modes.
pub fn pattern_count(photons: u32, modes: usize) -> f64 {
    // C(modes + photons - 1, photons), in floating point: only compared.
    let mut c = 1.0f64;
    for k in 1..=u64::from(photons) {
        c *= (modes as f64 - 1.0 + k as f64) / k as f64;
    }
    c
}

/// Every occupation of `modes` modes by `photons` photons, the first mode's
/// count descending first (lexicographic from `[photons, 0, ...]`).
pub fn occupations(photons: u32, modes: usize) -> Vec<Vec<u32>> {
    let mut out = Vec::new();
    let mut cur = vec![0u32; modes];
    fn rec(out: &mut Vec<Vec<u32>>, cur: &mut Vec<u32>, at: usize, left: u32) {
        if at + 1 == cur.len() {
            cur[at] = left;
            out.push(cur.clone());
            cur[at] = 0;
            return;
        }
        for k in (0..=left).rev() {
            cur[at] = k;
            rec(out, cur, at + 1, left - k);
        }
        cur[at] = 0;
    }
    if modes > 0 {
        rec(&mut out, &mut cur, 0, photons);
    }
    out
}

/// One output pattern and its amplitude.
#[derive(Clone, Debug, PartialEq)]
pub struct Outcome {
    pub occupation: Vec<u32>,
    pub amplitude: Complex64,
}

impl Outcome {
    pub fn probability(&self) -> f64 {
        self.amplitude.norm_sqr()
    }
}

/// The whole output distribution of `input` (every pattern, zeros included,
/// in [`occupations`] order), refused beyond [`MAX_PATTERNS`] or
/// [`MAX_WORK_STEPS`].
pub fn distribution(u: &DMatrix<Complex64>, input: &[u32]) -> Result<Vec<Outcome>, AmplitudeError> {
    let n = u.nrows();
    if input.len() != n {
        return Err(AmplitudeError::WrongLength {
            got: input.len(),
            want: n,
        });
    }
    let photons: u32 = input.iter().sum();
    if photons as usize > permanent::MAX_PHOTONS {
        return Err(PermanentError::TooLarge {
            n: photons as usize,
            limit: permanent::MAX_PHOTONS,
        }
        .into());
    }
    let patterns = pattern_count(photons, n);
    let work = patterns * permanent::glynn_steps(photons as usize).max(1.0);
    if patterns > MAX_PATTERNS as f64 || work > MAX_WORK_STEPS {
        return Err(AmplitudeError::TooManyPatterns {
            photons,
            modes: n,
            patterns,
            limit: MAX_PATTERNS as f64,
        });
    }
    occupations(photons, n)
        .into_par_iter()
        .map(|occ| {
            let a = amplitude(u, input, &occ)?;
            Ok(Outcome {
                occupation: occ,
                amplitude: a,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::optics::network::splitter;

    #[test]
    fn hong_ou_mandel_dip() {
        // Hong, Ou & Mandel, PRL 59, 2044 (1987): P(1,1) = (1 - 2R)^2.
        for r in [0.0, 0.1, 0.3, 0.5, 0.8] {
            let u = splitter(r);
            let p = amplitude(&u, &[1, 1], &[1, 1]).unwrap().norm_sqr();
            assert!((p - (1.0 - 2.0 * r).powi(2)).abs() < 1e-14, "R = {r}: {p}");
        }
        // At 50:50 the photons leave together: P(2,0) = P(0,2) = 1/2.
        let u = splitter(0.5);
        let p20 = amplitude(&u, &[1, 1], &[2, 0]).unwrap().norm_sqr();
        assert!((p20 - 0.5).abs() < 1e-14);
    }

    #[test]
    fn enumeration_counts_match_the_binomial() {
        for (p, m) in [(0u32, 3usize), (1, 4), (2, 6), (3, 5), (4, 4)] {
            let occ = occupations(p, m);
            assert_eq!(occ.len() as f64, pattern_count(p, m));
            assert!(occ.iter().all(|o| o.iter().sum::<u32>() == p));
        }
    }

    #[test]
    fn distribution_of_a_unitary_sums_to_one() {
        let mut rng = crate::optics::random::SplitMix64::new(7);
        let u = crate::optics::random::haar_unitary(5, &mut rng);
        let d = distribution(&u, &[1, 1, 0, 1, 0]).unwrap();
        let total: f64 = d.iter().map(Outcome::probability).sum();
        assert!((total - 1.0).abs() < 1e-12);
    }
}
