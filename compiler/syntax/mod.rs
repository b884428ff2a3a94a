//! The front end: source text to AST, comments, and the formatter.
//!
//! `parse` runs a linear pre-scan (nesting depth, brace balance) before the
//! pest parser so that no input can exhaust the stack, then builds the AST
//! with a span on every node. `format` prints the canonical form.

pub mod ast;
pub mod comments;
pub mod format;
mod parser;
pub mod prescan;

pub use ast::Ast;
pub use format::format;

use crate::diagnostic::Diagnostics;
use crate::source::Source;

/// Parses one file. All syntax errors of the file are returned together.
pub fn parse(source: &Source) -> Result<Ast, Diagnostics> {
    let pre = prescan::prescan(&source.text);
    if pre.has_errors() {
        return Err(pre);
    }
    parser::parse_text(&source.text)
}

/// Formats a file and proves the result safe before anyone writes it: the
/// output must parse to the same tree (up to positions), keep every comment
/// in order, and format to itself.
pub fn format_source(source: &Source) -> Result<String, Diagnostics> {
    use crate::diagnostic::Diagnostic;
    use ast::ClearSpans;
    let ast = parse(source)?;
    let out = format(&ast, &source.text);
    let internal = |what: &str| {
        Diagnostics::from(
            Diagnostic::error("formatter", format!("the formatter would change this file's meaning ({what}); the file is left as it is"), crate::source::Span::new(0, 0), "file left unchanged")
                .with_hint("please report this file as a bug in trilane"),
        )
    };
    let again = parse(&Source::new(source.name.clone(), out.clone()))
        .map_err(|_| internal("its output does not parse"))?;
    let (mut a, mut b) = (ast, again.clone());
    a.clear_spans();
    b.clear_spans();
    if a != b {
        return Err(internal("the circuit differs"));
    }
    let before: Vec<String> = comments::comments(&source.text)
        .into_iter()
        .map(|c| c.text)
        .collect();
    let after: Vec<String> = comments::comments(&out)
        .into_iter()
        .map(|c| c.text)
        .collect();
    if before != after {
        return Err(internal("a comment would move out of order or be lost"));
    }
    if format(&again, &out) != out {
        return Err(internal("formatting is not stable"));
    }
    Ok(out)
}
