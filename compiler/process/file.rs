//! Process files (TOML): a preset named by `base` with any of its fields
//! overridden. Unknown keys and bad values are located diagnostics on the
//! file. The format is documented in docs/process.md.
//!
//! ```toml
//! name = "run7"
//! base = "si220_wire"
//! [guide]
//! width_nm = 480
//! [tolerances]
//! edge_bias_nm = 3
//! [coupling]
//! table = "run7_coupling.csv"   # measured; relative to this file
//! ```

use super::presets;
use super::solved;
use super::spec::{CouplingSource, MATERIAL_NAMES, MODEL_NAMES, Process, material_by_name};
use super::table;
use crate::circuit::FileLoader;
use crate::circuit::suggest::nearest;
use crate::diagnostic::{Diagnostic, Diagnostics};
use crate::source::{Source, Span};
use serde::Deserialize;
use toml::Spanned;

/// Diagnostics and the file they are about.
#[derive(Clone, Debug)]
pub struct LocatedErrors {
    pub source: Source,
    pub diagnostics: Diagnostics,
}

type Num = Option<Spanned<f64>>;
type Text = Option<Spanned<String>>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    base: Text,
    name: Text,
    summary: Option<String>,
    guide: Option<RawGuide>,
    rules: Option<RawRules>,
    thermal: Option<RawThermal>,
    passive: Option<RawPassive>,
    loss: Option<RawLoss>,
    tolerances: Option<RawTolerances>,
    coupling: Option<RawCoupling>,
    mask: Option<RawMask>,
    layers: Option<RawLayers>,
    drc: Option<RawDeck>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMask {
    heater_width_um: Num,
    contact_um: Num,
    heater_clearance_um: Num,
    heater_spacing_um: Num,
}

type LayerPair = Option<Spanned<Vec<i64>>>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLayers {
    core: LayerPair,
    heater: LayerPair,
    contact: LayerPair,
    label: LayerPair,
    outline: LayerPair,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDeck {
    min_gap_nm: Num,
    min_width_nm: Num,
    min_bend_radius_um: Num,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGuide {
    width_nm: Num,
    thickness_nm: Num,
    wavelength_nm: Num,
    core: Text,
    lower_cladding: Text,
    upper_cladding: Text,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRules {
    min_gap_nm: Num,
    min_width_nm: Num,
    min_bend_radius_um: Num,
    rail_pitch_um: Num,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawThermal {
    length_um: Num,
    p_pi_mw: Num,
    loss_db: Num,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPassive {
    width_step_nm: Num,
    loss_db: Num,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLoss {
    propagation_db_per_cm: Num,
    bend_db: Num,
    crossing_db: Num,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTolerances {
    edge_bias_nm: Num,
    thickness_bias_nm: Num,
    edge_local_nm: Num,
    roughness_nm: Num,
    correlation_um: Num,
    phase_rad: Num,
    wavelength_nm: Num,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCoupling {
    model: Text,
    table: Text,
    solved: Text,
    gaps_nm: Option<Spanned<Vec<f64>>>,
    g_ref_nm: Num,
}

fn span(r: std::ops::Range<usize>) -> Span {
    Span::new(r.start, r.end.max(r.start + 1))
}

/// What a value must be.
#[derive(Clone, Copy)]
enum Need {
    Positive,
    NonNegative,
    AtLeast(f64),
}

struct Reader {
    diags: Diagnostics,
    /// Keys the file set, for the process's source notes.
    set: Vec<String>,
}

impl Reader {
    /// A GDSII layer written `[layer, datatype]`, each 0 to 255 (the
    /// range every reader takes).
    fn layer(&mut self, slot: &mut super::spec::GdsLayer, v: &LayerPair, key: &str) {
        let Some(v) = v else { return };
        match v.get_ref().as_slice() {
            [l, d] if (0..=255).contains(l) && (0..=255).contains(d) => {
                *slot = super::spec::GdsLayer {
                    layer: *l as u16,
                    datatype: *d as u16,
                };
                self.set.push(key.to_owned());
            }
            _ => self.diags.push(
                Diagnostic::error(
                    "process-value",
                    format!("`{key}` must be [layer, datatype], each 0 to 255"),
                    span(v.span()),
                    "not a layer",
                )
                .with_hint("for example `core = [1, 0]`"),
            ),
        }
    }

    fn num_opt(&mut self, slot: &mut Option<f64>, v: &Num, key: &str) {
        let mut x = f64::NAN;
        self.num(&mut x, v, key, Need::Positive, 1.0);
        if x.is_finite() {
            *slot = Some(x);
        }
    }

    fn num(&mut self, slot: &mut f64, v: &Num, key: &str, need: Need, scale: f64) {
        let Some(v) = v else { return };
        let x = *v.get_ref();
        let ok = x.is_finite()
            && match need {
                Need::Positive => x > 0.0,
                Need::NonNegative => x >= 0.0,
                Need::AtLeast(m) => x >= m,
            };
        if !ok {
            let want = match need {
                Need::Positive => "a positive number".to_owned(),
                Need::NonNegative => "zero or more".to_owned(),
                Need::AtLeast(m) => format!("at least {m}"),
            };
            self.diags.push(Diagnostic::error(
                "process-value",
                format!("`{key}` must be {want}, got {x}"),
                span(v.span()),
                "out of range",
            ));
            return;
        }
        *slot = x * scale;
        self.set.push(key.to_owned());
    }

    fn material(&mut self, slot: &mut super::material::Material, v: &Text, key: &str) {
        let Some(v) = v else { return };
        match material_by_name(v.get_ref()) {
            Some(m) => {
                *slot = m;
                self.set.push(key.to_owned());
            }
            None => {
                let mut d = Diagnostic::error(
                    "process-value",
                    format!("`{key}` names an unknown material `{}`", v.get_ref()),
                    span(v.span()),
                    "unknown material",
                );
                d = d.with_hint(match nearest(v.get_ref(), MATERIAL_NAMES) {
                    Some(n) => format!(
                        "did you mean `{n}`? materials: {}",
                        MATERIAL_NAMES.join(", ")
                    ),
                    None => format!("materials: {}", MATERIAL_NAMES.join(", ")),
                });
                self.diags.push(d);
            }
        }
    }
}

/// A toml error as a located diagnostic, with a "did you mean" for
/// unknown keys.
fn toml_error(e: &toml::de::Error, len: usize) -> Diagnostic {
    let sp = e.span().map_or(Span::new(0, len.min(1)), span);
    let msg = e.message().to_owned();
    let mut d = Diagnostic::error("process-file", msg.clone(), sp, "here");
    if let Some(rest) = msg.strip_prefix("unknown field `")
        && let Some((field, expected)) = rest.split_once('`')
    {
        let names: Vec<&str> = expected.split('`').skip(1).step_by(2).collect();
        if let Some(n) = nearest(field, names.iter().copied()) {
            d = d.with_hint(format!("did you mean `{n}`?"));
        }
        d.labels[0].text = "unknown key".into();
    }
    d
}

/// Reads a process file; matrix and table files it names come through
/// `files`, relative to it.
pub fn read(src: &Source, files: &dyn FileLoader) -> Result<Process, Vec<LocatedErrors>> {
    let fail = |d: Diagnostics| {
        vec![LocatedErrors {
            source: src.clone(),
            diagnostics: d,
        }]
    };
    let raw: RawFile = match toml::from_str(&src.text) {
        Ok(r) => r,
        Err(e) => return Err(fail(Diagnostics::from(toml_error(&e, src.text.len())))),
    };
    let mut r = Reader {
        diags: Diagnostics::new(),
        set: Vec::new(),
    };
    let base_name = raw
        .base
        .as_ref()
        .map_or(presets::DEFAULT, |b| b.get_ref().as_str());
    let Some(mut p) = presets::preset(base_name) else {
        let b = raw.base.as_ref().expect("the default exists");
        let mut d = Diagnostic::error(
            "process-value",
            format!("`base` names no built-in process: `{base_name}`"),
            span(b.span()),
            "unknown preset",
        );
        d = d.with_hint(match nearest(base_name, presets::NAMES) {
            Some(n) => format!("did you mean `{n}`? presets: {}", presets::NAMES.join(", ")),
            None => format!("presets: {}", presets::NAMES.join(", ")),
        });
        return Err(fail(Diagnostics::from(d)));
    };
    p.origin = src.name.clone();
    if let Some(n) = &raw.name {
        p.name = n.get_ref().clone();
    } else {
        p.name = format!("{} (from {})", p.name, src.name);
    }
    if let Some(s) = raw.summary {
        p.summary = s;
    }
    if let Some(g) = &raw.guide {
        r.num(
            &mut p.width_nm,
            &g.width_nm,
            "width_nm",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut p.film.thickness_um,
            &g.thickness_nm,
            "thickness_nm",
            Need::Positive,
            1e-3,
        );
        r.num(
            &mut p.wavelength_um,
            &g.wavelength_nm,
            "wavelength_nm",
            Need::Positive,
            1e-3,
        );
        r.material(&mut p.film.core, &g.core, "core");
        r.material(&mut p.film.lower, &g.lower_cladding, "lower_cladding");
        r.material(&mut p.film.upper, &g.upper_cladding, "upper_cladding");
    }
    if let Some(x) = &raw.rules {
        r.num(
            &mut p.rules.min_gap_nm,
            &x.min_gap_nm,
            "min_gap_nm",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut p.rules.min_width_nm,
            &x.min_width_nm,
            "min_width_nm",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut p.rules.min_bend_radius_um,
            &x.min_bend_radius_um,
            "min_bend_radius_um",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut p.rules.rail_pitch_um,
            &x.rail_pitch_um,
            "rail_pitch_um",
            Need::Positive,
            1.0,
        );
    }
    if let Some(x) = &raw.thermal {
        r.num(
            &mut p.thermal.length_um,
            &x.length_um,
            "length_um",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut p.thermal.p_pi_mw,
            &x.p_pi_mw,
            "p_pi_mw",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut p.thermal.loss_db,
            &x.loss_db,
            "loss_db",
            Need::NonNegative,
            1.0,
        );
    }
    if let Some(x) = &raw.passive {
        r.num(
            &mut p.passive.width_step_nm,
            &x.width_step_nm,
            "width_step_nm",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut p.passive.loss_db,
            &x.loss_db,
            "loss_db",
            Need::NonNegative,
            1.0,
        );
    }
    if let Some(x) = &raw.loss {
        r.num(
            &mut p.loss.propagation_db_per_cm,
            &x.propagation_db_per_cm,
            "propagation_db_per_cm",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut p.loss.bend_db,
            &x.bend_db,
            "bend_db",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut p.loss.crossing_db,
            &x.crossing_db,
            "crossing_db",
            Need::NonNegative,
            1.0,
        );
    }
    if let Some(x) = &raw.tolerances {
        let t = &mut p.tolerances;
        r.num(
            &mut t.edge_bias_nm,
            &x.edge_bias_nm,
            "edge_bias_nm",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut t.thickness_bias_nm,
            &x.thickness_bias_nm,
            "thickness_bias_nm",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut t.edge_local_nm,
            &x.edge_local_nm,
            "edge_local_nm",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut t.roughness_nm,
            &x.roughness_nm,
            "roughness_nm",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut t.correlation_um,
            &x.correlation_um,
            "correlation_um",
            Need::AtLeast(1.0),
            1.0,
        );
        r.num(
            &mut t.phase_rad,
            &x.phase_rad,
            "phase_rad",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut t.wavelength_nm,
            &x.wavelength_nm,
            "wavelength_nm",
            Need::NonNegative,
            1.0,
        );
    }
    let mut extra = Vec::new();
    if let Some(x) = &raw.mask {
        let m = &mut p.mask;
        r.num(
            &mut m.heater_width_um,
            &x.heater_width_um,
            "heater_width_um",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut m.contact_um,
            &x.contact_um,
            "contact_um",
            Need::Positive,
            1.0,
        );
        r.num(
            &mut m.heater_clearance_um,
            &x.heater_clearance_um,
            "heater_clearance_um",
            Need::NonNegative,
            1.0,
        );
        r.num(
            &mut m.heater_spacing_um,
            &x.heater_spacing_um,
            "heater_spacing_um",
            Need::NonNegative,
            1.0,
        );
    }
    if let Some(x) = &raw.layers {
        let l = &mut p.mask.layers;
        r.layer(&mut l.core, &x.core, "core");
        r.layer(&mut l.heater, &x.heater, "heater");
        r.layer(&mut l.contact, &x.contact, "contact");
        r.layer(&mut l.label, &x.label, "label");
        r.layer(&mut l.outline, &x.outline, "outline");
    }
    if let Some(x) = &raw.drc {
        let d = &mut p.mask.deck;
        r.num_opt(&mut d.min_gap_nm, &x.min_gap_nm, "drc.min_gap_nm");
        r.num_opt(&mut d.min_width_nm, &x.min_width_nm, "drc.min_width_nm");
        r.num_opt(
            &mut d.min_bend_radius_um,
            &x.min_bend_radius_um,
            "drc.min_bend_radius_um",
        );
    }
    if let Some(c) = &raw.coupling {
        let mut g_ref = p.coupling.g_ref_nm();
        r.num(&mut g_ref, &c.g_ref_nm, "g_ref_nm", Need::Positive, 1.0);
        let given: Vec<(&str, &Spanned<String>)> = [
            ("model", &c.model),
            ("table", &c.table),
            ("solved", &c.solved),
        ]
        .into_iter()
        .filter_map(|(k, v)| v.as_ref().map(|v| (k, v)))
        .collect();
        if given.len() > 1 {
            r.diags.push(
                Diagnostic::error(
                    "process-value",
                    format!(
                        "give one source of the coupling law, not {}",
                        given
                            .iter()
                            .map(|(k, _)| format!("`{k}`"))
                            .collect::<Vec<_>>()
                            .join(" and ")
                    ),
                    span(given[1].1.span()),
                    "second source",
                )
                .with_label(span(given[0].1.span()), "first source"),
            );
        }
        if let Some(m) = &c.model
            && !MODEL_NAMES.contains(&m.get_ref().as_str())
        {
            r.diags.push(
                Diagnostic::error(
                    "process-value",
                    format!("unknown coupling model `{}`", m.get_ref()),
                    span(m.span()),
                    "unknown model",
                )
                .with_hint(match nearest(m.get_ref(), MODEL_NAMES) {
                    Some(n) => format!(
                        "did you mean `{n}`? models: {} (or give a measured `table`)",
                        MODEL_NAMES.join(", ")
                    ),
                    None => format!(
                        "models: {} (or give a measured `table`)",
                        MODEL_NAMES.join(", ")
                    ),
                }),
            );
        }
        if let Some(t) = &c.table {
            match files.load(t.get_ref()) {
                Ok(text) => {
                    let csv = Source::new(t.get_ref().clone(), text);
                    match table::parse(&csv, p.wavelength_um) {
                        Ok(tables) => {
                            p.coupling = CouplingSource::Table {
                                tables,
                                g_ref_nm: g_ref,
                                from: t.get_ref().clone(),
                            }
                        }
                        Err(d) => extra.push(LocatedErrors {
                            source: csv,
                            diagnostics: d,
                        }),
                    }
                }
                Err(why) => r.diags.push(Diagnostic::error(
                    "file",
                    format!("cannot read the coupling table: {why}"),
                    span(t.span()),
                    "cannot read",
                )),
            }
        } else if let Some(f) = &c.solved {
            match files.load(f.get_ref()).map_err(|why| format!("cannot read the solution: {why}")).and_then(|text| {
                solved::Solution::parse(&text).map_err(|e| e.to_string())
            }) {
                Ok(solution) => match solution.covers(&p) {
                    Ok(()) => {
                        if c.gaps_nm.is_some() {
                            r.diags.push(Diagnostic::error(
                                "process-value",
                                "a solution brings its own gaps",
                                span(f.span()),
                                "has its gaps",
                            ).with_hint("remove `gaps_nm`, or solve again at those gaps (`model = \"full_vector\"`)"));
                        }
                        p.coupling = CouplingSource::Solved {
                            solution: std::sync::Arc::new(solution),
                            g_ref_nm: g_ref,
                            from: f.get_ref().clone(),
                        }
                    }
                    Err(e) => r.diags.push(
                        Diagnostic::error("process-value", e.to_string(), span(f.span()), "does not fit this process")
                            .with_hint("solve this process and save it: `trilane process FILE --solve --save TABLE.toml`"),
                    ),
                },
                Err(why) => r.diags.push(Diagnostic::error(
                    "file",
                    why,
                    span(f.span()),
                    "cannot use",
                )),
            }
        } else {
            let gaps = match &c.gaps_nm {
                Some(g) => {
                    let v = g.get_ref().clone();
                    let ok = v.len() >= 3
                        && v.windows(2).all(|w| w[1] > w[0])
                        && v.iter().all(|x| *x > 0.0 && x.is_finite());
                    if !ok {
                        r.diags.push(Diagnostic::error(
                            "process-value",
                            "`gaps_nm` needs at least 3 positive gaps in increasing order",
                            span(g.span()),
                            "bad gap list",
                        ));
                    }
                    v
                }
                None => p
                    .coupling
                    .gaps_nm()
                    .expect("presets compute their law")
                    .to_vec(),
            };
            let model = match &c.model {
                Some(m) => m.get_ref().clone(),
                None => match &p.coupling {
                    CouplingSource::Model { model, .. } => model.clone(),
                    _ => solved::MODEL.to_owned(),
                },
            };
            // The base's shipped solution serves when nothing it depends
            // on changed.
            let same_gaps = p.coupling.gaps_nm() == Some(gaps.as_slice());
            let keep = model == solved::MODEL
                && same_gaps
                && matches!(p.coupling, CouplingSource::Solved { .. });
            if keep {
                if let CouplingSource::Solved { g_ref_nm, .. } = &mut p.coupling {
                    *g_ref_nm = g_ref;
                }
            } else {
                p.coupling = CouplingSource::Model {
                    model,
                    gaps_nm: gaps,
                    g_ref_nm: g_ref,
                };
            }
        }
    }
    if !r.set.is_empty() {
        p.sources.insert(
            0,
            (
                format!("set by {}", src.name),
                format!(
                    "{} (the other values are {}'s)",
                    r.set.join(", "),
                    base_name
                ),
            ),
        );
    }
    let mut errors = Vec::new();
    if r.diags.has_errors() {
        errors.push(LocatedErrors {
            source: src.clone(),
            diagnostics: r.diags.sorted(),
        });
    }
    errors.extend(extra);
    if errors.is_empty() {
        Ok(p)
    } else {
        Err(errors)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::NoFiles;

    #[test]
    fn a_file_overrides_its_base() {
        let src = Source::new(
            "run.toml",
            "name = \"run7\"\nbase = \"si220_wire\"\n[guide]\nwidth_nm = 480\n[tolerances]\nedge_bias_nm = 3\n",
        );
        let p = read(&src, &NoFiles).unwrap();
        assert_eq!(p.name, "run7");
        assert_eq!(p.width_nm, 480.0);
        assert_eq!(p.tolerances.edge_bias_nm, 3.0);
        assert_eq!(
            p.rules.min_gap_nm, 100.0,
            "untouched fields keep the preset's values"
        );
    }

    #[test]
    fn unknown_keys_and_bad_values_are_located() {
        let src = Source::new("run.toml", "[guide]\nwidht_nm = 480\n");
        let e = read(&src, &NoFiles).unwrap_err();
        let d = &e[0].diagnostics.0[0];
        assert_eq!(src.line_col(d.span().start), (2, 1));
        assert!(
            d.hint.as_deref().unwrap_or("").contains("width_nm"),
            "{d:?}"
        );
        let src = Source::new(
            "run.toml",
            "[tolerances]\ncorrelation_um = 0.5\n[guide]\ncore = \"silicn\"\n",
        );
        let e = read(&src, &NoFiles).unwrap_err();
        assert_eq!(e[0].diagnostics.0.len(), 2);
        assert_eq!(src.line_col(e[0].diagnostics.0[0].span().start), (2, 18));
        assert!(
            e[0].diagnostics.0[1]
                .hint
                .as_deref()
                .unwrap()
                .contains("`silicon`")
        );
    }

    #[test]
    fn mask_layers_and_rule_deck_are_read_and_checked() {
        let src = Source::new(
            "run.toml",
            "[mask]\nheater_width_um = 1.5\n[layers]\ncore = [3, 2]\n[drc]\nmin_gap_nm = 150\n",
        );
        let p = read(&src, &NoFiles).unwrap();
        assert_eq!(p.mask.heater_width_um, 1.5);
        assert_eq!(p.mask.layers.core.layer, 3);
        assert_eq!(p.mask.layers.core.datatype, 2);
        assert_eq!(p.mask.layers.heater.layer, 20, "the default map stays");
        assert_eq!(p.mask.deck.min_gap_nm, Some(150.0));
        assert_eq!(p.mask.deck.min_width_nm, None);
        assert_eq!(
            p.rules.min_gap_nm, 100.0,
            "the deck leaves the design rules"
        );
        // A layer out of range and a bad deck value, each located.
        let src = Source::new(
            "run.toml",
            "[layers]\nheater = [300, 0]\n[drc]\nmin_gap_nm = -1\n",
        );
        let e = read(&src, &NoFiles).unwrap_err();
        let d = &e[0].diagnostics.0;
        assert_eq!(d.len(), 2, "{d:?}");
        assert_eq!(src.line_col(d[0].span().start), (2, 10));
        assert!(d[0].message.contains("[layer, datatype]"), "{d:?}");
        assert_eq!(src.line_col(d[1].span().start), (4, 14));
    }
}

#[cfg(test)]
mod coupling_tests {
    //! The `[coupling]` section: which model or solution a file's law
    //! comes from.
    use super::*;
    use crate::process::solved::shipped;

    /// Files from memory, by name.
    struct Files(Vec<(&'static str, String)>);
    impl FileLoader for Files {
        fn load(&self, path: &str) -> Result<String, String> {
            self.0
                .iter()
                .find(|(n, _)| *n == path)
                .map(|(_, t)| t.clone())
                .ok_or_else(|| "no such file".into())
        }
    }

    fn read_with(text: &str, files: &Files) -> Result<Process, Vec<LocatedErrors>> {
        read(&Source::new("run.toml", text), files)
    }

    #[test]
    fn a_small_change_of_guide_keeps_the_shipped_solution() {
        let p = read_with("[guide]\nwidth_nm = 480\n", &Files(vec![])).unwrap();
        assert!(matches!(p.coupling, CouplingSource::Solved { ref from, .. } if from == "preset"));
        let p = read_with("[coupling]\nmodel = \"effective_index\"\n", &Files(vec![])).unwrap();
        assert!(
            matches!(p.coupling, CouplingSource::Model { ref model, .. } if model == "effective_index")
        );
        // New gaps with the full-vector model: a fresh solve at those gaps.
        let p = read_with(
            "[coupling]\nmodel = \"full_vector\"\ngaps_nm = [100, 200, 300]\n",
            &Files(vec![]),
        )
        .unwrap();
        assert!(
            matches!(p.coupling, CouplingSource::Model { ref model, ref gaps_nm, .. }
            if model == "full_vector" && gaps_nm.len() == 3)
        );
    }

    #[test]
    fn a_saved_solution_is_checked_against_the_file() {
        let text = shipped("si220_wire").unwrap().to_toml();
        let files = Files(vec![("s.toml", text)]);
        let p = read_with("[coupling]\nsolved = \"s.toml\"\n", &files).unwrap();
        assert!(matches!(p.coupling, CouplingSource::Solved { ref from, .. } if from == "s.toml"));
        // A guide beyond its reach: located on the `solved` value.
        let src = "[guide]\nwidth_nm = 600\n[coupling]\nsolved = \"s.toml\"\n";
        let e = read_with(src, &files).unwrap_err();
        let d = &e[0].diagnostics.0[0];
        assert!(d.message.contains("600.0 nm wide"), "{}", d.message);
        assert_eq!(
            Source::new("run.toml", src).line_col(d.span().start),
            (4, 10)
        );
        // Two sources, an unknown model, a missing file.
        let e = read_with(
            "[coupling]\nmodel = \"full_vector\"\nsolved = \"s.toml\"\n",
            &files,
        )
        .unwrap_err();
        assert!(e[0].diagnostics.0[0].message.contains("one source"));
        let e = read_with("[coupling]\nmodel = \"full_vectr\"\n", &files).unwrap_err();
        assert!(
            e[0].diagnostics.0[0]
                .hint
                .as_deref()
                .unwrap()
                .contains("`full_vector`")
        );
        let e = read_with("[coupling]\nsolved = \"none.toml\"\n", &files).unwrap_err();
        assert!(e[0].diagnostics.0[0].message.contains("cannot read"));
    }
}
