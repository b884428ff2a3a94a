//! Human and machine-readable summaries: text tables and the JSON wire types
//! (their own structs, never serde derives on the IR). The field names are
//! documented in docs/json.md.

pub mod build;
pub mod cell;
pub mod cell_sweep;
pub mod process;
pub mod progress;
pub mod simulate;
pub mod solve;

use crate::diagnostic::Diagnostic;
use crate::source::Source;
use nalgebra::DMatrix;
use num_complex::Complex64;
use serde::Serialize;

/// A diagnostic as JSON: position as 1-based line and column.
#[derive(Serialize, Clone, Debug)]
pub struct JsonDiagnostic {
    pub severity: &'static str,
    pub code: &'static str,
    pub message: String,
    pub line: usize,
    pub column: usize,
    pub end_line: usize,
    pub end_column: usize,
    pub label: String,
    pub hint: Option<String>,
}

pub fn json_diagnostic(d: &Diagnostic, src: &Source) -> JsonDiagnostic {
    let sp = d.span();
    let (line, column) = src.line_col(sp.start);
    let (end_line, end_column) = src.line_col(sp.end);
    JsonDiagnostic {
        severity: d.severity.as_str(),
        code: d.code,
        message: d.message.clone(),
        line,
        column,
        end_line,
        end_column,
        label: d.labels.first().map(|l| l.text.clone()).unwrap_or_default(),
        hint: d.hint.clone(),
    }
}

/// A complex matrix as `{"re": [[...]], "im": [[...]]}`, row-major.
#[derive(Serialize, Clone, Debug, PartialEq)]
pub struct JsonMatrix {
    pub re: Vec<Vec<f64>>,
    pub im: Vec<Vec<f64>>,
}

impl From<&DMatrix<Complex64>> for JsonMatrix {
    fn from(m: &DMatrix<Complex64>) -> Self {
        let rows = |f: fn(&Complex64) -> f64| {
            (0..m.nrows())
                .map(|i| (0..m.ncols()).map(|j| f(&m[(i, j)])).collect())
                .collect()
        };
        JsonMatrix {
            re: rows(|z| z.re),
            im: rows(|z| z.im),
        }
    }
}

/// A complex number as `{"re", "im"}`.
#[derive(Serialize, Clone, Copy, Debug, PartialEq)]
pub struct JsonComplex {
    pub re: f64,
    pub im: f64,
}

impl From<Complex64> for JsonComplex {
    fn from(z: Complex64) -> Self {
        JsonComplex { re: z.re, im: z.im }
    }
}

/// A complex number in a fixed number of decimals, parts that round to zero
/// left out: `0.333333`, `-0.5i`, `0.25+0.1i`.
pub fn complex_text(z: Complex64, decimals: usize) -> String {
    let zero = |x: f64| format!("{:.*}", decimals, x.abs()) == format!("{:.*}", decimals, 0.0);
    let r = |x: f64| {
        let s = format!("{x:.decimals$}");
        if zero(x) {
            format!("{:.*}", decimals, 0.0)
        } else {
            s
        }
    };
    match (zero(z.re), zero(z.im)) {
        (true, true) => "0".into(),
        (false, true) => r(z.re),
        (true, false) => format!("{}i", r(z.im)),
        (false, false) => format!(
            "{}{}{:.*}i",
            r(z.re),
            if z.im < 0.0 { "-" } else { "+" },
            decimals,
            z.im.abs()
        ),
    }
}
