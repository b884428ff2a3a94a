//! Along-z edge roughness: each guide edge moves by a stationary Gaussian
//! random process f(z) of standard deviation sigma and Gaussian
//! autocorrelation `<f(z) f(z + t)> = sigma^2 exp(-t^2 / L_c^2)`, L_c the
//! correlation length (language.md's `roughness` with `correlation`).
//!
//! Realisations by the randomised spectral representation (Shinozuka &
//! Deodatis, Appl. Mech. Rev. 44, 191, 1991):
//! `f(z) = sigma sqrt(2 / M) sum_m cos(q_m z + phi_m)`, with `phi_m` uniform
//! on [0, 2 pi) and `q_m` drawn from the normalised spectral density, here
//! normal with variance `2 / L_c^2` (the Fourier transform of the Gaussian
//! autocorrelation), so `E[f(z) f(z + t)] = sigma^2 E[cos(q t)] = sigma^2
//! exp(-t^2 / L_c^2)` exactly for any M. Each realisation is smooth, so the
//! cell integrators keep their order. M = 24 modes.

use crate::optics::random::SplitMix64;

/// Modes per edge profile.
pub const MODES: usize = 24;

/// One edge's displacement along z, nm (positive: the guide widens).
#[derive(Clone, Debug, PartialEq)]
pub struct EdgeProfile {
    /// A constant displacement (a local edge error of this cell).
    pub offset_nm: f64,
    amplitude_nm: f64,
    q_per_um: Vec<f64>,
    phase_rad: Vec<f64>,
}

impl EdgeProfile {
    pub fn sample(sigma_nm: f64, correlation_um: f64, rng: &mut SplitMix64) -> EdgeProfile {
        let sq = 2f64.sqrt() / correlation_um.max(1e-9);
        let mut q = Vec::with_capacity(MODES);
        let mut phase = Vec::with_capacity(MODES);
        for _ in 0..MODES {
            q.push(sq * rng.normal());
            phase.push(2.0 * std::f64::consts::PI * rng.uniform());
        }
        EdgeProfile {
            offset_nm: 0.0,
            amplitude_nm: sigma_nm * (2.0 / MODES as f64).sqrt(),
            q_per_um: q,
            phase_rad: phase,
        }
    }

    pub fn scaled(&self, s: f64) -> EdgeProfile {
        EdgeProfile {
            offset_nm: s * self.offset_nm,
            amplitude_nm: s * self.amplitude_nm,
            ..self.clone()
        }
    }

    pub fn at(&self, z_um: f64) -> f64 {
        if self.amplitude_nm == 0.0 {
            return self.offset_nm;
        }
        self.offset_nm
            + self.amplitude_nm
                * self
                    .q_per_um
                    .iter()
                    .zip(&self.phase_rad)
                    .map(|(q, p)| (q * z_um + p).cos())
                    .sum::<f64>()
    }

    /// Steps of L_c / 8 resolve a realisation; the integrator needs them.
    pub fn shortest_scale_um(&self) -> f64 {
        let q = self.q_per_um.iter().fold(0.0f64, |m, q| m.max(q.abs()));
        if q > 0.0 { 1.0 / q } else { f64::INFINITY }
    }
}

/// The six edges of a three-guide cell, top to bottom: upper rail outer,
/// upper rail inner, auxiliary top, auxiliary bottom, lower rail inner,
/// lower rail outer. A two-guide coupler uses edges 0, 1 (its upper guide)
/// and 4, 5 (its lower guide).
#[derive(Clone, Debug, PartialEq)]
pub struct RoughEdges {
    pub edges: [EdgeProfile; 6],
}

impl RoughEdges {
    pub fn sample(sigma_nm: f64, correlation_um: f64, rng: &mut SplitMix64) -> RoughEdges {
        RoughEdges {
            edges: std::array::from_fn(|_| EdgeProfile::sample(sigma_nm, correlation_um, rng)),
        }
    }

    pub fn scaled(&self, s: f64) -> RoughEdges {
        RoughEdges {
            edges: std::array::from_fn(|i| self.edges[i].scaled(s)),
        }
    }

    /// At z: the changes of the (upper, lower) gaps and the width changes
    /// of (upper rail, auxiliary, lower rail), nm.
    pub fn at(&self, z_um: f64) -> ([f64; 2], [f64; 3]) {
        let e: [f64; 6] = std::array::from_fn(|i| self.edges[i].at(z_um));
        (
            [-(e[1] + e[2]), -(e[3] + e[4])],
            [e[0] + e[1], e[2] + e[3], e[4] + e[5]],
        )
    }

    /// For a coupler: the gap change and the widths of its two guides.
    pub fn coupler_at(&self, z_um: f64) -> (f64, [f64; 2]) {
        let e: [f64; 6] = std::array::from_fn(|i| self.edges[i].at(z_um));
        (-(e[1] + e[4]), [e[0] + e[1], e[4] + e[5]])
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn realisations_have_the_stated_variance_and_correlation() {
        // Shinozuka & Deodatis (1991): the ensemble of realisations has
        // variance sigma^2 and autocorrelation sigma^2 exp(-t^2 / L_c^2).
        // 4000 realisations: the sample estimates carry about 2-3 % noise.
        let (sigma, lc) = (0.5, 5.0);
        let mut rng = SplitMix64::new(7);
        let n = 4000;
        let (mut var, mut cov_lc, mut cov_2lc) = (0.0, 0.0, 0.0);
        for _ in 0..n {
            let f = EdgeProfile::sample(sigma, lc, &mut rng);
            let f0 = f.at(13.0);
            var += f0 * f0;
            cov_lc += f0 * f.at(13.0 + lc);
            cov_2lc += f0 * f.at(13.0 + 2.0 * lc);
        }
        let (var, c1, c2) = (var / n as f64, cov_lc / n as f64, cov_2lc / n as f64);
        assert!((var / (sigma * sigma) - 1.0).abs() < 0.08, "{var}");
        assert!((c1 / (sigma * sigma) - (-1f64).exp()).abs() < 0.05, "{c1}");
        assert!((c2 / (sigma * sigma) - (-4f64).exp()).abs() < 0.05, "{c2}");
    }
}
