//! Source text and byte spans.
//!
//! Every diagnostic points into a [`Source`] by a byte [`Span`]; line and
//! column numbers (1-based, columns counted in characters) are derived here
//! and nowhere else.

use serde::Serialize;

/// A half-open byte range `start..end` into a source text.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub struct Span {
    pub start: usize,
    pub end: usize,
}

impl Span {
    pub fn new(start: usize, end: usize) -> Self {
        Span {
            start,
            end: end.max(start),
        }
    }

    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span::new(self.start.min(other.start), self.end.max(other.end))
    }

    pub fn len(self) -> usize {
        self.end - self.start
    }

    pub fn is_empty(self) -> bool {
        self.start == self.end
    }
}

/// One input file: its display name (usually the path) and its text.
#[derive(Clone, Debug)]
pub struct Source {
    pub name: String,
    pub text: String,
}

impl Source {
    pub fn new(name: impl Into<String>, text: impl Into<String>) -> Self {
        Source {
            name: name.into(),
            text: text.into(),
        }
    }

    /// 1-based line and column (in characters) of a byte offset.
    pub fn line_col(&self, offset: usize) -> (usize, usize) {
        let offset = floor_char_boundary(&self.text, offset.min(self.text.len()));
        let before = &self.text[..offset];
        let line = before.bytes().filter(|&b| b == b'\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        let column = self.text[line_start..offset].chars().count() + 1;
        (line, column)
    }

    /// The text of the line holding `offset`, without its newline.
    pub fn line_text(&self, offset: usize) -> &str {
        let offset = floor_char_boundary(&self.text, offset.min(self.text.len()));
        let start = self.text[..offset].rfind('\n').map_or(0, |i| i + 1);
        let end = self.text[offset..]
            .find('\n')
            .map_or(self.text.len(), |i| offset + i);
        &self.text[start..end]
    }
}

/// The largest char boundary not after `i`.
pub fn floor_char_boundary(text: &str, mut i: usize) -> usize {
    while i > 0 && !text.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// Decode file bytes as UTF-8. Invalid bytes are replaced for display and the
/// offset of the first one is returned so the caller can report it.
pub fn decode(bytes: &[u8]) -> (String, Option<usize>) {
    match std::str::from_utf8(bytes) {
        Ok(s) => (s.to_owned(), None),
        Err(e) => (
            String::from_utf8_lossy(bytes).into_owned(),
            Some(e.valid_up_to()),
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_and_column_count_characters() {
        let s = Source::new("t", "ab\nçd e\n");
        assert_eq!(s.line_col(0), (1, 1));
        assert_eq!(s.line_col(3), (2, 1));
        // 'ç' is two bytes: 'd' sits at byte 5, column 2.
        assert_eq!(s.line_col(5), (2, 2));
        assert_eq!(s.line_text(6), "çd e");
    }

    #[test]
    fn invalid_utf8_reports_first_bad_byte() {
        let (text, bad) = decode(b"chip a {\xff}");
        assert_eq!(bad, Some(8));
        assert!(text.contains('\u{FFFD}'));
    }
}
