//! The process model: materials, the waveguide mode solver (effective index
//! method), the coupling law and its fits, process files and presets.

pub mod coupling;
pub mod eim;
pub mod file;
pub mod law;
pub mod material;
pub mod presets;
pub mod slab;
pub mod solved;
pub mod spec;
pub mod table;
pub mod vector;

use crate::circuit::{FileLoader, ProcessRef};
use crate::diagnostic::Diagnostic;
use crate::source::Source;
use spec::Process;

/// Reads files relative to a folder of another loader (a coupling table
/// beside its process file).
struct Beside<'a> {
    base: &'a dyn FileLoader,
    dir: String,
}

impl FileLoader for Beside<'_> {
    fn load(&self, path: &str) -> Result<String, String> {
        if self.dir.is_empty() || path.starts_with('/') {
            self.base.load(path)
        } else {
            self.base.load(&format!("{}/{path}", self.dir))
        }
    }
}

/// The process a circuit names (the default preset when it names none). A
/// problem becomes one diagnostic on the `process` line; for a process file
/// it quotes the first error and points to `trilane process FILE`.
pub fn resolve(r: Option<&ProcessRef>, files: &dyn FileLoader) -> Result<Process, Diagnostic> {
    match r {
        None => Ok(presets::preset(presets::DEFAULT).expect("the default preset exists")),
        Some(ProcessRef::Preset { name, span }) => presets::preset(name).ok_or_else(|| {
            let near = crate::circuit::suggest::nearest(name, presets::NAMES).or_else(|| {
                presets::NAMES
                    .iter()
                    .copied()
                    .find(|n| n.starts_with(name.as_str()))
            });
            Diagnostic::error(
                "unknown-process",
                format!("`{name}` is not a built-in process"),
                *span,
                "unknown process",
            )
            .with_hint(match near {
                Some(n) => format!(
                    "did you mean `{n}`? built-in: {}; or name a process file in quotes",
                    presets::NAMES.join(", ")
                ),
                None => format!(
                    "built-in: {}; or name a process file in quotes: process \"fab/run.toml\"",
                    presets::NAMES.join(", ")
                ),
            })
        }),
        Some(ProcessRef::File { path, span }) => {
            let text = files.load(path).map_err(|why| {
                Diagnostic::error(
                    "file",
                    format!("cannot read the process file: {why}"),
                    *span,
                    "cannot read",
                )
                .with_hint("the path is relative to the circuit file's folder")
            })?;
            let dir = std::path::Path::new(path)
                .parent()
                .map(|d| d.to_string_lossy().into_owned())
                .unwrap_or_default();
            let beside = Beside { base: files, dir };
            file::read(&Source::new(path.clone(), text), &beside).map_err(|errors| {
                let total: usize = errors.iter().map(|e| e.diagnostics.error_count()).sum();
                let first = &errors[0];
                let d = &first.diagnostics.0[0];
                let (line, col) = first.source.line_col(d.span().start);
                Diagnostic::error(
                    "process-file",
                    format!(
                        "the process file has {total} error{}; the first, at {}:{line}:{col}: {}",
                        if total == 1 { "" } else { "s" },
                        first.source.name,
                        d.message
                    ),
                    *span,
                    "this process file",
                )
                .with_hint(format!(
                    "`trilane process {path}` shows them all (run it from the circuit's folder)"
                ))
            })
        }
    }
}
