//! Seeded randomness for tests, benchmarks and (later) Monte Carlo budgets.
//!
//! SplitMix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number
//! generators", OOPSLA 2014) for uniform bits, the Box–Muller transform
//! (Box & Muller, Ann. Math. Statist. 29, 610, 1958) for normal deviates,
//! and Haar-random unitaries by the QR method with the phase correction of
//! Mezzadri ("How to generate random matrices from the classical compact
//! groups", Notices of the AMS 54, 592, 2007).

use nalgebra::DMatrix;
use num_complex::Complex64;

/// A small, fast, seedable generator; the same seed gives the same stream
/// on every platform.
#[derive(Clone, Debug)]
pub struct SplitMix64 {
    state: u64,
}

impl SplitMix64 {
    pub fn new(seed: u64) -> Self {
        SplitMix64 { state: seed }
    }

    pub fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1), 53 random bits.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// A standard normal deviate (Box–Muller, one of the pair).
    pub fn normal(&mut self) -> f64 {
        let u1 = 1.0 - self.uniform(); // in (0, 1]: ln is finite
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }

    /// A complex number with independent standard normal parts.
    pub fn complex_normal(&mut self) -> Complex64 {
        Complex64::new(self.normal(), self.normal())
    }
}

/// A Haar-random n x n unitary: QR of a complex Ginibre matrix, with the
/// columns of Q rephased by the phases of R's diagonal (Mezzadri 2007, sec. 5).
pub fn haar_unitary(n: usize, rng: &mut SplitMix64) -> DMatrix<Complex64> {
    let z = DMatrix::from_fn(n, n, |_, _| rng.complex_normal());
    let qr = z.qr();
    let mut q = qr.q();
    let r = qr.r();
    for j in 0..n {
        let d = r[(j, j)];
        let phase = if d.norm() > 0.0 {
            d / d.norm()
        } else {
            Complex64::new(1.0, 0.0)
        };
        for i in 0..n {
            q[(i, j)] *= phase;
        }
    }
    q
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_deviates_have_unit_variance() {
        let mut rng = SplitMix64::new(7);
        let n = 200_000;
        let xs: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / n as f64;
        // Standard errors: 1/sqrt(n) = 0.0022 for the mean, sqrt(2/n) = 0.0032 for the variance.
        assert!(mean.abs() < 0.01, "{mean}");
        assert!((var - 1.0).abs() < 0.015, "{var}");
    }

    #[test]
    fn haar_unitaries_are_unitary_and_unbiased_in_phase() {
        let mut rng = SplitMix64::new(11);
        let u = haar_unitary(12, &mut rng);
        let err = (&u.adjoint() * &u - DMatrix::<Complex64>::identity(12, 12)).norm();
        assert!(err < 1e-13, "{err}");
        // Haar measure: E|U_ij|^2 = 1/n (Mezzadri 2007); average over samples.
        let mut mean = 0.0;
        let samples = 400;
        for _ in 0..samples {
            mean += haar_unitary(4, &mut rng)[(0, 0)].norm_sqr();
        }
        mean /= samples as f64;
        assert!((mean - 0.25).abs() < 0.03, "{mean}");
    }
}
