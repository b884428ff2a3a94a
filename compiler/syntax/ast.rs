//! The abstract syntax tree: what was written, with a span on every node.
//!
//! Expressions keep the literal text of their numbers so that the formatter
//! prints exactly what the user wrote; evaluation happens in `circuit/`.

use crate::source::Span;

/// A whole file.
#[derive(Clone, Debug, PartialEq)]
pub struct Ast {
    pub items: Vec<Item>,
}

#[derive(Clone, Debug, PartialEq)]
pub enum Item {
    Chip(Chip),
    /// A definition at file level, visible in every chip of the file.
    Define(Define),
}

impl Item {
    pub fn span(&self) -> Span {
        match self {
            Item::Chip(c) => c.span,
            Item::Define(d) => d.span,
        }
    }
}

/// A user-written name (qubit, mode, definition, metric, key ...).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Name {
    pub text: String,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Chip {
    pub name: Name,
    pub body: Vec<Stmt>,
    /// The span of `chip NAME {`.
    pub header: Span,
    /// The span of the closing brace.
    pub close: Span,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Stmt {
    pub kind: StmtKind,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub enum StmtKind {
    Process(ProcessRef),
    Dualrail(Vec<Name>),
    Mode(Vec<Name>),
    Ancilla {
        names: Vec<Name>,
        photons: Option<Count>,
    },
    Launch(Vec<LaunchItem>),
    Apply(Apply),
    Unitary(UnitaryStmt),
    Define(Define),
    Herald(Vec<HeraldItem>),
    Detect(Vec<Operand>),
    Require(Require),
    Tolerance(Vec<TolEntry>),
    Band(Band),
}

#[derive(Clone, Debug, PartialEq)]
pub enum ProcessRef {
    Preset(Name),
    File { path: String, span: Span },
}

/// A non-negative integer as written (photon numbers, step counts).
#[derive(Clone, Debug, PartialEq)]
pub struct Count {
    pub text: String,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct LaunchItem {
    pub target: Name,
    pub value: LaunchValue,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub enum LaunchValue {
    /// `|0>`, `|1>`: the digits between the bars.
    Ket {
        bits: String,
        span: Span,
    },
    Photons(Count),
}

/// `CALLEE(ARGS) on OPERANDS`: a standard gate, a mode-level element or a
/// user definition.
#[derive(Clone, Debug, PartialEq)]
pub struct Apply {
    pub callee: Name,
    /// `None` when no parentheses were written; `Some(vec![])` for `()`.
    pub args: Option<Vec<Quantity>>,
    pub args_span: Option<Span>,
    /// The word `heralded` after the callee (`CZ heralded on a, b`): the
    /// ancilla-photon scheme of an entangling gate.
    pub heralded: Option<Span>,
    pub operands: Vec<Operand>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Operand {
    pub kind: OperandKind,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub enum OperandKind {
    /// A qubit, a mode, an ancilla or a definition's formal.
    Name(Name),
    /// `q.0`, `q.1`: one rail of a dual-rail qubit.
    Rail { qubit: Name, index: String },
    /// `m0 ... m7`: every mode from the first to the last, in mode order.
    Range(Box<Operand>, Box<Operand>),
}

#[derive(Clone, Debug, PartialEq)]
pub struct UnitaryStmt {
    pub operands: Vec<Operand>,
    pub source: MatrixSource,
}

#[derive(Clone, Debug, PartialEq)]
pub enum MatrixSource {
    Literal(Matrix),
    /// `from "U8.csv"`, relative to the circuit file's folder.
    File {
        path: String,
        span: Span,
    },
}

#[derive(Clone, Debug, PartialEq)]
pub struct Matrix {
    pub rows: Vec<MatrixRow>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct MatrixRow {
    pub entries: Vec<Expr>,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Define {
    pub name: Name,
    /// Angle (or other number) parameters; `None` when no parentheses.
    pub params: Option<Vec<Name>>,
    /// The operands the body acts on.
    pub formals: Vec<Name>,
    pub body: Vec<Stmt>,
    pub header: Span,
    pub close: Span,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct HeraldItem {
    pub target: Name,
    pub count: Count,
    pub span: Span,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CmpOp {
    AtLeast,
    AtMost,
    Above,
    Below,
}

impl CmpOp {
    pub fn as_str(self) -> &'static str {
        match self {
            CmpOp::AtLeast => ">=",
            CmpOp::AtMost => "<=",
            CmpOp::Above => ">",
            CmpOp::Below => "<",
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Require {
    pub metric: Name,
    pub op: CmpOp,
    pub op_span: Span,
    pub value: Quantity,
    /// `at 90% yield`
    pub yield_level: Option<Quantity>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct TolEntry {
    pub key: Name,
    pub value: Quantity,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Band {
    pub from: Quantity,
    /// `to STOP in N steps`
    pub to: Option<(Quantity, Count)>,
}

/// A unit as written after an expression.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Unit {
    Nm,
    Um,
    Mm,
    Cm,
    Rad,
    Deg,
    Db,
    DbPerCm,
    Mw,
    Percent,
}

impl Unit {
    pub fn parse(text: &str) -> Option<Unit> {
        Some(match text {
            "nm" => Unit::Nm,
            "um" => Unit::Um,
            "mm" => Unit::Mm,
            "cm" => Unit::Cm,
            "rad" => Unit::Rad,
            "deg" => Unit::Deg,
            "dB" => Unit::Db,
            "dB/cm" => Unit::DbPerCm,
            "mW" => Unit::Mw,
            "%" => Unit::Percent,
            _ => return None,
        })
    }

    pub fn as_str(self) -> &'static str {
        match self {
            Unit::Nm => "nm",
            Unit::Um => "um",
            Unit::Mm => "mm",
            Unit::Cm => "cm",
            Unit::Rad => "rad",
            Unit::Deg => "deg",
            Unit::Db => "dB",
            Unit::DbPerCm => "dB/cm",
            Unit::Mw => "mW",
            Unit::Percent => "%",
        }
    }
}

/// A value as written where a number with a unit is expected: an
/// expression whose terms may carry units (`pi/2 + 30 deg`).
#[derive(Clone, Debug, PartialEq)]
pub struct Quantity {
    pub expr: Expr,
    pub span: Span,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Expr {
    pub kind: ExprKind,
    pub span: Span,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
}

impl BinOp {
    pub fn as_str(self) -> &'static str {
        match self {
            BinOp::Add => "+",
            BinOp::Sub => "-",
            BinOp::Mul => "*",
            BinOp::Div => "/",
            BinOp::Pow => "^",
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub enum ExprKind {
    /// A real literal, as written (`0.5`, `1e-3`).
    Number(String),
    /// An imaginary literal without its `i` (`0.5` for `0.5i`).
    Imaginary(String),
    /// `pi`, `i`, or a definition's parameter.
    Name(String),
    Call {
        func: Name,
        arg: Box<Expr>,
    },
    Neg(Box<Expr>),
    Binary {
        op: BinOp,
        lhs: Box<Expr>,
        rhs: Box<Expr>,
    },
    /// A product followed by a unit: `pi/3 rad`, `30 deg`, `90%`.
    WithUnit {
        value: Box<Expr>,
        unit: Unit,
        unit_span: Span,
    },
}

// ---- comparison without positions -------------------------------------------

/// Sets every span of a tree to zero, so that two trees can be compared for
/// what they say rather than where they stand (the formatter's round trip).
pub trait ClearSpans {
    fn clear_spans(&mut self);
}

impl ClearSpans for Span {
    fn clear_spans(&mut self) {
        *self = Span::default();
    }
}

impl<T: ClearSpans> ClearSpans for Vec<T> {
    fn clear_spans(&mut self) {
        self.iter_mut().for_each(ClearSpans::clear_spans);
    }
}

impl<T: ClearSpans> ClearSpans for Option<T> {
    fn clear_spans(&mut self) {
        if let Some(x) = self {
            x.clear_spans();
        }
    }
}

impl<T: ClearSpans> ClearSpans for Box<T> {
    fn clear_spans(&mut self) {
        (**self).clear_spans();
    }
}

impl ClearSpans for Ast {
    fn clear_spans(&mut self) {
        self.items.clear_spans();
    }
}

impl ClearSpans for Item {
    fn clear_spans(&mut self) {
        match self {
            Item::Chip(c) => c.clear_spans(),
            Item::Define(d) => d.clear_spans(),
        }
    }
}

impl ClearSpans for Name {
    fn clear_spans(&mut self) {
        self.span.clear_spans();
    }
}

impl ClearSpans for Count {
    fn clear_spans(&mut self) {
        self.span.clear_spans();
    }
}

impl ClearSpans for Chip {
    fn clear_spans(&mut self) {
        self.name.clear_spans();
        self.body.clear_spans();
        self.header.clear_spans();
        self.close.clear_spans();
        self.span.clear_spans();
    }
}

impl ClearSpans for Define {
    fn clear_spans(&mut self) {
        self.name.clear_spans();
        self.params.clear_spans();
        self.formals.clear_spans();
        self.body.clear_spans();
        self.header.clear_spans();
        self.close.clear_spans();
        self.span.clear_spans();
        // `define f() on q` and `define f on q` mean the same.
        if self.params.as_ref().is_some_and(Vec::is_empty) {
            self.params = None;
        }
    }
}

impl ClearSpans for Stmt {
    fn clear_spans(&mut self) {
        self.span.clear_spans();
        match &mut self.kind {
            StmtKind::Process(ProcessRef::Preset(n)) => n.clear_spans(),
            StmtKind::Process(ProcessRef::File { span, .. }) => span.clear_spans(),
            StmtKind::Dualrail(n) | StmtKind::Mode(n) => n.clear_spans(),
            StmtKind::Ancilla { names, photons } => {
                names.clear_spans();
                photons.clear_spans();
            }
            StmtKind::Launch(items) => {
                for it in items {
                    it.target.clear_spans();
                    it.span.clear_spans();
                    match &mut it.value {
                        LaunchValue::Ket { span, .. } => span.clear_spans(),
                        LaunchValue::Photons(c) => c.clear_spans(),
                    }
                }
            }
            StmtKind::Apply(a) => a.clear_spans(),
            StmtKind::Unitary(u) => {
                u.operands.clear_spans();
                match &mut u.source {
                    MatrixSource::Literal(m) => {
                        m.span.clear_spans();
                        for r in &mut m.rows {
                            r.span.clear_spans();
                            r.entries.clear_spans();
                        }
                    }
                    MatrixSource::File { span, .. } => span.clear_spans(),
                }
            }
            StmtKind::Define(d) => d.clear_spans(),
            StmtKind::Herald(items) => {
                for h in items {
                    h.target.clear_spans();
                    h.count.clear_spans();
                    h.span.clear_spans();
                }
            }
            StmtKind::Detect(o) => o.clear_spans(),
            StmtKind::Require(r) => {
                r.metric.clear_spans();
                r.op_span.clear_spans();
                r.value.clear_spans();
                r.yield_level.clear_spans();
            }
            StmtKind::Tolerance(entries) => {
                for e in entries {
                    e.key.clear_spans();
                    e.value.clear_spans();
                    e.span.clear_spans();
                }
            }
            StmtKind::Band(b) => {
                b.from.clear_spans();
                if let Some((q, c)) = &mut b.to {
                    q.clear_spans();
                    c.clear_spans();
                }
            }
        }
    }
}

impl ClearSpans for Apply {
    fn clear_spans(&mut self) {
        self.callee.clear_spans();
        self.args.clear_spans();
        self.args_span = None;
        if self.heralded.is_some() {
            self.heralded = Some(Span::default());
        }
        self.operands.clear_spans();
        if self.args.as_ref().is_some_and(Vec::is_empty) {
            self.args = None;
        }
    }
}

impl ClearSpans for Operand {
    fn clear_spans(&mut self) {
        self.span.clear_spans();
        match &mut self.kind {
            OperandKind::Name(n) => n.clear_spans(),
            OperandKind::Rail { qubit, .. } => qubit.clear_spans(),
            OperandKind::Range(a, b) => {
                a.clear_spans();
                b.clear_spans();
            }
        }
    }
}

impl ClearSpans for Quantity {
    fn clear_spans(&mut self) {
        self.expr.clear_spans();
        self.span.clear_spans();
    }
}

impl ClearSpans for Expr {
    fn clear_spans(&mut self) {
        self.span.clear_spans();
        match &mut self.kind {
            ExprKind::Call { func, arg } => {
                func.clear_spans();
                arg.clear_spans();
            }
            ExprKind::Neg(x) => x.clear_spans(),
            ExprKind::Binary { lhs, rhs, .. } => {
                lhs.clear_spans();
                rhs.clear_spans();
            }
            ExprKind::WithUnit {
                value, unit_span, ..
            } => {
                value.clear_spans();
                unit_span.clear_spans();
            }
            _ => {}
        }
    }
}
