//! `floorplan.svg`: the chip drawn for a person to read at a glance.
//!
//! What is drawn (x along the light to the right, y up, mode 0 the top
//! rail):
//! - a title line (chip, process, strategy, mesh, cell kind, length x
//!   width, total heater power);
//! - the die, with a faint line at every column boundary, alternate
//!   columns of cells or phase sections banded, and the column numbers along
//!   the top (those of report.txt's column table; `out` is the final phase
//!   section);
//! - every rail as one path per mode: straight runs, S-bends as cubic
//!   curves, crossings as two curves exchanging places;
//! - each cell as one group (`class="cell"`, `data-id` the component id):
//!   a box over its two rails, the rails' own shape inside it (a geometric
//!   cell's rails bow towards the auxiliary guide between them; a coupler's
//!   guides close in to their gap; an MZI's two couplers and the heater on
//!   its upper arm), a label with the split (theta and the cross power) when
//!   there is room, and a tooltip with the full figures;
//! - the auxiliary guides' tapered ends (terminators), phase shifters
//!   (heaters, labelled with their power; passive sections with their
//!   phase), balancing sections (a pale band under the rail), the ports
//!   (mode names at both facets);
//! - a scale bar for each axis, a note of the compression, and a legend.
//!
//! Scales: y is fixed per rail pitch (36 px, 32 px above 12 modes), so the
//! cells' gaps and the S-bends are drawn to the y scale; x is compressed to
//! about 2000 px per row. A chip that would go below 0.8 px/um is wrapped
//! into rows broken at column boundaries (at most 40 rows), every row with
//! its own column numbers and mode names. Text keeps its size whatever the
//! chip's; labels are placed greedily (cells first, then phase shifters)
//! and any that would overlap a placed one, or does not fit its
//! component, is left out (its tooltip keeps the figures).
//!
//! Palette (our own, "chart-room"): warm paper `#fbfaf7`; a pale slate die
//! `#eef2f5` edged `#8d9aa6`, banded columns `#e3e9ee`, column lines
//! `#cdd5dd`; rails in navy ink `#1f3a5f`; cells in sand `#f4e6c8` edged
//! with ochre `#c49a55`; auxiliary guides and their tapers in dark ochre
//! `#a8742a`; heaters in brick `#c4553b` edged `#8e3322`; passive phase
//! sections in olive `#6f8f3a`; crossings marked in plum `#6a4c93`;
//! balancing sections in sage `#9cc5b3`; ports in slate `#4a5561`; text in
//! charcoal `#22262a` and grey `#5f6871`.
//!
//! Every number goes through one formatter (`fix`: fixed decimals, no
//! negative zero, `0` for a coordinate that is not finite); nothing here
//! iterates a hash map, so the text is a function of the floorplan alone.

use super::floorplan::{Component, Floorplan, Kind, Side, Tuning, WaveguideRole};
use crate::cell::CellDesign;
use std::f64::consts::{PI, TAU};
use std::fmt::Write;

mod colour {
    pub const PAPER: &str = "#fbfaf7";
    pub const DIE: &str = "#eef2f5";
    pub const DIE_EDGE: &str = "#8d9aa6";
    pub const BAND: &str = "#e3e9ee";
    pub const DIVIDER: &str = "#cdd5dd";
    pub const RAIL: &str = "#1f3a5f";
    pub const CELL: &str = "#f4e6c8";
    pub const CELL_EDGE: &str = "#c49a55";
    pub const AUX: &str = "#a8742a";
    pub const HEATER: &str = "#c4553b";
    pub const HEATER_EDGE: &str = "#8e3322";
    pub const PASSIVE: &str = "#6f8f3a";
    pub const CROSSING: &str = "#6a4c93";
    pub const BALANCE: &str = "#9cc5b3";
    pub const PORT: &str = "#4a5561";
    pub const TEXT: &str = "#22262a";
    pub const GREY: &str = "#5f6871";
}

/// Content width a row aims at, px.
const ROW_W: f64 = 2000.0;
/// Below this x scale (px/um) the chip wraps into rows.
const SX_MIN: f64 = 0.8;
const MAX_ROWS: usize = 40;
const HEADER_H: f64 = 66.0;
const CAPTION_H: f64 = 20.0;
const STRIP_H: f64 = 22.0;
const ROW_GAP: f64 = 30.0;
const LABEL_PT: f64 = 10.0;
const MODE_PT: f64 = 11.0;
/// Longest mode name drawn whole, characters.
const NAME_CHARS: usize = 20;

/// The floorplan as an SVG document.
pub fn floorplan_svg(fp: &Floorplan) -> String {
    render(fp).svg
}

struct Drawing {
    svg: String,
    /// Every placed component label's box (x0, y0, x1, y1), px.
    #[cfg_attr(not(test), allow(dead_code))]
    labels: Vec<[f64; 4]>,
    #[cfg_attr(not(test), allow(dead_code))]
    rows: usize,
}

/// The one number format: `d` decimals, no negative zero; `0` for a value
/// that is not finite.
fn fix(v: f64, d: usize) -> String {
    if !v.is_finite() {
        return "0".into();
    }
    let half = 0.5 * 10f64.powi(-(d.min(12) as i32));
    let v = if v.abs() < half { 0.0 } else { v };
    format!("{:.*}", d.min(12), v)
}

/// A coordinate or length in px.
fn c(v: f64) -> String {
    fix(v, 2)
}

/// A figure for a label: `-` when it is not finite.
fn fig(v: f64, d: usize) -> String {
    if v.is_finite() { fix(v, d) } else { "-".into() }
}

/// Text for XML content or an attribute value.
fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&apos;"),
            '\t' | '\n' | '\r' => o.push(' '),
            c if (c as u32) < 0x20 || c == '\u{fffe}' || c == '\u{ffff}' => o.push('?'),
            c => o.push(c),
        }
    }
    o
}

/// A name cut to `NAME_CHARS` characters.
fn short(s: &str) -> String {
    if s.chars().count() <= NAME_CHARS {
        s.to_owned()
    } else {
        let mut t: String = s.chars().take(NAME_CHARS - 1).collect();
        t.push('\u{2026}');
        t
    }
}

/// A generous estimate of a text's width in a sans-serif face, px.
fn text_w(s: &str, size: f64) -> f64 {
    s.chars()
        .map(|ch| match ch {
            ' ' | '.' | ',' | ':' | ';' | 'i' | 'l' | 'j' | '|' | '\'' | '!' | 'I' | 'f' | 't'
            | 'r' => 0.36,
            'm' | 'w' | 'M' | 'W' | '%' | '\u{2014}' => 0.92,
            'A'..='Z' => 0.72,
            _ => 0.62,
        })
        .sum::<f64>()
        * size
}

/// `v` within [lo, hi]; `lo` when the bounds or `v` are not numbers (unlike
/// `f64::clamp`, never a panic).
fn clampf(v: f64, lo: f64, hi: f64) -> f64 {
    if lo.is_nan() || hi.is_nan() || lo > hi || v.is_nan() {
        return if lo.is_nan() { 0.0 } else { lo };
    }
    v.max(lo).min(hi)
}

/// The largest of 1, 2, 5 x 10^k not above `v`.
fn nice(v: f64) -> f64 {
    if !(v.is_finite() && v > 0.0) {
        return 1.0;
    }
    let p = 10f64.powf(v.log10().floor());
    [5.0, 2.0, 1.0]
        .into_iter()
        .map(|k| k * p)
        .find(|&x| x <= v * (1.0 + 1e-12))
        .unwrap_or(p)
}

fn text(s: &mut String, x: f64, y: f64, size: f64, fill: &str, anchor: &str, body: &str) {
    let _ = write!(
        s,
        "<text x=\"{}\" y=\"{}\" font-size=\"{}\" fill=\"{}\" text-anchor=\"{}\">{}</text>",
        c(x),
        c(y),
        fix(size, 1),
        fill,
        anchor,
        esc(body)
    );
}

struct Row {
    x0: f64,
    x1: f64,
    /// px of the row's top (caption or column strip).
    top: f64,
    /// px of the die's top edge (y = n pitch).
    die_top: f64,
}

struct Frame {
    n: usize,
    pitch: f64,
    /// px per um.
    sx: f64,
    sy: f64,
    /// px per rail pitch.
    ppitch: f64,
    /// px where each row's x0 is drawn.
    left: f64,
    rows: Vec<Row>,
}

impl Frame {
    fn row_of(&self, x: f64) -> usize {
        let mut r = 0;
        for (i, row) in self.rows.iter().enumerate() {
            if x >= row.x0 - 1e-9 {
                r = i;
            }
        }
        r
    }
    fn x(&self, r: usize, x_um: f64) -> f64 {
        let x0 = self.rows.get(r).map_or(0.0, |w| w.x0);
        self.left + (x_um - x0) * self.sx
    }
    fn y(&self, r: usize, y_um: f64) -> f64 {
        let top = self.rows.get(r).map_or(0.0, |w| w.die_top);
        top + (self.n as f64 * self.pitch - y_um) * self.sy
    }
    /// Nominal rail y of a mode, um (mode 0 on top).
    fn rail(&self, m: usize) -> f64 {
        self.n.saturating_sub(1).saturating_sub(m) as f64 * self.pitch
    }
    fn die_h(&self) -> f64 {
        (self.n as f64 + 1.0) * self.ppitch
    }
    fn row_px(&self, r: usize) -> f64 {
        self.rows.get(r).map_or(0.0, |w| (w.x1 - w.x0) * self.sx)
    }
}

/// Greedy label placement: a box is taken only when it overlaps none taken.
#[derive(Default)]
struct Boxes(Vec<[f64; 4]>);

impl Boxes {
    fn take(&mut self, b: [f64; 4]) -> bool {
        let pad = 2.0;
        let clash = self.0.iter().any(|o| {
            b[0] < o[2] + pad && o[0] < b[2] + pad && b[1] < o[3] + pad && o[1] < b[3] + pad
        });
        if clash {
            return false;
        }
        self.0.push(b);
        true
    }
}

/// A label's box around its anchor (centred text at baseline `y`).
fn label_box(cx: f64, y: f64, w: f64, size: f64) -> [f64; 4] {
    [
        cx - w / 2.0 - 1.0,
        y - 0.8 * size,
        cx + w / 2.0 + 1.0,
        y + 0.25 * size,
    ]
}

/// Per mode and row, one rail path.
struct Pen {
    n: usize,
    paths: Vec<String>,
    at: Vec<Option<(usize, f64, f64)>>,
}

impl Pen {
    fn new(n: usize, rows: usize) -> Pen {
        Pen {
            n,
            paths: vec![String::new(); n * rows],
            at: vec![None; n],
        }
    }
    fn path(&mut self, r: usize, m: usize) -> Option<&mut String> {
        let k = r.checked_mul(self.n)?.checked_add(m)?;
        self.paths.get_mut(k)
    }
    fn start(&mut self, r: usize, m: usize, x: f64, y: f64) {
        let here = matches!(self.at.get(m), Some(Some((rr, xx, yy))) if *rr == r && (xx - x).abs() < 0.05 && (yy - y).abs() < 0.05);
        if !here && let Some(p) = self.path(r, m) {
            let _ = write!(p, "M{} {}", c(x), c(y));
        }
    }
    fn end(&mut self, r: usize, m: usize, x: f64, y: f64) {
        if let Some(a) = self.at.get_mut(m) {
            *a = Some((r, x, y));
        }
    }
    fn line(&mut self, r: usize, m: usize, (x0, y0): (f64, f64), (x1, y1): (f64, f64)) {
        if m >= self.n {
            return;
        }
        self.start(r, m, x0, y0);
        if let Some(p) = self.path(r, m) {
            if (y1 - y0).abs() < 0.005 {
                let _ = write!(p, "H{}", c(x1));
            } else {
                let _ = write!(p, "L{} {}", c(x1), c(y1));
            }
        }
        self.end(r, m, x1, y1);
    }
    /// An S-curve from (x0, y0) to (x1, y1), level at both ends.
    fn s_curve(&mut self, r: usize, m: usize, (x0, y0): (f64, f64), (x1, y1): (f64, f64)) {
        if m >= self.n {
            return;
        }
        self.start(r, m, x0, y0);
        let xm = (x0 + x1) / 2.0;
        if let Some(p) = self.path(r, m) {
            let _ = write!(
                p,
                "C{} {} {} {} {} {}",
                c(xm),
                c(y0),
                c(xm),
                c(y1),
                c(x1),
                c(y1)
            );
        }
        self.end(r, m, x1, y1);
    }
}

/// An S-curve as a path (cells and the legend).
fn s_path(x0: f64, y0: f64, x1: f64, y1: f64) -> String {
    let xm = (x0 + x1) / 2.0;
    format!(
        "M{} {}C{} {} {} {} {} {}",
        c(x0),
        c(y0),
        c(xm),
        c(y0),
        c(xm),
        c(y1),
        c(x1),
        c(y1)
    )
}

/// A rail that leaves `y0` for `y0 + d` over `[x0, x0 + a]` (parabola),
/// runs level to `x1 - b`, and comes back to `y0` at `x1`: px.
fn waist_path(x0: f64, x1: f64, y0: f64, d: f64, a: f64, b: f64) -> String {
    let a = clampf(a, 0.0, (x1 - x0).max(0.0) / 2.0);
    let b = clampf(b, 0.0, (x1 - x0).max(0.0) / 2.0);
    let y = y0 + d;
    format!(
        "M{} {}Q{} {} {} {}H{}Q{} {} {} {}",
        c(x0),
        c(y0),
        c(x0 + a / 2.0),
        c(y),
        c(x0 + a),
        c(y),
        c(x1 - b),
        c(x1 - b / 2.0),
        c(y),
        c(x1),
        c(y0)
    )
}

fn finite(c: &Component) -> bool {
    c.x_um.is_finite() && c.length_um.is_finite() && c.y_um.is_finite()
}

fn mode_name(fp: &Floorplan, m: usize) -> String {
    fp.modes.get(m).cloned().unwrap_or_else(|| format!("m{m}"))
}

fn modes_text(fp: &Floorplan, modes: &[usize]) -> String {
    modes
        .iter()
        .map(|&m| mode_name(fp, m))
        .collect::<Vec<_>>()
        .join(" / ")
}

fn cell_kind_text(d: &CellDesign) -> &'static str {
    match d {
        CellDesign::Geometric(_) => "geometric cell",
        CellDesign::Coupler(_) => "directional-coupler cell",
        CellDesign::Mzi(_) => "MZI cell",
    }
}

fn cell_labels(theta: f64) -> (String, String) {
    let short = format!("\u{3b8} {}", fig(theta, 3));
    let long = format!("{short} \u{b7} {} %", fig(100.0 * theta.sin().powi(2), 1));
    (long, short)
}

fn frame(fp: &Floorplan) -> Frame {
    let n = fp
        .components
        .iter()
        .flat_map(|c| c.modes.iter().copied())
        .filter(|&m| m < 100_000)
        .map(|m| m + 1)
        .max()
        .unwrap_or(0)
        .max(fp.modes.len());
    let pitch = if fp.pitch_um.is_finite() && fp.pitch_um > 0.0 {
        fp.pitch_um
    } else {
        1.0
    };
    let ppitch = if n <= 12 { 36.0 } else { 32.0 };
    let sy = ppitch / pitch;
    let far = fp
        .components
        .iter()
        .filter(|c| finite(c))
        .map(|c| c.x_um + c.length_um.max(0.0))
        .fold(0.0f64, f64::max);
    let len = if fp.length_um.is_finite() && fp.length_um > 0.0 {
        fp.length_um.max(far)
    } else {
        far
    };
    let len = if len > 0.0 && len.is_finite() {
        len
    } else {
        1.0
    };
    let want = ((len * SX_MIN / ROW_W).ceil() as usize).clamp(1, MAX_ROWS);
    let mut breaks = vec![0.0];
    if want > 1 {
        let mut cand: Vec<f64> = fp
            .columns
            .iter()
            .map(|r| r.x_um)
            .chain(std::iter::once(fp.final_section.x_um))
            .filter(|x| x.is_finite() && *x > 0.0 && *x < len)
            .collect();
        cand.sort_by(|a, b| a.total_cmp(b));
        cand.dedup();
        for k in 1..want {
            let t = k as f64 * len / want as f64;
            let last = breaks.last().copied().unwrap_or(0.0);
            let best = cand
                .iter()
                .copied()
                .filter(|&x| x > last + 1e-9)
                .min_by(|a, b| (a - t).abs().total_cmp(&(b - t).abs()));
            if let Some(b) = best {
                breaks.push(b);
            }
        }
    }
    let spans: Vec<(f64, f64)> = breaks
        .iter()
        .enumerate()
        .map(|(i, &a)| (a, breaks.get(i + 1).copied().unwrap_or(len)))
        .collect();
    let longest = spans
        .iter()
        .map(|(a, b)| b - a)
        .fold(0.0f64, f64::max)
        .max(1e-9);
    let sx = (ROW_W / longest).min(sy).max(1e-9);
    let wrapped = spans.len() > 1;
    let name_w = (0..n)
        .map(|m| text_w(&short(&mode_name(fp, m)), MODE_PT))
        .fold(0.0f64, f64::max)
        .max(text_w("column", LABEL_PT));
    let left = (name_w + 30.0).clamp(70.0, 260.0);
    let die_h = (n as f64 + 1.0) * ppitch;
    let mut top = HEADER_H;
    let rows = spans
        .iter()
        .map(|&(x0, x1)| {
            let t = top;
            let die_top = t + if wrapped { CAPTION_H } else { 0.0 } + STRIP_H;
            top = die_top + die_h + ROW_GAP;
            Row {
                x0,
                x1,
                top: t,
                die_top,
            }
        })
        .collect();
    Frame {
        n,
        pitch,
        sx,
        sy,
        ppitch,
        left,
        rows,
    }
}

fn render(fp: &Floorplan) -> Drawing {
    let f = frame(fp);
    let n = f.n;
    let nrows = f.rows.len();
    let w_um = fp.guide_width_nm * 1e-3;
    let w_um = if w_um.is_finite() && w_um > 0.0 {
        w_um
    } else {
        0.5
    };
    let mut order: Vec<usize> = (0..fp.components.len())
        .filter(|&i| finite(&fp.components[i]))
        .collect();
    order.sort_by(|&a, &b| {
        let (ca, cb) = (&fp.components[a], &fp.components[b]);
        ca.x_um
            .total_cmp(&cb.x_um)
            .then(ca.modes.first().cmp(&cb.modes.first()))
            .then(a.cmp(&b))
    });
    let box_margin = 0.15 * f.ppitch;
    let heater_h = 0.3 * f.ppitch;

    // 1. Labels: cells first, then phase shifters; each where it fits.
    let mut boxes = Boxes::default();
    let mut label: Vec<Option<(String, f64, f64)>> = vec![None; fp.components.len()];
    for pass in 0..2 {
        for &i in &order {
            let cp = &fp.components[i];
            let r = f.row_of(cp.x_um);
            let (xa, xb) = (f.x(r, cp.x_um), f.x(r, cp.x_um + cp.length_um.max(0.0)));
            let span = xb - xa;
            let (lo, hi) = (f.left + 2.0, f.left + f.row_px(r) - 2.0);
            let candidates: Vec<(String, f64)> = match (&cp.kind, pass) {
                (Kind::Cell { theta, .. }, 0) => {
                    let (long, short) = cell_labels(*theta);
                    vec![(long, span + 10.0), (short, span + 16.0)]
                }
                (
                    Kind::PhaseShifter {
                        tuning, power_mw, ..
                    },
                    1,
                ) => {
                    let t = match tuning {
                        Tuning::Thermal => {
                            // Small powers keep two decimals, not to read 0.0.
                            let d = if power_mw.abs() < 0.095 { 2 } else { 1 };
                            format!("{} mW", fig(*power_mw, d))
                        }
                        Tuning::Passive => format!("{} rad", fig(cp.phase_rad, 2)),
                    };
                    // A passive section is short: its label may reach past it
                    // while it overlaps no other.
                    let slack = if *tuning == Tuning::Passive {
                        50.0
                    } else {
                        6.0
                    };
                    vec![(t, span + slack)]
                }
                _ => continue,
            };
            let Some(&m0) = cp.modes.first() else {
                continue;
            };
            let top_rail = f.y(r, f.rail(m0));
            let base = match cp.kind {
                Kind::Cell { .. } => top_rail - box_margin - 4.0,
                _ => top_rail - heater_h / 2.0 - 3.0,
            };
            for (t, room) in candidates {
                let w = text_w(&t, LABEL_PT);
                if w > room {
                    continue;
                }
                let cx = clampf(
                    (xa + xb) / 2.0,
                    lo + w / 2.0,
                    (hi - w / 2.0).max(lo + w / 2.0),
                );
                if boxes.take(label_box(cx, base, w, LABEL_PT)) {
                    label[i] = Some((t, cx, base));
                    break;
                }
            }
        }
    }

    // 2. The drawing, by layers.
    let mut die = String::new();
    let mut bands = String::new();
    let mut strip = String::new();
    let mut balance = String::new();
    let mut cells = String::new();
    let mut aux = String::new();
    let mut marks = String::new();
    let mut heaters = String::new();
    let mut ports = String::new();
    let mut pen = Pen::new(n, nrows);
    let mut cur: Vec<f64> = (0..n).map(|m| f.rail(m)).collect();
    let mut seen = Seen::default();
    for &i in &order {
        let cp = &fp.components[i];
        let r = f.row_of(cp.x_um);
        let len = cp.length_um.max(0.0);
        let (xa, xb) = (f.x(r, cp.x_um), f.x(r, cp.x_um + len));
        let ym = |m: usize, cur: &[f64]| cur.get(m).copied().unwrap_or(0.0);
        match &cp.kind {
            Kind::Port { side } => {
                let Some(&m) = cp.modes.first() else { continue };
                let y = f.y(r, ym(m, &cur));
                let _ = write!(
                    ports,
                    "<rect x=\"{}\" y=\"{}\" width=\"4\" height=\"{}\" fill=\"{}\"><title>port {} ({} facet)</title></rect>",
                    c(if *side == Side::Input { xa - 4.0 } else { xa }),
                    c(y - 0.2 * f.ppitch),
                    c(0.4 * f.ppitch),
                    colour::PORT,
                    esc(&mode_name(fp, m)),
                    if *side == Side::Input {
                        "input"
                    } else {
                        "output"
                    }
                );
                let name = short(&mode_name(fp, m));
                match side {
                    Side::Input => text(
                        &mut ports,
                        xa - 9.0,
                        y + 0.36 * MODE_PT,
                        MODE_PT,
                        colour::TEXT,
                        "end",
                        &name,
                    ),
                    Side::Output => text(
                        &mut ports,
                        xa + 9.0,
                        y + 0.36 * MODE_PT,
                        MODE_PT,
                        colour::TEXT,
                        "start",
                        &name,
                    ),
                }
            }
            Kind::Waveguide {
                role, dummy_bends, ..
            } => {
                for &m in &cp.modes {
                    let y = f.y(r, ym(m, &cur));
                    if len > 0.0 {
                        pen.line(r, m, (xa, y), (xb, y));
                    }
                    if *role == WaveguideRole::Balance && len > 0.0 {
                        seen.balance = true;
                        let h = 0.26 * f.ppitch;
                        let _ = write!(
                            balance,
                            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" rx=\"{}\"><title>{}: balancing section on {}, path {} um{}</title></rect>",
                            c(xa),
                            c(y - h / 2.0),
                            c(xb - xa),
                            c(h),
                            c(h / 2.0),
                            esc(&cp.id),
                            esc(&mode_name(fp, m)),
                            fig(cp.path_um, 2),
                            if *dummy_bends > 0 {
                                format!(", {dummy_bends} dummy bends")
                            } else {
                                String::new()
                            }
                        );
                    }
                }
            }
            Kind::Bend { offset_um, .. } => {
                seen.bend = true;
                for &m in &cp.modes {
                    let y0 = ym(m, &cur);
                    let d = if offset_um.is_finite() {
                        *offset_um
                    } else {
                        0.0
                    };
                    pen.s_curve(r, m, (xa, f.y(r, y0)), (xb, f.y(r, y0 + d)));
                    if let Some(v) = cur.get_mut(m) {
                        *v = y0 + d;
                    }
                }
            }
            Kind::PhaseShifter {
                tuning,
                power_mw,
                widened_um,
            } => {
                for &m in &cp.modes {
                    let y = f.y(r, ym(m, &cur));
                    pen.line(r, m, (xa, y), (xb, y));
                    let (fill, edge, w, h, tip) = match tuning {
                        Tuning::Thermal => {
                            seen.heater = true;
                            (
                                colour::HEATER,
                                colour::HEATER_EDGE,
                                (xb - xa).max(1.0),
                                heater_h,
                                format!(
                                    "heater, phase {} rad, {} mW",
                                    fig(cp.phase_rad, 3),
                                    fig(*power_mw, 2)
                                ),
                            )
                        }
                        Tuning::Passive => {
                            seen.passive = true;
                            let wd = if widened_um.is_finite() {
                                clampf(*widened_um, 0.0, len)
                            } else {
                                len
                            };
                            (
                                colour::PASSIVE,
                                colour::PASSIVE,
                                (wd * f.sx).max(1.0),
                                0.22 * f.ppitch,
                                format!(
                                    "passive phase section, phase {} rad, widened over {} um",
                                    fig(cp.phase_rad, 3),
                                    fig(*widened_um, 1)
                                ),
                            )
                        }
                    };
                    let _ = write!(
                        heaters,
                        "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" rx=\"1.5\" fill=\"{}\" fill-opacity=\"0.8\" stroke=\"{}\" stroke-width=\"0.6\"><title>{}: {} on {}</title></rect>",
                        c(xa),
                        c(y - h / 2.0),
                        c(w),
                        c(h),
                        fill,
                        edge,
                        esc(&cp.id),
                        esc(&tip),
                        esc(&mode_name(fp, m))
                    );
                }
                if let Some((t, x, y)) = &label[i] {
                    text(&mut heaters, *x, *y, LABEL_PT, colour::TEXT, "middle", t);
                }
            }
            Kind::Crossing { swap, .. } => {
                seen.crossing = true;
                if let [u, l] = cp.modes[..] {
                    let (yu, yl) = (ym(u, &cur), ym(l, &cur));
                    pen.s_curve(r, u, (xa, f.y(r, yu)), (xb, f.y(r, yl)));
                    pen.s_curve(r, l, (xa, f.y(r, yl)), (xb, f.y(r, yu)));
                    // The rails are positions: past the crossing each mode's
                    // rail carries on from its own place.
                    let ymid = f.y(r, (yu + yl) / 2.0);
                    let _ = write!(
                        marks,
                        "<circle cx=\"{}\" cy=\"{}\" r=\"3.2\" fill=\"{}\" stroke=\"#ffffff\" stroke-width=\"1\"><title>{}: crossing of {}{}</title></circle>",
                        c((xa + xb) / 2.0),
                        c(ymid),
                        colour::CROSSING,
                        esc(&cp.id),
                        esc(&modes_text(fp, &cp.modes)),
                        if *swap { " (routing swap)" } else { "" }
                    );
                } else {
                    for &m in &cp.modes {
                        let y = f.y(r, ym(m, &cur));
                        pen.line(r, m, (xa, y), (xb, y));
                    }
                }
            }
            Kind::Terminator { taper_um, side } => {
                seen.terminator = true;
                let t = if taper_um.is_finite() {
                    clampf(*taper_um, 0.0, len.max(*taper_um))
                } else {
                    len
                };
                let (tip, base) = match side {
                    Side::Input => (xa, xa + t * f.sx),
                    Side::Output => (xa + t * f.sx, xa),
                };
                let y = f.y(r, cp.y_um);
                let h = clampf(w_um * f.sy, 3.0, 0.25 * f.ppitch) / 2.0;
                let _ = write!(
                    aux,
                    "<path d=\"M{} {}L{} {}L{} {}Z\" fill=\"{}\"><title>{}: taper of the auxiliary guide, {} um</title></path>",
                    c(tip),
                    c(y),
                    c(base),
                    c(y - h),
                    c(base),
                    c(y + h),
                    colour::AUX,
                    esc(&cp.id),
                    fig(*taper_um, 1)
                );
            }
            Kind::Cell {
                cell,
                theta,
                phi,
                swap,
                element,
            } => {
                let (u, l) = match cp.modes[..] {
                    [u, l] => (u, l),
                    [u] => (u, u),
                    _ => continue,
                };
                let (yu, yl) = (ym(u, &cur), ym(l, &cur));
                let (pu, pl) = (f.y(r, yu), f.y(r, yl));
                let (top, bottom) = (pu.min(pl) - box_margin, pu.max(pl) + box_margin);
                let mut tip = format!(
                    "{}: {} on {}, \u{3b8} {} rad, cross power {} %, length {} um",
                    cp.id,
                    cell_kind_text(cell),
                    modes_text(fp, &cp.modes),
                    fig(*theta, 4),
                    fig(100.0 * theta.sin().powi(2), 2),
                    fig(cp.length_um, 1)
                );
                let _ = write!(tip, ", mesh \u{3c6} {} rad", fig(*phi, 3));
                if let Some(e) = element {
                    let _ = write!(tip, ", element {e}");
                }
                if *swap {
                    tip.push_str(", routing swap");
                }
                let mut inner = String::new();
                let rail_attr = format!(
                    "fill=\"none\" stroke=\"{}\" stroke-width=\"1.6\"",
                    colour::RAIL
                );
                let half = (pl - pu) / 2.0;
                match &**cell {
                    CellDesign::Geometric(rc) => {
                        seen.geometric = true;
                        let d = &rc.design;
                        let (gu0, gl0) = d.gaps_nm(0.0);
                        let (gum, glm) = d.gaps_nm(d.length_um / 2.0);
                        let du = clampf((gu0 - gum) * 1e-3 * f.sy, 0.0, (half - 2.0).max(0.0));
                        let dl = clampf((gl0 - glm) * 1e-3 * f.sy, 0.0, (half - 2.0).max(0.0));
                        let hl = (xb - xa) / 2.0;
                        let _ = write!(
                            inner,
                            "<path d=\"M{} {}H{}\" stroke=\"{}\" stroke-width=\"1.3\"/>",
                            c(xa),
                            c(pu + half),
                            c(xb),
                            colour::AUX
                        );
                        for (p, dd) in [(pu, du), (pl, -dl)] {
                            let _ = write!(
                                inner,
                                "<path d=\"{}\" {rail_attr}/>",
                                waist_path(xa, xb, p, dd, hl, hl)
                            );
                        }
                        let _ = write!(
                            tip,
                            ", gaps {} / {} nm at the waist",
                            fig(d.gap_upper_nm, 0),
                            fig(d.gap_lower_nm, 0)
                        );
                    }
                    CellDesign::Coupler(k) => {
                        seen.coupler = true;
                        let wst = clampf((w_um + k.gap_nm * 1e-3) / 2.0 * f.sy, 1.0, half.max(1.0));
                        let reach = clampf(k.bend_reach_um * f.sx, 0.0, (xb - xa) / 2.0);
                        for (p, dd) in [(pu, half - wst), (pl, -(half - wst))] {
                            let _ = write!(
                                inner,
                                "<path d=\"{}\" {rail_attr}/>",
                                waist_path(xa, xb, p, dd, reach, reach)
                            );
                        }
                        let _ = write!(
                            tip,
                            ", gap {} nm, straight {} um",
                            fig(k.gap_nm, 0),
                            fig(k.straight_um, 1)
                        );
                    }
                    CellDesign::Mzi(z) => {
                        seen.mzi = true;
                        let k = &z.coupler;
                        let wst = clampf((w_um + k.gap_nm * 1e-3) / 2.0 * f.sy, 1.0, half.max(1.0));
                        let lc = clampf(k.length_um * f.sx, 0.0, (xb - xa) / 2.0);
                        let reach = clampf(k.bend_reach_um * f.sx, 0.0, lc / 2.0);
                        for (a, b) in [(xa, xa + lc), (xb - lc, xb)] {
                            for (p, dd) in [(pu, half - wst), (pl, -(half - wst))] {
                                let _ = write!(
                                    inner,
                                    "<path d=\"{}\" {rail_attr}/>",
                                    waist_path(a, b, p, dd, reach, reach)
                                );
                            }
                        }
                        for p in [pu, pl] {
                            let _ = write!(
                                inner,
                                "<path d=\"M{} {}H{}\" {rail_attr}/>",
                                c(xa + lc),
                                c(p),
                                c(xb - lc)
                            );
                        }
                        let arm = (xb - xa) - 2.0 * lc;
                        if arm > 0.0 {
                            let _ = write!(
                                inner,
                                "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" rx=\"1.5\" fill=\"{}\" fill-opacity=\"0.8\" stroke=\"{}\" stroke-width=\"0.6\"/>",
                                c(xa + lc + 0.1 * arm),
                                c(pu - heater_h / 2.0),
                                c(0.8 * arm),
                                c(heater_h),
                                colour::HEATER,
                                colour::HEATER_EDGE
                            );
                        }
                        let ph = if z.phase_rad.is_finite() {
                            z.phase_rad.rem_euclid(TAU)
                        } else {
                            0.0
                        };
                        let _ = write!(
                            tip,
                            ", internal phase {} rad ({} mW)",
                            fig(z.phase_rad, 3),
                            fig(fp.process.p_pi_mw * ph / PI, 2)
                        );
                    }
                }
                let _ = write!(
                    cells,
                    "<g class=\"cell\" data-id=\"{}\"><title>{}</title><rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" rx=\"3\" fill=\"{}\" stroke=\"{}\" stroke-width=\"0.8\"/>{}",
                    esc(&cp.id),
                    esc(&tip),
                    c(xa),
                    c(top),
                    c((xb - xa).max(0.5)),
                    c(bottom - top),
                    colour::CELL,
                    colour::CELL_EDGE,
                    inner
                );
                if let Some((t, x, y)) = &label[i] {
                    text(&mut cells, *x, *y, LABEL_PT, colour::TEXT, "middle", t);
                }
                cells.push_str("</g>");
                // The rails inside the cell are the group's: the rail paths
                // start afresh after it.
                if let Some(p) = pen.at.get_mut(u) {
                    *p = None;
                }
                if let Some(p) = pen.at.get_mut(l) {
                    *p = None;
                }
            }
        }
        // Crossings put the rails back in their places.
        if let Kind::Crossing { .. } = cp.kind {
            for &m in &cp.modes {
                let y0 = f.rail(m);
                if let Some(v) = cur.get_mut(m) {
                    *v = y0;
                }
            }
        }
    }

    // 3. Die, column bands and numbers, row captions, mode names at breaks.
    for (r, row) in f.rows.iter().enumerate() {
        let (xa, xb) = (f.x(r, row.x0), f.x(r, row.x1));
        let (ya, yb) = (row.die_top, row.die_top + f.die_h());
        let _ = write!(
            die,
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{}\"/>",
            c(xa),
            c(ya),
            c(xb - xa),
            c(yb - ya),
            colour::DIE
        );
        let edge = |x: f64, facet: bool, s: &mut String| {
            let _ = write!(
                s,
                "<path d=\"M{} {}V{}\" stroke=\"{}\" stroke-width=\"{}\"{}/>",
                c(x),
                c(ya),
                c(yb),
                colour::DIE_EDGE,
                if facet { "1.2" } else { "0.8" },
                if facet {
                    ""
                } else {
                    " stroke-dasharray=\"4 3\""
                }
            );
        };
        let _ = write!(
            die,
            "<path d=\"M{} {}H{}M{} {}H{}\" stroke=\"{}\" stroke-width=\"1\"/>",
            c(xa),
            c(ya),
            c(xb),
            c(xa),
            c(yb),
            c(xb),
            colour::DIE_EDGE
        );
        edge(xa, r == 0, &mut die);
        edge(xb, r + 1 == nrows, &mut die);
        if nrows > 1 {
            text(
                &mut strip,
                xa,
                row.top + 13.0,
                11.0,
                colour::GREY,
                "start",
                &format!(
                    "row {} of {}: x {} to {} \u{b5}m",
                    r + 1,
                    nrows,
                    fig(row.x0, 1),
                    fig(row.x1, 1)
                ),
            );
        }
        text(
            &mut strip,
            f.left - 9.0,
            row.die_top - 7.0,
            LABEL_PT,
            colour::GREY,
            "end",
            "column",
        );
        for m in 0..n {
            let y = f.y(r, f.rail(m)) + 0.36 * MODE_PT;
            let name = short(&mode_name(fp, m));
            if r > 0 {
                text(&mut ports, xa - 9.0, y, MODE_PT, colour::GREY, "end", &name);
            }
            if r + 1 < nrows {
                text(
                    &mut ports,
                    xb + 9.0,
                    y,
                    MODE_PT,
                    colour::GREY,
                    "start",
                    &name,
                );
            }
        }
    }
    let mut numbers: Vec<Boxes> = (0..nrows).map(|_| Boxes::default()).collect();
    let mut shade = false;
    for col in fp.columns.iter().chain(std::iter::once(&fp.final_section)) {
        if !(col.x_um.is_finite() && col.length_um.is_finite() && col.length_um > 0.0) {
            continue;
        }
        let r = f.row_of(col.x_um);
        let (xa, xb) = (f.x(r, col.x_um), f.x(r, col.x_um + col.length_um));
        let ya = f.rows.get(r).map_or(0.0, |w| w.die_top);
        let is_final = col.index >= fp.columns.len();
        // Bands alternate over the columns that hold cells or phase
        // sections; a column of crossings alone keeps the die's colour.
        let wide = col.cells > 0 || col.phase_section_um > 0.0 || is_final;
        if wide {
            shade = !shade;
        }
        let _ = write!(
            bands,
            "<path d=\"M{} {}V{}\" stroke=\"{}\" stroke-width=\"0.6\"/>",
            c(xa),
            c(ya),
            c(ya + f.die_h()),
            colour::DIVIDER
        );
        if wide && !shade {
            let _ = write!(
                bands,
                "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{}\"/>",
                c(xa),
                c(ya),
                c(xb - xa),
                c(f.die_h()),
                colour::BAND
            );
        }
        let _ = write!(
            strip,
            "<path d=\"M{} {}V{}\" stroke=\"{}\" stroke-width=\"0.8\"/>",
            c(xa),
            c(ya - 6.0),
            c(ya),
            colour::DIE_EDGE
        );
        let t = if is_final {
            "out".to_owned()
        } else {
            col.index.to_string()
        };
        let w = text_w(&t, LABEL_PT);
        let cx = (xa + xb) / 2.0;
        let base = ya - 7.0;
        if let Some(b) = numbers.get_mut(r)
            && b.take(label_box(cx, base, w + 4.0, LABEL_PT))
        {
            text(&mut strip, cx, base, LABEL_PT, colour::GREY, "middle", &t);
        }
    }

    // 4. Rails.
    let mut rails = String::new();
    for p in pen.paths.iter().filter(|p| !p.is_empty()) {
        let _ = write!(rails, "<path d=\"{p}\"/>");
    }

    // 5. Footer: scale bars and the note.
    let rows_bottom = f.rows.last().map_or(HEADER_H, |w| w.die_top + f.die_h());
    let mut foot = String::new();
    let fy = rows_bottom + 34.0;
    let xbar = nice(160.0 / f.sx);
    let xbar_px = xbar * f.sx;
    let x0 = f.left;
    let _ = write!(
        foot,
        "<g id=\"scale\" stroke=\"{t}\" stroke-width=\"1.4\" fill=\"none\"><path d=\"M{} {}H{}M{} {}V{}M{} {}V{}\"/>",
        c(x0),
        c(fy),
        c(x0 + xbar_px),
        c(x0),
        c(fy - 5.0),
        c(fy + 5.0),
        c(x0 + xbar_px),
        c(fy - 5.0),
        c(fy + 5.0),
        t = colour::TEXT
    );
    let ybar = nice(2.0 * f.pitch);
    let ybar_px = ybar * f.sy;
    let yx = x0 + xbar_px + 90.0;
    let _ = write!(
        foot,
        "<path d=\"M{} {}V{}M{} {}H{}M{} {}H{}\"/></g>",
        c(yx),
        c(fy + 8.0 - ybar_px),
        c(fy + 8.0),
        c(yx - 5.0),
        c(fy + 8.0 - ybar_px),
        c(yx + 5.0),
        c(yx - 5.0),
        c(fy + 8.0),
        c(yx + 5.0)
    );
    let um = |v: f64| {
        if v >= 1.0 {
            format!("{} \u{b5}m", fix(v, 0))
        } else {
            format!("{} \u{b5}m", fig(v, 3))
        }
    };
    text(
        &mut foot,
        x0 + xbar_px / 2.0,
        fy - 9.0,
        11.0,
        colour::TEXT,
        "middle",
        &format!("x {}", um(xbar)),
    );
    text(
        &mut foot,
        yx + 9.0,
        fy + 8.0 - ybar_px / 2.0 + 4.0,
        11.0,
        colour::TEXT,
        "start",
        &format!("y {}", um(ybar)),
    );
    let ratio = f.sy / f.sx;
    let mut note = if ratio > 1.05 {
        format!("x compressed {}:1 against y", fig(ratio, 1))
    } else {
        "x and y at one scale".to_owned()
    };
    let _ = write!(
        note,
        " (x {} px/\u{b5}m, y {} px/\u{b5}m); rail pitch {} \u{b5}m; bends and cell gaps drawn to the y scale, guide widths not to scale",
        fig(f.sx, 3),
        fig(f.sy, 2),
        fig(f.pitch, 2)
    );
    let nx = yx + 70.0;
    text(&mut foot, nx, fy - 2.0, 11.0, colour::GREY, "start", &note);
    if nrows > 1 {
        text(
            &mut foot,
            nx,
            fy + 14.0,
            11.0,
            colour::GREY,
            "start",
            &format!(
                "long chip: drawn in {nrows} rows broken at column boundaries; each rail goes on at the left of the next row"
            ),
        );
    }
    let note_w = nx + text_w(&note, 11.0) + 20.0;

    // 6. Legend.
    let items = legend_items(&seen);
    let item_w = 330.0;
    let content_w = (0..nrows).map(|r| f.row_px(r)).fold(0.0f64, f64::max);
    let right = (0..n)
        .map(|m| text_w(&short(&mode_name(fp, m)), MODE_PT))
        .fold(0.0f64, f64::max)
        + 30.0;
    let title = format!("{} \u{2014} floorplan", fp.chip);
    let sub = format!(
        "process {} \u{b7} strategy {} \u{b7} mesh {} \u{b7} cells {} \u{b7} {} \u{b5}m \u{d7} {} \u{b5}m \u{b7} heater power {} mW",
        fp.process.name,
        fp.strategy,
        fp.mesh,
        fp.cell_kind.name(),
        fig(fp.length_um, 1),
        fig(fp.width_um, 1),
        fig(fp.heater_power_mw, 1)
    );
    let width = (f.left + content_w + right.max(40.0))
        .max(text_w(&sub, 12.0) + 60.0)
        .max(text_w(&title, 17.0) + 60.0)
        .max(note_w)
        .max(2.0 * item_w + 60.0);
    let per_line = (((width - 60.0) / item_w).floor() as usize).clamp(1, 4);
    let ly = fy + 44.0;
    let lines = items.len().div_ceil(per_line);
    let lh = 26.0;
    let legend_h = 30.0 + lines as f64 * lh + 8.0;
    let mut legend = String::new();
    let lx = 20.0;
    let _ = write!(
        legend,
        "<g id=\"legend\"><rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" rx=\"4\" fill=\"#ffffff\" stroke=\"{}\" stroke-width=\"0.8\"/>",
        c(lx),
        c(ly),
        c(per_line as f64 * item_w + 20.0),
        c(legend_h),
        colour::DIE_EDGE
    );
    text(
        &mut legend,
        lx + 12.0,
        ly + 19.0,
        12.0,
        colour::TEXT,
        "start",
        "Legend",
    );
    for (k, (sym, what)) in items.iter().enumerate() {
        let ix = lx + 12.0 + (k % per_line) as f64 * item_w;
        let iy = ly + 30.0 + (k / per_line) as f64 * lh + lh / 2.0;
        legend.push_str(&symbol(*sym, ix, iy));
        text(
            &mut legend,
            ix + 56.0,
            iy + 4.0,
            11.0,
            colour::TEXT,
            "start",
            what,
        );
    }
    legend.push_str("</g>");
    let height = ly + legend_h + 20.0;

    // 7. The document.
    let mut s = String::with_capacity(
        die.len()
            + bands.len()
            + strip.len()
            + balance.len()
            + cells.len()
            + aux.len()
            + rails.len()
            + heaters.len()
            + ports.len()
            + 4096,
    );
    let _ = write!(
        s,
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" font-family=\"DejaVu Sans, Verdana, Arial, sans-serif\">\n",
        w = c(width.ceil()),
        h = c(height.ceil())
    );
    let _ = writeln!(
        s,
        "<title>{}</title>",
        esc(&format!("floorplan of chip {}", fp.chip))
    );
    let _ = writeln!(s, "<desc>{}</desc>", esc(&sub));
    let _ = writeln!(
        s,
        "<rect width=\"100%\" height=\"100%\" fill=\"{}\"/>",
        colour::PAPER
    );
    let _ = write!(s, "<g id=\"title\">");
    let _ = write!(
        s,
        "<text x=\"20\" y=\"28\" font-size=\"17\" font-weight=\"bold\" fill=\"{}\">{}</text>",
        colour::TEXT,
        esc(&title)
    );
    text(&mut s, 20.0, 50.0, 12.0, colour::TEXT, "start", &sub);
    let _ = writeln!(s, "</g>");
    let _ = writeln!(s, "<g id=\"die\">{die}</g>");
    let _ = writeln!(s, "<g id=\"columns\">{bands}{strip}</g>");
    let _ = writeln!(
        s,
        "<g id=\"balancing\" fill=\"{}\" fill-opacity=\"0.5\">{balance}</g>",
        colour::BALANCE
    );
    let _ = writeln!(s, "<g id=\"cells\">{cells}</g>");
    let _ = writeln!(
        s,
        "<g id=\"rails\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.6\" stroke-linejoin=\"round\" stroke-linecap=\"round\">{rails}</g>",
        colour::RAIL
    );
    let _ = writeln!(s, "<g id=\"terminators\">{aux}</g>");
    let _ = writeln!(s, "<g id=\"crossings\">{marks}</g>");
    let _ = writeln!(s, "<g id=\"phase-shifters\">{heaters}</g>");
    let _ = writeln!(s, "<g id=\"ports\">{ports}</g>");
    let _ = writeln!(s, "{foot}");
    let _ = writeln!(s, "{legend}");
    s.push_str("</svg>\n");
    Drawing {
        svg: s,
        labels: boxes.0,
        rows: nrows,
    }
}

/// What kinds of component the chip has (for the legend).
#[derive(Default)]
struct Seen {
    bend: bool,
    geometric: bool,
    coupler: bool,
    mzi: bool,
    terminator: bool,
    heater: bool,
    passive: bool,
    crossing: bool,
    balance: bool,
}

#[derive(Clone, Copy)]
enum Sym {
    Rail,
    Bend,
    Geometric,
    Coupler,
    Mzi,
    Terminator,
    Heater,
    Passive,
    Crossing,
    Balance,
    Port,
    Column,
    Label,
}

fn legend_items(seen: &Seen) -> Vec<(Sym, &'static str)> {
    let mut v = vec![
        (Sym::Rail, "rail: one waveguide per mode"),
        (Sym::Port, "port at a facet, with the mode name"),
    ];
    if seen.bend {
        v.push((Sym::Bend, "S-bend (cell lead-in / lead-out)"));
    }
    if seen.geometric {
        v.push((
            Sym::Geometric,
            "geometric cell: rails bow to an auxiliary guide",
        ));
    }
    if seen.terminator {
        v.push((Sym::Terminator, "taper ending an auxiliary guide"));
    }
    if seen.coupler {
        v.push((Sym::Coupler, "directional-coupler cell"));
    }
    if seen.mzi {
        v.push((Sym::Mzi, "MZI cell: two couplers, heater on the arm"));
    }
    v.push((Sym::Column, "column: band and number as in report.txt"));
    if seen.heater {
        v.push((Sym::Heater, "thermal phase shifter, label: power"));
    }
    if seen.passive {
        v.push((Sym::Passive, "passive phase section, label: phase"));
    }
    if seen.crossing {
        v.push((Sym::Crossing, "waveguide crossing: two rails swap"));
    }
    if seen.balance {
        v.push((Sym::Balance, "balancing section on an idle rail"));
    }
    v.push((
        Sym::Label,
        "cell label: split \u{3b8} in rad \u{b7} cross power",
    ));
    v
}

/// A legend symbol, 44 px wide, centred on y.
fn symbol(sym: Sym, x: f64, y: f64) -> String {
    let rail = |d: &str| {
        format!(
            "<path d=\"{d}\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.6\"/>",
            colour::RAIL
        )
    };
    let line = format!("M{} {}H{}", c(x), c(y), c(x + 44.0));
    match sym {
        Sym::Rail => rail(&line),
        Sym::Bend => rail(&s_path(x, y + 5.0, x + 44.0, y - 5.0)),
        Sym::Geometric => {
            let mut s = format!(
                "<rect x=\"{}\" y=\"{}\" width=\"44\" height=\"20\" rx=\"3\" fill=\"{}\" stroke=\"{}\" stroke-width=\"0.8\"/>",
                c(x),
                c(y - 10.0),
                colour::CELL,
                colour::CELL_EDGE
            );
            let _ = write!(
                s,
                "<path d=\"M{} {}H{}\" stroke=\"{}\" stroke-width=\"1.3\"/>",
                c(x),
                c(y),
                c(x + 44.0),
                colour::AUX
            );
            s += &rail(&waist_path(x, x + 44.0, y - 7.0, 4.0, 22.0, 22.0));
            s += &rail(&waist_path(x, x + 44.0, y + 7.0, -4.0, 22.0, 22.0));
            s
        }
        Sym::Coupler | Sym::Mzi => {
            let mut s = format!(
                "<rect x=\"{}\" y=\"{}\" width=\"44\" height=\"20\" rx=\"3\" fill=\"{}\" stroke=\"{}\" stroke-width=\"0.8\"/>",
                c(x),
                c(y - 10.0),
                colour::CELL,
                colour::CELL_EDGE
            );
            if let Sym::Coupler = sym {
                s += &rail(&waist_path(x, x + 44.0, y - 7.0, 5.0, 12.0, 12.0));
                s += &rail(&waist_path(x, x + 44.0, y + 7.0, -5.0, 12.0, 12.0));
            } else {
                for (a, b) in [(x, x + 14.0), (x + 30.0, x + 44.0)] {
                    s += &rail(&waist_path(a, b, y - 7.0, 5.0, 6.0, 6.0));
                    s += &rail(&waist_path(a, b, y + 7.0, -5.0, 6.0, 6.0));
                }
                s += &rail(&format!(
                    "M{} {}H{}M{} {}H{}",
                    c(x + 14.0),
                    c(y - 7.0),
                    c(x + 30.0),
                    c(x + 14.0),
                    c(y + 7.0),
                    c(x + 30.0)
                ));
                let _ = write!(
                    s,
                    "<rect x=\"{}\" y=\"{}\" width=\"12\" height=\"6\" fill=\"{}\" fill-opacity=\"0.8\"/>",
                    c(x + 16.0),
                    c(y - 10.0),
                    colour::HEATER
                );
            }
            s
        }
        Sym::Terminator => {
            let mut s = String::new();
            let _ = write!(
                s,
                "<path d=\"M{} {}H{}\" stroke=\"{}\" stroke-width=\"1.3\"/>",
                c(x + 20.0),
                c(y),
                c(x + 44.0),
                colour::AUX
            );
            let _ = write!(
                s,
                "<path d=\"M{} {}L{} {}L{} {}Z\" fill=\"{}\"/>",
                c(x + 4.0),
                c(y),
                c(x + 20.0),
                c(y - 3.0),
                c(x + 20.0),
                c(y + 3.0),
                colour::AUX
            );
            s
        }
        Sym::Heater | Sym::Passive => {
            let (fill, h) = if let Sym::Heater = sym {
                (colour::HEATER, 10.0)
            } else {
                (colour::PASSIVE, 8.0)
            };
            let mut s = rail(&line);
            let _ = write!(
                s,
                "<rect x=\"{}\" y=\"{}\" width=\"28\" height=\"{}\" rx=\"1.5\" fill=\"{}\" fill-opacity=\"0.8\"/>",
                c(x + 8.0),
                c(y - h / 2.0),
                c(h),
                fill
            );
            s
        }
        Sym::Crossing => {
            let mut s = rail(&s_path(x, y - 7.0, x + 44.0, y + 7.0));
            s += &rail(&s_path(x, y + 7.0, x + 44.0, y - 7.0));
            let _ = write!(
                s,
                "<circle cx=\"{}\" cy=\"{}\" r=\"3.2\" fill=\"{}\" stroke=\"#ffffff\" stroke-width=\"1\"/>",
                c(x + 22.0),
                c(y),
                colour::CROSSING
            );
            s
        }
        Sym::Balance => {
            let mut s = format!(
                "<rect x=\"{}\" y=\"{}\" width=\"36\" height=\"8\" rx=\"4\" fill=\"{}\" fill-opacity=\"0.6\"/>",
                c(x + 4.0),
                c(y - 4.0),
                colour::BALANCE
            );
            s += &rail(&line);
            s
        }
        Sym::Port => {
            let mut s = rail(&format!("M{} {}H{}", c(x + 22.0), c(y), c(x + 44.0)));
            let _ = write!(
                s,
                "<rect x=\"{}\" y=\"{}\" width=\"4\" height=\"12\" fill=\"{}\"/>",
                c(x + 18.0),
                c(y - 6.0),
                colour::PORT
            );
            s
        }
        Sym::Label => {
            let mut s = String::new();
            text(
                &mut s,
                x + 22.0,
                y + 4.0,
                LABEL_PT,
                colour::TEXT,
                "middle",
                "\u{3b8} \u{b7} %",
            );
            s
        }
        Sym::Column => {
            let mut s = format!(
                "<rect x=\"{}\" y=\"{}\" width=\"24\" height=\"12\" fill=\"{}\" stroke=\"{}\" stroke-width=\"0.5\"/>",
                c(x + 10.0),
                c(y - 1.0),
                colour::BAND,
                colour::DIE_EDGE
            );
            let _ = write!(
                s,
                "<text x=\"{}\" y=\"{}\" font-size=\"9\" fill=\"{}\" text-anchor=\"middle\">3</text>",
                c(x + 22.0),
                c(y - 4.0),
                colour::GREY
            );
            s
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cell::CellKind;
    use crate::compile::chip::{BuildOptions, StrategyChoice, build};
    use crate::compile::mesh::Strategy;

    fn chip(text: &str, o: BuildOptions) -> Floorplan {
        chip_on(text, "si220_wire", o)
    }

    fn chip_on(text: &str, process: &str, o: BuildOptions) -> Floorplan {
        let src = crate::source::Source::new("t.trl", text);
        let prog = crate::check(&src, &crate::circuit::NoFiles).expect("the circuit checks");
        let p = crate::process::presets::preset(process).expect("a preset");
        build(&prog.circuits[0], &p, o)
            .expect("the chip builds")
            .chosen
            .floorplan
    }

    fn bell(o: BuildOptions) -> Floorplan {
        chip(
            &std::fs::read_to_string("circuits/bell_pair.trl").expect("the example"),
            o,
        )
    }

    fn local() -> BuildOptions {
        BuildOptions {
            strategy: StrategyChoice::Only(Strategy::Local),
            ..Default::default()
        }
    }

    /// A chip of `n` modes applying a Haar-random unitary.
    fn haar_chip(n: usize, seed: u64, o: BuildOptions) -> Floorplan {
        let u = crate::optics::random::haar_unitary(
            n,
            &mut crate::optics::random::SplitMix64::new(seed),
        );
        let names: Vec<String> = (0..n).map(|m| format!("m{m}")).collect();
        let rows: Vec<String> = (0..n)
            .map(|i| {
                let e: Vec<String> = (0..n)
                    .map(|j| {
                        let z = u[(i, j)];
                        if z.im >= 0.0 {
                            format!("{} + {}*i", z.re, z.im)
                        } else {
                            format!("{} - {}*i", z.re, -z.im)
                        }
                    })
                    .collect();
                format!("[{}]", e.join(", "))
            })
            .collect();
        let text = format!(
            "chip haar{n} {{\n    process si220_wire\n    mode {}\n    unitary on m0 ... m{} = [\n{}\n]\n}}\n",
            names.join(", "),
            n - 1,
            rows.join(",\n")
        );
        chip(&text, o)
    }

    /// Well-formed XML, as far as this drawing uses it: one root element,
    /// balanced tags, quoted attributes without `<`, known entities only.
    fn well_formed(s: &str) -> Result<(), String> {
        fn entity_ok(t: &str) -> Result<(), String> {
            let mut rest = t;
            while let Some(k) = rest.find('&') {
                let tail = &rest[k + 1..];
                let end = tail.find(';').ok_or("an & without ;")?;
                let name = &tail[..end];
                let ok = matches!(name, "amp" | "lt" | "gt" | "quot" | "apos")
                    || (name.starts_with('#')
                        && name.len() > 1
                        && name[1..].chars().all(|c| c.is_ascii_hexdigit() || c == 'x'));
                if !ok {
                    return Err(format!("unknown entity &{name};"));
                }
                rest = &tail[end + 1..];
            }
            Ok(())
        }
        let mut stack: Vec<String> = Vec::new();
        let mut roots = 0;
        let mut i = 0;
        let b = s.as_bytes();
        while i < s.len() {
            if b[i] != b'<' {
                let next = s[i..].find('<').map_or(s.len(), |k| i + k);
                let t = &s[i..next];
                if t.contains('>') {
                    return Err("a stray >".into());
                }
                if stack.is_empty() && !t.trim().is_empty() {
                    return Err("text outside the root".into());
                }
                entity_ok(t)?;
                i = next;
                continue;
            }
            let rest = &s[i..];
            if rest.starts_with("<?") {
                let e = rest.find("?>").ok_or("an open <?")?;
                i += e + 2;
                continue;
            }
            if rest.starts_with("<!--") {
                let e = rest.find("-->").ok_or("an open comment")?;
                i += e + 3;
                continue;
            }
            // A tag: find its end outside quotes.
            let mut j = 1;
            let mut quote: Option<u8> = None;
            let rb = rest.as_bytes();
            while j < rb.len() {
                match (quote, rb[j]) {
                    (None, b'"') | (None, b'\'') => quote = Some(rb[j]),
                    (Some(q), ch) if ch == q => quote = None,
                    (Some(_), b'<') => return Err("< in an attribute".into()),
                    (None, b'>') => break,
                    _ => {}
                }
                j += 1;
            }
            if j >= rb.len() {
                return Err("an open tag".into());
            }
            let tag = &rest[1..j];
            i += j + 1;
            if let Some(name) = tag.strip_prefix('/') {
                let top = stack.pop().ok_or("a close tag without an open one")?;
                if top != name.trim() {
                    return Err(format!("</{}> closes <{}>", name.trim(), top));
                }
                continue;
            }
            let self_closing = tag.ends_with('/');
            let body = tag.trim_end_matches('/');
            let name: String = body.chars().take_while(|c| !c.is_whitespace()).collect();
            if name.is_empty()
                || !name
                    .chars()
                    .all(|c| c.is_alphanumeric() || c == '-' || c == ':' || c == '_')
            {
                return Err(format!("a bad tag name {name:?}"));
            }
            // Attributes: name="value" pairs.
            let mut attrs = &body[name.len()..];
            let mut names: Vec<String> = Vec::new();
            loop {
                attrs = attrs.trim_start();
                if attrs.is_empty() {
                    break;
                }
                let eq = attrs
                    .find('=')
                    .ok_or(format!("an attribute without = in <{name}>"))?;
                let an = attrs[..eq].trim().to_owned();
                if names.contains(&an) {
                    return Err(format!("attribute {an} twice in <{name}>"));
                }
                names.push(an);
                let v = attrs[eq + 1..].trim_start();
                let q = v.chars().next().ok_or("an attribute without a value")?;
                if q != '"' && q != '\'' {
                    return Err("an unquoted attribute".into());
                }
                let close = v[1..].find(q).ok_or("an open attribute value")?;
                entity_ok(&v[1..1 + close])?;
                attrs = &v[close + 2..];
            }
            if stack.is_empty() {
                roots += 1;
            }
            if !self_closing {
                stack.push(name);
            }
        }
        if !stack.is_empty() {
            return Err(format!("unclosed <{}>", stack.join("> <")));
        }
        if roots != 1 {
            return Err(format!("{roots} root elements"));
        }
        Ok(())
    }

    fn cells(fp: &Floorplan) -> usize {
        fp.components
            .iter()
            .filter(|c| matches!(c.kind, Kind::Cell { .. }))
            .count()
    }

    fn no_overlap(labels: &[[f64; 4]]) -> Result<(), String> {
        for (i, a) in labels.iter().enumerate() {
            for b in &labels[i + 1..] {
                if a[0] < b[2] && b[0] < a[2] && a[1] < b[3] && b[1] < a[3] {
                    return Err(format!("labels {a:?} and {b:?} overlap"));
                }
            }
        }
        Ok(())
    }

    #[test]
    fn the_floorplan_svg_is_well_formed_xml() {
        let fp = bell(BuildOptions::default());
        let svg = floorplan_svg(&fp);
        well_formed(&svg).unwrap();
        assert!(svg.contains("<svg xmlns=\"http://www.w3.org/2000/svg\""));
        assert!(svg.contains("viewBox=\"0 0 "));
        assert!(svg.contains("<title>floorplan of chip bell_pair</title>"));
        // The checker itself refuses what is not XML.
        for bad in [
            "<a><b></a></b>",
            "<a x=\"1\" x=\"2\"/>",
            "<a>&nbsp;</a>",
            "<a/><b/>",
            "<a x=1/>",
            "<a>x > y</a>",
        ] {
            assert!(well_formed(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn one_cell_element_per_cell() {
        for o in [
            BuildOptions::default(),
            BuildOptions {
                cell: CellKind::Coupler,
                ..local()
            },
            BuildOptions {
                cell: CellKind::Mzi,
                ..local()
            },
        ] {
            let fp = bell(o);
            let svg = floorplan_svg(&fp);
            assert!(cells(&fp) > 0);
            assert_eq!(
                svg.matches("class=\"cell\"").count(),
                cells(&fp),
                "{}",
                fp.cell_kind.name()
            );
            for c in fp
                .components
                .iter()
                .filter(|c| matches!(c.kind, Kind::Cell { .. }))
            {
                assert_eq!(
                    svg.matches(&format!("class=\"cell\" data-id=\"{}\"", c.id))
                        .count(),
                    1,
                    "{}",
                    c.id
                );
            }
            well_formed(&svg).unwrap();
        }
    }

    #[test]
    fn the_picture_names_the_chip_its_size_and_has_a_legend() {
        let fp = bell(BuildOptions::default());
        let svg = floorplan_svg(&fp);
        assert!(svg.contains("bell_pair"));
        assert!(svg.contains(&format!(
            "{:.1} \u{b5}m \u{d7} {:.1} \u{b5}m",
            fp.length_um, fp.width_um
        )));
        assert!(svg.contains(&format!("heater power {:.1} mW", fp.heater_power_mw)));
        assert!(
            svg.contains(&fp.process.name) && svg.contains(fp.strategy) && svg.contains(fp.mesh)
        );
        assert!(svg.contains("<g id=\"legend\">") && svg.contains(">Legend</text>"));
        assert!(svg.contains("x compressed"));
        assert!(svg.contains("<g id=\"scale\""));
        for m in &fp.modes {
            assert!(svg.contains(&format!(">{}</text>", esc(m))), "{m}");
        }
        // A geometric cell is labelled with its split.
        assert!(svg.contains("\u{3b8} 0.785"));
        let d = render(&fp);
        no_overlap(&d.labels).unwrap();
        assert_eq!(d.rows, 1);
        assert_eq!(floorplan_svg(&fp), d.svg, "deterministic");
    }

    /// The bell chip's columns repeated `copies` times: a long chip.
    fn repeated(fp: &Floorplan, copies: usize) -> Floorplan {
        let mut long = fp.clone();
        let span = fp.length_um;
        long.components.clear();
        long.columns.clear();
        for k in 0..copies {
            let dx = k as f64 * span;
            for c in &fp.components {
                if matches!(c.kind, Kind::Port { .. })
                    && ((k > 0 && matches!(c.kind, Kind::Port { side: Side::Input }))
                        || (k + 1 < copies && matches!(c.kind, Kind::Port { side: Side::Output })))
                {
                    continue;
                }
                let mut c = c.clone();
                c.x_um += dx;
                c.id = format!("{}.{k}", c.id);
                long.components.push(c);
            }
            for r in &fp.columns {
                let mut r = r.clone();
                r.index += k * fp.columns.len();
                r.x_um += dx;
                long.columns.push(r);
            }
        }
        long.final_section.index = long.columns.len();
        long.final_section.x_um += (copies - 1) as f64 * span;
        long.length_um = copies as f64 * span;
        long
    }

    #[test]
    fn a_long_chip_wraps_into_rows_with_no_label_on_another() {
        // Some 7 mm long.
        let long = repeated(&bell(BuildOptions::default()), 8);
        let d = render(&long);
        assert!(d.rows > 1, "{} rows", d.rows);
        no_overlap(&d.labels).unwrap();
        well_formed(&d.svg).unwrap();
        assert_eq!(d.svg.matches("class=\"cell\"").count(), cells(&long));
    }

    #[test]
    fn odd_floorplans_draw_without_a_panic() {
        let fp = bell(BuildOptions::default());
        let mut odd = fp.clone();
        odd.chip = "a<b & \"c\" 'd'\u{1}".into();
        odd.modes = vec!["x<&>".into()];
        odd.length_um = f64::NAN;
        odd.pitch_um = 0.0;
        odd.heater_power_mw = f64::INFINITY;
        for c in odd.components.iter_mut().step_by(3) {
            c.x_um = f64::NAN;
        }
        let svg = floorplan_svg(&odd);
        well_formed(&svg).unwrap();
        assert!(svg.contains("a&lt;b &amp; &quot;c&quot; &apos;d&apos;?"));
        let mut empty = fp.clone();
        empty.components.clear();
        empty.columns.clear();
        empty.modes.clear();
        empty.length_um = 0.0;
        well_formed(&floorplan_svg(&empty)).unwrap();
        let mut huge = fp.clone();
        huge.length_um = 1e12;
        huge.final_section.x_um = 5e11;
        well_formed(&floorplan_svg(&huge)).unwrap();
        // Numbers at the edge of f64: overflow to infinity on the way.
        let mut vast = fp;
        for c in vast
            .components
            .iter_mut()
            .filter(|c| matches!(c.kind, Kind::Cell { .. }))
        {
            c.x_um = 1e307;
            c.length_um = f64::MAX;
        }
        vast.columns[0].x_um = f64::MAX;
        vast.length_um = f64::MAX;
        let svg = floorplan_svg(&vast);
        well_formed(&svg).unwrap();
        assert!(!svg.contains("NaN") && !svg.contains("inf"));
        assert!(fix(-0.0001, 2) == "0.00" && fix(f64::NAN, 2) == "0" && fix(1.005, 1) == "1.0");
    }

    /// Writes pictures to /tmp for a person to look at, with timings:
    /// `cargo test --release --lib layout::svg::tests::pictures -- --ignored --nocapture`.
    #[test]
    #[ignore]
    fn pictures() {
        let t = |name: &str, fp: &Floorplan| {
            let start = std::time::Instant::now();
            let svg = floorplan_svg(fp);
            let dt = start.elapsed();
            std::fs::write(format!("/tmp/helper1-{name}.svg"), &svg).unwrap();
            println!(
                "{name}: {} components, {} columns, {} um, {} bytes, rendered in {:?}",
                fp.components.len(),
                fp.columns.len(),
                fix(fp.length_um, 0),
                svg.len(),
                dt
            );
            well_formed(&svg).unwrap();
        };
        t("bell", &bell(BuildOptions::default()));
        t(
            "bell-local-coupler",
            &bell(BuildOptions {
                cell: CellKind::Coupler,
                ..local()
            }),
        );
        t(
            "bell-local-mzi",
            &bell(BuildOptions {
                cell: CellKind::Mzi,
                ..local()
            }),
        );
        for f in ["ghz3", "heralded_cz"] {
            t(
                f,
                &chip(
                    &std::fs::read_to_string(format!("circuits/{f}.trl")).unwrap(),
                    BuildOptions::default(),
                ),
            );
        }
        t(
            "haar16-flat",
            &haar_chip(
                16,
                7,
                BuildOptions {
                    strategy: StrategyChoice::Only(Strategy::Flat),
                    ..Default::default()
                },
            ),
        );
        t("haar16-local", &haar_chip(16, 7, local()));
        t("bell-x8", &repeated(&bell(BuildOptions::default()), 8));
        let text = std::fs::read_to_string("circuits/bell_pair.trl").unwrap();
        t(
            "bell-passive",
            &bell(BuildOptions {
                tuning: Tuning::Passive,
                ..local()
            }),
        );
        t("bell-sin400", &chip_on(&text, "sin400_strip", local()));
        if std::env::var("HELPER_BIG").is_ok() {
            t(
                "haar32-flat",
                &haar_chip(
                    32,
                    3,
                    BuildOptions {
                        strategy: StrategyChoice::Only(Strategy::Flat),
                        ..Default::default()
                    },
                ),
            );
        }
    }
}
