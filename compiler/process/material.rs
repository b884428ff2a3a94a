//! Refractive indices of the guide and cladding materials, by Sellmeier-type
//! dispersion models, each with the wavelength range it was fitted over.
//!
//! - Silicon: Li, J. Phys. Chem. Ref. Data 9, 561 (1980), at 293 K, in the
//!   form `n^2 = e + A / l^2 + B l1^2 / (l^2 - l1^2)` with e = 11.6858,
//!   A = 0.939816 um^2, B = 8.10461e-3, l1 = 1.1071 um (coefficients from
//!   memory; they give n(1.55 um) = 3.4764, the value of the trade). Range
//!   1.2 to 14 um (from memory of the paper's fit range).
//! - Fused silica: Malitson, J. Opt. Soc. Am. 55, 1205 (1965), three
//!   Sellmeier terms, 0.21 to 3.71 um.
//! - Silicon nitride (stoichiometric, LPCVD): Luke et al., Opt. Lett. 40,
//!   4823 (2015), two Sellmeier terms, 0.31 to 5.504 um (coefficients from
//!   memory: 3.0249 at 0.1353406 um and 40314 at 1239.842 um).
//! - Doped silica (a germanium-doped core): fused silica plus a constant
//!   index step, by default 0.0075 x n_SiO2 (a 0.75 % index contrast, common
//!   practice for planar lightwave circuits). A constant step is an
//!   approximation: the dopant's own dispersion is neglected.
//!
//! Wavelengths are in micrometres.

use serde::Serialize;

/// A dispersion model.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "model", rename_all = "snake_case")]
pub enum Material {
    /// Li (1980) silicon.
    SiliconLi1980,
    /// Malitson (1965) fused silica.
    SilicaMalitson1965,
    /// Luke et al. (2015) silicon nitride.
    NitrideLuke2015,
    /// Fused silica (Malitson 1965) plus a constant index step.
    DopedSilica { index_step: f64 },
    /// A constant index, for tests and for users who know their film.
    Constant { index: f64 },
}

#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error(
    "{material}: {wavelength_um} um is outside the {lo_um} to {hi_um} um its dispersion model ({source_name}) was fitted over"
)]
pub struct OutOfRange {
    pub material: &'static str,
    pub source_name: &'static str,
    pub wavelength_um: f64,
    pub lo_um: f64,
    pub hi_um: f64,
}

impl Material {
    pub fn name(&self) -> &'static str {
        match self {
            Material::SiliconLi1980 => "silicon",
            Material::SilicaMalitson1965 => "fused silica",
            Material::NitrideLuke2015 => "silicon nitride",
            Material::DopedSilica { .. } => "doped silica",
            Material::Constant { .. } => "constant index",
        }
    }

    /// The source of the model, for reports.
    pub fn source(&self) -> &'static str {
        match self {
            Material::SiliconLi1980 => "Li, J. Phys. Chem. Ref. Data 9, 561 (1980), 293 K",
            Material::SilicaMalitson1965 => "Malitson, J. Opt. Soc. Am. 55, 1205 (1965)",
            Material::NitrideLuke2015 => "Luke et al., Opt. Lett. 40, 4823 (2015)",
            Material::DopedSilica { .. } => {
                "Malitson (1965) silica plus a constant index step (common practice)"
            }
            Material::Constant { .. } => "a constant index given by the process",
        }
    }

    /// The wavelength range of the model, um.
    pub fn range_um(&self) -> (f64, f64) {
        match self {
            Material::SiliconLi1980 => (1.2, 14.0),
            Material::SilicaMalitson1965 | Material::DopedSilica { .. } => (0.21, 3.71),
            Material::NitrideLuke2015 => (0.31, 5.504),
            Material::Constant { .. } => (0.0, f64::INFINITY),
        }
    }

    /// The refractive index at `wavelength_um`.
    pub fn index(&self, wavelength_um: f64) -> Result<f64, OutOfRange> {
        let (lo, hi) = self.range_um();
        if !(lo..=hi).contains(&wavelength_um) {
            return Err(OutOfRange {
                material: self.name(),
                source_name: self.source(),
                wavelength_um,
                lo_um: lo,
                hi_um: hi,
            });
        }
        Ok(self.index_unchecked(wavelength_um))
    }

    fn index_unchecked(&self, l: f64) -> f64 {
        let l2 = l * l;
        match self {
            Material::SiliconLi1980 => {
                let (e, a, b, l1) = (11.6858, 0.939816, 8.10461e-3, 1.1071);
                (e + a / l2 + b * l1 * l1 / (l2 - l1 * l1)).sqrt()
            }
            Material::SilicaMalitson1965 => silica(l2),
            Material::DopedSilica { index_step } => silica(l2) + index_step,
            Material::NitrideLuke2015 => {
                let t1 = 3.0249 * l2 / (l2 - 0.1353406f64.powi(2));
                let t2 = 40314.0 * l2 / (l2 - 1239.842f64.powi(2));
                (1.0 + t1 + t2).sqrt()
            }
            Material::Constant { index } => *index,
        }
    }

    /// The group index of the bulk material, `n - l dn/dl`, by a central
    /// difference of 1 nm.
    pub fn group_index(&self, wavelength_um: f64) -> Result<f64, OutOfRange> {
        let h = 1e-3;
        let n = self.index(wavelength_um)?;
        let up = self.index(wavelength_um + h)?;
        let down = self.index(wavelength_um - h)?;
        Ok(n - wavelength_um * (up - down) / (2.0 * h))
    }
}

fn silica(l2: f64) -> f64 {
    let terms = [
        (0.6961663, 0.0684043),
        (0.4079426, 0.1162414),
        (0.8974794, 9.896161),
    ];
    let s: f64 = terms.iter().map(|(b, c)| b * l2 / (l2 - c * c)).sum();
    (1.0 + s).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn published_indices() {
        // checks.md: Malitson (1965) n(1.55) = 1.444024, n(1.31) = 1.446804.
        let sio2 = Material::SilicaMalitson1965;
        assert!((sio2.index(1.55).unwrap() - 1.444024).abs() < 1e-6);
        assert!((sio2.index(1.31).unwrap() - 1.446804).abs() < 1e-6);
        // checks.md: Li (1980) n(1.55) = 3.4764, n(1.31) = 3.5005 (coefficients from memory).
        let si = Material::SiliconLi1980;
        assert!((si.index(1.55).unwrap() - 3.4764).abs() < 1e-4);
        assert!((si.index(1.31).unwrap() - 3.5005).abs() < 1e-4);
        // Luke et al. (2015): n(1.55) about 1.996 (from memory of the paper's figure).
        let sin = Material::NitrideLuke2015;
        assert!((sin.index(1.55).unwrap() - 1.996).abs() < 2e-3);
    }

    #[test]
    fn outside_the_fit_range_is_an_error() {
        let e = Material::SiliconLi1980.index(1.0).unwrap_err();
        assert!(e.to_string().contains("1.2 to 14 um"), "{e}");
        assert!(Material::SilicaMalitson1965.index(4.0).is_err());
    }

    #[test]
    fn silica_group_index() {
        // Bulk fused silica at 1.55 um: n_g about 1.463 (from memory, a
        // handbook figure; Malitson's model gives it by differentiation).
        let ng = Material::SilicaMalitson1965.group_index(1.55).unwrap();
        assert!((ng - 1.4626).abs() < 1e-3, "{ng}");
    }
}
