//! Coupling tables from CSV: a header `gap_nm,k_per_um` for one wavelength
//! (the process's), or `gap_nm,k_per_um@1550nm,k_per_um@1530nm,...` for
//! several; then one row per gap. Blank lines and lines starting with `#`
//! are skipped. Errors are located diagnostics on the CSV file.

use super::coupling::CouplingTable;
use crate::diagnostic::{Diagnostic, Diagnostics};
use crate::source::{Source, Span};

/// Reads the tables; `default_wavelength_um` is used when the header gives
/// no wavelength.
pub fn parse(src: &Source, default_wavelength_um: f64) -> Result<Vec<CouplingTable>, Diagnostics> {
    let mut diags = Diagnostics::new();
    let mut offset = 0usize;
    let mut header: Option<Vec<f64>> = None;
    let mut columns: Vec<Vec<(f64, f64)>> = Vec::new();
    for line in src.text.split_inclusive('\n') {
        let start = offset;
        offset += line.len();
        let body = line.trim_end_matches(['\n', '\r']);
        let trimmed = body.trim();
        if trimmed.is_empty() || trimmed.starts_with('#') {
            continue;
        }
        let mut fields = Vec::new();
        let mut at = start;
        for f in body.split(',') {
            let lead = f.len() - f.trim_start().len();
            fields.push((
                f.trim(),
                Span::new(at + lead, at + lead + f.trim().len().max(1)),
            ));
            at += f.len() + 1;
        }
        match &header {
            None => {
                let mut wl = Vec::new();
                let mut ok = true;
                if fields[0].0 != "gap_nm" {
                    diags.push(
                        Diagnostic::error("table", "the first column must be `gap_nm`", fields[0].1, "expected `gap_nm`")
                            .with_hint("start the file with `gap_nm,k_per_um` (or `gap_nm,k_per_um@1550nm,k_per_um@1530nm,...`)"),
                    );
                    ok = false;
                }
                if fields.len() < 2 {
                    diags.push(
                        Diagnostic::error(
                            "table",
                            "the header names no coupling column",
                            fields[0].1,
                            "only one column",
                        )
                        .with_hint("add `k_per_um` (or `k_per_um@1550nm` per wavelength)"),
                    );
                    ok = false;
                }
                for (name, sp) in fields.iter().skip(1) {
                    match column_wavelength(name) {
                        Some(Some(nm)) => wl.push(nm * 1e-3),
                        Some(None) => wl.push(default_wavelength_um),
                        None => {
                            diags.push(
                                Diagnostic::error("table", format!("`{name}` is not a coupling column"), *sp, "unknown column")
                                    .with_hint("coupling columns are `k_per_um` or `k_per_um@WAVELENGTHnm`, in rad/um"),
                            );
                            ok = false;
                        }
                    }
                }
                if !ok {
                    return Err(diags);
                }
                columns = vec![Vec::new(); wl.len()];
                header = Some(wl);
            }
            Some(wl) => {
                if fields.len() != wl.len() + 1 {
                    diags.push(Diagnostic::error(
                        "table",
                        format!(
                            "this row has {} fields, the header {}",
                            fields.len(),
                            wl.len() + 1
                        ),
                        Span::new(start, start + body.len().max(1)),
                        "wrong number of fields",
                    ));
                    continue;
                }
                let mut vals = Vec::new();
                for (i, (f, sp)) in fields.iter().enumerate() {
                    match f.parse::<f64>() {
                        Ok(v) if v.is_finite() && v > 0.0 => vals.push(v),
                        _ => {
                            let what = if i == 0 {
                                "a gap in nm"
                            } else {
                                "a coupling in rad/um"
                            };
                            diags.push(
                                Diagnostic::error(
                                    "table",
                                    format!("`{f}` is not a positive number ({what})"),
                                    *sp,
                                    "not a positive number",
                                )
                                .with_hint("write plain numbers: gaps in nm, couplings in rad/um"),
                            );
                        }
                    }
                }
                if vals.len() == fields.len() {
                    for (c, col) in columns.iter_mut().enumerate() {
                        col.push((vals[0], vals[c + 1]));
                    }
                }
            }
        }
    }
    let Some(wl) = header else {
        diags.push(
            Diagnostic::error("table", "the table is empty", Span::new(0, 0), "no header")
                .with_hint("start the file with `gap_nm,k_per_um`"),
        );
        return Err(diags);
    };
    if diags.has_errors() {
        return Err(diags);
    }
    let mut out = Vec::new();
    for (c, mut col) in columns.into_iter().enumerate() {
        col.sort_by(|a, b| a.0.total_cmp(&b.0));
        if col.len() < 3 {
            diags.push(Diagnostic::error(
                "table",
                format!(
                    "a coupling law needs at least 3 gaps, the table has {}",
                    col.len()
                ),
                Span::new(0, 0),
                "too few rows",
            ));
            return Err(diags);
        }
        if let Some(w) = col.windows(2).find(|w| w[0].0 == w[1].0) {
            diags.push(Diagnostic::error(
                "table",
                format!("the gap {} nm appears twice", w[0].0),
                Span::new(0, 0),
                "repeated gap",
            ));
            return Err(diags);
        }
        out.push(CouplingTable {
            wavelength_um: wl[c],
            gaps_nm: col.iter().map(|p| p.0).collect(),
            k_per_um: col.iter().map(|p| p.1).collect(),
        });
    }
    Ok(out)
}

/// `k_per_um` -> Some(None); `k_per_um@1550nm` -> Some(Some(1550)).
fn column_wavelength(name: &str) -> Option<Option<f64>> {
    if name == "k_per_um" {
        return Some(None);
    }
    let nm = name.strip_prefix("k_per_um@")?.strip_suffix("nm")?;
    let v: f64 = nm.trim().parse().ok()?;
    (v > 0.0 && v.is_finite()).then_some(Some(v))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::process::coupling::exponential_fit;

    #[test]
    fn a_generated_table_is_fitted_back_to_its_law() {
        // Generated from k = 0.0416 exp(-(g - 200) / 113.5) at two
        // wavelengths (the second law a little weaker): the fit returns it.
        let mut text =
            String::from("# made for the test\ngap_nm,k_per_um@1550nm,k_per_um@1530nm\n");
        for g in (100..=500).step_by(50) {
            let g = g as f64;
            let k1 = 0.0416 * (-(g - 200.0) / 113.5).exp();
            let k2 = 0.0400 * (-(g - 200.0) / 110.0).exp();
            text.push_str(&format!("{g}, {k1:.12e}, {k2:.12e}\n"));
        }
        let t = parse(&Source::new("t.csv", text), 1.55).unwrap();
        assert_eq!(t.len(), 2);
        assert!((t[1].wavelength_um - 1.53).abs() < 1e-12);
        let f = exponential_fit(&t[0].gaps_nm, &t[0].k_per_um, 200.0).unwrap();
        assert!((f.k_ref_per_um - 0.0416).abs() < 1e-12 && (f.g_c_nm - 113.5).abs() < 1e-9);
        let f = exponential_fit(&t[1].gaps_nm, &t[1].k_per_um, 200.0).unwrap();
        assert!((f.g_c_nm - 110.0).abs() < 1e-9);
    }

    #[test]
    fn bad_cells_are_located() {
        let src = Source::new("t.csv", "gap_nm,k_per_um\n100,0.15\n150,abc\n200,0.06\n");
        let d = parse(&src, 1.55).unwrap_err();
        assert_eq!(d.0.len(), 1);
        let (line, col) = src.line_col(d.0[0].span().start);
        assert_eq!((line, col), (3, 5));
        let d = parse(&Source::new("t.csv", "gap,k\n"), 1.55).unwrap_err();
        assert!(d.0[0].message.contains("gap_nm"));
    }
}
