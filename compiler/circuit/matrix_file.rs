//! Unitary matrices from CSV files: one row per line, entries separated by
//! commas, each a real `0.5`, an imaginary `-0.5i`, or a complex `0.5-0.5i`
//! (also `0.5 - 0.5 i`, spaces ignored). Blank lines and lines starting with
//! `#` are skipped.

use nalgebra::DMatrix;
use num_complex::Complex64;

#[derive(Debug, PartialEq)]
pub struct MatrixFileError {
    pub line: usize,
    pub message: String,
}

pub fn parse(text: &str) -> Result<DMatrix<Complex64>, MatrixFileError> {
    let mut rows: Vec<(usize, Vec<Complex64>)> = Vec::new();
    for (k, raw) in text.lines().enumerate() {
        let line = raw.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let mut row = Vec::new();
        for (c, field) in line.split(',').enumerate() {
            let v = parse_complex(field).ok_or_else(|| MatrixFileError {
                line: k + 1,
                message: format!(
                    "entry {} `{}` is not a number like `0.5-0.5i`",
                    c + 1,
                    field.trim()
                ),
            })?;
            row.push(v);
        }
        if let Some((first_line, first)) = rows.first()
            && first.len() != row.len()
        {
            return Err(MatrixFileError {
                line: k + 1,
                message: format!(
                    "this row has {} entr{}, the row on line {} has {}",
                    row.len(),
                    if row.len() == 1 { "y" } else { "ies" },
                    first_line,
                    first.len()
                ),
            });
        }
        rows.push((k + 1, row));
    }
    if rows.is_empty() {
        return Err(MatrixFileError {
            line: 1,
            message: "the file holds no matrix rows".into(),
        });
    }
    let n = rows.len();
    let m = rows[0].1.len();
    if n > 4096 || m > 4096 {
        return Err(MatrixFileError {
            line: 1,
            message: format!("a {n} x {m} matrix is larger than trilane handles (4096 modes)"),
        });
    }
    let flat: Vec<Complex64> = rows.into_iter().flat_map(|(_, r)| r).collect();
    Ok(DMatrix::from_row_slice(n, m, &flat))
}

/// `re`, `imi`, `re+imi`, `re-imi`, with optional exponents and spaces.
pub fn parse_complex(field: &str) -> Option<Complex64> {
    let s: String = field.chars().filter(|c| !c.is_whitespace()).collect();
    if s.is_empty() {
        return None;
    }
    let finite = |v: f64| v.is_finite().then_some(v);
    if let Some(body) = s.strip_suffix('i').or_else(|| s.strip_suffix('j')) {
        // Split at the last sign that is not the first character and not
        // part of an exponent.
        let bytes = body.as_bytes();
        let split = (1..bytes.len()).rev().find(|&k| {
            (bytes[k] == b'+' || bytes[k] == b'-') && !matches!(bytes[k - 1], b'e' | b'E')
        });
        return match split {
            Some(k) => {
                let re = finite(body[..k].parse().ok()?)?;
                let im_text = &body[k..];
                let im = match im_text {
                    "+" => 1.0,
                    "-" => -1.0,
                    t => finite(t.parse().ok()?)?,
                };
                Some(Complex64::new(re, im))
            }
            None => {
                let im = match body {
                    "" | "+" => 1.0,
                    "-" => -1.0,
                    t => finite(t.parse().ok()?)?,
                };
                Some(Complex64::new(0.0, im))
            }
        };
    }
    Some(Complex64::new(finite(s.parse().ok()?)?, 0.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn entries_in_every_written_form() {
        assert_eq!(parse_complex("0.5"), Some(Complex64::new(0.5, 0.0)));
        assert_eq!(parse_complex(" 0.5-0.5i "), Some(Complex64::new(0.5, -0.5)));
        assert_eq!(parse_complex("-i"), Some(Complex64::new(0.0, -1.0)));
        assert_eq!(parse_complex("1e-3+2e-1i"), Some(Complex64::new(1e-3, 0.2)));
        assert_eq!(parse_complex("1e+3-2i"), Some(Complex64::new(1e3, -2.0)));
        assert_eq!(parse_complex("abc"), None);
        assert_eq!(parse_complex("1e999"), None);
    }

    #[test]
    fn rows_must_agree() {
        let m = parse("# swap\n0, 1\n1, 0\n").unwrap();
        assert_eq!(m[(0, 1)], Complex64::new(1.0, 0.0));
        let e = parse("0, 1\n1\n").unwrap_err();
        assert_eq!(e.line, 2);
    }
}
