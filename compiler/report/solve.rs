//! `trilane process NAME --solve`: a fresh full-vector solution against the
//! law the process uses (its shipped or saved solution, its effective index
//! law, or its table), value by value with the discretisation errors.

use crate::process::law::Characterisation;
use crate::process::solved::{Estimate, Solution};
use serde::Serialize;
use std::fmt::Write;

/// One value compared.
#[derive(Clone, Debug, Serialize)]
pub struct Row {
    pub what: String,
    /// The value the process uses now.
    pub current: f64,
    pub solved: f64,
    pub difference: f64,
    /// The discretisation error the current value states (a solution's
    /// Richardson estimate); none for an effective index or table value.
    pub stated_error: Option<f64>,
    /// The fresh solve's own estimate.
    pub solved_error: f64,
    /// Within the stated error (none when there is none to hold it to).
    pub ok: Option<bool>,
}

#[derive(Clone, Debug, Serialize)]
pub struct Comparison {
    pub process: String,
    /// What the fresh solution is compared with.
    pub against: String,
    pub solves: usize,
    pub seconds: f64,
    pub threads: usize,
    pub rows: Vec<Row>,
    /// Values of the nine off-nominal stencil points, summarised: the
    /// largest |difference| / stated error of each.
    pub stencil: Vec<StencilRow>,
    /// Derived figures at the nominal guide (current, solved).
    pub group_index: [f64; 2],
    pub dneff_dw_per_nm: [f64; 2],
    pub dneff_dt_per_nm: [f64; 2],
    pub three_guide_ratio: Option<f64>,
    /// Whether the current solution holds within its stated errors; none
    /// when it is no solution (nothing to hold it to).
    pub passed: Option<bool>,
    /// Largest eigen-residual, unknowns of the largest solve, Arnoldi steps.
    pub max_residual: Option<f64>,
    pub max_unknowns: Option<usize>,
    pub arnoldi_steps: Option<usize>,
    /// The nominal strip on three nested grids: the observed order of
    /// convergence and the three-level limit of n_eff (when run).
    pub order_check: Option<OrderCheck>,
}

#[derive(Clone, Copy, Debug, Serialize)]
pub struct OrderCheck {
    pub observed_order: Option<f64>,
    pub neff_three_levels: f64,
    pub neff_two_levels: f64,
    pub finest_step_nm: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct StencilRow {
    pub point: String,
    pub values: usize,
    pub largest_ratio: f64,
}

fn row(what: String, current: f64, stated: Option<f64>, solved: Estimate) -> Row {
    let d = solved.value - current;
    Row {
        what,
        current,
        solved: solved.value,
        difference: d,
        stated_error: stated,
        solved_error: solved.error,
        ok: stated.map(|e| d.abs() <= e),
    }
}

const POINTS: [&str; 10] = [
    "nominal",
    "width -h",
    "width +h",
    "thickness -h",
    "thickness +h",
    "wavelength -h",
    "wavelength +h",
    "width, thickness +h",
    "width, wavel. +h",
    "thickness, wavel. +h",
];

/// Compares `solved` (fresh, `solves` solves in `seconds`) with what the
/// process `c` uses.
pub fn compare(process: &str, c: &Characterisation, solved: &Solution, seconds: f64) -> Comparison {
    let fresh_local = |s: &Solution| {
        let g = s.nominal().guide;
        let l = g.wavelength_nm;
        // Derived figures from the stencil's central differences.
        let p = |i: usize| s.points[i].neff.value;
        let (hw, ht, hl) = (
            s.steps.width_nm,
            s.steps.thickness_nm,
            s.steps.wavelength_nm,
        );
        [
            p(0) - l * (p(6) - p(5)) / (2.0 * hl),
            (p(2) - p(1)) / (2.0 * hw),
            (p(4) - p(3)) / (2.0 * ht),
        ]
    };
    let new = fresh_local(solved);
    let nominal = solved.nominal();
    let mut rows = Vec::new();
    let mut stencil = Vec::new();
    let against;
    let current_figures;
    match &c.solution {
        Some(cur) if cur.gaps_nm == solved.gaps_nm => {
            against = "the solution it ships (or names)".to_owned();
            current_figures = fresh_local(cur);
            let cn = cur.nominal();
            rows.push(row(
                "n_eff".into(),
                cn.neff.value,
                Some(cn.neff.error),
                nominal.neff,
            ));
            for (i, g) in solved.gaps_nm.iter().enumerate() {
                let k = cn.k_per_um[i];
                rows.push(row(
                    format!("k at {g:.0} nm"),
                    k.value,
                    Some(k.error),
                    nominal.k_per_um[i],
                ));
            }
            if let (Some(a), Some(b)) = (cur.tm_like_neff, solved.tm_like_neff) {
                rows.push(row("TM-like n_eff".into(), a.value, Some(a.error), b));
            }
            if let (Some(a), Some(b)) = (cur.three_guides, solved.three_guides) {
                let (a, b) = (a.half_outer_splitting_per_um, b.half_outer_splitting_per_um);
                rows.push(row(
                    "three-guide splitting".into(),
                    a.value,
                    Some(a.error),
                    b,
                ));
            }
            for (i, name) in POINTS.iter().enumerate().skip(1) {
                let (a, b) = (&cur.points[i], &solved.points[i]);
                let pairs = std::iter::once((a.neff, b.neff))
                    .chain(a.k_per_um.iter().copied().zip(b.k_per_um.iter().copied()));
                let mut n = 0;
                let mut worst = 0.0f64;
                for (x, y) in pairs {
                    n += 1;
                    worst = worst.max((y.value - x.value).abs() / x.error.max(f64::MIN_POSITIVE));
                }
                stencil.push(StencilRow {
                    point: (*name).to_owned(),
                    values: n,
                    largest_ratio: worst,
                });
            }
        }
        _ => {
            against = format!("its {} law", c.model.replace('_', " "));
            let m = c.mode.as_ref().expect("mode figures");
            current_figures = [m.group_index, m.dneff_dw_per_nm, m.dneff_dt_per_nm];
            rows.push(row("n_eff".into(), m.neff, None, nominal.neff));
            let law = c.law();
            for (i, g) in solved.gaps_nm.iter().enumerate() {
                rows.push(row(
                    format!("k at {g:.0} nm"),
                    law.smooth.k_per_um(*g),
                    None,
                    nominal.k_per_um[i],
                ));
            }
        }
    }
    let passed = if c.solution.is_some() {
        Some(
            rows.iter().all(|r| r.ok != Some(false))
                && stencil.iter().all(|s| s.largest_ratio <= 1.0),
        )
    } else {
        None
    };
    let solves = solved.points.len() * (1 + solved.gaps_nm.len()) + 2;
    let three_guide_ratio = solved.three_guides.map(|t| {
        t.half_outer_splitting_per_um.value / (2f64.sqrt() * solved.nominal_k_per_um(t.gap_nm))
    });
    Comparison {
        process: process.to_owned(),
        against,
        solves,
        seconds,
        threads: rayon::current_num_threads(),
        rows,
        stencil,
        group_index: [current_figures[0], new[0]],
        dneff_dw_per_nm: [current_figures[1], new[1]],
        dneff_dt_per_nm: [current_figures[2], new[2]],
        three_guide_ratio,
        passed,
        max_residual: solved.stats.map(|s| s.max_residual),
        max_unknowns: solved.stats.map(|s| s.max_unknowns),
        arnoldi_steps: solved.stats.map(|s| s.arnoldi_steps),
        order_check: None,
    }
}

pub fn to_text(c: &Comparison, solved: &Solution) -> String {
    let mut s = String::new();
    let g = &solved.grid;
    let _ = writeln!(
        s,
        "full-vector solve of {}: {} two-level solves in {:.1} s on {} threads",
        c.process, c.solves, c.seconds, c.threads
    );
    let _ = writeln!(
        s,
        "  grid {} nm at interfaces, {} nm in cores, {} nm in claddings, growth {}; each value extrapolated from it and it halved (Richardson)",
        g.edge_step_nm, g.core_step_nm, g.cladding_step_nm, g.growth
    );
    let _ = writeln!(s, "  solved at {}", solved.reach());
    if let (Some(r), Some(n), Some(a)) = (c.max_residual, c.max_unknowns, c.arnoldi_steps) {
        let _ = writeln!(
            s,
            "  largest solve {n} unknowns; {a} Arnoldi steps in all; largest eigen-residual {r:.1e}"
        );
    }
    if let Some(o) = &c.order_check {
        let order = o
            .observed_order
            .map_or("not monotone".to_owned(), |p| format!("{p:.2}"));
        let _ = writeln!(
            s,
            "  convergence: the nominal strip on three nested grids (finest {:.1} nm in the cores) converges at order {order} (the scheme's: 2); n_eff {:.6} from three levels, {:.6} from two",
            o.finest_step_nm, o.neff_three_levels, o.neff_two_levels
        );
    }
    let _ = writeln!(s, "\ncompared with {}", c.against);
    let _ = writeln!(
        s,
        "  {:<22} {:>13} {:>13} {:>11} {:>11} {:>11}",
        "value", "current", "solved", "difference", "stated err", "solve err"
    );
    for r in &c.rows {
        let stated = r
            .stated_error
            .map_or("-".to_owned(), |e| format!("{e:.2e}"));
        let mark = match r.ok {
            Some(true) => "  ok",
            Some(false) => "  OFF",
            None => "",
        };
        let _ = writeln!(
            s,
            "  {:<22} {:>13.6e} {:>13.6e} {:>11.2e} {:>11} {:>11.2e}{mark}",
            r.what, r.current, r.solved, r.difference, stated, r.solved_error
        );
    }
    if !c.stencil.is_empty() {
        let _ = writeln!(
            s,
            "\n  stencil points (n_eff and every k): largest |difference| / stated error"
        );
        for p in &c.stencil {
            let _ = writeln!(
                s,
                "    {:<14} {:>3} values  {:.3}{}",
                p.point,
                p.values,
                p.largest_ratio,
                if p.largest_ratio <= 1.0 {
                    "  ok"
                } else {
                    "  OFF"
                }
            );
        }
    }
    let _ = writeln!(
        s,
        "\n  derived at the nominal guide       current        solved"
    );
    let _ = writeln!(
        s,
        "    group index                    {:>9.4}     {:>9.4}",
        c.group_index[0], c.group_index[1]
    );
    let _ = writeln!(
        s,
        "    dn_eff/dw per nm               {:>9.3e}     {:>9.3e}",
        c.dneff_dw_per_nm[0], c.dneff_dw_per_nm[1]
    );
    let _ = writeln!(
        s,
        "    dn_eff/dt per nm               {:>9.3e}     {:>9.3e}",
        c.dneff_dt_per_nm[0], c.dneff_dt_per_nm[1]
    );
    if let Some(r) = c.three_guide_ratio {
        let _ = writeln!(
            s,
            "    three guides: half the outer splitting = {r:.4} x sqrt(2) k (coupled-mode theory: 1)"
        );
    }
    let _ = writeln!(s);
    match c.passed {
        Some(true) => {
            let _ = writeln!(
                s,
                "result: the current solution agrees with the fresh solve within its stated discretisation errors"
            );
        }
        Some(false) => {
            let n = c.rows.iter().filter(|r| r.ok == Some(false)).count()
                + c.stencil.iter().filter(|p| p.largest_ratio > 1.0).count();
            let _ = writeln!(
                s,
                "result: the current solution is OFF at {n} place{} by more than its stated discretisation error",
                if n == 1 { "" } else { "s" }
            );
        }
        None => {
            let _ = writeln!(
                s,
                "result: for information (the process's law is not a full-vector solution, so nothing is held to an error)"
            );
        }
    }
    s
}
