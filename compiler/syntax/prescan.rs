//! A linear scan before parsing: bracket nesting depth and brace balance.
//!
//! pest parses nested brackets by recursion, so a file with 20,000 opening
//! parentheses would overflow the stack. This scan runs first, without
//! recursion, and refuses nesting deeper than [`MAX_NESTING`]; it also finds
//! unbalanced braces, which would otherwise make every later line look wrong.
//! Comments and strings are skipped as the grammar skips them.

use crate::diagnostic::{Diagnostic, Diagnostics};
use crate::source::Span;

/// The deepest nesting of `(`, `[` and `{` together that a file may use.
pub const MAX_NESTING: usize = 64;

pub fn prescan(text: &str) -> Diagnostics {
    let mut diags = Diagnostics::new();
    let bytes = text.as_bytes();
    let mut stack: Vec<(u8, usize)> = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        match bytes[i] {
            b'/' if bytes.get(i + 1) == Some(&b'/') => {
                while i < bytes.len() && bytes[i] != b'\n' {
                    i += 1;
                }
                continue;
            }
            b'"' => {
                i += 1;
                while i < bytes.len() && bytes[i] != b'"' && bytes[i] != b'\n' {
                    i += 1;
                }
            }
            open @ (b'(' | b'[' | b'{') => {
                stack.push((open, i));
                if stack.len() > MAX_NESTING {
                    diags.push(
                        Diagnostic::error(
                            "nesting-too-deep",
                            format!("brackets nested more than {MAX_NESTING} deep"),
                            Span::new(i, i + 1),
                            format!("nesting level {} starts here", stack.len()),
                        )
                        .with_hint("no circuit needs this much nesting: flatten the expression or the blocks"),
                    );
                    return diags;
                }
            }
            close @ (b')' | b']' | b'}') => {
                // Only braces must balance here: a bracket left open in one
                // line is the parser's to report, in context.
                if close != b'}' {
                    if stack.last().is_some_and(|(o, _)| *o != b'{') {
                        stack.pop();
                    }
                    i += 1;
                    continue;
                }
                // Brackets still open inside this block are forgotten.
                while stack.last().is_some_and(|(o, _)| *o != b'{') {
                    stack.pop();
                }
                if stack.pop().is_none() {
                    diags.push(
                        Diagnostic::error(
                            "unbalanced",
                            "`}` without a matching `{`",
                            Span::new(i, i + 1),
                            "nothing to close here",
                        )
                        .with_hint("remove it, or check the braces above"),
                    );
                    return diags;
                }
            }
            _ => {}
        }
        i += 1;
    }
    if let Some(&(_, at)) = stack.iter().find(|(o, _)| *o == b'{') {
        diags.push(
            Diagnostic::error(
                "unbalanced",
                "`{` is never closed",
                Span::new(at, at + 1),
                "opened here",
            )
            .with_hint("add the closing `}` at the end of the block"),
        );
    }
    diags
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn deep_nesting_is_refused_without_recursion() {
        let text = format!(
            "chip a {{ RZ({}1{}) on q }}",
            "(".repeat(20_000),
            ")".repeat(20_000)
        );
        let d = prescan(&text);
        assert_eq!(d.len(), 1);
        assert_eq!(d.0[0].code, "nesting-too-deep");
        assert_eq!(d.0[0].span().start, 12 + MAX_NESTING - 2);
    }

    #[test]
    fn braces_in_comments_and_strings_do_not_count() {
        assert!(prescan("chip a { // {\n process \"x{.toml\" }").is_empty());
        assert!(!prescan("chip a { ").is_empty());
        assert!(!prescan("chip a { } }").is_empty());
        // An unclosed parenthesis is left to the parser.
        assert!(prescan("chip a { RZ(1 on q\n H on q }").is_empty());
    }
}
