//! The coupling law k(g) between two equal guides at edge-to-edge gap g,
//! from a table of computed or measured points: the exponential fit of the
//! trade, and the smooth law that cells integrate against.
//!
//! - **Exponential fit** `k = k_ref exp(-(g - g_ref) / g_c)`: least squares
//!   on ln k, so the residual is relative (`fit_rms` is the rms of
//!   ln k_table - ln k_fit, about the relative error). Exponential decay of
//!   the overlap of evanescent tails is the coupled-mode result (Marcuse,
//!   Theory of Dielectric Optical Waveguides, 2nd ed., 1991, ch. 3).
//! - **Smooth law**: a natural cubic spline through (g, ln k) (de Boor, A
//!   Practical Guide to Splines, 1978, ch. 4), continued beyond the table by
//!   the straight lines that meet its ends. The natural spline has zero
//!   curvature at its ends, so the continuation keeps the law twice
//!   continuously differentiable everywhere (C2). Cells integrate the
//!   coupling along a parabolic gap profile; a piecewise-linear or a
//!   monotone C1 interpolant would put kinks in dk/dz that a high-order
//!   integrator sees as error, so neither is used.
//!
//! Gaps are in nm, couplings in rad/um.

use serde::Serialize;

/// Computed or measured couplings at one wavelength.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CouplingTable {
    pub wavelength_um: f64,
    pub gaps_nm: Vec<f64>,
    pub k_per_um: Vec<f64>,
}

#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ExponentialFit {
    pub k_ref_per_um: f64,
    pub g_ref_nm: f64,
    pub g_c_nm: f64,
    /// rms of ln k_table - ln k_fit (about the rms relative error).
    pub fit_rms: f64,
}

impl ExponentialFit {
    pub fn k_per_um(&self, gap_nm: f64) -> f64 {
        self.k_ref_per_um * (-(gap_nm - self.g_ref_nm) / self.g_c_nm).exp()
    }
}

/// Natural cubic spline of ln k against g with straight continuations.
#[derive(Clone, Debug, PartialEq)]
pub struct SmoothLaw {
    g: Vec<f64>,
    y: Vec<f64>,
    /// Second derivatives at the knots (zero at both ends).
    m: Vec<f64>,
}

#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum CouplingError {
    #[error("a coupling law needs at least 3 gaps, got {0}")]
    TooFewPoints(usize),
    #[error("gaps must increase strictly: {0} nm follows {1} nm")]
    NotIncreasing(f64, f64),
    #[error("couplings must be positive and finite: {k} rad/um at {gap} nm")]
    BadCoupling { gap: f64, k: f64 },
}

impl SmoothLaw {
    pub fn new(gaps_nm: &[f64], k_per_um: &[f64]) -> Result<SmoothLaw, CouplingError> {
        check_points(gaps_nm, k_per_um)?;
        let n = gaps_nm.len();
        let g = gaps_nm.to_vec();
        let y: Vec<f64> = k_per_um.iter().map(|k| k.ln()).collect();
        // Tridiagonal system for the interior second derivatives (Thomas).
        let h: Vec<f64> = (0..n - 1).map(|i| g[i + 1] - g[i]).collect();
        let mut m = vec![0.0; n];
        if n > 2 {
            let k = n - 2;
            let mut diag = vec![0.0; k];
            let mut upper = vec![0.0; k];
            let mut rhs = vec![0.0; k];
            for i in 0..k {
                diag[i] = 2.0 * (h[i] + h[i + 1]);
                upper[i] = h[i + 1];
                rhs[i] = 6.0 * ((y[i + 2] - y[i + 1]) / h[i + 1] - (y[i + 1] - y[i]) / h[i]);
            }
            for i in 1..k {
                let w = h[i] / diag[i - 1];
                diag[i] -= w * upper[i - 1];
                rhs[i] -= w * rhs[i - 1];
            }
            let mut sol = vec![0.0; k];
            sol[k - 1] = rhs[k - 1] / diag[k - 1];
            for i in (0..k - 1).rev() {
                sol[i] = (rhs[i] - upper[i] * sol[i + 1]) / diag[i];
            }
            m[1..n - 1].copy_from_slice(&sol);
        }
        Ok(SmoothLaw { g, y, m })
    }

    /// ln k and its first and second derivatives in g (per nm).
    pub fn ln_k(&self, gap_nm: f64) -> (f64, f64, f64) {
        let n = self.g.len();
        let slope = |i: usize| -> f64 {
            // First derivative of the spline at knot i.
            if i + 1 < n {
                let h = self.g[i + 1] - self.g[i];
                (self.y[i + 1] - self.y[i]) / h - h * (2.0 * self.m[i] + self.m[i + 1]) / 6.0
            } else {
                let h = self.g[n - 1] - self.g[n - 2];
                (self.y[n - 1] - self.y[n - 2]) / h
                    + h * (self.m[n - 2] + 2.0 * self.m[n - 1]) / 6.0
            }
        };
        if gap_nm <= self.g[0] {
            let s = slope(0);
            return (self.y[0] + s * (gap_nm - self.g[0]), s, 0.0);
        }
        if gap_nm >= self.g[n - 1] {
            let s = slope(n - 1);
            return (self.y[n - 1] + s * (gap_nm - self.g[n - 1]), s, 0.0);
        }
        let i = match self.g.binary_search_by(|x| x.total_cmp(&gap_nm)) {
            Ok(i) => i.min(n - 2),
            Err(i) => i - 1,
        };
        let h = self.g[i + 1] - self.g[i];
        let a = (self.g[i + 1] - gap_nm) / h;
        let b = (gap_nm - self.g[i]) / h;
        let (mi, mj) = (self.m[i], self.m[i + 1]);
        let v = a * self.y[i]
            + b * self.y[i + 1]
            + ((a * a * a - a) * mi + (b * b * b - b) * mj) * h * h / 6.0;
        let d = (self.y[i + 1] - self.y[i]) / h - (3.0 * a * a - 1.0) / 6.0 * h * mi
            + (3.0 * b * b - 1.0) / 6.0 * h * mj;
        let dd = a * mi + b * mj;
        (v, d, dd)
    }

    pub fn k_per_um(&self, gap_nm: f64) -> f64 {
        let n = self.g.len();
        if gap_nm <= self.g[0] || gap_nm >= self.g[n - 1] {
            return self.ln_k(gap_nm).0.exp();
        }
        // The spline value alone (as in `ln_k`): the hot path of the cells.
        let i = match self.g.binary_search_by(|x| x.total_cmp(&gap_nm)) {
            Ok(i) => i.min(n - 2),
            Err(i) => i - 1,
        };
        let h = self.g[i + 1] - self.g[i];
        let a = (self.g[i + 1] - gap_nm) / h;
        let b = 1.0 - a;
        let v = a * self.y[i]
            + b * self.y[i + 1]
            + ((a * a * a - a) * self.m[i] + (b * b * b - b) * self.m[i + 1]) * h * h / 6.0;
        v.exp()
    }

    /// The knots: between them (and beyond the ends) ln k is a polynomial
    /// in g; at them its third derivative jumps, which an integrator should
    /// not step across.
    pub fn knots_nm(&self) -> &[f64] {
        &self.g
    }

    /// The local decay length `-1 / (d ln k / dg)`, nm.
    pub fn decay_length_nm(&self, gap_nm: f64) -> f64 {
        -1.0 / self.ln_k(gap_nm).1
    }

    pub fn range_nm(&self) -> (f64, f64) {
        (self.g[0], self.g[self.g.len() - 1])
    }
}

fn check_points(gaps_nm: &[f64], k_per_um: &[f64]) -> Result<(), CouplingError> {
    if gaps_nm.len() < 3 || k_per_um.len() != gaps_nm.len() {
        return Err(CouplingError::TooFewPoints(
            gaps_nm.len().min(k_per_um.len()),
        ));
    }
    for w in gaps_nm.windows(2) {
        if w[1].partial_cmp(&w[0]) != Some(std::cmp::Ordering::Greater) {
            return Err(CouplingError::NotIncreasing(w[1], w[0]));
        }
    }
    for (&g, &k) in gaps_nm.iter().zip(k_per_um) {
        if !(k.is_finite() && k > 0.0 && g.is_finite()) {
            return Err(CouplingError::BadCoupling { gap: g, k });
        }
    }
    Ok(())
}

/// Least-squares fit of ln k = ln k_ref - (g - g_ref) / g_c, with `g_ref`
/// given (the reference gap the law is quoted at).
pub fn exponential_fit(
    gaps_nm: &[f64],
    k_per_um: &[f64],
    g_ref_nm: f64,
) -> Result<ExponentialFit, CouplingError> {
    check_points(gaps_nm, k_per_um)?;
    let n = gaps_nm.len() as f64;
    let x: Vec<f64> = gaps_nm.iter().map(|g| g - g_ref_nm).collect();
    let y: Vec<f64> = k_per_um.iter().map(|k| k.ln()).collect();
    let (sx, sy) = (x.iter().sum::<f64>(), y.iter().sum::<f64>());
    let sxx: f64 = x.iter().map(|v| v * v).sum();
    let sxy: f64 = x.iter().zip(&y).map(|(a, b)| a * b).sum();
    let slope = (n * sxy - sx * sy) / (n * sxx - sx * sx);
    let intercept = (sy - slope * sx) / n;
    let rms = (x
        .iter()
        .zip(&y)
        .map(|(a, b)| (b - (intercept + slope * a)).powi(2))
        .sum::<f64>()
        / n)
        .sqrt();
    Ok(ExponentialFit {
        k_ref_per_um: intercept.exp(),
        g_ref_nm,
        g_c_nm: -1.0 / slope,
        fit_rms: rms,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_exact_exponential_is_fitted_back() {
        let gaps: Vec<f64> = (0..10).map(|i| 100.0 + 50.0 * i as f64).collect();
        let k: Vec<f64> = gaps
            .iter()
            .map(|g| 0.0634 * (-(g - 200.0) / 119.0).exp())
            .collect();
        let f = exponential_fit(&gaps, &k, 200.0).unwrap();
        assert!((f.k_ref_per_um - 0.0634).abs() < 1e-14);
        assert!((f.g_c_nm - 119.0).abs() < 1e-10);
        assert!(f.fit_rms < 1e-13);
        let s = SmoothLaw::new(&gaps, &k).unwrap();
        for g in [80.0, 123.0, 200.0, 317.5, 700.0] {
            assert!((s.k_per_um(g) / f.k_per_um(g) - 1.0).abs() < 1e-12, "{g}");
            assert!((s.decay_length_nm(g) - 119.0).abs() < 1e-8);
        }
    }

    #[test]
    fn the_smooth_law_is_c2_across_knots_and_ends() {
        // A curved ln k: the spline's value, slope and curvature are
        // continuous at every knot and where the straight continuations start.
        let gaps = [100.0, 150.0, 200.0, 300.0, 400.0];
        let k: Vec<f64> = gaps
            .iter()
            .map(|g: &f64| 0.1 * (-(g / 110.0) - (g / 900.0).powi(2)).exp())
            .collect();
        let s = SmoothLaw::new(&gaps, &k).unwrap();
        let eps = 1e-7;
        for &g in &gaps {
            let (a, b) = (s.ln_k(g - eps), s.ln_k(g + eps));
            assert!((a.0 - b.0).abs() < 1e-8);
            assert!((a.1 - b.1).abs() < 1e-8);
            assert!(
                (a.2 - b.2).abs() < 1e-6,
                "curvature jumps at {g}: {} {}",
                a.2,
                b.2
            );
        }
        // Interpolates the points.
        for (g, kk) in gaps.iter().zip(&k) {
            assert!((s.k_per_um(*g) / kk - 1.0).abs() < 1e-14);
        }
    }

    #[test]
    fn bad_tables_are_refused() {
        assert!(SmoothLaw::new(&[100.0, 200.0], &[0.1, 0.05]).is_err());
        assert!(SmoothLaw::new(&[100.0, 100.0, 200.0], &[0.1, 0.1, 0.05]).is_err());
        assert!(SmoothLaw::new(&[100.0, 150.0, 200.0], &[0.1, -0.1, 0.05]).is_err());
    }
}
