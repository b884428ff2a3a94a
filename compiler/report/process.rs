//! The `process` report: a readable summary, its JSON document
//! (docs/json.md), and the coupling-law figure (SVG).

use crate::process::law::Characterisation;
use crate::process::spec::{CouplingSource, Process};
use serde::Serialize;
use std::fmt::Write;

/// What the report says about the model's accuracy.
pub fn model_note(model: &str) -> &'static str {
    match model {
        "effective_index" => {
            "effective index method (Marcatili 1969; Okamoto 2006): fast and rough. For silicon \
             wires it overstates n_eff (2.49 against 2.45 full-vector for 500 x 220 nm) and the \
             coupling, by about half at a 200 nm gap, so cells designed on it are too short on \
             real silicon; a full-vector solver is the accurate model"
        }
        "full_vector" => {
            "full-vector finite-difference mode solver (Yee-cell transverse magnetic field, Zhu & \
             Brown 2002; Fallahkhair, Li & Murphy 2008), extrapolated over two nested grids \
             (Richardson); the error column is that extrapolation's estimate of the \
             discretisation error"
        }
        "table" => "a measured or simulated table, fitted as given",
        _ => "",
    }
}

#[derive(Serialize)]
pub struct JsonProcess {
    pub name: String,
    pub summary: String,
    pub origin: String,
    pub wavelength_um: f64,
    pub model: String,
    pub model_note: &'static str,
    pub materials: Vec<JsonMaterial>,
    pub width_nm: f64,
    pub thickness_nm: f64,
    pub film_index: Option<f64>,
    pub neff: Option<f64>,
    /// The TM-like fundamental mode, by the effective index method.
    pub neff_tm_like: Option<f64>,
    pub group_index: Option<f64>,
    pub dneff_dw_per_nm: Option<f64>,
    pub dneff_dt_per_nm: Option<f64>,
    pub coupling: JsonCoupling,
    /// The full-vector solution behind the law, when there is one.
    pub solution: Option<JsonSolution>,
    pub three_guides: Option<JsonThreeGuides>,
    pub rules: JsonRules,
    pub thermal: JsonThermal,
    pub passive: JsonPassive,
    pub loss: JsonLoss,
    pub tolerances: JsonTolerances,
    pub sources: Vec<JsonSource>,
}

#[derive(Serialize)]
pub struct JsonMaterial {
    pub role: &'static str,
    pub name: &'static str,
    pub source: &'static str,
    pub index: f64,
    pub group_index: f64,
    pub range_um: [f64; 2],
}

#[derive(Serialize)]
pub struct JsonCoupling {
    /// `effective_index` or `table`.
    pub model: String,
    /// The table's file, when the law comes from one.
    pub from: Option<String>,
    pub k_ref_per_um: f64,
    pub g_ref_nm: f64,
    pub g_c_nm: f64,
    pub fit_rms: f64,
    pub table: Vec<JsonCouplingRow>,
    pub by_wavelength: Vec<JsonLaw>,
}

#[derive(Serialize)]
pub struct JsonSolution {
    /// `preset` (shipped), the file it was read from, or `solved now`.
    pub from: String,
    /// The guide it was solved at, and how far from it it is trusted.
    pub width_nm: f64,
    pub thickness_nm: f64,
    pub wavelength_nm: f64,
    pub reach: String,
    pub grid: JsonGrid,
    pub levels: usize,
    /// Discretisation error of the nominal n_eff (Richardson estimate).
    pub neff_error: f64,
}

#[derive(Serialize)]
pub struct JsonGrid {
    pub edge_step_nm: f64,
    pub core_step_nm: f64,
    pub cladding_step_nm: f64,
    pub growth: f64,
}

#[derive(Serialize)]
pub struct JsonCouplingRow {
    pub gap_nm: f64,
    pub k_per_um: f64,
    pub k_fit_per_um: f64,
    /// Local decay length of the smooth law, -1 / (d ln k / dg).
    pub decay_nm: f64,
    /// The full-vector solution's discretisation error of this k (at its
    /// nominal guide), rad/um.
    pub k_error_per_um: Option<f64>,
}

#[derive(Serialize)]
pub struct JsonLaw {
    pub wavelength_um: f64,
    pub k_ref_per_um: f64,
    pub g_c_nm: f64,
    pub fit_rms: f64,
}

#[derive(Serialize)]
pub struct JsonThreeGuides {
    pub gap_nm: f64,
    pub k_pair_per_um: f64,
    pub half_outer_splitting_per_um: f64,
    pub ratio_to_sqrt2_k: f64,
}

#[derive(Serialize)]
pub struct JsonRules {
    pub min_gap_nm: f64,
    pub min_width_nm: f64,
    pub min_bend_radius_um: f64,
    pub rail_pitch_um: f64,
}

#[derive(Serialize)]
pub struct JsonThermal {
    pub length_um: f64,
    pub p_pi_mw: f64,
    pub loss_db: f64,
}

#[derive(Serialize)]
pub struct JsonPassive {
    pub width_step_nm: f64,
    pub loss_db: f64,
}

#[derive(Serialize)]
pub struct JsonLoss {
    pub propagation_db_per_cm: f64,
    pub bend_db: f64,
    pub crossing_db: f64,
}

#[derive(Serialize)]
pub struct JsonTolerances {
    pub edge_bias_nm: f64,
    pub thickness_bias_nm: f64,
    pub edge_local_nm: f64,
    pub roughness_nm: f64,
    pub correlation_um: f64,
    pub phase_rad: f64,
    pub wavelength_nm: f64,
}

#[derive(Serialize)]
pub struct JsonSource {
    pub what: String,
    pub source: String,
}

pub fn to_json(p: &Process, c: &Characterisation) -> JsonProcess {
    let law = c.law();
    let from = match &p.coupling {
        CouplingSource::Table { from, .. } | CouplingSource::Solved { from, .. } => {
            Some(from.clone())
        }
        CouplingSource::Model { .. } => None,
    };
    JsonProcess {
        name: p.name.clone(),
        summary: p.summary.clone(),
        origin: p.origin.clone(),
        wavelength_um: c.wavelength_um,
        model: c.model.clone(),
        model_note: model_note(&c.model),
        materials: c
            .materials
            .iter()
            .map(|m| JsonMaterial {
                role: m.role,
                name: m.material.name(),
                source: m.material.source(),
                index: m.index,
                group_index: m.group_index,
                range_um: {
                    let (a, b) = m.material.range_um();
                    [a, if b.is_finite() { b } else { f64::MAX }]
                },
            })
            .collect(),
        width_nm: p.width_nm,
        thickness_nm: p.film.thickness_um * 1e3,
        film_index: c.film_index,
        neff: c.mode.as_ref().map(|m| m.neff),
        neff_tm_like: c.tm_like_neff,
        group_index: c.mode.as_ref().map(|m| m.group_index),
        dneff_dw_per_nm: c.mode.as_ref().map(|m| m.dneff_dw_per_nm),
        dneff_dt_per_nm: c.mode.as_ref().map(|m| m.dneff_dt_per_nm),
        coupling: JsonCoupling {
            model: c.model.clone(),
            from,
            k_ref_per_um: law.fit.k_ref_per_um,
            g_ref_nm: law.fit.g_ref_nm,
            g_c_nm: law.fit.g_c_nm,
            fit_rms: law.fit.fit_rms,
            table: law
                .table
                .gaps_nm
                .iter()
                .zip(&law.table.k_per_um)
                .enumerate()
                .map(|(i, (&g, &k))| JsonCouplingRow {
                    gap_nm: g,
                    k_per_um: k,
                    k_fit_per_um: law.fit.k_per_um(g),
                    decay_nm: law.smooth.decay_length_nm(g),
                    k_error_per_um: c.solution.as_ref().map(|s| s.nominal().k_per_um[i].error),
                })
                .collect(),
            by_wavelength: c
                .laws
                .iter()
                .map(|l| JsonLaw {
                    wavelength_um: l.table.wavelength_um,
                    k_ref_per_um: l.fit.k_ref_per_um,
                    g_c_nm: l.fit.g_c_nm,
                    fit_rms: l.fit.fit_rms,
                })
                .collect(),
        },
        solution: c.solution.as_ref().map(|s| {
            let g = s.nominal().guide;
            JsonSolution {
                from: solution_origin(p, c),
                width_nm: g.width_nm,
                thickness_nm: g.thickness_nm,
                wavelength_nm: g.wavelength_nm,
                reach: s.reach(),
                grid: JsonGrid {
                    edge_step_nm: s.grid.edge_step_nm,
                    core_step_nm: s.grid.core_step_nm,
                    cladding_step_nm: s.grid.cladding_step_nm,
                    growth: s.grid.growth,
                },
                levels: s.levels,
                neff_error: s.nominal().neff.error,
            }
        }),
        three_guides: c.three_guides.map(|t| JsonThreeGuides {
            gap_nm: t.gap_nm,
            k_pair_per_um: t.k_pair_per_um,
            half_outer_splitting_per_um: t.half_outer_splitting_per_um,
            ratio_to_sqrt2_k: t.half_outer_splitting_per_um / (2f64.sqrt() * t.k_pair_per_um),
        }),
        rules: JsonRules {
            min_gap_nm: p.rules.min_gap_nm,
            min_width_nm: p.rules.min_width_nm,
            min_bend_radius_um: p.rules.min_bend_radius_um,
            rail_pitch_um: p.rules.rail_pitch_um,
        },
        thermal: JsonThermal {
            length_um: p.thermal.length_um,
            p_pi_mw: p.thermal.p_pi_mw,
            loss_db: p.thermal.loss_db,
        },
        passive: JsonPassive {
            width_step_nm: p.passive.width_step_nm,
            loss_db: p.passive.loss_db,
        },
        loss: JsonLoss {
            propagation_db_per_cm: p.loss.propagation_db_per_cm,
            bend_db: p.loss.bend_db,
            crossing_db: p.loss.crossing_db,
        },
        tolerances: JsonTolerances {
            edge_bias_nm: p.tolerances.edge_bias_nm,
            thickness_bias_nm: p.tolerances.thickness_bias_nm,
            edge_local_nm: p.tolerances.edge_local_nm,
            roughness_nm: p.tolerances.roughness_nm,
            correlation_um: p.tolerances.correlation_um,
            phase_rad: p.tolerances.phase_rad,
            wavelength_nm: p.tolerances.wavelength_nm,
        },
        sources: p
            .sources
            .iter()
            .map(|(w, s)| JsonSource {
                what: w.clone(),
                source: s.clone(),
            })
            .collect(),
    }
}

/// Where the characterisation's full-vector solution came from.
pub fn solution_origin(p: &Process, c: &Characterisation) -> String {
    match (&p.coupling, &c.solution) {
        (CouplingSource::Solved { solution, from, .. }, Some(s))
            if std::sync::Arc::ptr_eq(solution, s) =>
        {
            if from == "preset" {
                "shipped with the preset".into()
            } else {
                from.clone()
            }
        }
        _ => "solved in this run".into(),
    }
}

pub fn to_text(p: &Process, c: &Characterisation) -> String {
    let mut s = String::new();
    let l_nm = c.wavelength_um * 1e3;
    let _ = writeln!(s, "process {}: {}", p.name, p.summary);
    let _ = writeln!(s, "  from     {}", p.origin);
    let _ = writeln!(s, "  model    {}", c.model);
    for line in textwrap_lines(model_note(&c.model), 76) {
        let _ = writeln!(s, "           {line}");
    }
    let _ = writeln!(s, "\nmaterials at {l_nm:.0} nm");
    for m in &c.materials {
        let (a, b) = m.material.range_um();
        let range = if b.is_finite() {
            format!("valid {a}-{b} um")
        } else {
            "any wavelength".into()
        };
        let _ = writeln!(
            s,
            "  {:<15} {:<16} n {:.6}  n_g {:.4}  {} ({range})",
            m.role,
            m.material.name(),
            m.index,
            m.group_index,
            m.material.source()
        );
    }
    let by = if c.solution.is_some() {
        "the full-vector solver"
    } else {
        "the effective index method"
    };
    let _ = writeln!(
        s,
        "\nguide {:.0} x {:.0} nm (width x thickness), TE-like fundamental mode, by {by}",
        p.width_nm,
        p.film.thickness_um * 1e3
    );
    if let Some(sol) = &c.solution {
        let g = &sol.grid;
        let _ = writeln!(
            s,
            "  solution                {}; solved at {}",
            solution_origin(p, c),
            sol.reach()
        );
        let _ = writeln!(
            s,
            "  grid                    {} nm at interfaces, {} nm in cores, {} nm in claddings, growth {}, and that grid halved",
            g.edge_step_nm, g.core_step_nm, g.cladding_step_nm, g.growth
        );
    }
    if let Some(f) = c.film_index {
        let _ = writeln!(s, "  film index (TE0 slab)   {f:.5}");
    }
    if let Some(m) = &c.mode {
        match &c.solution {
            Some(sol) => {
                let _ = writeln!(
                    s,
                    "  n_eff                   {:.5}   (discretisation error {:.1e})",
                    m.neff,
                    sol.nominal().neff.error
                );
            }
            None => {
                let _ = writeln!(s, "  n_eff                   {:.5}", m.neff);
            }
        }
        if let Some(tm) = c.tm_like_neff {
            let _ = writeln!(
                s,
                "  n_eff of the TM-like    {tm:.5}   (cells use the TE-like mode above; {})",
                if c.solution.is_some() {
                    "full-vector"
                } else {
                    "effective index method"
                }
            );
        }
        let _ = writeln!(s, "  group index             {:.4}", m.group_index);
        let _ = writeln!(
            s,
            "  dn_eff/dw               {:.3e} per nm of width",
            m.dneff_dw_per_nm
        );
        let _ = writeln!(
            s,
            "  dn_eff/dt               {:.3e} per nm of thickness",
            m.dneff_dt_per_nm
        );
    }
    let law = c.law();
    let _ = writeln!(
        s,
        "\ncoupling law k(g) of two guides at edge-to-edge gap g ({}, {l_nm:.0} nm)",
        c.model
    );
    let _ = writeln!(
        s,
        "  {:>8}  {:>12}  {:>12}  {:>8}  {:>9}{}",
        "gap nm",
        "k rad/um",
        "fit rad/um",
        "fit err",
        "decay nm",
        if c.solution.is_some() {
            "  discretisation err"
        } else {
            ""
        }
    );
    for (i, (&g, &k)) in law
        .table
        .gaps_nm
        .iter()
        .zip(&law.table.k_per_um)
        .enumerate()
    {
        let kf = law.fit.k_per_um(g);
        let err = c.solution.as_ref().map_or(String::new(), |sol| {
            let e = sol.nominal().k_per_um[i];
            format!("  {:>8.2}%", 100.0 * e.error / e.value)
        });
        let _ = writeln!(
            s,
            "  {g:>8.0}  {k:>12.5e}  {kf:>12.5e}  {:>7.2}%  {:>9.1}{err}",
            100.0 * (kf / k - 1.0),
            law.smooth.decay_length_nm(g)
        );
    }
    let _ = writeln!(
        s,
        "  exponential fit   k = {:.5} rad/um x exp(-(g - {:.0} nm) / {:.1} nm), rms {:.2} % (in ln k)",
        law.fit.k_ref_per_um,
        law.fit.g_ref_nm,
        law.fit.g_c_nm,
        100.0 * law.fit.fit_rms
    );
    let _ = writeln!(
        s,
        "  smooth law        natural cubic spline of ln k (C2), straight beyond {:.0}-{:.0} nm; cells use this one",
        law.smooth.range_nm().0,
        law.smooth.range_nm().1
    );
    for extra in &c.laws[1..] {
        let _ = writeln!(
            s,
            "  at {:.0} nm          k_ref {:.5} rad/um, g_c {:.1} nm, rms {:.2} %",
            extra.table.wavelength_um * 1e3,
            extra.fit.k_ref_per_um,
            extra.fit.g_c_nm,
            100.0 * extra.fit.fit_rms
        );
    }
    if let Some(t) = &c.three_guides {
        let _ = writeln!(
            s,
            "  three guides      at {:.0} nm gaps pi (n0 - n2) / l = {:.5} rad/um = {:.4} x sqrt(2) k (coupled-mode theory: 1)",
            t.gap_nm,
            t.half_outer_splitting_per_um,
            t.half_outer_splitting_per_um / (2f64.sqrt() * t.k_pair_per_um)
        );
    }
    let r = &p.rules;
    let _ = writeln!(s, "\ndesign rules");
    let _ = writeln!(
        s,
        "  minimum gap {:.0} nm, minimum width {:.0} nm, minimum bend radius {} um, rail pitch {} um",
        r.min_gap_nm, r.min_width_nm, r.min_bend_radius_um, r.rail_pitch_um
    );
    let m = &p.mask;
    let l = &m.layers;
    let _ = writeln!(
        s,
        "  mask: heaters {} um wide with {} um contacts, {} um from other guides, {} um apart; layers core {}/{}, heater {}/{}, contact {}/{}, label {}/{}, outline {}/{}",
        m.heater_width_um,
        m.contact_um,
        m.heater_clearance_um,
        m.heater_spacing_um,
        l.core.layer,
        l.core.datatype,
        l.heater.layer,
        l.heater.datatype,
        l.contact.layer,
        l.contact.datatype,
        l.label.layer,
        l.label.datatype,
        l.outline.layer,
        l.outline.datatype
    );
    let deck: Vec<String> = [
        m.deck.min_gap_nm.map(|v| format!("minimum gap {v} nm")),
        m.deck.min_width_nm.map(|v| format!("minimum width {v} nm")),
        m.deck
            .min_bend_radius_um
            .map(|v| format!("minimum bend radius {v} um")),
    ]
    .into_iter()
    .flatten()
    .collect();
    if !deck.is_empty() {
        let _ = writeln!(
            s,
            "  rule deck (checked on the mask, stricter than the design): {}",
            deck.join(", ")
        );
    }
    let _ = writeln!(s, "\nphase shifters");
    let _ = writeln!(
        s,
        "  thermal   {} um, P_pi {} mW, {} dB   (heaters run hot: follow your lab's rules for bench power and probing)",
        p.thermal.length_um, p.thermal.p_pi_mw, p.thermal.loss_db
    );
    let _ = writeln!(
        s,
        "  passive   width step {} nm, {} dB",
        p.passive.width_step_nm, p.passive.loss_db
    );
    let _ = writeln!(s, "\nloss");
    let _ = writeln!(
        s,
        "  propagation {} dB/cm, bend {} dB per 90 deg, crossing {} dB",
        p.loss.propagation_db_per_cm, p.loss.bend_db, p.loss.crossing_db
    );
    let t = &p.tolerances;
    let _ = writeln!(s, "\ntolerances (one sigma)");
    let _ = writeln!(
        s,
        "  edge_bias {} nm, thickness_bias {} nm, edge_local {} nm, roughness {} nm over {} um, phase {} rad, wavelength {} nm",
        t.edge_bias_nm,
        t.thickness_bias_nm,
        t.edge_local_nm,
        t.roughness_nm,
        t.correlation_um,
        t.phase_rad,
        t.wavelength_nm
    );
    if !p.sources.is_empty() {
        let _ = writeln!(s, "\nsources");
        for (w, src) in &p.sources {
            let _ = writeln!(s, "  {w}: {src}");
        }
    }
    s
}

fn textwrap_lines(text: &str, width: usize) -> Vec<String> {
    let mut out = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.len() + 1 + word.len() > width {
            out.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        out.push(line);
    }
    out
}

/// The coupling law on a log axis: the table's points, the exponential fit
/// and the smooth law, as SVG text (plotters, SVG backend).
pub fn coupling_plot_svg(p: &Process, c: &Characterisation) -> Result<String, String> {
    use plotters::prelude::*;
    let law = c.law();
    let (g0, g1) = law.smooth.range_nm();
    let pad = 0.05 * (g1 - g0);
    let (x0, x1) = (g0 - pad, g1 + pad);
    let kmax = law.table.k_per_um.iter().copied().fold(f64::MIN, f64::max);
    let kmin = law.table.k_per_um.iter().copied().fold(f64::MAX, f64::min);
    let (y0, y1) = (kmin / 2.0, kmax * 2.0);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (760, 500)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        let title = format!(
            "coupling law of {} ({}, {:.0} nm)",
            p.name,
            c.model,
            c.wavelength_um * 1e3
        );
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 20))
            .margin(16)
            .x_label_area_size(44)
            .y_label_area_size(70)
            .build_cartesian_2d(x0..x1, (y0..y1).log_scale())
            .map_err(|e| e.to_string())?;
        chart
            .configure_mesh()
            .x_desc("edge-to-edge gap (nm)")
            .y_desc("coupling k (rad/um)")
            .y_label_formatter(&|v| format!("{v:.0e}"))
            .draw()
            .map_err(|e| e.to_string())?;
        // A palette of our own: slate for data, teal for the smooth law,
        // amber for the exponential fit.
        let slate = RGBColor(0x33, 0x41, 0x55);
        let teal = RGBColor(0x0f, 0x76, 0x6e);
        let amber = RGBColor(0xb4, 0x53, 0x09);
        let n = 200;
        let xs: Vec<f64> = (0..=n)
            .map(|i| x0 + (x1 - x0) * f64::from(i) / f64::from(n))
            .collect();
        chart
            .draw_series(LineSeries::new(
                xs.iter().map(|&g| (g, law.fit.k_per_um(g))),
                amber.stroke_width(2),
            ))
            .map_err(|e| e.to_string())?
            .label(format!(
                "exponential fit: g_c {:.1} nm, rms {:.2} %",
                law.fit.g_c_nm,
                100.0 * law.fit.fit_rms
            ))
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], amber.stroke_width(2))
            });
        chart
            .draw_series(LineSeries::new(
                xs.iter().map(|&g| (g, law.smooth.k_per_um(g))),
                teal.stroke_width(2),
            ))
            .map_err(|e| e.to_string())?
            .label("smooth law (C2 spline of ln k)")
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], teal.stroke_width(2))
            });
        chart
            .draw_series(
                law.table
                    .gaps_nm
                    .iter()
                    .zip(&law.table.k_per_um)
                    .map(|(&g, &k)| Circle::new((g, k), 4, slate.filled())),
            )
            .map_err(|e| e.to_string())?
            .label(format!("table ({} points)", law.table.gaps_nm.len()))
            .legend(move |(x, y)| Circle::new((x + 10, y), 4, slate.filled()));
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(slate)
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(|e| e.to_string())?;
        root.present().map_err(|e| e.to_string())?;
    }
    Ok(svg)
}
