//! Data-driven front-end tests (architecture.md: "Data-driven tests").
//!
//! - `tests/data/ok/*.trl` must elaborate with no error; the IR dump of every
//!   chip, followed by any warnings, must equal `NAME.ir` beside the file.
//! - `tests/data/err/*.trl` must fail; the rendered diagnostics (no colour)
//!   must equal `NAME.expected` beside the file.
//!
//! Set `UPDATE_EXPECT=1` to (re)write the expected files, then review the
//! diff by eye: the expectation is what a user should read.

use std::path::{Path, PathBuf};
use trilane::circuit::FileLoader;
use trilane::diagnostic::{Style, render_all};
use trilane::source::Source;

struct Folder(PathBuf);

impl FileLoader for Folder {
    fn load(&self, path: &str) -> Result<String, String> {
        // The same words as the command line, whatever the platform says.
        std::fs::read_to_string(self.0.join(path)).map_err(|e| match e.kind() {
            std::io::ErrorKind::NotFound => format!("{path}: no such file"),
            _ => format!("{path}: {e}"),
        })
    }
}

fn cases(dir: &str) -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join(dir);
    let mut v: Vec<PathBuf> = std::fs::read_dir(&root)
        .unwrap_or_else(|e| panic!("{}: {e}", root.display()))
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "trl"))
        .collect();
    v.sort();
    v
}

/// Reads a case with its name relative to the repository, as a user would
/// type it, so the expected text does not depend on where the clone is.
fn source(path: &Path) -> Source {
    let rel = path
        .strip_prefix(env!("CARGO_MANIFEST_DIR"))
        .unwrap()
        .display()
        .to_string();
    let bytes = std::fs::read(path).unwrap();
    let (text, bad) = trilane::source::decode(&bytes);
    assert!(
        bad.is_none(),
        "{rel}: test cases are UTF-8 (invalid bytes are tested in tests/robustness.rs)"
    );
    Source::new(rel, text)
}

fn compare(expected_path: &Path, actual: &str, failures: &mut Vec<String>) {
    if std::env::var_os("UPDATE_EXPECT").is_some() {
        std::fs::write(expected_path, actual).unwrap();
        return;
    }
    let want = std::fs::read_to_string(expected_path).unwrap_or_default();
    if want != actual {
        failures.push(format!(
            "{}:\n--- expected\n{want}\n--- actual\n{actual}",
            expected_path.display()
        ));
    }
}

fn check(dir: &str, ext: &str, ok: bool) -> usize {
    let mut failures = Vec::new();
    let all = cases(dir);
    for path in &all {
        let src = source(path);
        let loader = Folder(path.parent().unwrap().to_path_buf());
        let result = trilane::check(&src, &loader);
        let text = match (&result, ok) {
            (Ok(p), true) => {
                let mut t: String = p.circuits.iter().map(|c| c.to_string()).collect();
                t.push_str(&render_all(&p.warnings, &src, Style::Plain));
                t
            }
            (Err(d), false) => {
                assert!(d.has_errors());
                render_all(d, &src, Style::Plain)
            }
            (Ok(_), false) => {
                failures.push(format!("{}: expected an error, it elaborated", src.name));
                continue;
            }
            (Err(d), true) => {
                failures.push(format!(
                    "{}: expected to elaborate:\n{}",
                    src.name,
                    render_all(d, &src, Style::Plain)
                ));
                continue;
            }
        };
        compare(&path.with_extension(ext), &text, &mut failures);
    }
    assert!(
        failures.is_empty(),
        "{} of {} cases differ:\n{}",
        failures.len(),
        all.len(),
        failures.join("\n")
    );
    all.len()
}

#[test]
fn valid_circuits_elaborate_to_the_expected_ir() {
    assert!(check("tests/data/ok", "ir", true) >= 5);
}

#[test]
fn every_error_case_renders_the_expected_diagnostic() {
    assert!(check("tests/data/err", "expected", false) >= 25);
}
