//! The canonical formatter.
//!
//! Prints an AST in one canonical layout: four-space indentation, one
//! statement per line, `, ` between list items, spaces around `+ -` and
//! comparisons, none around `* / ^`, minimal parentheses, units after a space
//! (`30 deg`) except `%` (`90%`). Comments come back where they stood: a
//! comment on its own line stays on its own line before the same statement;
//! a comment after code stays at the end of that line; a comment inside a
//! statement that is printed on one line moves to its own line just above
//! it. One blank line between statements is kept where the source had one or
//! more. Formatting is idempotent, and the output parses to the same AST up
//! to spans (tests/format.rs checks both).

use super::ast::*;
use super::comments::{Comment, comments};

const INDENT: &str = "    ";
/// Marks where code ends and a trailing comment begins, until alignment.
const MARK: char = '\u{1}';
/// Lines longer than this are broken where the layout allows (matrices,
/// tolerance blocks).
pub const WIDTH: usize = 100;

/// Formats a parsed file; `text` is the source it was parsed from.
pub fn format(ast: &Ast, text: &str) -> String {
    let mut p = Printer {
        text,
        comments: comments(text),
        next: 0,
        out: String::new(),
        last_end: 0,
    };
    for (k, item) in ast.items.iter().enumerate() {
        let start = item.span().start;
        if k > 0 {
            p.out.push('\n');
        }
        p.leading(start, 0, k > 0);
        match item {
            Item::Chip(c) => p.block(
                &format!("chip {} {{", c.name.text),
                c.header,
                &c.body,
                c.close,
                0,
            ),
            Item::Define(d) => p.block(&define_header(d), d.header, &d.body, d.close, 0),
        }
    }
    p.leading(usize::MAX, 0, !ast.items.is_empty());
    let mut out = align_trailing_comments(&p.out);
    while out.ends_with("\n\n") {
        out.pop();
    }
    if out.is_empty() || !out.ends_with('\n') {
        out.push('\n');
    }
    if out == "\n" { String::new() } else { out }
}

struct Printer<'t> {
    text: &'t str,
    comments: Vec<Comment>,
    next: usize,
    out: String,
    last_end: usize,
}

impl Printer<'_> {
    fn blank_before(&self, pos: usize) -> bool {
        let end = pos.min(self.text.len());
        self.last_end < end && self.text[self.last_end..end].matches('\n').count() >= 2
    }

    /// Own-line comments before `pos`; a blank line kept before each group.
    fn leading(&mut self, pos: usize, depth: usize, allow_blank: bool) {
        let mut first = true;
        while self.next < self.comments.len() && self.comments[self.next].span.start < pos {
            let c = self.comments[self.next].clone();
            self.next += 1;
            if (allow_blank || !first)
                && self.blank_before(c.span.start)
                && !self.out.ends_with("\n\n")
                && !self.out.ends_with("{\n")
            {
                self.out.push('\n');
            }
            first = false;
            self.line(depth, &c.text);
            self.last_end = c.span.end;
        }
    }

    /// The trailing comment on the line where `end` is, if any.
    fn trailing(&mut self, end: usize) -> Option<String> {
        let c = self.comments.get(self.next)?;
        // Trailing only when nothing but blanks stands between: with two
        // statements on a line, the comment belongs to the second.
        if c.span.start >= end
            && self.text[end..c.span.start].trim().is_empty()
            && !self.text[end..c.span.start].contains('\n')
        {
            let t = format!("{MARK}{}", c.text);
            self.last_end = c.span.end;
            self.next += 1;
            Some(t)
        } else {
            None
        }
    }

    fn line(&mut self, depth: usize, s: &str) {
        for _ in 0..depth {
            self.out.push_str(INDENT);
        }
        self.out.push_str(s);
        self.out.push('\n');
    }

    /// Writes `lines` (the last one may get a trailing comment).
    fn lines(&mut self, depth: usize, mut lines: Vec<String>, end: usize) {
        self.last_end = end;
        if let Some(t) = self.trailing(end)
            && let Some(last) = lines.last_mut()
        {
            last.push(' ');
            last.push_str(&t);
        }
        for l in &lines {
            self.line(depth, l);
        }
    }

    fn block(
        &mut self,
        header: &str,
        header_span: crate::source::Span,
        body: &[Stmt],
        close: crate::source::Span,
        depth: usize,
    ) {
        // Comments inside the header move above it.
        self.leading(header_span.end.saturating_sub(1), depth, false);
        self.last_end = header_span.end;
        let mut h = header.to_owned();
        // A comment after `{` is the header's only if no statement stands
        // between them on that line.
        let first = body.first().map_or(close.start, |s| s.span.start);
        if self
            .comments
            .get(self.next)
            .is_some_and(|c| c.span.start < first)
            && let Some(t) = self.trailing(header_span.end)
        {
            h.push(' ');
            h.push_str(&t);
        }
        self.line(depth, &h);
        for s in body {
            self.statement(s, depth + 1);
        }
        self.leading(close.start, depth + 1, true);
        self.last_end = close.end;
        let mut c = "}".to_owned();
        if let Some(t) = self.trailing(close.end) {
            c.push(' ');
            c.push_str(&t);
        }
        self.line(depth, &c);
    }

    fn statement(&mut self, s: &Stmt, depth: usize) {
        let blank = self.blank_before(
            self.comments
                .get(self.next)
                .filter(|c| c.span.start < s.span.start)
                .map_or(s.span.start, |c| c.span.start),
        );
        if blank && !self.out.ends_with("{\n") && !self.out.ends_with("\n\n") {
            self.out.push('\n');
        }
        self.leading(s.span.start, depth, false);
        match &s.kind {
            StmtKind::Define(d) => self.block(&define_header(d), d.header, &d.body, d.close, depth),
            StmtKind::Tolerance(entries) => {
                let inner = self
                    .comments
                    .get(self.next)
                    .is_some_and(|c| c.span.start < s.span.end);
                let one = format!(
                    "tolerance {{ {} }}",
                    entries.iter().map(tol_entry).collect::<Vec<_>>().join(", ")
                );
                if !inner && one.len() + depth * INDENT.len() <= WIDTH && !entries.is_empty() {
                    self.lines(depth, vec![one], s.span.end);
                } else if entries.is_empty() && !inner {
                    self.lines(depth, vec!["tolerance {}".into()], s.span.end);
                } else {
                    self.last_end = s.span.start;
                    let mut h = "tolerance {".to_owned();
                    if let Some(t) =
                        self.trailing(s.span.start + "tolerance {".len().min(s.span.len()))
                    {
                        h.push(' ');
                        h.push_str(&t);
                    }
                    self.line(depth, &h);
                    for e in entries {
                        self.leading(e.span.start, depth + 1, true);
                        self.lines(depth + 1, vec![tol_entry(e)], e.span.end);
                    }
                    self.leading(s.span.end - 1, depth + 1, true);
                    self.lines(depth, vec!["}".into()], s.span.end);
                }
            }
            StmtKind::Unitary(UnitaryStmt {
                operands: ops,
                source: MatrixSource::Literal(m),
            }) => {
                let inner = self
                    .comments
                    .get(self.next)
                    .is_some_and(|c| c.span.start < s.span.end);
                let head = format!("unitary on {} = [", operands(ops));
                let rows: Vec<String> = m.rows.iter().map(row_text).collect();
                let one = format!("{head}{}]", rows.join(", "));
                if !inner && m.rows.len() < 3 && one.len() + depth * INDENT.len() <= WIDTH {
                    self.lines(depth, vec![one], s.span.end);
                } else {
                    // One row per line; comments stay with their rows.
                    self.leading(m.span.start, depth, false);
                    self.lines(depth, vec![head], m.span.start + 1);
                    for (r, text) in m.rows.iter().zip(rows) {
                        self.leading(r.span.start, depth + 1, true);
                        self.lines(depth + 1, vec![format!("{text},")], r.span.end);
                    }
                    self.leading(s.span.end.saturating_sub(1), depth + 1, true);
                    self.lines(depth, vec!["]".into()], s.span.end);
                }
            }
            _ => {
                // Comments inside a one-line statement go above it.
                self.leading(s.span.end, depth, false);
                let lines = statement_lines(&s.kind, depth);
                self.lines(depth, lines, s.span.end);
            }
        }
    }
}

fn row_text(r: &MatrixRow) -> String {
    format!(
        "[{}]",
        r.entries
            .iter()
            .map(expr_text)
            .collect::<Vec<_>>()
            .join(", ")
    )
}

/// Aligns the trailing comments of consecutive lines one space past the
/// longest code among them; a line without one, or at another
/// indentation, ends the run.
fn align_trailing_comments(text: &str) -> String {
    let lines: Vec<&str> = text.split('\n').collect();
    let mut out: Vec<String> = Vec::with_capacity(lines.len());
    let mut k = 0;
    while k < lines.len() {
        if !lines[k].contains(MARK) {
            out.push(lines[k].to_owned());
            k += 1;
            continue;
        }
        let indent = |l: &str| l.len() - l.trim_start_matches(' ').len();
        let mut end = k;
        while end < lines.len()
            && lines[end].contains(MARK)
            && indent(lines[end]) == indent(lines[k])
        {
            end += 1;
        }
        let split: Vec<(&str, &str)> = lines[k..end]
            .iter()
            .map(|l| {
                let (code, comment) = l.split_once(MARK).expect("marked");
                (code.trim_end(), comment)
            })
            .collect();
        let width = split
            .iter()
            .map(|(c, _)| c.chars().count())
            .max()
            .unwrap_or(0);
        for (code, comment) in split {
            let pad = width - code.chars().count() + 1;
            out.push(format!("{code}{}{comment}", " ".repeat(pad)));
        }
        k = end;
    }
    out.join("\n")
}

/// A definition's parameter list as written canonically: `(t, c)`, or
/// nothing when it has none.
pub fn params_text(d: &Define) -> String {
    match &d.params {
        Some(p) if !p.is_empty() => format!(
            "({})",
            p.iter()
                .map(|n| n.text.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
        _ => String::new(),
    }
}

fn define_header(d: &Define) -> String {
    let params = params_text(d);
    let formals: Vec<&str> = d.formals.iter().map(|n| n.text.as_str()).collect();
    format!(
        "define {}{} on {} {{",
        d.name.text,
        params,
        formals.join(", ")
    )
}

fn tol_entry(e: &TolEntry) -> String {
    format!("{} {}", e.key.text, quantity_text(&e.value))
}

fn names(n: &[Name]) -> String {
    n.iter()
        .map(|x| x.text.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

fn photons(c: &Count) -> String {
    let one = c.text.trim_start_matches('0') == "1";
    format!("{} {}", c.text, if one { "photon" } else { "photons" })
}

fn count_text(c: &Count) -> String {
    c.text.clone()
}

pub fn operand_text(o: &Operand) -> String {
    match &o.kind {
        OperandKind::Name(n) => n.text.clone(),
        OperandKind::Rail { qubit, index } => format!("{}.{}", qubit.text, index),
        OperandKind::Range(a, b) => format!("{} ... {}", operand_text(a), operand_text(b)),
    }
}

fn operands(o: &[Operand]) -> String {
    o.iter().map(operand_text).collect::<Vec<_>>().join(", ")
}

fn statement_lines(k: &StmtKind, depth: usize) -> Vec<String> {
    let one = match k {
        StmtKind::Process(ProcessRef::Preset(n)) => format!("process {}", n.text),
        StmtKind::Process(ProcessRef::File { path, .. }) => format!("process \"{path}\""),
        StmtKind::Dualrail(n) => format!("dualrail {}", names(n)),
        StmtKind::Mode(n) => format!("mode {}", names(n)),
        StmtKind::Ancilla {
            names: n,
            photons: None,
        } => format!("ancilla {}", names(n)),
        StmtKind::Ancilla {
            names: n,
            photons: Some(c),
        } => format!("ancilla {} = {}", names(n), photons(c)),
        StmtKind::Launch(items) => {
            let parts: Vec<String> = items
                .iter()
                .map(|it| match &it.value {
                    LaunchValue::Ket { bits, .. } => format!("{} = |{bits}>", it.target.text),
                    LaunchValue::Photons(c) => format!("{} = {}", it.target.text, photons(c)),
                })
                .collect();
            format!("launch {}", parts.join(", "))
        }
        StmtKind::Apply(a) => {
            let args = match &a.args {
                Some(q) if !q.is_empty() => format!(
                    "({})",
                    q.iter().map(quantity_text).collect::<Vec<_>>().join(", ")
                ),
                _ => String::new(),
            };
            let scheme = if a.heralded.is_some() {
                " heralded"
            } else {
                ""
            };
            format!(
                "{}{}{} on {}",
                a.callee.text,
                args,
                scheme,
                operands(&a.operands)
            )
        }
        StmtKind::Unitary(u) => {
            let head = format!("unitary on {}", operands(&u.operands));
            match &u.source {
                MatrixSource::File { path, .. } => format!("{head} from \"{path}\""),
                MatrixSource::Literal(m) => {
                    let rows: Vec<String> = m.rows.iter().map(row_text).collect();
                    let _ = depth;
                    format!("{head} = [{}]", rows.join(", "))
                }
            }
        }
        StmtKind::Herald(items) => {
            let parts: Vec<String> = items
                .iter()
                .map(|h| format!("{} = {}", h.target.text, count_text(&h.count)))
                .collect();
            format!("herald {}", parts.join(", "))
        }
        StmtKind::Detect(o) => format!("detect {}", operands(o)),
        StmtKind::Require(r) => {
            let y = r
                .yield_level
                .as_ref()
                .map(|q| format!(" at {} yield", quantity_text(q)))
                .unwrap_or_default();
            format!(
                "require {} {} {}{}",
                r.metric.text,
                r.op.as_str(),
                quantity_text(&r.value),
                y
            )
        }
        StmtKind::Band(b) => match &b.to {
            None => format!("band {}", quantity_text(&b.from)),
            Some((q, c)) => {
                let n = count_text(c);
                let one = n.trim_start_matches('0') == "1";
                format!(
                    "band {} to {} in {} {}",
                    quantity_text(&b.from),
                    quantity_text(q),
                    n,
                    if one { "step" } else { "steps" }
                )
            }
        },
        StmtKind::Tolerance(_) | StmtKind::Define(_) => {
            unreachable!("blocks are printed by the printer")
        }
    };
    vec![one]
}

/// A quantity as canonical text: `pi/3 rad`, `90%`.
pub fn quantity_text(q: &Quantity) -> String {
    expr_text(&q.expr)
}

/// Binding strength: what an operand needs to print without parentheses.
fn prec(e: &Expr) -> u8 {
    match &e.kind {
        ExprKind::Binary {
            op: BinOp::Add | BinOp::Sub,
            ..
        } => 1,
        ExprKind::WithUnit { .. } => 2,
        ExprKind::Binary {
            op: BinOp::Mul | BinOp::Div,
            ..
        } => 3,
        ExprKind::Neg(_) => 4,
        ExprKind::Binary { op: BinOp::Pow, .. } => 5,
        _ => 6,
    }
}

fn wrap(e: &Expr, min: u8) -> String {
    let s = expr_text(e);
    if prec(e) < min { format!("({s})") } else { s }
}

/// `0.5+0.5i`, `-1-2i`: a complex literal prints without spaces.
fn is_complex_literal(lhs: &Expr, rhs: &Expr) -> bool {
    let real = match &lhs.kind {
        ExprKind::Number(_) => true,
        ExprKind::Neg(x) => matches!(x.kind, ExprKind::Number(_)),
        _ => false,
    };
    real && matches!(rhs.kind, ExprKind::Imaginary(_))
}

pub fn expr_text(e: &Expr) -> String {
    match &e.kind {
        ExprKind::Number(t) => t.clone(),
        ExprKind::Imaginary(t) => format!("{t}i"),
        ExprKind::Name(n) => n.clone(),
        ExprKind::Call { func, arg } => format!("{}({})", func.text, expr_text(arg)),
        ExprKind::Neg(x) => format!("-{}", wrap(x, 4)),
        ExprKind::WithUnit { value, unit, .. } => match unit {
            Unit::Percent => format!("{}%", wrap(value, 3)),
            u => format!("{} {}", wrap(value, 3), u.as_str()),
        },
        ExprKind::Binary { op, lhs, rhs } => match op {
            BinOp::Add | BinOp::Sub if is_complex_literal(lhs, rhs) => {
                format!("{}{}{}", expr_text(lhs), op.as_str(), expr_text(rhs))
            }
            BinOp::Add | BinOp::Sub => format!("{} {} {}", wrap(lhs, 1), op.as_str(), wrap(rhs, 2)),
            BinOp::Mul | BinOp::Div => format!("{}{}{}", wrap(lhs, 3), op.as_str(), wrap(rhs, 4)),
            BinOp::Pow => format!("{}^{}", wrap(lhs, 6), wrap(rhs, 4)),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::Source;

    fn fmt(text: &str) -> String {
        let ast = crate::syntax::parse(&Source::new("t", text)).unwrap();
        format(&ast, text)
    }

    #[test]
    fn minimal_parentheses_keep_the_tree() {
        assert_eq!(
            fmt("chip a{RZ( (1-(2-3))*(-x)^2/(4*5) ) on q}"),
            "chip a {\n    RZ((1 - (2 - 3))*(-x)^2/(4*5)) on q\n}\n"
        );
        assert_eq!(
            fmt("chip a{RZ(2^(3^4)+(2^3)^4 + -(2*3)) on q}"),
            "chip a {\n    RZ(2^3^4 + (2^3)^4 + -(2*3)) on q\n}\n"
        );
    }

    #[test]
    fn comments_stay_where_they_stand() {
        let src = "// head\nchip a { // open\n  H on q // trail\n\n\n  // own line\n  X on q\n  // before close\n} // after\n// tail\n";
        let want = "// head\nchip a { // open\n    H on q // trail\n\n    // own line\n    X on q\n    // before close\n} // after\n// tail\n";
        assert_eq!(fmt(src), want);
        assert_eq!(fmt(want), want);
    }

    #[test]
    fn a_trailing_comment_belongs_to_the_last_statement_of_its_line() {
        let src = "chip c { dualrail a H on a // about H\n}\ndefine t(x) on q{RY(x) on q RZ(x/2) on q} // whole\n";
        let want = "chip c {\n    dualrail a\n    H on a // about H\n}\n\ndefine t(x) on q {\n    RY(x) on q\n    RZ(x/2) on q\n} // whole\n";
        assert_eq!(fmt(src), want);
    }
}
