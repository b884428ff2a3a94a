//! Guided modes of a multilayer dielectric slab by the transfer-matrix
//! method, with root finding that cannot miss a mode.
//!
//! A slab is a stack of layers (thickness, index) between two semi-infinite
//! claddings. In layer j the transverse field psi (E_y for TE, H_y for TM)
//! obeys `(p psi')' + k0^2 (n_j^2 - n_eff^2) p psi = 0`, with p = 1 (TE) or
//! 1/n_j^2 (TM), and psi and p psi' are continuous across interfaces
//! (Kogelnik & Ramaswamy, Appl. Opt. 13, 1857, 1974; Okamoto, Fundamentals
//! of Optical Waveguides, 2nd ed., 2006, ch. 2; Chilwell & Hodgkinson,
//! J. Opt. Soc. Am. A 1, 742, 1984 for the multilayer matrices). Starting
//! from the field that decays into the lower cladding, the layers' 2 x 2
//! matrices carry (psi, p psi') to the upper cladding, where a guided mode
//! must decay too: `F(n_eff) = p psi' + p_c gamma_c psi = 0` there.
//!
//! No root is missed: by the Sturm oscillation theorem the solution that
//! decays on one side has, at a trial index, as many zeros as there are
//! modes above that index. Counting zeros (exactly, layer by layer) gives
//! the number of modes in any interval; bisection on that count isolates
//! every mode in its own bracket, even for nearly degenerate supermodes of
//! weakly coupled guides, and Brent's method (Brent, Algorithms for
//! Minimization without Derivatives, 1973, ch. 4) then finds it to 1e-14.

use std::f64::consts::PI;

/// Polarisation of a slab mode.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Polarisation {
    /// Electric field along the layers (p = 1).
    Te,
    /// Magnetic field along the layers (p = 1/n^2).
    Tm,
}

/// A multilayer slab.
#[derive(Clone, Debug, PartialEq)]
pub struct Slab {
    /// Index of the lower (first) cladding.
    pub lower: f64,
    /// Inner layers in order: (thickness um, index).
    pub layers: Vec<(f64, f64)>,
    /// Index of the upper (last) cladding.
    pub upper: f64,
}

#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum SlabError {
    #[error("the slab guides no {0:?} mode at this wavelength")]
    NoMode(Polarisation),
    #[error("the slab guides only {found} {pol:?} modes; mode {wanted} does not exist")]
    NotEnoughModes {
        pol: Polarisation,
        wanted: usize,
        found: usize,
    },
    #[error("invalid slab: {0}")]
    Invalid(String),
}

impl Slab {
    /// A symmetric three-layer slab: core of `thickness_um` and `core`,
    /// both claddings `clad`.
    pub fn symmetric(thickness_um: f64, core: f64, clad: f64) -> Slab {
        Slab {
            lower: clad,
            layers: vec![(thickness_um, core)],
            upper: clad,
        }
    }

    fn n_max(&self) -> f64 {
        self.layers.iter().map(|l| l.1).fold(f64::MIN, f64::max)
    }

    fn n_clad(&self) -> f64 {
        self.lower.max(self.upper)
    }

    fn validate(&self) -> Result<(), SlabError> {
        let ok = self.lower > 0.0
            && self.upper > 0.0
            && self
                .layers
                .iter()
                .all(|&(d, n)| d.is_finite() && d >= 0.0 && n > 0.0 && n.is_finite());
        if !ok || self.layers.is_empty() {
            return Err(SlabError::Invalid(
                "layers need finite non-negative thicknesses and positive indices".into(),
            ));
        }
        Ok(())
    }

    /// Propagates the field that decays into the lower cladding to the top
    /// of the stack: returns (psi, p psi') there, the number of zeros of psi
    /// over the whole line (upper cladding included), and the dispersion
    /// function F.
    fn shoot(&self, pol: Polarisation, k0: f64, neff: f64) -> (f64, usize) {
        let p = |n: f64| match pol {
            Polarisation::Te => 1.0,
            Polarisation::Tm => 1.0 / (n * n),
        };
        let b2 = neff * neff;
        let gamma_l = k0 * (b2 - self.lower * self.lower).max(0.0).sqrt();
        // psi = e^{gamma x} in the lower cladding.
        let (mut psi, mut q) = (1.0f64, p(self.lower) * gamma_l);
        let mut zeros = 0usize;
        for &(d, n) in &self.layers {
            let pn = p(n);
            let s = k0 * k0 * (n * n - b2);
            if s > 0.0 {
                let kappa = s.sqrt();
                let (sn, cs) = (kappa * d).sin_cos();
                // psi = A cos(kx) + B sin(kx), B = q / (p k).
                let (a, b) = (psi, q / (pn * kappa));
                let phi = b.atan2(a);
                let end = kappa * d;
                let count =
                    ((end - phi - PI / 2.0) / PI).floor() - ((-phi - PI / 2.0) / PI).floor();
                zeros += count.max(0.0) as usize;
                let psi2 = a * cs + b * sn;
                let q2 = pn * kappa * (-a * sn + b * cs);
                psi = psi2;
                q = q2;
            } else if s < 0.0 {
                let gamma = (-s).sqrt();
                let gd = gamma * d;
                let (a, b) = (psi, q / (pn * gamma));
                // psi = A cosh + B sinh: one zero where tanh(gx) = -A/B.
                if b != 0.0 {
                    let t = -a / b;
                    if t > 0.0 && t < gd.tanh() {
                        zeros += 1;
                    }
                }
                let (ch, sh) = (gd.cosh(), gd.sinh());
                psi = a * ch + b * sh;
                q = pn * gamma * (a * sh + b * ch);
            } else {
                // n = n_eff in this layer: psi linear.
                let psi2 = psi + q / pn * d;
                if psi != 0.0 && psi2.signum() != psi.signum() && psi2 != 0.0 {
                    zeros += 1;
                }
                psi = psi2;
            }
            // Keep the pair finite; only its direction matters.
            let norm = psi.abs().max(q.abs());
            if norm > 0.0 {
                psi /= norm;
                q /= norm;
            }
        }
        // Upper cladding: psi = psi_e cosh(gx) + q_e/(p g) sinh(gx).
        let gamma_u = k0 * (b2 - self.upper * self.upper).max(0.0).sqrt();
        let pu = p(self.upper);
        if gamma_u > 0.0 && q != 0.0 {
            let t = -psi * pu * gamma_u / q;
            if t > 0.0 && t < 1.0 {
                zeros += 1;
            }
        }
        let f = q + pu * gamma_u * psi;
        (f, zeros)
    }

    /// The dispersion function: zero at a guided mode.
    pub fn dispersion(&self, pol: Polarisation, wavelength_um: f64, neff: f64) -> f64 {
        self.shoot(pol, 2.0 * PI / wavelength_um, neff).0
    }

    /// How many guided modes have an effective index above `neff`.
    pub fn modes_above(&self, pol: Polarisation, wavelength_um: f64, neff: f64) -> usize {
        self.shoot(pol, 2.0 * PI / wavelength_um, neff).1
    }

    /// Every guided mode's effective index, highest (mode 0) first.
    pub fn modes(&self, pol: Polarisation, wavelength_um: f64) -> Result<Vec<f64>, SlabError> {
        self.validate()?;
        let k0 = 2.0 * PI / wavelength_um;
        let lo = self.n_clad() * (1.0 + 1e-13);
        let hi = self.n_max() * (1.0 - 1e-15);
        if hi <= lo {
            return Ok(Vec::new());
        }
        let count = |n: f64| self.shoot(pol, k0, n).1;
        let mut brackets = Vec::new();
        isolate(&count, lo, count(lo), hi, count(hi), &mut brackets, 0);
        let mut roots: Vec<f64> = brackets
            .into_iter()
            .map(|(a, b)| brent(|n| self.shoot(pol, k0, n).0, a, b))
            .collect();
        roots.sort_by(|a, b| b.total_cmp(a));
        Ok(roots)
    }

    /// The effective index of mode `m` (0 = fundamental).
    pub fn mode(&self, pol: Polarisation, wavelength_um: f64, m: usize) -> Result<f64, SlabError> {
        let all = self.modes(pol, wavelength_um)?;
        if all.is_empty() {
            return Err(SlabError::NoMode(pol));
        }
        all.get(m).copied().ok_or(SlabError::NotEnoughModes {
            pol,
            wanted: m,
            found: all.len(),
        })
    }
}

/// Splits [lo, hi] until each piece holds exactly one mode (the count drops
/// by one across it); pieces with none are dropped.
fn isolate(
    count: &dyn Fn(f64) -> usize,
    lo: f64,
    c_lo: usize,
    hi: f64,
    c_hi: usize,
    out: &mut Vec<(f64, f64)>,
    depth: u32,
) {
    let n = c_lo.saturating_sub(c_hi);
    if n == 0 {
        return;
    }
    if n == 1 || depth > 200 || hi - lo <= 1e-15 * hi {
        // Degenerate to the last bit: report the piece once per mode.
        for _ in 0..n {
            out.push((lo, hi));
        }
        return;
    }
    let mid = 0.5 * (lo + hi);
    let c_mid = count(mid);
    isolate(count, lo, c_lo, mid, c_mid, out, depth + 1);
    isolate(count, mid, c_mid, hi, c_hi, out, depth + 1);
}

/// Brent's root finder on a bracket; returns the midpoint of the final
/// bracket if the function does not change sign (a root at an end).
pub fn brent(f: impl Fn(f64) -> f64, a0: f64, b0: f64) -> f64 {
    let (mut a, mut b) = (a0, b0);
    let (mut fa, mut fb) = (f(a), f(b));
    if fa == 0.0 {
        return a;
    }
    if fb == 0.0 {
        return b;
    }
    if fa.signum() == fb.signum() {
        return 0.5 * (a + b);
    }
    let (mut c, mut fc) = (a, fa);
    let mut d = b - a;
    let mut e = d;
    for _ in 0..200 {
        if fb.signum() == fc.signum() {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol = 2.0 * f64::EPSILON * b.abs() + 1e-16;
        let m = 0.5 * (c - b);
        if m.abs() <= tol || fb == 0.0 {
            return b;
        }
        if e.abs() >= tol && fa.abs() > fb.abs() {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                p = 2.0 * m * s;
                q = 1.0 - s;
            } else {
                let qa = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * m * qa * (qa - r) - (b - a) * (r - 1.0));
                q = (qa - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * m * q - (tol * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = m;
                e = m;
            }
        } else {
            d = m;
            e = m;
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol { d } else { tol * m.signum() };
        fb = f(b);
    }
    b
}

#[cfg(test)]
mod tests {
    use super::*;

    /// b of the symmetric slab's mode m from the normalised relation
    /// V sqrt(1-b) = m pi + 2 atan(r sqrt(b/(1-b))), r = 1 (TE) or
    /// (n1/n2)^2 (TM) (Kogelnik & Ramaswamy 1974), by bisection.
    fn b_of_v(v: f64, m: usize, r: f64) -> f64 {
        let g = |b: f64| {
            v * (1.0 - b).sqrt() - m as f64 * PI - 2.0 * (r * (b / (1.0 - b)).sqrt()).atan()
        };
        let (mut lo, mut hi) = (1e-15, 1.0 - 1e-15);
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if g(mid) > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }

    #[test]
    fn symmetric_slab_matches_the_published_b_v_values() {
        // checks.md: TE0 b(V) for V = 0.5, 1, pi/2, 2, 4, 5 and TE1 at 4, 5
        // (computed independently from Kogelnik & Ramaswamy's relation).
        let (n1, n2, l) = (1.5f64, 1.45f64, 1.0f64);
        let na = (n1 * n1 - n2 * n2).sqrt();
        let k0 = 2.0 * PI / l;
        for (v, want0, want1) in [
            (0.5, 0.05774, None),
            (1.0, 0.18934, None),
            (PI / 2.0, 0.35010, None),
            (2.0, 0.45375, None),
            (4.0, 0.73484, Some(0.10178)),
            (5.0, 0.80268, Some(0.27727)),
        ] {
            let d = v / (k0 * na);
            let slab = Slab::symmetric(d, n1, n2);
            let modes = slab.modes(Polarisation::Te, l).unwrap();
            let b = |n: f64| (n * n - n2 * n2) / (n1 * n1 - n2 * n2);
            assert!(
                (b(modes[0]) - want0).abs() < 1e-5,
                "V = {v}: {}",
                b(modes[0])
            );
            match want1 {
                Some(w) => assert!((b(modes[1]) - w).abs() < 1e-5),
                None => assert_eq!(modes.len(), 1, "V = {v} < pi: one TE mode"),
            }
            // Mode count: TE_m is cut off at V = m pi (V over the full
            // thickness), so floor(V / pi) + 1 modes; in a symmetric slab the
            // TM modes have the same cut-offs (Kogelnik & Ramaswamy 1974).
            assert_eq!(modes.len(), (v / PI).floor() as usize + 1, "V = {v}");
            let tm = slab.modes(Polarisation::Tm, l).unwrap();
            assert_eq!(tm.len(), modes.len(), "V = {v}: TM count");
            let r = (n1 / n2).powi(2);
            for (m, n) in tm.iter().enumerate() {
                let want = b_of_v(v, m, r);
                assert!(
                    (b(*n) - want).abs() < 1e-9,
                    "V = {v}, TM{m}: {} vs {want}",
                    b(*n)
                );
            }
        }
    }

    #[test]
    fn tm_modes_follow_the_tm_relation() {
        // Kogelnik & Ramaswamy (1974), TM form, against this module's matrices.
        let (n1, n2, l) = (3.4764f64, 1.444f64, 1.55f64);
        let slab = Slab::symmetric(0.22, n1, n2);
        let v = 2.0 * PI / l * 0.22 * (n1 * n1 - n2 * n2).sqrt();
        let b = b_of_v(v, 0, (n1 / n2).powi(2));
        let want = (n2 * n2 + b * (n1 * n1 - n2 * n2)).sqrt();
        let got = slab.mode(Polarisation::Tm, l, 0).unwrap();
        assert!((got - want).abs() < 1e-10, "{got} vs {want}");
    }

    #[test]
    fn silicon_slab_indices() {
        // checks.md: 220 nm Si in SiO2 at 1550 nm, V = 2.8202, TE0 2.84819,
        // TM0 2.05364 (computed independently).
        let slab = Slab::symmetric(0.22, 3.4764, 1.444024);
        let te = slab.mode(Polarisation::Te, 1.55, 0).unwrap();
        let tm = slab.mode(Polarisation::Tm, 1.55, 0).unwrap();
        assert!((te - 2.84819).abs() < 2e-4, "{te}");
        assert!((tm - 2.05364).abs() < 2e-4, "{tm}");
    }

    #[test]
    fn nearly_degenerate_supermodes_are_both_found() {
        // Two guides 1.5 um apart: the even and odd modes differ by ~1e-6 in
        // index, far below any scan step; the count bisection still splits them.
        let (w, g) = (0.5, 1.5);
        let slab = Slab {
            lower: 1.444,
            layers: vec![(w, 2.848), (g, 1.444), (w, 2.848)],
            upper: 1.444,
        };
        let m = slab.modes(Polarisation::Tm, 1.55).unwrap();
        assert!(m.len() >= 2);
        assert!(m[0] > m[1] && m[0] - m[1] < 1e-4, "{:?}", &m[..2]);
        for n in &m[..2] {
            assert!(slab.dispersion(Polarisation::Tm, 1.55, *n).abs() < 1e-6);
        }
    }
}
