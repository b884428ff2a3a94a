//! Diagnostics as data, and their rendering at the edge.
//!
//! Every stage collects [`Diagnostic`]s (severity, message, labelled spans,
//! hint); only [`render`] turns them into text, through miette's graphical
//! report handler. Helpers without a span return a plain error and their
//! caller attaches the span.

use crate::source::{Source, Span};
use std::fmt;

#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Severity {
    Warning,
    Error,
}

impl Severity {
    pub fn as_str(self) -> &'static str {
        match self {
            Severity::Warning => "warning",
            Severity::Error => "error",
        }
    }
}

/// A labelled span: the caret and the words beside it.
#[derive(Clone, Debug, PartialEq)]
pub struct Label {
    pub span: Span,
    pub text: String,
}

/// One problem found in a source file.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnostic {
    pub severity: Severity,
    /// A stable identifier, e.g. `unknown-gate`; listed in docs/language.md.
    pub code: &'static str,
    pub message: String,
    /// The first label is the primary one: its position is the diagnostic's.
    pub labels: Vec<Label>,
    pub hint: Option<String>,
}

impl Diagnostic {
    pub fn error(
        code: &'static str,
        message: impl Into<String>,
        span: Span,
        label: impl Into<String>,
    ) -> Self {
        Diagnostic {
            severity: Severity::Error,
            code,
            message: message.into(),
            labels: vec![Label {
                span,
                text: label.into(),
            }],
            hint: None,
        }
    }

    pub fn warning(
        code: &'static str,
        message: impl Into<String>,
        span: Span,
        label: impl Into<String>,
    ) -> Self {
        Diagnostic {
            severity: Severity::Warning,
            ..Diagnostic::error(code, message, span, label)
        }
    }

    pub fn with_hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }

    pub fn with_label(mut self, span: Span, text: impl Into<String>) -> Self {
        self.labels.push(Label {
            span,
            text: text.into(),
        });
        self
    }

    /// The primary position.
    pub fn span(&self) -> Span {
        self.labels.first().map_or(Span::default(), |l| l.span)
    }

    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }
}

/// The diagnostics of one file, in source order once [`Diagnostics::sorted`].
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Diagnostics(pub Vec<Diagnostic>);

impl Diagnostics {
    pub fn new() -> Self {
        Diagnostics(Vec::new())
    }

    /// Adds a diagnostic unless an identical one is already there (the same
    /// error reached twice through two uses of one definition).
    pub fn push(&mut self, d: Diagnostic) {
        if !self
            .0
            .iter()
            .any(|o| o.code == d.code && o.span() == d.span() && o.message == d.message)
        {
            self.0.push(d);
        }
    }

    pub fn extend(&mut self, other: Diagnostics) {
        for d in other.0 {
            self.push(d);
        }
    }

    pub fn has_errors(&self) -> bool {
        self.0.iter().any(Diagnostic::is_error)
    }

    pub fn error_count(&self) -> usize {
        self.0.iter().filter(|d| d.is_error()).count()
    }

    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    pub fn len(&self) -> usize {
        self.0.len()
    }

    pub fn iter(&self) -> impl Iterator<Item = &Diagnostic> {
        self.0.iter()
    }

    /// Sorted by position, errors before warnings at the same position.
    pub fn sorted(mut self) -> Self {
        self.0
            .sort_by(|a, b| (a.span().start, b.severity).cmp(&(b.span().start, a.severity)));
        self
    }
}

impl From<Diagnostic> for Diagnostics {
    fn from(d: Diagnostic) -> Self {
        Diagnostics(vec![d])
    }
}

// ---- rendering ------------------------------------------------------------

struct Rendered<'a> {
    diag: &'a Diagnostic,
    source: Windowed<'a>,
}

/// The source text as miette reads it, but cut to the lines around each
/// span before miette scans it: miette walks its input from the first byte,
/// which for a large file and many warnings costs seconds.
struct Windowed<'a> {
    name: &'a str,
    text: &'a str,
}

impl miette::SourceCode for Windowed<'_> {
    fn read_span<'b>(
        &'b self,
        span: &miette::SourceSpan,
        before: usize,
        after: usize,
    ) -> Result<Box<dyn miette::SpanContents<'b> + 'b>, miette::MietteError> {
        let bytes = self.text.as_bytes();
        let start = span.offset().min(bytes.len());
        let end = (span.offset() + span.len()).min(bytes.len());
        // Back up `before` + 1 line starts, forward `after` + 1 line ends.
        let mut lo = start;
        for _ in 0..=before {
            match bytes[..lo].iter().rposition(|&b| b == b'\n') {
                Some(i) => lo = i,
                None => {
                    lo = 0;
                    break;
                }
            }
        }
        if lo > 0 {
            lo += 1;
        }
        let mut hi = end;
        for _ in 0..=after {
            match bytes[hi..].iter().position(|&b| b == b'\n') {
                Some(i) => hi = hi + i + 1,
                None => {
                    hi = bytes.len();
                    break;
                }
            }
        }
        let window = &bytes[lo..hi];
        let lines_before = bytes[..lo].iter().filter(|&&b| b == b'\n').count();
        let inner_span = miette::SourceSpan::from((start - lo, end - start));
        let c = window.read_span(&inner_span, before, after)?;
        let data_start = c.span().offset() + lo;
        Ok(Box::new(miette::MietteSpanContents::new_named(
            self.name.to_owned(),
            c.data(),
            miette::SourceSpan::from((data_start, c.span().len())),
            c.line() + lines_before,
            c.column(),
            c.line_count(),
        )))
    }
}

impl fmt::Debug for Rendered<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.diag.message)
    }
}

impl fmt::Display for Rendered<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.diag.message)
    }
}

impl std::error::Error for Rendered<'_> {}

impl miette::Diagnostic for Rendered<'_> {
    fn code<'a>(&'a self) -> Option<Box<dyn fmt::Display + 'a>> {
        Some(Box::new(format!("trilane::{}", self.diag.code)))
    }

    fn severity(&self) -> Option<miette::Severity> {
        Some(match self.diag.severity {
            Severity::Warning => miette::Severity::Warning,
            Severity::Error => miette::Severity::Error,
        })
    }

    fn help<'a>(&'a self) -> Option<Box<dyn fmt::Display + 'a>> {
        self.diag
            .hint
            .as_ref()
            .map(|h| Box::new(h.clone()) as Box<dyn fmt::Display>)
    }

    fn source_code(&self) -> Option<&dyn miette::SourceCode> {
        Some(&self.source)
    }

    fn labels(&self) -> Option<Box<dyn Iterator<Item = miette::LabeledSpan> + '_>> {
        let len = self.source.text.len();
        Some(Box::new(self.diag.labels.iter().enumerate().map(
            move |(i, l)| {
                let start = l.span.start.min(len);
                let end = l.span.end.min(len);
                let span = miette::SourceSpan::from(start..end);
                if i == 0 {
                    miette::LabeledSpan::new_primary_with_span(Some(l.text.clone()), span)
                } else {
                    miette::LabeledSpan::new_with_span(Some(l.text.clone()), span)
                }
            },
        )))
    }
}

/// How a diagnostic is drawn.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Style {
    /// Colours and Unicode box drawing, for a terminal.
    Colour,
    /// Unicode, no colour: files, pipes and the expected-output tests.
    Plain,
}

/// Renders one diagnostic against its source, miette's graphical layout,
/// with `file:line:column` in the snippet header.
pub fn render(diag: &Diagnostic, source: &Source, style: Style) -> String {
    let theme = match style {
        Style::Colour => miette::GraphicalTheme::unicode(),
        Style::Plain => miette::GraphicalTheme::unicode_nocolor(),
    };
    let handler = miette::GraphicalReportHandler::new_themed(theme)
        .with_width(100)
        .with_links(false)
        .with_word_splitter(textwrap::WordSplitter::NoHyphenation);
    let report = Rendered {
        diag,
        source: Windowed {
            name: &source.name,
            text: &source.text,
        },
    };
    let mut out = String::new();
    if handler.render_report(&mut out, &report).is_err() {
        // Rendering into a String cannot fail; keep a plain fallback anyway.
        let (line, col) = source.line_col(diag.span().start);
        out = format!(
            "{}: {}:{}:{}: {}\n",
            diag.severity.as_str(),
            source.name,
            line,
            col,
            diag.message
        );
    }
    out
}

/// Renders all diagnostics of a file, each followed by a blank line.
pub fn render_all(diags: &Diagnostics, source: &Source, style: Style) -> String {
    let mut out = String::new();
    for d in diags.iter() {
        out.push_str(&render(d, source, style));
        out.push('\n');
    }
    out
}
