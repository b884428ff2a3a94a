//! pest parse tree to AST, with error recovery.
//!
//! The grammar (grammar/trilane.pest) lets every line that is not a statement
//! fall into a `recover` node; each such line is parsed again on its own so
//! that its error names what was expected there. All syntax errors of a file
//! are so reported in one run.
//!
//! The `unwrap()`s on `into_inner().next()` below follow the shape of a pair
//! that the grammar guarantees once the pair exists (a `chip` pair always
//! holds its name, an `apply` its callee); they are not input-dependent, and
//! the property tests drive the builder with random and mutated files.

use super::ast::*;
use crate::diagnostic::{Diagnostic, Diagnostics};
use crate::source::Span;
use pest::Parser;
use pest::iterators::Pair;

#[derive(pest_derive::Parser)]
#[grammar = "grammar/trilane.pest"]
struct Grammar;

/// Operators and operands one expression may hold.
pub const MAX_EXPR_NODES: usize = 1_000;

#[derive(Clone, Copy, PartialEq, Eq)]
enum Context {
    TopLevel,
    Chip,
    Definition,
}

pub fn parse_text(text: &str) -> Result<Ast, Diagnostics> {
    TRIM.with(|t| {
        let comments = super::comments::comments(text)
            .into_iter()
            .map(|c| (c.span.start, c.span.end))
            .collect();
        *t.borrow_mut() = (text.to_owned(), comments);
    });
    let mut b = Builder {
        text,
        diags: Diagnostics::new(),
        nodes: 0,
    };
    let file = match Grammar::parse(Rule::file, text) {
        Ok(mut pairs) => pairs.next().expect("file rule yields one pair"),
        Err(e) => return Err(b.pest_error(e, 0).into()),
    };
    let mut items = Vec::new();
    for pair in file.into_inner() {
        match pair.as_rule() {
            Rule::chip => items.push(Item::Chip(b.chip(pair))),
            Rule::define => items.push(Item::Define(b.define(pair))),
            Rule::top_recover => b.recovered(pair, Context::TopLevel, None),
            _ => {}
        }
    }
    if b.diags.has_errors() {
        Err(b.diags)
    } else {
        Ok(Ast { items })
    }
}

struct Builder<'t> {
    text: &'t str,
    diags: Diagnostics,
    nodes: usize,
}

thread_local! {
    /// The text being parsed and its comments (start, end), for [`span_of`].
    static TRIM: std::cell::RefCell<(String, Vec<(usize, usize)>)> = const { std::cell::RefCell::new((String::new(), Vec::new())) };
}

/// The span of a pair without the whitespace and comments that pest leaves
/// at the end of a rule ending in an optional or repeated part.
fn span_of(pair: &Pair<Rule>) -> Span {
    let s = pair.as_span();
    let (start, mut end) = (s.start(), s.end());
    TRIM.with(|t| {
        let t = t.borrow();
        let text = t.0.as_bytes();
        loop {
            while end > start && matches!(text.get(end - 1), Some(b' ' | b'\t' | b'\r' | b'\n')) {
                end -= 1;
            }
            match t.1.binary_search_by_key(&end, |c| c.1) {
                Ok(k) if t.1[k].0 >= start => end = t.1[k].0,
                _ => break,
            }
        }
    });
    Span::new(start, end)
}

fn name(pair: Pair<Rule>) -> Name {
    Name {
        text: pair.as_str().to_owned(),
        span: span_of(&pair),
    }
}

fn count(pair: Pair<Rule>) -> Count {
    Count {
        text: pair.as_str().to_owned(),
        span: span_of(&pair),
    }
}

impl<'t> Builder<'t> {
    fn chip(&mut self, pair: Pair<Rule>) -> Chip {
        let span = span_of(&pair);
        let mut inner = pair.into_inner();
        let name = name(inner.next().unwrap());
        let header_end = self.text[name.span.end..span.end]
            .find('{')
            .map_or(name.span.end, |i| name.span.end + i + 1);
        let body = self.statements(inner, Context::Chip);
        Chip {
            name,
            body,
            header: Span::new(span.start, header_end),
            close: Span::new(span.end - 1, span.end),
            span,
        }
    }

    fn define(&mut self, pair: Pair<Rule>) -> Define {
        let span = span_of(&pair);
        let mut inner = pair.into_inner().peekable();
        let name = name(inner.next().unwrap());
        let params = if inner.peek().map(|p| p.as_rule()) == Some(Rule::def_params) {
            Some(inner.next().unwrap().into_inner().map(name_of).collect())
        } else {
            None
        };
        let formal_pair = inner.next().unwrap();
        let formals_end = span_of(&formal_pair).end;
        let formals = formal_pair.into_inner().map(name_of).collect();
        let header_end = self.text[formals_end..span.end]
            .find('{')
            .map_or(formals_end, |i| formals_end + i + 1);
        let body = self.statements(inner, Context::Definition);
        Define {
            name,
            params,
            formals,
            body,
            header: Span::new(span.start, header_end),
            close: Span::new(span.end - 1, span.end),
            span,
        }
    }

    fn statements<'a>(
        &mut self,
        pairs: impl Iterator<Item = Pair<'a, Rule>>,
        ctx: Context,
    ) -> Vec<Stmt> {
        let mut out: Vec<Stmt> = Vec::new();
        for pair in pairs {
            if pair.as_rule() == Rule::recover {
                let prev = out.last().map(|s| s.span);
                self.recovered(pair, ctx, prev);
            } else if pair.as_rule() == Rule::define {
                let span = span_of(&pair);
                out.push(Stmt {
                    kind: StmtKind::Define(self.define(pair)),
                    span,
                });
            } else if let Some(stmt) = self.statement(pair) {
                out.push(stmt);
            }
        }
        out
    }

    fn statement(&mut self, pair: Pair<Rule>) -> Option<Stmt> {
        let span = span_of(&pair);
        let rule = pair.as_rule();
        let mut inner = pair.into_inner();
        let kind = match rule {
            Rule::process_stmt => {
                let p = inner.next().unwrap();
                match p.as_rule() {
                    Rule::string => {
                        let sp = span_of(&p);
                        ProcessRef::File {
                            path: p.into_inner().next().unwrap().as_str().to_owned(),
                            span: sp,
                        }
                    }
                    _ => ProcessRef::Preset(name(p)),
                }
                .into_stmt()
            }
            Rule::dualrail_stmt => StmtKind::Dualrail(names(inner.next().unwrap())),
            Rule::mode_stmt => StmtKind::Mode(names(inner.next().unwrap())),
            Rule::ancilla_stmt => {
                let names = names(inner.next().unwrap());
                let photons = inner.next().map(|p| count(p.into_inner().next().unwrap()));
                StmtKind::Ancilla { names, photons }
            }
            Rule::launch_stmt => StmtKind::Launch(
                inner
                    .map(|item| {
                        let sp = span_of(&item);
                        let mut it = item.into_inner();
                        let target = name(it.next().unwrap());
                        let v = it.next().unwrap();
                        let value = match v.as_rule() {
                            Rule::ket => {
                                let vs = span_of(&v);
                                LaunchValue::Ket {
                                    bits: v.into_inner().next().unwrap().as_str().to_owned(),
                                    span: vs,
                                }
                            }
                            _ => LaunchValue::Photons(count(v.into_inner().next().unwrap())),
                        };
                        LaunchItem {
                            target,
                            value,
                            span: sp,
                        }
                    })
                    .collect(),
            ),
            Rule::apply => {
                let callee = name(inner.next().unwrap());
                let mut args = None;
                let mut args_span = None;
                let mut heralded = None;
                let mut operands = Vec::new();
                for p in inner {
                    match p.as_rule() {
                        Rule::args => {
                            args_span = Some(span_of(&p));
                            args = Some(p.into_inner().filter_map(|q| self.quantity(q)).collect());
                        }
                        Rule::heralded => heralded = Some(span_of(&p)),
                        Rule::operand_list => operands = self.operands(p),
                        _ => {}
                    }
                }
                StmtKind::Apply(Apply {
                    callee,
                    args,
                    args_span,
                    heralded,
                    operands,
                })
            }
            Rule::unitary_stmt => {
                let operands = self.operands(inner.next().unwrap());
                let src = inner.next().unwrap();
                let source = match src.as_rule() {
                    Rule::matrix_source => {
                        MatrixSource::Literal(self.matrix(src.into_inner().next().unwrap())?)
                    }
                    _ => {
                        let s = src.into_inner().next().unwrap();
                        let sp = span_of(&s);
                        MatrixSource::File {
                            path: s.into_inner().next().unwrap().as_str().to_owned(),
                            span: sp,
                        }
                    }
                };
                StmtKind::Unitary(UnitaryStmt { operands, source })
            }
            Rule::herald_stmt => StmtKind::Herald(
                inner
                    .map(|item| {
                        let sp = span_of(&item);
                        let mut it = item.into_inner();
                        HeraldItem {
                            target: name(it.next().unwrap()),
                            count: count(it.next().unwrap()),
                            span: sp,
                        }
                    })
                    .collect(),
            ),
            Rule::detect_stmt => StmtKind::Detect(self.operands(inner.next().unwrap())),
            Rule::require_stmt => {
                let metric = name(inner.next().unwrap());
                let op_pair = inner.next().unwrap();
                let op_span = span_of(&op_pair);
                let op = match op_pair.as_str() {
                    ">=" => CmpOp::AtLeast,
                    "<=" => CmpOp::AtMost,
                    ">" => CmpOp::Above,
                    _ => CmpOp::Below,
                };
                let value = self.quantity(inner.next().unwrap())?;
                let yield_level = match inner.next() {
                    Some(y) => Some(self.quantity(y.into_inner().next().unwrap())?),
                    None => None,
                };
                StmtKind::Require(Require {
                    metric,
                    op,
                    op_span,
                    value,
                    yield_level,
                })
            }
            Rule::tolerance_stmt => StmtKind::Tolerance(
                inner
                    .filter_map(|e| {
                        let sp = span_of(&e);
                        let mut it = e.into_inner();
                        let key = name(it.next().unwrap());
                        let value = self.quantity(it.next().unwrap())?;
                        Some(TolEntry {
                            key,
                            value,
                            span: sp,
                        })
                    })
                    .collect(),
            ),
            Rule::band_stmt => {
                let from = self.quantity(inner.next().unwrap())?;
                let to = match inner.next() {
                    Some(q) => {
                        let stop = self.quantity(q)?;
                        let n = count(inner.next().unwrap());
                        Some((stop, n))
                    }
                    None => None,
                };
                StmtKind::Band(Band { from, to })
            }
            _ => return None,
        };
        Some(Stmt { kind, span })
    }

    fn operands(&mut self, list: Pair<Rule>) -> Vec<Operand> {
        list.into_inner().map(operand).collect()
    }

    fn matrix(&mut self, pair: Pair<Rule>) -> Option<Matrix> {
        let span = span_of(&pair);
        let mut rows = Vec::new();
        for row in pair.into_inner() {
            let rspan = span_of(&row);
            let mut entries = Vec::new();
            for e in row.into_inner() {
                entries.push(self.expr(e)?);
            }
            rows.push(MatrixRow {
                entries,
                span: rspan,
            });
        }
        Some(Matrix { rows, span })
    }

    fn quantity(&mut self, pair: Pair<Rule>) -> Option<Quantity> {
        let span = span_of(&pair);
        let mut inner = pair.into_inner();
        let expr = self.expr(inner.next().unwrap())?;
        Some(Quantity { expr, span })
    }

    /// Builds an expression; `None` (with a diagnostic) when it is too large.
    fn expr(&mut self, pair: Pair<Rule>) -> Option<Expr> {
        self.nodes = 0;
        let span = span_of(&pair);
        let e = self.sum(pair);
        if self.nodes > MAX_EXPR_NODES {
            self.diags.push(
                Diagnostic::error(
                    "expression-too-large",
                    format!("the expression has more than {MAX_EXPR_NODES} operators and operands"),
                    Span::new(span.start, span.start + 1),
                    "this expression",
                )
                .with_hint("a gate angle is one number: compute it outside and write the value"),
            );
            return None;
        }
        Some(e)
    }

    fn bump(&mut self) {
        self.nodes += 1;
    }

    fn sum(&mut self, pair: Pair<Rule>) -> Expr {
        let mut inner = pair.into_inner();
        let mut acc = self.term(inner.next().unwrap());
        while let Some(op) = inner.next() {
            let rhs = self.term(inner.next().unwrap());
            let op = if op.as_str() == "+" {
                BinOp::Add
            } else {
                BinOp::Sub
            };
            acc = binary(op, acc, rhs);
            self.bump();
        }
        acc
    }

    fn term(&mut self, pair: Pair<Rule>) -> Expr {
        let mut inner = pair.into_inner();
        let mut acc = self.factor(inner.next().unwrap());
        while let Some(op) = inner.next() {
            if op.as_rule() == Rule::unit {
                let unit_span = span_of(&op);
                let unit = Unit::parse(op.as_str()).expect("grammar lists the units");
                let span = acc.span.to(unit_span);
                acc = Expr {
                    kind: ExprKind::WithUnit {
                        value: Box::new(acc),
                        unit,
                        unit_span,
                    },
                    span,
                };
                self.bump();
                break;
            }
            let rhs = self.factor(inner.next().unwrap());
            let op = if op.as_str() == "*" {
                BinOp::Mul
            } else {
                BinOp::Div
            };
            acc = binary(op, acc, rhs);
            self.bump();
        }
        acc
    }

    fn factor(&mut self, pair: Pair<Rule>) -> Expr {
        let mut negs = Vec::new();
        let mut power = None;
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::neg => negs.push(span_of(&p).start),
                Rule::plus => self.bump(),
                _ => power = Some(self.power(p)),
            }
        }
        let mut e = power.unwrap();
        for start in negs.into_iter().rev() {
            let span = Span::new(start, e.span.end);
            e = Expr {
                kind: ExprKind::Neg(Box::new(e)),
                span,
            };
            self.bump();
        }
        e
    }

    /// `a ^ -b ^ c` folded from the right: a^(-(b^c)).
    fn power(&mut self, pair: Pair<Rule>) -> Expr {
        let mut inner = pair.into_inner();
        let first = self.atom(inner.next().unwrap());
        // (negations before the atom, the atom)
        let mut rest: Vec<(Vec<usize>, Expr)> = Vec::new();
        for rhs in inner {
            let mut negs = Vec::new();
            let mut atom = None;
            for p in rhs.into_inner() {
                match p.as_rule() {
                    Rule::neg => negs.push(span_of(&p).start),
                    Rule::plus => self.bump(),
                    _ => atom = Some(self.atom(p)),
                }
            }
            rest.push((negs, atom.unwrap()));
        }
        let mut acc: Option<Expr> = None;
        for (negs, atom) in rest.into_iter().rev() {
            let mut value = match acc.take() {
                Some(exp) => {
                    self.bump();
                    binary(BinOp::Pow, atom, exp)
                }
                None => atom,
            };
            for start in negs.into_iter().rev() {
                let span = Span::new(start, value.span.end);
                value = Expr {
                    kind: ExprKind::Neg(Box::new(value)),
                    span,
                };
                self.bump();
            }
            acc = Some(value);
        }
        match acc {
            Some(exp) => {
                self.bump();
                binary(BinOp::Pow, first, exp)
            }
            None => first,
        }
    }

    fn atom(&mut self, pair: Pair<Rule>) -> Expr {
        self.bump();
        let span = span_of(&pair);
        match pair.as_rule() {
            Rule::number => Expr {
                kind: ExprKind::Number(pair.as_str().to_owned()),
                span,
            },
            Rule::imaginary => {
                let s = pair.as_str();
                Expr {
                    kind: ExprKind::Imaginary(s[..s.len() - 1].to_owned()),
                    span,
                }
            }
            Rule::ident => Expr {
                kind: ExprKind::Name(pair.as_str().to_owned()),
                span,
            },
            Rule::paren => {
                let inner = pair.into_inner().next().unwrap();
                let mut e = self.sum(inner);
                // Keep the parentheses in the span so labels cover them.
                e.span = span;
                e
            }
            Rule::call => {
                let mut inner = pair.into_inner();
                let func = name(inner.next().unwrap());
                let arg = self.sum(inner.next().unwrap());
                Expr {
                    kind: ExprKind::Call {
                        func,
                        arg: Box::new(arg),
                    },
                    span,
                }
            }
            r => unreachable!("atom rule {r:?}"),
        }
    }

    /// A line the grammar skipped: parse it alone to say what is wrong.
    fn recovered(&mut self, pair: Pair<Rule>, ctx: Context, prev: Option<Span>) {
        let span = span_of(&pair);
        let piece = &self.text[span.start..span.end];
        let line_start = self.text[..span.start].rfind('\n').map_or(0, |i| i + 1);
        let after_code = !self.text[line_start..span.start].trim().is_empty();
        if after_code && is_bare_name(piece) && !crate::circuit::KEYWORDS.contains(&piece) {
            self.diags.push(
                Diagnostic::error("syntax", format!("unexpected `{piece}` after the statement"), span, "not part of the statement before it")
                    .with_hint("separate names with commas (`dualrail a, b`, `CZ on a, b`); a new statement starts with a gate or a keyword"),
            );
            return;
        }
        // Tracking the tokens tried makes the message name them (`on`, `,`).
        pest::set_error_detail(true);
        // A statement parsed, then its line went on with something that is
        // not a statement: the statement's own tail is usually what is
        // wrong (`ancilla h = 1 fotons`). Parse the two together.
        if let Some(p) =
            prev.filter(|p| p.end <= span.start && !self.text[p.end..span.start].contains('\n'))
            && let Err(e) = Grammar::parse(Rule::statement_line, &self.text[p.start..span.end])
        {
            let d = self.pest_error(e, p.start);
            if d.span().start > span.start {
                self.diags.push(d);
                return;
            }
        }
        match Grammar::parse(Rule::statement_alone, piece) {
            Err(e) => {
                let d = self.pest_error(e, span.start);
                self.diags.push(d);
            }
            Ok(mut pairs) => {
                let stmt = pairs.next().unwrap().into_inner().next().unwrap();
                let end = span.start + stmt.as_str().trim_end().len();
                let stmt_span = Span::new(span.start, end);
                let d = match (ctx, stmt.as_rule()) {
                    (Context::TopLevel, Rule::chip_header)
                    | (Context::TopLevel, Rule::define_header) => Diagnostic::error(
                        "syntax",
                        "this block does not parse",
                        stmt_span,
                        "in this block",
                    )
                    .with_hint("a line inside it has an error; check its statements"),
                    (_, Rule::chip_header) => Diagnostic::error(
                        "misplaced",
                        "a chip cannot be declared inside another block",
                        stmt_span,
                        "nested chip",
                    )
                    .with_hint(
                        "close the enclosing block first: chips sit at the top level of a file",
                    ),
                    (Context::TopLevel, _) => Diagnostic::error(
                        "misplaced",
                        "statements belong inside a `chip NAME { ... }` block",
                        stmt_span,
                        "outside any chip",
                    )
                    .with_hint("only `chip` blocks and `define` blocks may stand at the top level"),
                    (Context::Definition, _) => Diagnostic::error(
                        "misplaced",
                        "a definition body may hold only gates and elements",
                        stmt_span,
                        "not a gate",
                    )
                    .with_hint(
                        "declarations, launches, detection and requirements belong to the chip",
                    ),
                    (Context::Chip, _) => {
                        let rest = &self.text[end..span.end];
                        let after = end + rest.len() - rest.trim_start().len();
                        Diagnostic::error(
                            "syntax",
                            "unexpected text after the statement",
                            Span::new(after, span.end.max(after + 1)),
                            "not expected here",
                        )
                        .with_hint("put each statement in full before the next")
                    }
                };
                self.diags.push(d);
            }
        }
    }

    fn pest_error(&self, e: pest::error::Error<Rule>, offset: usize) -> Diagnostic {
        use pest::error::{ErrorVariant, InputLocation};
        let attempts = e.parse_attempts();
        let location = match e.location {
            InputLocation::Pos(p) => p,
            InputLocation::Span((a, _)) => a,
        };
        // The furthest attempt, unless it lies inside a keyword that a
        // name's lookahead ruled out (`dualrail on`).
        let furthest = attempts.as_ref().map_or(location, |a| a.max_position);
        let inside_word = furthest > location
            && self
                .text
                .get(offset + location..offset + furthest)
                .is_some_and(|w| w.chars().all(|c| c.is_ascii_alphanumeric() || c == '_'));
        let pos = offset + if inside_word { location } else { furthest };
        let found = describe_found(self.text, pos);
        let rules: Vec<Rule> = match &e.variant {
            ErrorVariant::ParsingError { positives, .. } => positives.clone(),
            ErrorVariant::CustomError { .. } => Vec::new(),
        };
        let tokens: Vec<String> = attempts
            .map(|a| {
                a.expected_tokens()
                    .into_iter()
                    // Only literal tokens (pest does not export the token
                    // type; its Debug form says which kind a token is).
                    .filter(|t| format!("{t:?}").starts_with("Sensitive"))
                    .map(|t| t.to_string())
                    .filter(|t| {
                        !matches!(
                            t.as_str(),
                            " " | "\t" | "\r" | "\n" | "\u{feff}" | "//" | "."
                        )
                    })
                    .collect()
            })
            .unwrap_or_default();
        let (expected, mut hint) = expectation(&rules, &tokens);
        // `30 deg*2`: a unit closes its product.
        let before = self.text[..pos].trim_end();
        if hint.is_none()
            && matches!(found.0.as_str(), "`*`" | "`/`" | "`^`")
            && [
                "nm", "um", "mm", "cm", "rad", "deg", "dB", "dB/cm", "mW", "%",
            ]
            .iter()
            .any(|u| before.ends_with(u))
        {
            hint = Some("a unit ends its product: write `2*30 deg`, or put the value with its unit in parentheses, `(30 deg)*2`".to_owned());
        }
        if hint.is_none()
            && matches!(found.0.as_str(), "`photon`" | "`photons`")
            && expected.contains("a statement")
        {
            hint = Some("photon numbers stand alone in `herald h = 1`; the words `photon`/`photons` belong to `ancilla` and `launch`".to_owned());
        } else if hint.is_none() && found.2 && expected.contains("a statement") {
            hint = Some(format!(
                "{} cannot start a statement: the statement before it ended earlier than it should, check it",
                found.0
            ));
        }
        if hint.is_none() && found.2 && expected.contains("a name") {
            hint = Some(format!(
                "{} is a keyword and cannot be used as a name",
                found.0
            ));
        }
        if hint.is_none()
            && expected.contains("a name")
            && found.0.starts_with('`')
            && found.0[1..].starts_with(|c: char| c.is_ascii_uppercase())
        {
            hint = Some("names of qubits, modes and definitions start with a lower-case letter; upper case is for gates".to_owned());
        }
        let end = (pos + found.1).min(self.text.len()).max(pos);
        let mut d = Diagnostic::error(
            "syntax",
            format!("expected {expected}, found {}", found.0),
            Span::new(pos, end),
            format!("expected {expected}"),
        );
        if let Some(h) = hint {
            d = d.with_hint(h);
        }
        d
    }
}

fn is_bare_name(s: &str) -> bool {
    let mut c = s.chars();
    c.next()
        .is_some_and(|f| f.is_ascii_alphabetic() || f == '_')
        && c.all(|x| x.is_ascii_alphanumeric() || x == '_')
}

trait IntoStmt {
    fn into_stmt(self) -> StmtKind;
}

impl IntoStmt for ProcessRef {
    fn into_stmt(self) -> StmtKind {
        StmtKind::Process(self)
    }
}

fn name_of(pair: Pair<Rule>) -> Name {
    name(pair)
}

fn names(list: Pair<Rule>) -> Vec<Name> {
    list.into_inner().map(name).collect()
}

fn operand(pair: Pair<Rule>) -> Operand {
    let span = span_of(&pair);
    let kind = match pair.as_rule() {
        Rule::ident => OperandKind::Name(name(pair)),
        Rule::rail => {
            let mut it = pair.into_inner();
            let qubit = name(it.next().unwrap());
            OperandKind::Rail {
                qubit,
                index: it.next().unwrap().as_str().to_owned(),
            }
        }
        Rule::range => {
            let mut it = pair.into_inner();
            let a = operand(it.next().unwrap());
            let b = operand(it.next().unwrap());
            OperandKind::Range(Box::new(a), Box::new(b))
        }
        r => unreachable!("operand rule {r:?}"),
    };
    Operand { kind, span }
}

fn binary(op: BinOp, lhs: Expr, rhs: Expr) -> Expr {
    let span = lhs.span.to(rhs.span);
    Expr {
        kind: ExprKind::Binary {
            op,
            lhs: Box::new(lhs),
            rhs: Box::new(rhs),
        },
        span,
    }
}

/// What stands at `pos`, for "found ...": its description, its length in
/// bytes, and whether it is a keyword.
fn describe_found(text: &str, pos: usize) -> (String, usize, bool) {
    let rest = &text[crate::source::floor_char_boundary(text, pos.min(text.len()))..];
    let Some(c) = rest.chars().next() else {
        return ("the end of the file".into(), 0, false);
    };
    if c == '\n' || c == '\r' {
        return ("the end of the line".into(), 0, false);
    }
    if c.is_alphanumeric() || c == '_' {
        let word: String = rest
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_')
            .collect();
        let keyword = crate::circuit::KEYWORDS.contains(&word.as_str());
        return (format!("`{word}`"), word.len(), keyword);
    }
    if c.is_whitespace()
        || c.is_control()
        || matches!(c, '\u{200B}'..='\u{200F}' | '\u{2060}' | '\u{FEFF}')
    {
        return (
            format!("the invisible character U+{:04X}", c as u32),
            c.len_utf8(),
            false,
        );
    }
    (format!("`{c}`"), c.len_utf8(), false)
}

/// Friendly words for what the parser wanted, and a hint for common slips.
fn expectation(rules: &[Rule], tokens: &[String]) -> (String, Option<String>) {
    // Name the punctuation and connecting words the parser could take next;
    // keywords it merely ruled out, operators and units are summarised.
    const STRUCTURAL: [&str; 21] = [
        "on", "(", ")", ",", "[", "]", "=", "{", "}", ">", "|", "to", "in", "at", "yield", "from",
        "steps", "step", "photons", "photon", "...",
    ];
    let comparing = rules.contains(&Rule::cmp_op);
    let mut words: Vec<String> = tokens
        .iter()
        .filter(|t| STRUCTURAL.contains(&t.as_str()) && !(comparing && t.as_str() == ">"))
        .map(|t| format!("`{t}`"))
        .collect();
    let ops: Vec<&str> = ["+", "-", "*", "/", "^"]
        .into_iter()
        .filter(|o| tokens.iter().any(|t| t == o))
        .collect();
    match ops.len() {
        0 => {}
        5 => words.push("an operator".into()),
        _ => words.extend(ops.iter().map(|o| format!("`{o}`"))),
    }
    if tokens.iter().any(|t| super::ast::Unit::parse(t).is_some()) {
        words.push("a unit".into());
    }
    // `heralded` is an optional word that is almost never the one missing.
    let rules: Vec<Rule> = rules
        .iter()
        .copied()
        .filter(|r| *r != Rule::heralded)
        .collect();
    let rules: Vec<Rule> = if tokens.is_empty() {
        rules
    } else {
        rules
            .iter()
            .copied()
            .filter(|r| {
                !matches!(
                    r,
                    Rule::args
                        | Rule::unit
                        | Rule::add_op
                        | Rule::mul_op
                        | Rule::def_params
                        | Rule::photon_word
                        | Rule::step_word
                )
            })
            .collect()
    };
    let rules = &rules[..];
    let mut hint = None;
    for r in rules {
        let w = match r {
            Rule::EOI => "the end of the statement",
            Rule::chip | Rule::chip_header => "`chip NAME {`",
            Rule::define | Rule::define_header => "`define NAME on OPERANDS {`",
            Rule::chip_name
            | Rule::def_name
            | Rule::ident
            | Rule::ident_list
            | Rule::formal_list
            | Rule::metric => "a name",
            Rule::callee | Rule::apply => "a statement",
            Rule::args => "`(` with arguments",
            Rule::operand_list | Rule::range | Rule::rail => "an operand",
            Rule::quantity
            | Rule::expr
            | Rule::term
            | Rule::factor
            | Rule::power
            | Rule::pow_rhs
            | Rule::number
            | Rule::imaginary
            | Rule::paren
            | Rule::call
            | Rule::neg
            | Rule::plus => "a number or expression",
            Rule::unit => "a unit",
            Rule::add_op | Rule::mul_op => "an operator",
            Rule::cmp_op => "a comparison (`>=`, `<=`, `>`, `<`)",
            Rule::string | Rule::string_body => "a quoted file name",
            Rule::count => "a whole number",
            Rule::photons => "a photon number like `1 photon`",
            Rule::photon_word => "`photon` or `photons`",
            Rule::ket | Rule::ket_bits => "a logical state like `|0>`",
            Rule::launch_item => "`NAME = |0>` or `NAME = 1 photon`",
            Rule::herald_item => "`ANCILLA = COUNT`",
            Rule::matrix | Rule::matrix_source => "a matrix `[[...], [...]]`",
            Rule::matrix_row => "a matrix row `[...]`",
            Rule::file_source => "`from \"FILE.csv\"`",
            Rule::tol_entry => "a tolerance entry like `edge_bias 2 nm`",
            Rule::yield_clause => "`at P% yield`",
            Rule::step_word => "`steps`",
            Rule::def_params => "parameters `(a, b)`",
            _ => "a statement",
        };
        if !words.iter().any(|x| x == w) {
            words.push(w.to_owned());
        }
        if matches!(r, Rule::photon_word) {
            hint = Some("photon numbers read `= 1 photon` or `= 2 photons`".to_owned());
        }
        if matches!(r, Rule::step_word) {
            hint = Some("a band reads `band 1540 nm to 1560 nm in 5 steps`".to_owned());
        }
    }
    if words.iter().any(|w| w == "an operand") {
        words.retain(|w| w != "a name");
    }
    if rules.contains(&Rule::photon_word) || tokens.iter().any(|t| t == "photon") {
        hint = Some("photon numbers read `= 1 photon` or `= 2 photons`".to_owned());
    }
    let text = match words.len() {
        0 => "something else".to_owned(),
        1 => words[0].to_owned(),
        n => format!("{} or {}", words[..n - 1].join(", "), words[n - 1]),
    };
    (text, hint)
}

#[cfg(test)]
mod tests {
    use super::*;

    const BELL: &str = r#"// Bell-pair source
chip bell_pair {
    process si220_wire             // a built-in preset
    dualrail a, b
    mode m0, m1
    ancilla h0, h1 = 1 photon
    launch a = |0>, b = |1>, m0 = 2 photons
    H on a
    CZ on a, b
    RY(pi/3) on b
    rotate(pi/4, -pi/2^2) on a.0, a.1
    split(2/3) on m0, m1
    unitary on m0, m1 = [[1/sqrt(2), 0.5i], [-i, 1e-3+2i]]
    unitary on a.0 ... b.1 from "U4.csv"
    herald h0 = 1, h1 = 0
    detect a, b
    require fidelity >= 0.95 at 90% yield
    require length <= 6 mm
    tolerance { edge_bias 2 nm, edge_local 0.7 nm, phase 0.01 rad }
    band 1540 nm to 1560 nm in 5 steps
    define tilt(t) on q { RY(t) on q  RZ(t/2) on q }
    tilt(30 deg) on a
}
define pair on x, y { H on x  CZ on x, y }
"#;

    #[test]
    fn parses_every_statement_kind() {
        let ast = parse_text(BELL).unwrap_or_else(|d| panic!("{d:#?}"));
        assert_eq!(ast.items.len(), 2);
        let Item::Chip(chip) = &ast.items[0] else {
            panic!()
        };
        assert_eq!(chip.body.len(), 20);
    }

    #[test]
    fn reports_every_broken_line() {
        let e = parse_text("chip a {\n  H on\n  CZ on a b c\n  RY(1 on a\n}\n").unwrap_err();
        assert_eq!(e.len(), 3, "{e:#?}");
    }

    #[test]
    fn power_is_right_associative_with_negative_exponents() {
        let ast = parse_text("chip a { RZ(2^-3^2) on q }").unwrap();
        let Item::Chip(c) = &ast.items[0] else {
            panic!()
        };
        let StmtKind::Apply(a) = &c.body[0].kind else {
            panic!()
        };
        let e = &a.args.as_ref().unwrap()[0].expr;
        let ExprKind::Binary {
            op: BinOp::Pow,
            rhs,
            ..
        } = &e.kind
        else {
            panic!("{e:?}")
        };
        assert!(matches!(rhs.kind, ExprKind::Neg(_)));
    }
}
