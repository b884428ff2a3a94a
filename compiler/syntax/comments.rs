//! Comments, found by a scan that skips string literals as the grammar does.
//!
//! The grammar drops comments; the formatter needs them back with their
//! positions to keep every comment where it stands.

use crate::source::Span;

#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Comment {
    /// The comment's text, `//` included, trailing spaces removed.
    pub text: String,
    pub span: Span,
    /// Whether code stands before it on its line.
    pub trailing: bool,
}

pub fn comments(text: &str) -> Vec<Comment> {
    let bytes = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    let mut code_on_line = false;
    while i < bytes.len() {
        match bytes[i] {
            b'\n' => code_on_line = false,
            b'"' => {
                code_on_line = true;
                i += 1;
                while i < bytes.len() && bytes[i] != b'"' && bytes[i] != b'\n' {
                    i += 1;
                }
                if i < bytes.len() && bytes[i] == b'\n' {
                    continue;
                }
            }
            b'/' if bytes.get(i + 1) == Some(&b'/') => {
                let start = i;
                while i < bytes.len() && bytes[i] != b'\n' {
                    i += 1;
                }
                let raw = &text[start..i];
                out.push(Comment {
                    text: raw.trim_end().to_owned(),
                    span: Span::new(start, i),
                    trailing: code_on_line,
                });
                continue;
            }
            b' ' | b'\t' | b'\r' => {}
            _ => code_on_line = true,
        }
        i += 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_own_line_and_trailing_comments_but_not_in_strings() {
        let c = comments("// head\nprocess \"a//b.toml\" // tail\n  // own\n");
        assert_eq!(c.len(), 3);
        assert!(!c[0].trailing && c[1].trailing && !c[2].trailing);
        assert_eq!(c[1].text, "// tail");
    }
}
