//! The effective index method for strip guides: one, two or three parallel
//! guides of one film.
//!
//! The vertical problem is the film between its claddings, solved as a slab
//! in TE (the field of a TE-like strip mode lies in the film's plane); its
//! index then fills the guides' widths in a lateral slab, solved with TM
//! boundary conditions, the gaps and sides taking the cladding's index
//! (Marcatili, Bell Syst. Tech. J. 48, 2071, 1969; Okamoto, Fundamentals of
//! Optical Waveguides, 2nd ed., 2006, section 2.3; Kogelnik & Ramaswamy,
//! Appl. Opt. 13, 1857, 1974 for the slabs). Both slabs use the
//! transfer-matrix solver of [`super::slab`], which finds every mode.
//!
//! Known bias: for high-contrast silicon strips the method overstates the
//! effective index (2.492 against 2.446 full-vector for 500 x 220 nm) and
//! the coupling between guides (by about half at a 200 nm gap, checks.md).
//! It is the fast, rough model; a full-vector solver is the accurate one.

use super::material::{Material, OutOfRange};
use super::slab::{Polarisation, Slab, SlabError};

/// A guide cross-section: a film of `core` between claddings, etched
/// through to strips of some width.
#[derive(Clone, Debug, PartialEq)]
pub struct Film {
    pub core: Material,
    /// Below the film (buried oxide).
    pub lower: Material,
    /// Above and beside the strips.
    pub upper: Material,
    pub thickness_um: f64,
}

/// Parallel strips: widths left to right and the edge-to-edge gaps between
/// them (`gaps.len() == widths.len() - 1`).
#[derive(Clone, Debug, PartialEq)]
pub struct Strips {
    pub widths_um: Vec<f64>,
    pub gaps_um: Vec<f64>,
}

impl Strips {
    pub fn single(width_um: f64) -> Strips {
        Strips {
            widths_um: vec![width_um],
            gaps_um: vec![],
        }
    }

    pub fn pair(width_um: f64, gap_um: f64) -> Strips {
        Strips {
            widths_um: vec![width_um, width_um],
            gaps_um: vec![gap_um],
        }
    }

    pub fn triple(width_um: f64, gap_um: f64) -> Strips {
        Strips {
            widths_um: vec![width_um; 3],
            gaps_um: vec![gap_um; 2],
        }
    }
}

#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum SolverError {
    #[error(transparent)]
    Material(#[from] OutOfRange),
    #[error(transparent)]
    Slab(#[from] SlabError),
    #[error("{0}")]
    Geometry(String),
}

/// A waveguide model: the effective indices of the TE-like supermodes of
/// parallel strips, highest first. The effective index method is one; a
/// full-vector solver slots in beside it.
pub trait WaveguideModel: Sync {
    /// A short name recorded with every law it produces (`effective_index`).
    fn name(&self) -> &'static str;
    /// The first `strips.widths_um.len()` TE-like supermode indices.
    fn supermodes(
        &self,
        film: &Film,
        strips: &Strips,
        wavelength_um: f64,
    ) -> Result<Vec<f64>, SolverError>;
}

/// The effective index method (module doc), for TE-like strip modes
/// (`EffectiveIndex::default()`), or TM-like ones (field mainly normal to
/// the film: the vertical slab in TM, the lateral one in TE).
#[derive(Clone, Copy, Debug, Default)]
pub struct EffectiveIndex {
    pub tm_like: bool,
}

impl EffectiveIndex {
    pub const TE_LIKE: EffectiveIndex = EffectiveIndex { tm_like: false };
    pub const TM_LIKE: EffectiveIndex = EffectiveIndex { tm_like: true };

    fn polarisations(&self) -> (Polarisation, Polarisation) {
        if self.tm_like {
            (Polarisation::Tm, Polarisation::Te)
        } else {
            (Polarisation::Te, Polarisation::Tm)
        }
    }

    /// The film's fundamental TE0 slab index: the core index of the lateral
    /// problem for TE-like modes.
    pub fn film_index(film: &Film, wavelength_um: f64) -> Result<f64, SolverError> {
        Self::film_index_pol(film, wavelength_um, Polarisation::Te)
    }

    fn film_index_pol(
        film: &Film,
        wavelength_um: f64,
        pol: Polarisation,
    ) -> Result<f64, SolverError> {
        let slab = Slab {
            lower: film.lower.index(wavelength_um)?,
            layers: vec![(film.thickness_um, film.core.index(wavelength_um)?)],
            upper: film.upper.index(wavelength_um)?,
        };
        Ok(slab.mode(pol, wavelength_um, 0)?)
    }
}

impl WaveguideModel for EffectiveIndex {
    fn name(&self) -> &'static str {
        "effective_index"
    }

    fn supermodes(
        &self,
        film: &Film,
        strips: &Strips,
        wavelength_um: f64,
    ) -> Result<Vec<f64>, SolverError> {
        let n = strips.widths_um.len();
        if n == 0 || strips.gaps_um.len() + 1 != n {
            return Err(SolverError::Geometry(format!(
                "{} strips need {} gaps, got {}",
                n,
                n.saturating_sub(1),
                strips.gaps_um.len()
            )));
        }
        if strips
            .widths_um
            .iter()
            .chain(&strips.gaps_um)
            .any(|&x| !(x.is_finite() && x > 0.0))
        {
            return Err(SolverError::Geometry(
                "widths and gaps must be positive".into(),
            ));
        }
        if !(film.thickness_um.is_finite() && film.thickness_um > 0.0) {
            return Err(SolverError::Geometry(
                "the film thickness must be positive".into(),
            ));
        }
        let (vertical, lateral_pol) = self.polarisations();
        let n_film = Self::film_index_pol(film, wavelength_um, vertical)?;
        let n_side = film.upper.index(wavelength_um)?;
        let mut layers = Vec::with_capacity(2 * n - 1);
        for (k, &w) in strips.widths_um.iter().enumerate() {
            if k > 0 {
                layers.push((strips.gaps_um[k - 1], n_side));
            }
            layers.push((w, n_film));
        }
        let lateral = Slab {
            lower: n_side,
            layers,
            upper: n_side,
        };
        let modes = lateral.modes(lateral_pol, wavelength_um)?;
        if modes.len() < n {
            return Err(SolverError::Slab(SlabError::NotEnoughModes {
                pol: lateral_pol,
                wanted: n - 1,
                found: modes.len(),
            }));
        }
        Ok(modes[..n].to_vec())
    }
}

/// Effective index, group index and sensitivities of one strip.
#[derive(Clone, Debug, PartialEq)]
pub struct ModeFigures {
    pub neff: f64,
    /// `n_eff - l dn_eff/dl`, material dispersion included (central
    /// difference over +-1 nm).
    pub group_index: f64,
    /// dn_eff/dw per nm of width (central difference over +-1 nm).
    pub dneff_dw_per_nm: f64,
    /// dn_eff/dt per nm of film thickness (central difference over +-1 nm).
    pub dneff_dt_per_nm: f64,
}

pub fn mode_figures(
    model: &dyn WaveguideModel,
    film: &Film,
    width_um: f64,
    wavelength_um: f64,
) -> Result<ModeFigures, SolverError> {
    let h = 1e-3;
    let at = |f: &Film, w: f64, l: f64| -> Result<f64, SolverError> {
        Ok(model.supermodes(f, &Strips::single(w), l)?[0])
    };
    let n = at(film, width_um, wavelength_um)?;
    let dl = (at(film, width_um, wavelength_um + h)? - at(film, width_um, wavelength_um - h)?)
        / (2.0 * h);
    let dw =
        (at(film, width_um + h, wavelength_um)? - at(film, width_um - h, wavelength_um)?) / 2.0;
    let thick = |dt: f64| Film {
        thickness_um: film.thickness_um + dt,
        ..film.clone()
    };
    let dt =
        (at(&thick(h), width_um, wavelength_um)? - at(&thick(-h), width_um, wavelength_um)?) / 2.0;
    Ok(ModeFigures {
        neff: n,
        group_index: n - wavelength_um * dl,
        dneff_dw_per_nm: dw,
        dneff_dt_per_nm: dt,
    })
}

/// The coupling of two equal strips at edge-to-edge gap `gap_um`, from the
/// supermode splitting: `k = pi (n_even - n_odd) / l`, rad/um.
pub fn coupling_per_um(
    model: &dyn WaveguideModel,
    film: &Film,
    width_um: f64,
    gap_um: f64,
    wavelength_um: f64,
) -> Result<f64, SolverError> {
    let m = model.supermodes(film, &Strips::pair(width_um, gap_um), wavelength_um)?;
    Ok(std::f64::consts::PI * (m[0] - m[1]) / wavelength_um)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn si220() -> Film {
        Film {
            core: Material::SiliconLi1980,
            lower: Material::SilicaMalitson1965,
            upper: Material::SilicaMalitson1965,
            thickness_um: 0.22,
        }
    }

    #[test]
    fn silicon_strip_by_the_effective_index_method() {
        // checks.md: 500 x 220 nm Si in SiO2, TE0, effective index method:
        // n_eff = 2.4919 (computed independently).
        let m = EffectiveIndex::TE_LIKE
            .supermodes(&si220(), &Strips::single(0.5), 1.55)
            .unwrap();
        assert!((m[0] - 2.4919).abs() < 2e-3, "{}", m[0]);
    }

    #[test]
    fn coupling_matches_the_effective_index_column() {
        // checks.md, effective index method (computed independently):
        // 0.153, 0.096, 0.062, 0.041, 0.027, 0.012 rad/um at 100-400 nm.
        for (g, want) in [
            (0.10, 0.153f64),
            (0.15, 0.096),
            (0.20, 0.062),
            (0.25, 0.041),
            (0.30, 0.027),
            (0.40, 0.012),
        ] {
            let k = coupling_per_um(&EffectiveIndex::TE_LIKE, &si220(), 0.5, g, 1.55).unwrap();
            // 2 % as the issue asks, or half a unit of the last digit given.
            let tol = (0.02 * want).max(0.0005);
            assert!((k - want).abs() < tol, "gap {g}: {k} vs {want}");
        }
    }

    #[test]
    fn three_guides_split_by_sqrt2_times_the_pair_coupling() {
        // checks.md: at equal 200 nm gaps the three-guide supermode splitting
        // is sqrt(2) x the two-guide k (coupled-mode theory holds to 0.3 %
        // full-vector). Coupled modes give the three supermodes beta and
        // beta +- sqrt(2) k, so half the outer splitting, pi (n0 - n2) / l,
        // is sqrt(2) k; the pair gives beta +- k, so k = pi (n0 - n1) / l.
        // By this method the two agree to 0.6 %; the test allows 1 %.
        let film = si220();
        let k2 = coupling_per_um(&EffectiveIndex::TE_LIKE, &film, 0.5, 0.2, 1.55).unwrap();
        let m3 = EffectiveIndex::TE_LIKE
            .supermodes(&film, &Strips::triple(0.5, 0.2), 1.55)
            .unwrap();
        let split = std::f64::consts::PI * (m3[0] - m3[2]) / 1.55;
        assert!(
            (split / (2f64.sqrt() * k2) - 1.0).abs() < 0.01,
            "{split} vs {}",
            2f64.sqrt() * k2
        );
    }

    #[test]
    fn tm_like_modes_sit_below_te_like_ones() {
        // The TM-like mode of a 220 nm film starts from the film's TM0 index
        // (2.05364, checks.md), so it is far less confined than the TE-like one.
        let te = EffectiveIndex::TE_LIKE
            .supermodes(&si220(), &Strips::single(0.5), 1.55)
            .unwrap()[0];
        let tm = EffectiveIndex::TM_LIKE
            .supermodes(&si220(), &Strips::single(0.5), 1.55)
            .unwrap()[0];
        assert!(tm < 2.05364 && tm > 1.444 && tm < te, "{tm} {te}");
    }

    #[test]
    fn bad_geometry_is_an_error_not_a_panic() {
        let e = EffectiveIndex::TE_LIKE.supermodes(
            &si220(),
            &Strips {
                widths_um: vec![0.5, 0.5],
                gaps_um: vec![],
            },
            1.55,
        );
        assert!(e.is_err());
        let e = EffectiveIndex::TE_LIKE.supermodes(&si220(), &Strips::single(-1.0), 1.55);
        assert!(e.is_err());
        let e = EffectiveIndex::TE_LIKE.supermodes(&si220(), &Strips::single(0.5), 0.9);
        assert!(matches!(e, Err(SolverError::Material(_))));
    }
}
