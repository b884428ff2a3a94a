//! Full-vector solutions computed ahead of time: the coupling law and the
//! mode figures of one process, with enough neighbouring solutions to move
//! them when the guide's width, the film's thickness or the wavelength
//! change a little (fabrication errors, a process file's small edits).
//!
//! **What is solved.** The TE-like modes of one strip and of two strips at
//! every gap of the process, by [`super::vector::FullVector`] on its grid
//! and that grid halved, extrapolated to zero step (Richardson; the
//! difference is the stated discretisation error of each value). This is
//! done at ten points: the nominal guide; the width, the thickness and the
//! wavelength each moved by `-h` and `+h` alone (central differences); and
//! each pair of them moved by `+h` together (mixed differences). One three-guide solve at the reference gap checks coupled-mode
//! theory (checks.md).
//!
//! **How it is used.** At a guide `x = (w, t, l)` near the nominal `x0`
//! every value `f` (n_eff, and ln k at each gap) is its second-order Taylor
//! polynomial in `d = x - x0`, with the derivatives from the stencil:
//! `f_a = (f+a - f-a) / (2 h_a)`, `f_aa = (f+a + f-a - 2 f0) / h_a^2`,
//! `f_ab = (f(+a,+b) - f+a - f+b + f0) / (h_a h_b)` (finite-difference
//! formulas of Abramowitz & Stegun, Handbook of Mathematical Functions,
//! 1964, 25.3).
//! It is trusted to `|d_a| <= 2 h_a`; farther away the process is solved
//! afresh. Group index `n - l dn/dl` and `dn/dw`, `dn/dt` follow from the
//! same quadratics.
//!
//! **Files.** A solution is a small TOML file: the presets' are in
//! `compiler/process/solved/` and compiled in, so a build needs no solve;
//! `trilane process NAME --solve` recomputes one and prints the difference,
//! and `--save FILE` writes it for a process file to name.

use super::eim::{Film, Strips};
use super::spec::Process;
use super::vector::{Convergence, FullVector, GridSpec, VectorError};
use rayon::prelude::*;
use serde::Deserialize;
use std::fmt::Write;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex, OnceLock};

/// The model name a solved law carries.
pub const MODEL: &str = "full_vector";
/// Grid levels of every solve: the grid and the grid halved.
pub const LEVELS: usize = 2;
/// How far from the nominal guide the stencil is trusted, in stencil steps.
pub const REACH_STEPS: f64 = 2.0;

/// A value and the Richardson estimate of its discretisation error.
#[derive(Clone, Copy, Debug, PartialEq, Deserialize)]
pub struct Estimate {
    pub value: f64,
    pub error: f64,
}

/// The guide of one stencil point, in the units process files use.
#[derive(Clone, Copy, Debug, PartialEq, Deserialize)]
pub struct Guide {
    pub width_nm: f64,
    pub thickness_nm: f64,
    pub wavelength_nm: f64,
}

impl Guide {
    fn axis(&self, a: usize) -> f64 {
        [self.width_nm, self.thickness_nm, self.wavelength_nm][a]
    }

    fn moved(&self, a: usize, by: f64) -> Guide {
        let mut g = *self;
        match a {
            0 => g.width_nm += by,
            1 => g.thickness_nm += by,
            _ => g.wavelength_nm += by,
        }
        g
    }
}

/// The solutions at one stencil point.
#[derive(Clone, Debug, PartialEq, Deserialize)]
pub struct PointSolution {
    pub guide: Guide,
    /// TE-like fundamental mode of one strip.
    pub neff: Estimate,
    /// `pi (n_even - n_odd) / l` of two strips at each of the table's gaps.
    pub k_per_um: Vec<Estimate>,
}

/// The three-guide check at one gap.
#[derive(Clone, Copy, Debug, PartialEq, Deserialize)]
pub struct ThreeGuides {
    pub gap_nm: f64,
    /// `pi (n_0 - n_2) / l` of three equal strips, rad/um.
    pub half_outer_splitting_per_um: Estimate,
}

/// The grid every solve of a solution used (the first level).
#[derive(Clone, Copy, Debug, PartialEq, Deserialize)]
pub struct GridSettings {
    pub edge_step_nm: f64,
    pub core_step_nm: f64,
    pub cladding_step_nm: f64,
    pub growth: f64,
}

impl GridSettings {
    pub fn spec(&self) -> GridSpec {
        GridSpec {
            edge_step_um: self.edge_step_nm * 1e-3,
            core_step_um: self.core_step_nm * 1e-3,
            cladding_step_um: self.cladding_step_nm * 1e-3,
            growth: self.growth,
            margin_um: None,
            subdivide: 0,
        }
    }

    /// The grid for a film: the coarse grid of [`GridSpec::coarse`] (made
    /// for 220 nm silicon) for films up to 0.5 um, scaled with the film's
    /// thickness above that, so thick low-contrast guides get as many
    /// cells as thin ones.
    pub fn for_film(thickness_um: f64) -> GridSettings {
        let c = GridSpec::coarse();
        let s = (thickness_um / 0.5).max(1.0);
        GridSettings {
            edge_step_nm: c.edge_step_um * 1e3 * s,
            core_step_nm: c.core_step_um * 1e3 * s,
            cladding_step_nm: c.cladding_step_um * 1e3 * s,
            growth: c.growth,
        }
    }
}

/// The half-steps of the stencil.
#[derive(Clone, Copy, Debug, PartialEq, Deserialize)]
pub struct Steps {
    pub width_nm: f64,
    pub thickness_nm: f64,
    pub wavelength_nm: f64,
}

impl Steps {
    fn axis(&self, a: usize) -> f64 {
        [self.width_nm, self.thickness_nm, self.wavelength_nm][a]
    }

    /// Steps for a guide: 4 % of its width and of its thickness, 20 nm of
    /// wavelength (wide enough that grid changes between the points are
    /// small against the change of the mode, narrow enough that the
    /// quadratic holds; measured in the tests).
    pub fn for_guide(width_nm: f64, thickness_nm: f64) -> Steps {
        Steps {
            width_nm: (0.04 * width_nm).round().max(1.0),
            thickness_nm: (0.04 * thickness_nm).round().max(1.0),
            wavelength_nm: 20.0,
        }
    }
}

/// A full-vector solution of one process (module doc).
#[derive(Clone, Debug, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Solution {
    pub format: String,
    pub model: String,
    /// The process it was solved for, and how.
    pub process: String,
    pub produced_by: String,
    /// Material indices at the nominal wavelength: core, lower, upper
    /// cladding. A process whose materials differ cannot use the solution.
    pub materials: Vec<String>,
    pub material_indices: Vec<f64>,
    pub grid: GridSettings,
    pub levels: usize,
    pub steps: Steps,
    pub gaps_nm: Vec<f64>,
    /// Nominal first, then width -/+, thickness -/+, wavelength -/+, then
    /// the pairs moved together (+, +): width and thickness, width and
    /// wavelength, thickness and wavelength.
    pub points: Vec<PointSolution>,
    pub three_guides: Option<ThreeGuides>,
    /// The TM-like fundamental mode of one strip at the nominal guide (none
    /// when it is not guided).
    pub tm_like_neff: Option<Estimate>,
    /// What the solves did (not stored in files).
    #[serde(skip)]
    pub stats: Option<SolveStats>,
}

/// Figures of the solves behind a fresh solution.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct SolveStats {
    /// Largest eigen-residual `||A x - lambda x|| / ||x||` of any mode.
    pub max_residual: f64,
    /// Unknowns of the largest (finest-level) solve.
    pub max_unknowns: usize,
    /// Arnoldi steps over all solves.
    pub arnoldi_steps: usize,
}

impl SolveStats {
    fn add(&mut self, c: &Convergence) {
        for r in &c.reports {
            self.max_residual = self.max_residual.max(r.max_residual);
            self.max_unknowns = self.max_unknowns.max(r.unknowns);
            self.arnoldi_steps += r.iterations;
        }
    }
}

/// The solution evaluated at one guide.
#[derive(Clone, Debug, PartialEq)]
pub struct Local {
    pub neff: f64,
    pub group_index: f64,
    pub dneff_dw_per_nm: f64,
    pub dneff_dt_per_nm: f64,
    pub k_per_um: Vec<f64>,
}

#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum SolvedError {
    #[error(
        "the full-vector solution is for {want}; this process has {have}: solve it (`trilane process FILE --solve --save TABLE.toml`)"
    )]
    Outside { want: String, have: String },
    #[error("the full-vector solution's file: {0}")]
    File(String),
    #[error(transparent)]
    Solver(#[from] VectorError),
}

impl Solution {
    pub fn nominal(&self) -> &PointSolution {
        &self.points[0]
    }

    fn point(&self, axis: usize, plus: bool) -> &PointSolution {
        &self.points[1 + 2 * axis + usize::from(plus)]
    }

    /// The point with axes `a < b` both moved by `+h`.
    fn pair_point(&self, a: usize, b: usize) -> &PointSolution {
        &self.points[7 + a + b - 1]
    }

    /// Checks the file's structure.
    fn validate(&self) -> Result<(), SolvedError> {
        let bad = |m: String| Err(SolvedError::File(m));
        if self.format != "trilane-solution" {
            return bad(format!("format `{}`, not trilane-solution", self.format));
        }
        if self.model != MODEL {
            return bad(format!("model `{}`, not {MODEL}", self.model));
        }
        if self.points.len() != STENCIL_POINTS {
            return bad(format!(
                "{} stencil points, not {STENCIL_POINTS}",
                self.points.len()
            ));
        }
        if self.gaps_nm.len() < 3 || self.gaps_nm.windows(2).any(|w| w[1] <= w[0]) {
            return bad("at least 3 gaps in increasing order".into());
        }
        if self.material_indices.len() != 3 {
            return bad("three material indices (core, lower, upper)".into());
        }
        let x0 = self.nominal().guide;
        for (i, p) in self.points.iter().enumerate() {
            if p.k_per_um.len() != self.gaps_nm.len() {
                return bad(format!(
                    "point {i} has {} couplings for {} gaps",
                    p.k_per_um.len(),
                    self.gaps_nm.len()
                ));
            }
            if p.k_per_um
                .iter()
                .any(|k| !(k.value > 0.0 && k.value.is_finite()))
            {
                return bad(format!("point {i} has a non-positive coupling"));
            }
            let want = stencil_guide(&x0, &self.steps, i);
            if (0..3).any(|b| (p.guide.axis(b) - want.axis(b)).abs() > 1e-9) {
                return bad(format!("point {i} is not the stencil point {want:?}"));
            }
        }
        Ok(())
    }

    /// Reads a solution file (module doc).
    pub fn parse(text: &str) -> Result<Solution, SolvedError> {
        let s: Solution =
            toml::from_str(text).map_err(|e| SolvedError::File(e.message().to_owned()))?;
        s.validate()?;
        Ok(s)
    }

    /// The reach of the stencil, for messages.
    pub fn reach(&self) -> String {
        let x0 = self.nominal().guide;
        format!(
            "{:.0} +- {:.0} nm wide, {:.0} +- {:.0} nm thick, at {:.0} +- {:.0} nm",
            x0.width_nm,
            REACH_STEPS * self.steps.width_nm,
            x0.thickness_nm,
            REACH_STEPS * self.steps.thickness_nm,
            x0.wavelength_nm,
            REACH_STEPS * self.steps.wavelength_nm
        )
    }

    /// Whether the solution holds for `process` (same materials, guide
    /// within reach); the reason when it does not.
    pub fn covers(&self, process: &Process) -> Result<(), SolvedError> {
        let x0 = self.nominal().guide;
        let l = x0.wavelength_nm * 1e-3;
        let f = &process.film;
        let have: Vec<f64> = [&f.core, &f.lower, &f.upper]
            .iter()
            .map(|m| m.index(l).unwrap_or(f64::NAN))
            .collect();
        if have
            .iter()
            .zip(&self.material_indices)
            .any(|(a, b)| (a - b).abs().is_nan() || (a - b).abs() >= 1e-9)
        {
            return Err(SolvedError::Outside {
                want: format!("{} guides", self.materials.join(" / ")),
                have: "other materials".into(),
            });
        }
        let x = [
            process.width_nm,
            f.thickness_um * 1e3,
            process.wavelength_um * 1e3,
        ];
        if (0..3).any(|a| (x[a] - x0.axis(a)).abs() > REACH_STEPS * self.steps.axis(a) + 1e-9) {
            return Err(SolvedError::Outside {
                want: self.reach(),
                have: format!(
                    "{:.1} nm wide, {:.1} nm thick, at {:.1} nm",
                    x[0], x[1], x[2]
                ),
            });
        }
        Ok(())
    }

    /// The solution at `process`'s guide (which [`Solution::covers`] must
    /// accept).
    pub fn at(&self, process: &Process) -> Result<Local, SolvedError> {
        self.covers(process)?;
        let x0 = self.nominal().guide;
        let d = [
            process.width_nm - x0.width_nm,
            process.film.thickness_um * 1e3 - x0.thickness_nm,
            process.wavelength_um * 1e3 - x0.wavelength_nm,
        ];
        // Value and its derivative along each axis at d.
        let local = |f: &dyn Fn(&PointSolution) -> f64| -> (f64, [f64; 3]) {
            let f0 = f(self.nominal());
            let mut v = f0;
            let mut slope = [0.0; 3];
            let mut first = [0.0; 3];
            for a in 0..3 {
                let h = self.steps.axis(a);
                let (fm, fp) = (f(self.point(a, false)), f(self.point(a, true)));
                first[a] = (fp - fm) / (2.0 * h);
                let second = (fp + fm - 2.0 * f0) / (h * h);
                v += first[a] * d[a] + 0.5 * second * d[a] * d[a];
                slope[a] += first[a] + second * d[a];
            }
            // Mixed second derivatives from the (+, +) points: the forward
            // difference [f(+a,+b) - f(+a) - f(+b) + f0] / (h_a h_b).
            for (a, b) in [(0, 1), (0, 2), (1, 2)] {
                let (ha, hb) = (self.steps.axis(a), self.steps.axis(b));
                let mixed =
                    (f(self.pair_point(a, b)) - f(self.point(a, true)) - f(self.point(b, true))
                        + f0)
                        / (ha * hb);
                v += mixed * d[a] * d[b];
                slope[a] += mixed * d[b];
                slope[b] += mixed * d[a];
            }
            (v, slope)
        };
        let (neff, dn) = local(&|p| p.neff.value);
        let l_nm = x0.wavelength_nm + d[2];
        let k_per_um = (0..self.gaps_nm.len())
            .map(|i| local(&|p| p.k_per_um[i].value.ln()).0.exp())
            .collect();
        Ok(Local {
            neff,
            group_index: neff - l_nm * dn[2],
            dneff_dw_per_nm: dn[0],
            dneff_dt_per_nm: dn[1],
            k_per_um,
        })
    }

    /// The nominal coupling at `gap_nm` (a table gap, else the smooth law
    /// through the nominal table).
    pub fn nominal_k_per_um(&self, gap_nm: f64) -> f64 {
        let k: Vec<f64> = self.nominal().k_per_um.iter().map(|k| k.value).collect();
        match self.gaps_nm.iter().position(|&g| (g - gap_nm).abs() < 1e-9) {
            Some(i) => k[i],
            None => super::coupling::SmoothLaw::new(&self.gaps_nm, &k)
                .map(|law| law.k_per_um(gap_nm))
                .unwrap_or(f64::NAN),
        }
    }

    /// The file text (module doc), values to full precision.
    pub fn to_toml(&self) -> String {
        let mut s = String::new();
        let list = |v: &mut dyn Iterator<Item = f64>| -> String {
            v.map(|x| format!("{x:e}")).collect::<Vec<_>>().join(", ")
        };
        let _ = writeln!(
            s,
            "# A full-vector solution of process {} (docs/process.md). Written by\n# `trilane process ... --solve --save`; do not edit by hand.",
            self.process
        );
        let _ = writeln!(s, "format = \"{}\"", self.format);
        let _ = writeln!(s, "model = \"{}\"", self.model);
        let _ = writeln!(s, "process = {:?}", self.process);
        let _ = writeln!(s, "produced_by = {:?}", self.produced_by);
        let _ = writeln!(
            s,
            "materials = [{}]",
            self.materials
                .iter()
                .map(|m| format!("{m:?}"))
                .collect::<Vec<_>>()
                .join(", ")
        );
        let _ = writeln!(
            s,
            "material_indices = [{}]",
            list(&mut self.material_indices.iter().copied())
        );
        let _ = writeln!(s, "levels = {}", self.levels);
        let _ = writeln!(s, "gaps_nm = [{}]", list(&mut self.gaps_nm.iter().copied()));
        let g = &self.grid;
        let _ = writeln!(
            s,
            "\n[grid]\nedge_step_nm = {:e}\ncore_step_nm = {:e}\ncladding_step_nm = {:e}\ngrowth = {:e}",
            g.edge_step_nm, g.core_step_nm, g.cladding_step_nm, g.growth
        );
        let st = &self.steps;
        let _ = writeln!(
            s,
            "\n[steps]\nwidth_nm = {:e}\nthickness_nm = {:e}\nwavelength_nm = {:e}",
            st.width_nm, st.thickness_nm, st.wavelength_nm
        );
        if let Some(t) = &self.three_guides {
            let _ = writeln!(
                s,
                "\n[three_guides]\ngap_nm = {:e}\nhalf_outer_splitting_per_um = {{ value = {:e}, error = {:e} }}",
                t.gap_nm, t.half_outer_splitting_per_um.value, t.half_outer_splitting_per_um.error
            );
        }
        if let Some(t) = &self.tm_like_neff {
            let _ = writeln!(
                s,
                "\ntm_like_neff = {{ value = {:e}, error = {:e} }}",
                t.value, t.error
            );
        }
        for p in &self.points {
            let g = &p.guide;
            let _ = writeln!(
                s,
                "\n[[points]]\nguide = {{ width_nm = {:e}, thickness_nm = {:e}, wavelength_nm = {:e} }}\nneff = {{ value = {:e}, error = {:e} }}\nk_per_um = [",
                g.width_nm, g.thickness_nm, g.wavelength_nm, p.neff.value, p.neff.error
            );
            for k in &p.k_per_um {
                let _ = writeln!(s, "  {{ value = {:e}, error = {:e} }},", k.value, k.error);
            }
            let _ = writeln!(s, "]");
        }
        s
    }
}

/// Points of the stencil (module doc).
pub const STENCIL_POINTS: usize = 10;

/// Stencil point `i` around `x0`: 0 nominal; 1-6 one axis at -h, +h; 7-9
/// two axes at (+h, +h).
fn stencil_guide(x0: &Guide, h: &Steps, i: usize) -> Guide {
    match i {
        0 => *x0,
        1..=6 => {
            let a = (i - 1) / 2;
            let sign = if (i - 1) % 2 == 1 { 1.0 } else { -1.0 };
            x0.moved(a, sign * h.axis(a))
        }
        _ => {
            let (a, b) = [(0, 1), (0, 2), (1, 2)][i - 7];
            x0.moved(a, h.axis(a)).moved(b, h.axis(b))
        }
    }
}

/// Reports solve progress: `total` jobs, then one call per finished job.
pub trait Progress: Sync {
    fn start(&self, _label: &str, _total: usize) {}
    fn done_one(&self) {}
    fn finish(&self) {}
}

/// No progress report.
pub struct Quiet;
impl Progress for Quiet {}

/// What the solver is asked for: the process's guide, its gaps, the
/// reference gap for the three-guide check.
pub struct Request<'a> {
    pub process: &'a Process,
    pub gaps_nm: &'a [f64],
    pub g_ref_nm: f64,
    pub grid: GridSettings,
    pub steps: Steps,
}

impl<'a> Request<'a> {
    /// The presets' settings for `process` and its gaps.
    pub fn standard(process: &'a Process, gaps_nm: &'a [f64], g_ref_nm: f64) -> Request<'a> {
        Request {
            process,
            gaps_nm,
            g_ref_nm,
            grid: GridSettings::for_film(process.film.thickness_um),
            steps: Steps::for_guide(process.width_nm, process.film.thickness_um * 1e3),
        }
    }
}

/// Solves a process (module doc): 10 x (1 + gaps) two-level solves, one
/// three-guide solve and one TM-like solve, in parallel.
pub fn solve(req: &Request, progress: &dyn Progress) -> Result<Solution, SolvedError> {
    let p = req.process;
    let x0 = Guide {
        width_nm: p.width_nm,
        thickness_nm: p.film.thickness_um * 1e3,
        wavelength_nm: p.wavelength_um * 1e3,
    };
    let guides: Vec<Guide> = (0..STENCIL_POINTS)
        .map(|i| stencil_guide(&x0, &req.steps, i))
        .collect();
    // Jobs: (point, None) for one strip, (point, Some(gap index)) for a pair.
    let n_gaps = req.gaps_nm.len();
    let jobs: Vec<(usize, Option<usize>)> = (0..guides.len())
        .flat_map(|i| std::iter::once((i, None)).chain((0..n_gaps).map(move |g| (i, Some(g)))))
        .collect();
    let fv = FullVector::te_like(req.grid.spec());
    let film_at = |g: &Guide| Film {
        thickness_um: g.thickness_nm * 1e-3,
        ..p.film.clone()
    };
    let done = AtomicUsize::new(0);
    progress.start(
        &format!(
            "full-vector solve of {:.0} x {:.0} nm",
            x0.width_nm, x0.thickness_nm
        ),
        jobs.len() + 2,
    );
    let tick = || {
        done.fetch_add(1, Ordering::Relaxed);
        progress.done_one();
    };
    let results: Vec<Convergence> = jobs
        .par_iter()
        .map(|&(i, gap)| {
            let g = &guides[i];
            let w = g.width_nm * 1e-3;
            let strips = match gap {
                None => Strips::single(w),
                Some(k) => Strips::pair(w, req.gaps_nm[k] * 1e-3),
            };
            let c = fv.convergence(&film_at(g), &strips, g.wavelength_nm * 1e-3, LEVELS);
            tick();
            c
        })
        .collect::<Result<_, _>>()?;
    let (three, tm) = rayon::join(
        || {
            let c = fv.convergence(
                &film_at(&x0),
                &Strips::triple(x0.width_nm * 1e-3, req.g_ref_nm * 1e-3),
                x0.wavelength_nm * 1e-3,
                LEVELS,
            );
            tick();
            c
        },
        || {
            let c = FullVector::tm_like(req.grid.spec()).convergence(
                &film_at(&x0),
                &Strips::single(x0.width_nm * 1e-3),
                x0.wavelength_nm * 1e-3,
                LEVELS,
            );
            tick();
            c
        },
    );
    let three = three?;
    let mut stats = SolveStats::default();
    for c in results.iter().chain(std::iter::once(&three)) {
        stats.add(c);
    }
    // An unguided TM-like mode is a property of the guide, not a failure.
    let tm_like_neff = match tm {
        Ok(c) => Some(c.neff[0].clone()),
        Err(VectorError::NotGuided { .. }) => None,
        Err(e) => return Err(e.into()),
    };
    progress.finish();
    let estimate = |e: &super::vector::Extrapolation| Estimate {
        value: e.extrapolated,
        error: e.error_estimate,
    };
    let mut points = Vec::new();
    let mut it = results.iter();
    for g in &guides {
        let single = it.next().expect("one job per strip");
        let k_per_um = (0..n_gaps)
            .map(|_| {
                let c = it.next().expect("one job per gap");
                estimate(c.coupling_per_um.as_ref().expect("two strips"))
            })
            .collect();
        points.push(PointSolution {
            guide: *g,
            neff: estimate(&single.neff[0]),
            k_per_um,
        });
    }
    let l = p.wavelength_um;
    let half = {
        let (n0, n2) = (&three.neff[0], &three.neff[2]);
        let pi = std::f64::consts::PI;
        let split: Vec<f64> = n0
            .values
            .iter()
            .zip(&n2.values)
            .map(|(a, b)| pi * (a - b) / l)
            .collect();
        estimate(&super::vector::richardson::extrapolate(
            &n0.steps_um,
            &split,
        ))
    };
    let f = &p.film;
    Ok(Solution {
        format: "trilane-solution".into(),
        model: MODEL.into(),
        process: p.name.clone(),
        produced_by: format!(
            "trilane {} full-vector solver, TE-like, {} grid levels",
            env!("CARGO_PKG_VERSION"),
            LEVELS
        ),
        materials: [&f.core, &f.lower, &f.upper]
            .iter()
            .map(|m| m.name().to_owned())
            .collect(),
        material_indices: [&f.core, &f.lower, &f.upper]
            .iter()
            .map(|m| m.index(l))
            .collect::<Result<_, _>>()
            .map_err(VectorError::from)?,
        grid: req.grid,
        levels: LEVELS,
        steps: req.steps,
        gaps_nm: req.gaps_nm.to_vec(),
        points,
        three_guides: Some(ThreeGuides {
            gap_nm: req.g_ref_nm,
            half_outer_splitting_per_um: half,
        }),
        tm_like_neff: tm_like_neff.as_ref().map(estimate),
        stats: Some(stats),
    })
}

/// Where live solves report progress (the command line installs a bar).
static PROGRESS: OnceLock<Box<dyn Progress + Send>> = OnceLock::new();

/// Installs the progress report of solves started by [`covering`]; the
/// first call wins.
pub fn report_progress_to(p: Box<dyn Progress + Send>) {
    let _ = PROGRESS.set(p);
}

/// Solutions solved in this run, reused for every process they cover (a
/// tolerance study's perturbed guides lie within its nominal's reach).
static LIVE: Mutex<Vec<Arc<Solution>>> = Mutex::new(Vec::new());

/// A solution on the standard settings that covers `process` at these
/// gaps: one solved earlier in this run, or solved now.
pub fn covering(
    process: &Process,
    gaps_nm: &[f64],
    g_ref_nm: f64,
) -> Result<Arc<Solution>, SolvedError> {
    let req = Request::standard(process, gaps_nm, g_ref_nm);
    let fits = |s: &Solution| {
        s.gaps_nm == gaps_nm
            && s.grid == req.grid
            && s.three_guides.is_some_and(|t| t.gap_nm == g_ref_nm)
            && s.covers(process).is_ok()
    };
    let lock = || LIVE.lock().unwrap_or_else(|e| e.into_inner());
    if let Some(s) = lock().iter().find(|s| fits(s)) {
        return Ok(Arc::clone(s));
    }
    // Not held while solving: a rayon thread waiting inside the solve may
    // run another task that asks for a solution.
    let progress: &dyn Progress = match PROGRESS.get() {
        Some(p) => p.as_ref(),
        None => &Quiet,
    };
    let s = Arc::new(solve(&req, progress)?);
    lock().push(Arc::clone(&s));
    Ok(s)
}

/// The solution shipped with a preset (`compiler/process/solved/`).
pub fn shipped(preset: &str) -> Option<Arc<Solution>> {
    static SHIPPED: OnceLock<Vec<(&'static str, Arc<Solution>)>> = OnceLock::new();
    let all = SHIPPED.get_or_init(|| {
        SHIPPED_FILES
            .iter()
            .map(|(name, text)| {
                let s = Solution::parse(text)
                    .unwrap_or_else(|e| panic!("the shipped solution of {name} is broken: {e}"));
                (*name, Arc::new(s))
            })
            .collect()
    });
    all.iter()
        .find(|(n, _)| *n == preset)
        .map(|(_, s)| Arc::clone(s))
}

/// The shipped solution files, compiled in.
pub const SHIPPED_FILES: [(&str, &str); 3] = [
    ("si220_wire", include_str!("solved/si220_wire.toml")),
    ("sin400_strip", include_str!("solved/sin400_strip.toml")),
    ("silica_plc", include_str!("solved/silica_plc.toml")),
];

#[cfg(test)]
mod tests {
    //! The shipped solutions against this project's solver run now, and the
    //! stencil's quadratic against direct solves away from the nominal
    //! guide. Coarse grids and a few gaps keep each test to seconds.
    use super::*;
    use crate::process::eim::coupling_per_um;
    use crate::process::presets::{NAMES, preset};
    use crate::process::spec::CouplingSource;

    fn si220() -> (Process, Arc<Solution>) {
        let p = preset("si220_wire").unwrap();
        let s = shipped("si220_wire").unwrap();
        (p, s)
    }

    #[test]
    fn every_preset_ships_a_solution_of_its_own_guide() {
        for name in NAMES {
            let p = preset(name).unwrap();
            let s = shipped(name).unwrap();
            assert!(s.covers(&p).is_ok(), "{name}");
            let g = s.nominal().guide;
            assert_eq!(g.width_nm, p.width_nm, "{name}");
            assert!((g.thickness_nm - p.film.thickness_um * 1e3).abs() < 1e-9);
            assert!(matches!(p.coupling, CouplingSource::Solved { .. }));
            // The file round-trips exactly.
            assert_eq!(Solution::parse(&s.to_toml()).unwrap(), *s, "{name}");
            assert!(s.stats.is_none(), "files carry no solve figures");
        }
    }

    #[test]
    fn the_shipped_silicon_solution_is_what_the_solver_gives_now() {
        // The solver itself, on the shipped solution's grid and levels, at
        // the nominal guide: n_eff and k(200 nm) equal the shipped values
        // within their stated discretisation errors (they are the same
        // computation, so in practice to rounding). The values are also the
        // checks.md ones (computed independently): n_eff 2.4458 and
        // k(200 nm) 0.0416 rad/um within the 3e-3 and 10 %.
        let (p, s) = si220();
        let fv = FullVector::te_like(s.grid.spec());
        let c = fv
            .convergence(&p.film, &Strips::single(0.5), 1.55, LEVELS)
            .unwrap();
        let n = &s.nominal().neff;
        assert!((c.neff[0].extrapolated - n.value).abs() <= n.error);
        assert!((n.value - 2.4458).abs() < 3e-3);
        let i = s.gaps_nm.iter().position(|&g| g == 200.0).unwrap();
        let k = s.nominal().k_per_um[i];
        let got = FullVector {
            extrapolate: true,
            ..fv
        };
        let k_now = coupling_per_um(&got, &p.film, 0.5, 0.2, 1.55).unwrap();
        assert!((k_now - k.value).abs() <= k.error, "{k_now} vs {k:?}");
        assert!((k.value / 0.0416 - 1.0).abs() < 0.10);
    }

    #[test]
    fn the_stencil_predicts_a_guide_it_did_not_solve() {
        // 500 x 220 nm moved to 530 x 226 nm at 1565 nm (between the
        // stencil points, within its reach): the second-order Taylor
        // polynomial must match a direct solve there. Bounds: n_eff to 3e-4
        // (below the stated discretisation error, 5e-4; measured 1.3e-4,
        // where the per-axis quadratics alone miss by 1.0e-3: the mixed
        // terms matter), k(200 nm) to 0.5 %.
        let (mut p, s) = si220();
        p.width_nm = 530.0;
        p.film.thickness_um = 0.226;
        p.wavelength_um = 1.565;
        let local = s.at(&p).unwrap();
        let fv = FullVector {
            extrapolate: true,
            ..FullVector::te_like(s.grid.spec())
        };
        let n = fv
            .convergence(&p.film, &Strips::single(0.53), 1.565, LEVELS)
            .unwrap()
            .neff[0]
            .extrapolated;
        assert!((local.neff - n).abs() < 3e-4, "{} vs {n}", local.neff);
        let i = s.gaps_nm.iter().position(|&g| g == 200.0).unwrap();
        let k = coupling_per_um(&fv, &p.film, 0.53, 0.2, 1.565).unwrap();
        assert!(
            (local.k_per_um[i] / k - 1.0).abs() < 5e-3,
            "{} vs {k}",
            local.k_per_um[i]
        );
        // Group index and the sensitivities move with the guide: wider and
        // thicker guides confine more, so dn/dw falls.
        let nominal = s.at(&preset("si220_wire").unwrap()).unwrap();
        assert!(local.dneff_dw_per_nm < nominal.dneff_dw_per_nm);
        assert!((nominal.group_index - 4.18).abs() < 0.05);
    }

    #[test]
    fn a_guide_out_of_reach_or_of_other_materials_is_refused() {
        let (p, s) = si220();
        let mut wide = p.clone();
        wide.width_nm = 600.0;
        let e = s.covers(&wide).unwrap_err().to_string();
        assert!(
            e.contains("500 +- 40 nm wide") && e.contains("600.0 nm wide"),
            "{e}"
        );
        let mut air = p.clone();
        air.film.upper = crate::process::material::Material::Constant { index: 1.0 };
        assert!(
            s.covers(&air)
                .unwrap_err()
                .to_string()
                .contains("other materials")
        );
        assert!(s.at(&air).is_err());
    }

    #[test]
    fn broken_files_are_errors() {
        let (_, s) = si220();
        let text = s.to_toml();
        for (from, to) in [
            ("format = \"trilane-solution\"", "format = \"other\""),
            ("model = \"full_vector\"", "model = \"effective_index\""),
            ("levels = 2", "levels = 2\nextra = 1"),
        ] {
            assert!(
                Solution::parse(&text.replacen(from, to, 1)).is_err(),
                "{to}"
            );
        }
        // A stencil point in the wrong place.
        let moved = text.replacen("width_nm = 4.8e2", "width_nm = 4.7e2", 1);
        assert!(moved != text && Solution::parse(&moved).is_err());
        assert!(Solution::parse("").is_err());
    }
}
