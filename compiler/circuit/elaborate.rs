//! AST to circuit IR: name resolution, evaluation, definition expansion.
//!
//! One pass collects declarations (so a name may be used above the line that
//! declares it), a second walks the statements in order and expands user
//! definitions by substituting their formals, with a call stack that catches
//! recursion. Every problem becomes a diagnostic and elaboration goes on, so
//! one run reports all of a file's errors.

use super::expr::{self, Scope};
use super::gates::{self, QubitGate};
use super::units::Kind;
use super::*;
use crate::diagnostic::{Diagnostic, Diagnostics};
use crate::syntax::ast::{
    self, Apply, Define, Item, LaunchValue, MatrixSource, Operand, OperandKind, Stmt, StmtKind,
    UnitaryStmt,
};
use std::collections::{BTreeMap, BTreeSet};

/// Reads the files a circuit refers to (`unitary ... from "U.csv"`). Paths are
/// as written; the loader resolves them against the circuit file's folder.
pub trait FileLoader {
    fn load(&self, path: &str) -> Result<String, String>;
}

/// A loader for sources that have no folder (tests, standard input).
pub struct NoFiles;

impl FileLoader for NoFiles {
    fn load(&self, path: &str) -> Result<String, String> {
        Err(format!(
            "cannot read `{path}`: this source has no folder to read files from"
        ))
    }
}

/// The circuits of a file and the warnings found on the way.
#[derive(Clone, Debug)]
pub struct Program {
    pub circuits: Vec<Circuit>,
    pub warnings: Diagnostics,
}

/// The deepest nesting of definition uses.
pub const MAX_EXPANSION_DEPTH: usize = 64;
/// The most operations one chip may expand to.
pub const MAX_OPS: usize = 1_000_000;
/// The most uses of definitions one chip may expand.
pub const MAX_EXPANSION_STEPS: usize = 2_000_000;

pub const KEYWORDS: [&str; 23] = [
    "chip",
    "process",
    "dualrail",
    "mode",
    "ancilla",
    "launch",
    "herald",
    "detect",
    "require",
    "tolerance",
    "band",
    "define",
    "unitary",
    "on",
    "from",
    "at",
    "yield",
    "to",
    "in",
    "photon",
    "photons",
    "steps",
    "step",
];

const TOLERANCE_KEYS: [(&str, Kind); 7] = [
    ("edge_bias", Kind::Length),
    ("thickness_bias", Kind::Length),
    ("edge_local", Kind::Length),
    ("roughness", Kind::Length),
    ("correlation", Kind::Length),
    ("phase", Kind::Angle),
    ("wavelength", Kind::Length),
];

/// Elaborates every chip of a file. On error, the diagnostics hold the
/// errors and the warnings together.
pub fn elaborate(ast: &ast::Ast, files: &dyn FileLoader) -> Result<Program, Diagnostics> {
    let mut diags = Diagnostics::new();
    let mut file_defs: BTreeMap<String, &Define> = BTreeMap::new();
    for item in &ast.items {
        if let Item::Define(d) = item {
            register_define(&mut file_defs, d, &mut diags);
        }
    }
    let mut used_defs: BTreeSet<String> = BTreeSet::new();
    let mut cut_off = false;
    let mut circuits = Vec::new();
    let mut chip_names: BTreeMap<&str, Span> = BTreeMap::new();
    for item in &ast.items {
        if let Item::Chip(chip) = item {
            if let Some(first) = chip_names.insert(&chip.name.text, chip.name.span) {
                diags.push(
                    Diagnostic::error(
                        "duplicate",
                        format!("chip `{}` is declared twice", chip.name.text),
                        chip.name.span,
                        "second declaration",
                    )
                    .with_label(first, "first declared here")
                    .with_hint("give each chip of a file its own name"),
                );
            }
            let mut e = ChipElab::new(chip, &file_defs, files);
            e.run();
            used_defs.extend(e.used_defs.iter().cloned());
            cut_off |= e.overflowed;
            diags.extend(e.diags);
            circuits.push(e.circuit);
        }
    }
    for (name, d) in &file_defs {
        if !used_defs.contains(name) && !cut_off {
            diags.push(Diagnostic::warning(
                "unused",
                format!("definition `{name}` is never used"),
                d.name.span,
                "defined here",
            ));
            check_unused_body(d, &file_defs, &mut diags);
        }
    }
    if ast.items.iter().all(|i| !matches!(i, Item::Chip(_))) {
        diags.push(
            Diagnostic::error(
                "no-chip",
                "the file declares no chip",
                Span::new(0, 0),
                "expected `chip NAME { ... }`",
            )
            .with_hint("a circuit file holds one or more `chip NAME { ... }` blocks"),
        );
    }
    let diags = diags.sorted();
    if diags.has_errors() {
        return Err(diags);
    }
    let mut program = Program {
        circuits,
        warnings: diags,
    };
    let mut more = Diagnostics::new();
    for c in &program.circuits {
        more.extend(validate::validate(c));
    }
    if more.has_errors() {
        program.warnings.extend(more);
        return Err(program.warnings.sorted());
    }
    program.warnings.extend(more);
    program.warnings = program.warnings.sorted();
    Ok(program)
}

fn register_define<'a>(
    defs: &mut BTreeMap<String, &'a Define>,
    d: &'a Define,
    diags: &mut Diagnostics,
) {
    let n = &d.name.text;
    if gates::element_spec(n).is_some()
        || KEYWORDS.contains(&n.as_str())
        || expr::FUNCTIONS.contains(&n.as_str())
        || n == "pi"
        || n == "i"
    {
        diags.push(
            Diagnostic::error(
                "reserved",
                format!("`{n}` is a reserved word and cannot name a definition"),
                d.name.span,
                "reserved",
            )
            .with_hint("choose another lower-case name"),
        );
        // Still registered, so that its uses do not also read as unknown.
    }
    if let Some(first) = defs.get(n) {
        diags.push(
            Diagnostic::error(
                "duplicate",
                format!("definition `{n}` is declared twice"),
                d.name.span,
                "second definition",
            )
            .with_label(first.name.span, "first defined here"),
        );
        return;
    }
    let mut seen: BTreeMap<&str, Span> = BTreeMap::new();
    for p in d.params.iter().flatten().chain(d.formals.iter()) {
        if let Some(first) = seen.insert(&p.text, p.span) {
            diags.push(
                Diagnostic::error(
                    "duplicate",
                    format!("`{}` is listed twice in definition `{n}`", p.text),
                    p.span,
                    "again here",
                )
                .with_label(first, "first here"),
            );
        }
        let is_param = d.params.iter().flatten().any(|x| std::ptr::eq(x, p));
        if is_param && (p.text == "pi" || p.text == "i") {
            diags.push(Diagnostic::error(
                "reserved",
                format!("`{}` is a constant and cannot name a parameter", p.text),
                p.span,
                "reserved",
            ));
        }
    }
    defs.insert(n.clone(), d);
}

/// A name resolved to what it denotes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Target {
    Qubit(QubitId),
    Mode(ModeId),
}

struct Frame<'d> {
    def: &'d Define,
    /// A file-level definition sees only file-level definitions.
    file_level: bool,
    call: Span,
    bindings: BTreeMap<String, Target>,
    scope: Scope,
}

struct ChipElab<'a> {
    chip: &'a ast::Chip,
    defs: BTreeMap<String, &'a Define>,
    files: &'a dyn FileLoader,
    names: BTreeMap<String, (Target, Span)>,
    circuit: Circuit,
    diags: Diagnostics,
    used: BTreeSet<ModeId>,
    used_qubits: BTreeSet<QubitId>,
    used_defs: BTreeSet<String>,
    detect_span: Option<Span>,
    launched: BTreeMap<String, Span>,
    overflowed: bool,
    /// The definitions being expanded and their call sites, outermost first.
    stack: Vec<(String, Span)>,
    /// Definitions whose expansion reported an error: not expanded again.
    failed_defs: BTreeSet<String>,
    expansion_steps: usize,
    band_span: Option<Span>,
    /// The file-level definitions, for the scope of their own bodies.
    file_defs: BTreeMap<String, &'a Define>,
    tolerance_keys: BTreeMap<String, Span>,
}

impl<'a> ChipElab<'a> {
    fn new(
        chip: &'a ast::Chip,
        file_defs: &BTreeMap<String, &'a Define>,
        files: &'a dyn FileLoader,
    ) -> Self {
        ChipElab {
            chip,
            defs: file_defs.clone(),
            files,
            names: BTreeMap::new(),
            circuit: Circuit {
                name: chip.name.text.clone(),
                process: None,
                qubits: Vec::new(),
                modes: Vec::new(),
                ops: Vec::new(),
                heralds: Vec::new(),
                detect: None,
                requirements: Vec::new(),
                tolerances: Tolerances::default(),
                band: None,
                span: chip.span,
            },
            diags: Diagnostics::new(),
            used: BTreeSet::new(),
            used_qubits: BTreeSet::new(),
            used_defs: BTreeSet::new(),
            detect_span: None,
            launched: BTreeMap::new(),
            overflowed: false,
            stack: Vec::new(),
            failed_defs: BTreeSet::new(),
            expansion_steps: 0,
            band_span: None,
            file_defs: file_defs.clone(),
            tolerance_keys: BTreeMap::new(),
        }
    }

    /// Records a diagnostic; inside a definition it also points at the use
    /// being expanded.
    fn report(&mut self, d: Diagnostic) {
        let d = match self.stack.last() {
            Some((_, call)) if !d.labels.iter().any(|l| l.span == *call) => {
                d.with_label(*call, "in this use of the definition")
            }
            _ => d,
        };
        self.diags.push(d);
    }

    fn run(&mut self) {
        let body = &self.chip.body;
        // Local definitions shadow nothing: a clash with a file-level one is an error.
        let mut local: BTreeMap<String, &'a Define> = BTreeMap::new();
        for s in body {
            if let StmtKind::Define(d) = &s.kind {
                if let Some(outer) = self.defs.get(&d.name.text) {
                    self.report(
                        Diagnostic::error(
                            "duplicate",
                            format!("definition `{}` is declared twice", d.name.text),
                            d.name.span,
                            "second definition",
                        )
                        .with_label(outer.name.span, "first defined here"),
                    );
                    continue;
                }
                register_define(&mut local, d, &mut self.diags);
            }
        }
        let local_names: Vec<(String, Span)> = local
            .iter()
            .map(|(k, d)| (k.clone(), d.name.span))
            .collect();
        self.defs.extend(local);
        for s in body {
            self.declare(s);
        }
        for s in body {
            self.statement(s);
        }
        self.photon_budget();
        // After an expansion was cut off, "never used" would be noise.
        let local_names = if self.overflowed {
            Vec::new()
        } else {
            local_names
        };
        for (name, span) in local_names {
            if !self.used_defs.contains(&name) {
                self.report(Diagnostic::warning(
                    "unused",
                    format!("definition `{name}` is never used"),
                    span,
                    "defined here",
                ));
                if let Some(d) = self.defs.get(&name).copied() {
                    let mut found = Diagnostics::new();
                    check_unused_body(d, &self.defs, &mut found);
                    self.diags.extend(found);
                }
            }
        }
        self.unused_warnings();
    }

    // ---- declarations -----------------------------------------------------

    fn declare_name(&mut self, name: &ast::Name, target: Target) -> bool {
        if KEYWORDS.contains(&name.text.as_str()) {
            self.report(
                Diagnostic::error(
                    "reserved",
                    format!(
                        "`{}` is a keyword and cannot name a qubit or mode",
                        name.text
                    ),
                    name.span,
                    "keyword",
                )
                .with_hint("choose another lower-case name"),
            );
            return false;
        }
        if let Some((_, first)) = self.names.get(&name.text) {
            self.report(
                Diagnostic::error(
                    "duplicate",
                    format!("`{}` is declared twice", name.text),
                    name.span,
                    "declared again",
                )
                .with_label(*first, "first declared here")
                .with_hint("every qubit, mode and ancilla of a chip needs its own name"),
            );
            return false;
        }
        self.names.insert(name.text.clone(), (target, name.span));
        true
    }

    fn add_mode(&mut self, name: String, role: ModeRole, photons: u32, span: Span) -> ModeId {
        self.circuit.modes.push(Mode {
            name,
            role,
            photons,
            span,
        });
        self.circuit.modes.len() - 1
    }

    fn declare(&mut self, s: &Stmt) {
        match &s.kind {
            StmtKind::Process(p) => {
                if let Some(prev) = &self.circuit.process {
                    let first = match prev {
                        ProcessRef::Preset { span, .. } | ProcessRef::File { span, .. } => *span,
                    };
                    self.report(
                        Diagnostic::error(
                            "duplicate",
                            "a chip names one process",
                            s.span,
                            "second process line",
                        )
                        .with_label(first, "first named here")
                        .with_hint("keep one `process` line"),
                    );
                    return;
                }
                self.circuit.process = Some(match p {
                    ast::ProcessRef::Preset(n) => ProcessRef::Preset {
                        name: n.text.clone(),
                        span: n.span,
                    },
                    ast::ProcessRef::File { path, span } => ProcessRef::File {
                        path: path.clone(),
                        span: *span,
                    },
                });
            }
            StmtKind::Dualrail(names) => {
                for n in names {
                    let q = self.circuit.qubits.len();
                    if self.declare_name(n, Target::Qubit(q)) {
                        let r0 = self.add_mode(
                            format!("{}.0", n.text),
                            ModeRole::Rail { qubit: q, index: 0 },
                            1,
                            n.span,
                        );
                        let r1 = self.add_mode(
                            format!("{}.1", n.text),
                            ModeRole::Rail { qubit: q, index: 1 },
                            0,
                            n.span,
                        );
                        self.circuit.qubits.push(Qubit {
                            name: n.text.clone(),
                            rails: [r0, r1],
                            launch: 0,
                            span: n.span,
                        });
                    }
                }
            }
            StmtKind::Mode(names) => {
                for n in names {
                    let m = self.circuit.modes.len();
                    if self.declare_name(n, Target::Mode(m)) {
                        self.add_mode(n.text.clone(), ModeRole::Free, 0, n.span);
                    }
                }
            }
            StmtKind::Ancilla { names, photons } => {
                let count = match photons {
                    // Declared even when the count is bad, so that later
                    // uses do not also report the ancilla as undeclared.
                    Some(c) => self.count(c, "a photon number").unwrap_or(0),
                    None => 0,
                };
                for n in names {
                    let m = self.circuit.modes.len();
                    if self.declare_name(n, Target::Mode(m)) {
                        self.add_mode(n.text.clone(), ModeRole::Ancilla, count, n.span);
                    }
                }
            }
            _ => {}
        }
    }

    fn count(&mut self, c: &ast::Count, what: &str) -> Option<u32> {
        match c.text.parse::<u32>() {
            Ok(v) if v <= 1000 => Some(v),
            _ => {
                self.report(
                    Diagnostic::error(
                        "out-of-range",
                        format!("{what} of {} is beyond what trilane handles", c.text),
                        c.span,
                        "too large",
                    )
                    .with_hint("photon numbers and step counts go up to 1000"),
                );
                None
            }
        }
    }

    // ---- statements -------------------------------------------------------

    fn statement(&mut self, s: &'a Stmt) {
        let is_op = matches!(s.kind, StmtKind::Apply(_) | StmtKind::Unitary(_));
        if let (StmtKind::Apply(a), Some(_)) = (&s.kind, self.detect_span) {
            // Misplaced, but used: no "never used" warning on top.
            self.used_defs.insert(a.callee.text.clone());
        }
        if is_op && let Some(d) = self.detect_span {
            self.report(
                Diagnostic::error(
                    "after-detect",
                    "an operation follows `detect`",
                    s.span,
                    "after detection",
                )
                .with_label(d, "the outputs are detected here")
                .with_hint("`detect` describes the chip's outputs: move it after the last gate"),
            );
            return;
        }
        match &s.kind {
            StmtKind::Launch(items) => {
                for it in items {
                    self.launch(it);
                }
            }
            StmtKind::Apply(a) => self.apply(a, s.span, None),
            StmtKind::Unitary(u) => self.unitary(u, s.span, None),
            StmtKind::Herald(items) => {
                for it in items {
                    self.herald(it);
                }
            }
            StmtKind::Detect(ops) => self.detect(ops, s.span),
            StmtKind::Require(r) => self.require(r, s.span),
            StmtKind::Tolerance(entries) => self.tolerance(entries),
            StmtKind::Band(b) => self.band(b, s.span),
            StmtKind::Process(_)
            | StmtKind::Dualrail(_)
            | StmtKind::Mode(_)
            | StmtKind::Ancilla { .. }
            | StmtKind::Define(_) => {}
        }
    }

    fn lookup(&mut self, name: &ast::Name) -> Option<Target> {
        match self.names.get(&name.text) {
            Some((t, _)) => Some(*t),
            None => {
                let d = Diagnostic::error(
                    "undeclared",
                    format!("`{}` is not declared", name.text),
                    name.span,
                    "unknown name",
                );
                let known: Vec<&str> = self.names.keys().map(String::as_str).collect();
                let d = match super::suggest::nearest_name(&name.text, known.iter().copied()) {
                    Some(s) => d.with_hint(format!("did you mean `{s}`?")),
                    None if known.is_empty() => {
                        d.with_hint("declare it first, e.g. `dualrail q` or `mode m0`")
                    }
                    None => d.with_hint(format!("declared here: {}", known.join(", "))),
                };
                self.report(d);
                None
            }
        }
    }

    fn launch(&mut self, it: &ast::LaunchItem) {
        let Some(t) = self.lookup(&it.target) else {
            return;
        };
        if let Some(first) = self.launched.insert(it.target.text.clone(), it.span) {
            self.report(
                Diagnostic::error(
                    "duplicate",
                    format!("`{}` is launched twice", it.target.text),
                    it.span,
                    "second launch",
                )
                .with_label(first, "first launched here"),
            );
            return;
        }
        match (t, &it.value) {
            (Target::Qubit(q), LaunchValue::Ket { bits, span }) => {
                if bits == "0" || bits == "1" {
                    let v = u8::from(bits == "1");
                    let [r0, r1] = self.circuit.qubits[q].rails;
                    self.circuit.qubits[q].launch = v;
                    self.circuit.modes[r0].photons = u32::from(v == 0);
                    self.circuit.modes[r1].photons = u32::from(v == 1);
                } else {
                    self.report(
                        Diagnostic::error(
                            "bad-launch",
                            format!("a dual-rail qubit starts in |0> or |1>, not |{bits}>"),
                            *span,
                            "not a one-qubit state",
                        )
                        .with_hint("launch each qubit on its own: `launch a = |0>, b = |1>`"),
                    );
                }
            }
            (Target::Qubit(_), LaunchValue::Photons(c)) => self.report(
                Diagnostic::error(
                    "bad-launch",
                    format!(
                        "`{}` is a qubit: it starts in a logical state",
                        it.target.text
                    ),
                    c.span,
                    "a photon number",
                )
                .with_hint(format!(
                    "write `launch {} = |0>` or `|1>`; photon numbers are for modes",
                    it.target.text
                )),
            ),
            (Target::Mode(m), LaunchValue::Photons(c)) => {
                if self.circuit.modes[m].role == ModeRole::Ancilla {
                    self.report(
                        Diagnostic::error(
                            "bad-launch",
                            format!(
                                "`{}` is an ancilla: its photons are set where it is declared",
                                it.target.text
                            ),
                            it.span,
                            "ancilla",
                        )
                        .with_hint(format!(
                            "write `ancilla {} = {} photon`",
                            it.target.text, c.text
                        )),
                    );
                } else if let Some(v) = self.count(c, "a photon number") {
                    self.circuit.modes[m].photons = v;
                }
            }
            (Target::Mode(_), LaunchValue::Ket { span, .. }) => self.report(
                Diagnostic::error(
                    "bad-launch",
                    format!(
                        "`{}` is a mode: it starts with a photon number",
                        it.target.text
                    ),
                    *span,
                    "a logical state",
                )
                .with_hint(format!("write `launch {} = 1 photon`", it.target.text)),
            ),
        }
    }

    /// Resolves an operand (within a definition, through its bindings).
    fn resolve(&mut self, op: &Operand, frame: Option<&Frame>) -> Option<Vec<Target>> {
        match &op.kind {
            OperandKind::Name(n) => self.resolve_name(n, frame).map(|t| vec![t]),
            OperandKind::Rail { qubit, index } => {
                let t = self.resolve_name(qubit, frame)?;
                match t {
                    Target::Qubit(q) => match index.as_str() {
                        "0" | "1" => Some(vec![Target::Mode(
                            self.circuit.qubits[q].rails[usize::from(index == "1")],
                        )]),
                        _ => {
                            self.report(
                                Diagnostic::error(
                                    "bad-rail",
                                    format!("a dual-rail qubit has rails .0 and .1, not .{index}"),
                                    op.span,
                                    "no such rail",
                                )
                                .with_hint(format!(
                                    "`{0}.0` carries |0>, `{0}.1` carries |1>",
                                    qubit.text
                                )),
                            );
                            None
                        }
                    },
                    Target::Mode(_) => {
                        self.report(
                            Diagnostic::error(
                                "bad-rail",
                                format!("`{}` is a mode, not a qubit: it has no rails", qubit.text),
                                op.span,
                                "not a qubit",
                            )
                            .with_hint(format!("write `{}` on its own", qubit.text)),
                        );
                        None
                    }
                }
            }
            OperandKind::Range(a, b) => {
                if let Some(f) = frame {
                    self.report(
                        Diagnostic::error("bad-range", format!("a range inside definition `{}` could reach modes it was not given", f.def.name.text), op.span, "range in a definition")
                            .with_hint("list the operands one by one: a definition acts only on what it is given"),
                    );
                    return None;
                }
                let ta = self.resolve(a, frame)?;
                let tb = self.resolve(b, frame)?;
                match (ta.as_slice(), tb.as_slice()) {
                    ([Target::Mode(x)], [Target::Mode(y)]) if x <= y => {
                        Some((*x..=*y).map(Target::Mode).collect())
                    }
                    ([Target::Qubit(x)], [Target::Qubit(y)]) if x <= y => {
                        Some((*x..=*y).map(Target::Qubit).collect())
                    }
                    ([Target::Qubit(_)], [Target::Qubit(_)])
                    | ([Target::Mode(_)], [Target::Mode(_)]) => {
                        self.report(
                            Diagnostic::error(
                                "bad-range",
                                "a range runs from the upper mode or qubit to the lower one",
                                op.span,
                                "reversed range",
                            )
                            .with_hint(
                                "start the range at the mode or qubit declared first, e.g. `m0 ... m7` or `a ... c`",
                            ),
                        );
                        None
                    }
                    _ => {
                        self.report(
                            Diagnostic::error(
                                "bad-range",
                                "a range runs between two modes or between two qubits",
                                op.span,
                                "not a range of one kind",
                            )
                            .with_hint(
                                "a range joins two modes (`m0 ... m3`, `a.0 ... b.1`) or two qubits (`a ... c`)",
                            ),
                        );
                        None
                    }
                }
            }
        }
    }

    fn resolve_name(&mut self, n: &ast::Name, frame: Option<&Frame>) -> Option<Target> {
        match frame {
            None => self.lookup(n),
            Some(f) => match f.bindings.get(&n.text) {
                Some(t) => Some(*t),
                None => {
                    let formals: Vec<&str> =
                        f.def.formals.iter().map(|x| x.text.as_str()).collect();
                    self.report(
                        Diagnostic::error(
                            "undeclared",
                            format!(
                                "`{}` is not an operand of definition `{}`",
                                n.text, f.def.name.text
                            ),
                            n.span,
                            "not an operand here",
                        )
                        .with_label(f.call, "used here")
                        .with_hint(format!(
                            "its operands are {}; a definition acts only on what it is given",
                            formals.join(", ")
                        )),
                    );
                    None
                }
            },
        }
    }

    /// Resolves all operands; they must be of one kind, distinct, and counted.
    fn operands(&mut self, ops: &[Operand], frame: Option<&Frame>) -> Option<Vec<(Target, Span)>> {
        let mut out: Vec<(Target, Span)> = Vec::new();
        let mut ok = true;
        for op in ops {
            match self.resolve(op, frame) {
                Some(ts) => out.extend(ts.into_iter().map(|t| (t, op.span))),
                None => ok = false,
            }
        }
        // A name written as an operand is used, even where the operation fails.
        for (t, _) in &out {
            match *t {
                Target::Qubit(q) => {
                    self.used_qubits.insert(q);
                }
                Target::Mode(m) => {
                    self.used.insert(m);
                }
            }
        }
        if !ok {
            return None;
        }
        // A rail used twice, or a qubit and one of its rails.
        for i in 0..out.len() {
            for j in 0..i {
                let clash = match (out[i].0, out[j].0) {
                    (a, b) if a == b => true,
                    (Target::Qubit(q), Target::Mode(m)) | (Target::Mode(m), Target::Qubit(q)) => {
                        self.circuit.qubits[q].rails.contains(&m)
                    }
                    _ => false,
                };
                if clash {
                    let (a, b) = (self.target_name(out[j].0), self.target_name(out[i].0));
                    let message = if a == b {
                        format!("`{b}` is used twice in one operation")
                    } else {
                        let (rail, qubit) = if matches!(out[i].0, Target::Mode(_)) {
                            (&b, &a)
                        } else {
                            (&a, &b)
                        };
                        format!("`{rail}` is a rail of `{qubit}`, and the operation uses both")
                    };
                    let d = Diagnostic::error("repeated-operand", message, out[i].1, "used again")
                        .with_label(out[j].1, "first use")
                        .with_hint("an operation acts on distinct qubits or modes");
                    let calls = self.call_stack(frame);
                    let d = self.with_call_label(d, &calls);
                    self.report(d);
                    return None;
                }
            }
        }
        Some(out)
    }

    fn target_name(&self, t: Target) -> String {
        match t {
            Target::Qubit(q) => self.circuit.qubits[q].name.clone(),
            Target::Mode(m) => self.circuit.modes[m].name.clone(),
        }
    }

    fn push_op(&mut self, kind: OpKind, span: Span, frame: Option<&Frame>, calls: &[Span]) {
        if self.circuit.ops.len() >= MAX_OPS {
            if !self.overflowed {
                self.overflowed = true;
                let at = calls.first().copied().unwrap_or(span);
                self.report(
                    Diagnostic::error("too-many-operations", format!("the chip expands to more than {MAX_OPS} operations"), at, "expands too far")
                        .with_hint("a chip of this size cannot be fabricated; check definitions that call each other many times"),
                );
            }
            return;
        }
        let _ = frame;
        for m in kind.modes(&self.circuit.qubits) {
            self.used.insert(m);
        }
        if let OpKind::Gate { qubits, .. } = &kind {
            self.used_qubits.extend(qubits.iter().copied());
        }
        self.circuit.ops.push(Op {
            kind,
            span,
            expanded_from: calls.to_vec(),
        });
    }

    fn with_call_label(&self, d: Diagnostic, calls: &[Span]) -> Diagnostic {
        match calls.last() {
            Some(c) => d.with_label(*c, "in this use of the definition"),
            None => d,
        }
    }

    fn apply(&mut self, a: &'a Apply, span: Span, frame: Option<&Frame<'a>>) {
        let calls: Vec<Span> = self.call_stack(frame);
        let scope = frame.map(|f| f.scope.clone()).unwrap_or_default();
        let name = a.callee.text.as_str();
        if let Some(word) = a.heralded
            && !matches!(name, "CZ" | "CNOT")
        {
            let d = Diagnostic::error(
                "not-heralded",
                format!(
                    "`heralded` names the ancilla-photon scheme of CZ and CNOT; `{name}` has none"
                ),
                word,
                "only after CZ or CNOT",
            )
            .with_hint("remove `heralded`");
            let d = self.with_call_label(d, &calls);
            self.report(d);
            let _ = self.operands(&a.operands, frame);
            return;
        }
        if let Some(spec) = gates::gate_spec(name) {
            let angles = self.args(a, spec.angles, &calls, &scope, |i| {
                format!(
                    "the argument of {}{}",
                    name,
                    if spec.angles > 1 {
                        format!(" #{i}")
                    } else {
                        String::new()
                    }
                )
            });
            let ops = self.operands(&a.operands, frame);
            let (Some(angles), Some(ops)) = (angles, ops) else {
                return;
            };
            if ops.len() != spec.qubits {
                let d = Diagnostic::error(
                    "arity",
                    format!(
                        "{name} acts on {} qubit{}, got {}",
                        spec.qubits,
                        plural(spec.qubits),
                        ops.len()
                    ),
                    operand_span(a),
                    format!("{} operand{}", ops.len(), plural(ops.len())),
                )
                .with_hint(format!(
                    "write `{name} on {}`",
                    example_operands(spec.qubits)
                ));
                let d = self.with_call_label(d, &calls);
                self.report(d);
                return;
            }
            let mut qubits = Vec::new();
            for (t, sp) in &ops {
                match t {
                    Target::Qubit(q) => qubits.push(*q),
                    Target::Mode(m) => {
                        let mname = self.circuit.modes[*m].name.clone();
                        let kind = if matches!(self.circuit.modes[*m].role, ModeRole::Rail { .. }) {
                            "a rail"
                        } else {
                            "a mode"
                        };
                        let d = Diagnostic::error("wrong-operand", format!("{name} acts on qubits, and `{mname}` is {kind}"), *sp, kind)
                            .with_hint(match self.circuit.modes[*m].role {
                                ModeRole::Rail { qubit, .. } => format!("write the qubit `{}`; mode-level elements (rotate, split, phase, unitary) act on rails", self.circuit.qubits[qubit].name),
                                _ => "mode-level elements (rotate, split, phase, unitary) act on modes".to_owned(),
                            });
                        let d = self.with_call_label(d, &calls);
                        self.report(d);
                        return;
                    }
                }
            }
            let mut gate = QubitGate::from_name(name, &angles).expect("spec names a gate");
            if a.heralded.is_some() {
                gate = gate.heralded().expect("checked above: CZ or CNOT");
            }
            // `I` is written on purpose (an idle slot); an angle that makes
            // a rotation trivial is more likely a slip.
            if gate != QubitGate::I && gates::is_identity_up_to_phase(&gate.matrix(), 1e-12) {
                self.diags
                    .push(self.identity_warning(&written(a), span, &calls));
            }
            self.push_op(OpKind::Gate { gate, qubits }, span, frame, &calls);
            return;
        }
        if let Some(spec) = gates::element_spec(name) {
            if name == "unitary" {
                let d = Diagnostic::error("syntax", "`unitary` needs its matrix", a.callee.span.to(operand_span(a)), "no matrix")
                    .with_hint("write `unitary on m0, m1 = [[...], [...]]` or `unitary on m0 ... m3 from \"U.csv\"`");
                self.report(d);
                return;
            }
            let kinds: Vec<Kind> = match name {
                "split" => vec![Kind::Fraction],
                _ => vec![Kind::Angle; spec.args.len()],
            };
            let vals = self.element_args(a, &kinds, spec.args, &calls, &scope);
            let ops = self.operands(&a.operands, frame);
            let (Some(vals), Some(ops)) = (vals, ops) else {
                return;
            };
            let n = spec.modes.unwrap_or(0);
            let Some(modes) = self.mode_operands(name, &ops, n, a, &calls) else {
                return;
            };
            let kind = match name {
                "rotate" => OpKind::Rotate {
                    theta_rad: vals[0],
                    phi_rad: vals[1],
                    modes: [modes[0], modes[1]],
                },
                "split" => {
                    if !(0.0..=1.0).contains(&vals[0]) {
                        let q = &a.args.as_ref().unwrap()[0];
                        let d = Diagnostic::error("out-of-range", format!("split moves a power fraction between 0 and 1, got {}", expr::fmt_real(vals[0])), q.span, "out of range")
                            .with_hint("split(c) sends the fraction c across: split(0.5) is 50:50, split(2/3) or split(66.7%) two thirds");
                        let d = self.with_call_label(d, &calls);
                        self.report(d);
                        return;
                    }
                    OpKind::Split {
                        cross_fraction: vals[0],
                        modes: [modes[0], modes[1]],
                    }
                }
                _ => OpKind::Phase {
                    phase_rad: vals[0],
                    mode: modes[0],
                },
            };
            let identity = match &kind {
                OpKind::Rotate {
                    theta_rad, phi_rad, ..
                } => {
                    theta_rad.sin().abs() < 1e-12
                        && theta_rad.cos() > 0.0
                        && (phi_rad.cos() - 1.0).abs() < 1e-12
                }
                OpKind::Split { cross_fraction, .. } => *cross_fraction == 0.0,
                OpKind::Phase { phase_rad, .. } => (phase_rad.cos() - 1.0).abs() < 1e-12,
                _ => false,
            };
            if identity {
                self.diags
                    .push(self.identity_warning(&written(a), span, &calls));
            }
            self.push_op(kind, span, frame, &calls);
            return;
        }
        let visible = match frame {
            Some(f) if f.file_level => self.file_defs.get(name).copied(),
            _ => self.defs.get(name).copied(),
        };
        if let Some(def) = visible {
            self.used_defs.insert(name.to_owned());
            self.expand(def, a, span, frame);
            return;
        }
        if let (Some(f), Some(local)) = (frame, self.defs.get(name)) {
            self.used_defs.insert(name.to_owned());
            let d = Diagnostic::error(
                "undeclared",
                format!("file-level definition `{}` uses `{name}`, which is defined only in chip `{}`", f.def.name.text, self.chip.name.text),
                a.callee.span,
                "not visible here",
            )
            .with_label(local.name.span, "defined in the chip")
            .with_hint("a definition at file level may use only definitions at file level: move it to the top level");
            self.report(d);
            return;
        }
        self.unknown_callee(a, &calls);
        // Still resolve the operands: undeclared names are reported too, and
        // the qubits count as used.
        let _ = self.operands(&a.operands, frame);
    }

    fn identity_warning(&self, written: &str, span: Span, calls: &[Span]) -> Diagnostic {
        let hint = if written.contains('(') {
            "remove it, or check its arguments"
        } else {
            "remove it, or check its entries"
        };
        let d = Diagnostic::warning(
            "identity",
            format!("`{written}` is the identity and does nothing"),
            span,
            "no effect",
        )
        .with_hint(hint);
        self.with_call_label(d, calls)
    }

    fn call_stack(&self, _frame: Option<&Frame>) -> Vec<Span> {
        self.stack.iter().map(|(_, s)| *s).collect()
    }

    fn unknown_callee(&mut self, a: &Apply, calls: &[Span]) {
        let d = unknown_callee(a, self.defs.keys().map(String::as_str));
        let d = self.with_call_label(d, calls);
        self.report(d);
    }

    /// Evaluates the angles of a standard gate.
    fn args(
        &mut self,
        a: &Apply,
        want: usize,
        calls: &[Span],
        scope: &Scope,
        what: impl Fn(usize) -> String,
    ) -> Option<Vec<f64>> {
        let name = &a.callee.text;
        let given = a.args.as_ref().map_or(0, Vec::len);
        if a.args.is_none() && want > 0 || given != want {
            let sp = a.args_span.unwrap_or(a.callee.span);
            let d = if want == 0 {
                Diagnostic::error(
                    "arity",
                    format!("{name} takes no angle"),
                    sp,
                    "unexpected arguments",
                )
                .with_hint(format!("write `{name} on ...`"))
            } else {
                Diagnostic::error(
                    "arity",
                    format!("{name} takes {want} angle{}, got {given}", plural(want)),
                    sp,
                    format!("{given} given"),
                )
                .with_hint(format!(
                    "write `{name}(theta) on ...`, e.g. `{name}(pi/2) on q`"
                ))
            };
            let d = self.with_call_label(d, calls);
            self.report(d);
            return None;
        }
        self.eval_args(a, |_| Kind::Angle, what, calls, scope)
    }

    /// Evaluates every argument (reporting each failure); `None` if any failed.
    fn eval_args(
        &mut self,
        a: &Apply,
        kind: impl Fn(usize) -> Kind,
        what: impl Fn(usize) -> String,
        calls: &[Span],
        scope: &Scope,
    ) -> Option<Vec<f64>> {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, q) in a.args.iter().flatten().enumerate() {
            match expr::quantity(q, kind(i), scope, &what(i + 1)) {
                Ok(v) => out.push(v),
                Err(d) => {
                    let d = self.with_call_label(d, calls);
                    self.report(d);
                    ok = false;
                }
            }
        }
        ok.then_some(out)
    }

    fn element_args(
        &mut self,
        a: &Apply,
        kinds: &[Kind],
        names: &[&str],
        calls: &[Span],
        scope: &Scope,
    ) -> Option<Vec<f64>> {
        let name = &a.callee.text;
        let given = a.args.as_ref().map_or(0, Vec::len);
        if given != kinds.len() {
            let sp = a.args_span.unwrap_or(a.callee.span);
            let d = Diagnostic::error(
                "arity",
                format!(
                    "{name} takes {} argument{} ({}), got {given}",
                    kinds.len(),
                    plural(kinds.len()),
                    names.join(", ")
                ),
                sp,
                format!("{given} given"),
            )
            .with_hint(format!("write `{name}({}) on ...`", names.join(", ")));
            let d = self.with_call_label(d, calls);
            self.report(d);
            return None;
        }
        self.eval_args(
            a,
            |i| kinds[i],
            |i| format!("`{}` of {name}", names[i - 1]),
            calls,
            scope,
        )
    }

    fn mode_operands(
        &mut self,
        name: &str,
        ops: &[(Target, Span)],
        want: usize,
        a: &Apply,
        calls: &[Span],
    ) -> Option<Vec<ModeId>> {
        let mut modes = Vec::new();
        for (t, sp) in ops {
            match t {
                Target::Mode(m) => modes.push(*m),
                Target::Qubit(q) => {
                    let qn = self.circuit.qubits[*q].name.clone();
                    let d = Diagnostic::error(
                        "wrong-operand",
                        format!("{name} acts on modes, and `{qn}` is a qubit"),
                        *sp,
                        "a qubit",
                    )
                    .with_hint(format!(
                        "name its rails `{qn}.0` and `{qn}.1`, or use a qubit gate"
                    ));
                    let d = self.with_call_label(d, calls);
                    self.report(d);
                    return None;
                }
            }
        }
        if want > 0 && modes.len() != want {
            let d = Diagnostic::error(
                "arity",
                format!(
                    "{name} acts on {want} mode{}, got {}",
                    plural(want),
                    modes.len()
                ),
                operand_span(a),
                format!("{} mode{}", modes.len(), plural(modes.len())),
            )
            .with_hint(if want == 2 {
                format!("write `{name}(...) on m0, m1`")
            } else {
                format!("write `{name}(...) on m0`")
            });
            let d = self.with_call_label(d, calls);
            self.report(d);
            return None;
        }
        Some(modes)
    }

    fn unitary(&mut self, u: &UnitaryStmt, span: Span, frame: Option<&Frame<'a>>) {
        let calls = self.call_stack(frame);
        let scope = frame.map(|f| f.scope.clone()).unwrap_or_default();
        let Some(ops) = self.operands(&u.operands, frame) else {
            return;
        };
        let fake = Apply {
            callee: ast::Name {
                text: "unitary".into(),
                span,
            },
            args: None,
            args_span: None,
            heralded: None,
            operands: u.operands.clone(),
        };
        let Some(modes) = self.mode_operands("unitary", &ops, 0, &fake, &calls) else {
            return;
        };
        let n = modes.len();
        let (matrix, where_span) = match &u.source {
            MatrixSource::Literal(m) => {
                let mut ok = true;
                if m.rows.len() != n {
                    let d = Diagnostic::error(
                        "matrix-size",
                        format!(
                            "the matrix has {} row{} for {n} mode{}",
                            m.rows.len(),
                            plural(m.rows.len()),
                            plural(n)
                        ),
                        m.span,
                        format!("{} rows", m.rows.len()),
                    )
                    .with_label(operand_span(&fake), format!("{n} mode{}", plural(n)))
                    .with_hint("an N-mode unitary is an N x N matrix, one row per output mode");
                    self.report(self.with_call_label(d, &calls));
                    return;
                }
                let mut mat = DMatrix::from_element(n, n, Complex64::new(0.0, 0.0));
                for (i, row) in m.rows.iter().enumerate() {
                    if row.entries.len() != n {
                        let d = Diagnostic::error(
                            "matrix-size",
                            format!(
                                "row {} has {} entr{} for {n} mode{}",
                                i + 1,
                                row.entries.len(),
                                if row.entries.len() == 1 { "y" } else { "ies" },
                                plural(n)
                            ),
                            row.span,
                            format!("{} entries", row.entries.len()),
                        )
                        .with_hint("every row of an N-mode unitary has N entries");
                        self.report(self.with_call_label(d, &calls));
                        ok = false;
                        continue;
                    }
                    for (j, e) in row.entries.iter().enumerate() {
                        match expr::eval(e, &scope, true) {
                            Ok(v) => mat[(i, j)] = v,
                            Err(d) => {
                                self.report(self.with_call_label(d, &calls));
                                ok = false;
                            }
                        }
                    }
                }
                if !ok {
                    return;
                }
                (mat, m.span)
            }
            MatrixSource::File { path, span: psp } => {
                let text = match self.files.load(path) {
                    Ok(t) => t,
                    Err(msg) => {
                        let d = Diagnostic::error(
                            "file",
                            format!("cannot read the matrix file: {msg}"),
                            *psp,
                            "this file",
                        )
                        .with_hint("the path is relative to the circuit file's folder");
                        self.report(self.with_call_label(d, &calls));
                        return;
                    }
                };
                match matrix_file::parse(&text) {
                    Ok(m) if m.nrows() == n && m.ncols() == n => (m, *psp),
                    Ok(m) => {
                        let d = Diagnostic::error(
                            "matrix-size",
                            format!(
                                "`{path}` holds a {} x {} matrix for {n} mode{}",
                                m.nrows(),
                                m.ncols(),
                                plural(n)
                            ),
                            *psp,
                            "wrong size",
                        )
                        .with_label(operand_span(&fake), format!("{n} mode{}", plural(n)));
                        self.report(self.with_call_label(d, &calls));
                        return;
                    }
                    Err(e) => {
                        let d = Diagnostic::error("matrix-file", format!("`{path}` line {}: {}", e.line, e.message), *psp, "in this file")
                            .with_hint("one row per line, entries separated by commas, each `re`, `re+imi` or `imi` (e.g. `0.5-0.5i`)");
                        self.report(self.with_call_label(d, &calls));
                        return;
                    }
                }
            }
        };
        if let Some(d) = unitarity_error(&matrix, where_span) {
            self.report(self.with_call_label(d, &calls));
            return;
        }
        if n > 0
            && (&matrix - DMatrix::<Complex64>::identity(n, n))
                .iter()
                .all(|v| v.norm() < 1e-12)
        {
            self.diags
                .push(self.identity_warning("unitary", span, &calls));
        }
        self.push_op(OpKind::Unitary { modes, matrix }, span, frame, &calls);
    }

    fn expand(&mut self, def: &'a Define, a: &'a Apply, _span: Span, frame: Option<&Frame<'a>>) {
        let calls = self.call_stack(frame);
        let name = &def.name.text;
        if let Some(pos) = self.stack.iter().position(|(n, _)| n == name) {
            let mut cycle: Vec<&str> = self.stack[pos..].iter().map(|(n, _)| n.as_str()).collect();
            cycle.push(name);
            let d = Diagnostic::error(
                "recursion",
                format!("definition `{name}` uses itself: {}", cycle.join(" -> ")),
                a.callee.span,
                "recursive use",
            )
            .with_label(def.name.span, "defined here")
            .with_hint("a definition expands into gates once; unroll the repetition by hand");
            self.report(d);
            return;
        }
        if self.overflowed {
            return;
        }
        if self.stack.len() >= MAX_EXPANSION_DEPTH {
            self.overflowed = true;
            self.report(
                Diagnostic::error(
                    "expansion-too-deep",
                    format!("definitions nest more than {MAX_EXPANSION_DEPTH} deep"),
                    a.callee.span,
                    "too deep",
                )
                .with_hint("a chain this deep is almost certainly generated by mistake; expansion stops here"),
            );
            return;
        }
        self.expansion_steps += 1;
        if self.expansion_steps > MAX_EXPANSION_STEPS {
            self.overflowed = true;
            let at = self.stack.first().map_or(a.callee.span, |(_, s)| *s);
            self.report(
                Diagnostic::error(
                    "too-many-operations",
                    format!("the definitions expand more than {MAX_EXPANSION_STEPS} times"),
                    at,
                    "expands too far",
                )
                .with_hint("a chip of this size cannot be fabricated; check definitions that use each other many times"),
            );
            return;
        }
        let errors_before = self.diags.error_count();
        let scope = frame.map(|f| f.scope.clone()).unwrap_or_default();
        let params: &[ast::Name] = def.params.as_deref().unwrap_or(&[]);
        let given = a.args.as_ref().map_or(0, Vec::len);
        if given != params.len() {
            let sp = a.args_span.unwrap_or(a.callee.span);
            let list: Vec<&str> = params.iter().map(|p| p.text.as_str()).collect();
            let d = Diagnostic::error(
                "arity",
                format!(
                    "`{name}` takes {} argument{}, got {given}",
                    params.len(),
                    plural(params.len())
                ),
                sp,
                format!("{given} given"),
            )
            .with_label(def.header, "defined here")
            .with_hint(if params.is_empty() {
                format!("write `{name} on ...`")
            } else {
                format!("write `{name}({}) on ...`", list.join(", "))
            });
            self.report(self.with_call_label(d, &calls));
            return;
        }
        let mut new_scope = Scope::default();
        let mut ok = true;
        for (p, q) in params.iter().zip(a.args.iter().flatten()) {
            match expr::quantity_with_kind(
                q,
                Kind::Number,
                &scope,
                &format!("argument `{}` of `{name}`", p.text),
            ) {
                Ok(v) => {
                    new_scope.params.insert(p.text.clone(), v);
                }
                Err(d) => {
                    self.report(self.with_call_label(d, &calls));
                    ok = false;
                }
            }
        }
        let Some(ops) = self.operands(&a.operands, frame) else {
            return;
        };
        if !ok {
            return;
        }
        let singles: Vec<(Target, Span)> = ops;
        if let Some(r) = a
            .operands
            .iter()
            .find(|o| matches!(o.kind, OperandKind::Range(..)))
        {
            let list: Vec<&str> = def.formals.iter().map(|p| p.text.as_str()).collect();
            let d = Diagnostic::error(
                "arity",
                format!("a range cannot stand for the operands of `{name}`"),
                r.span,
                "a range",
            )
            .with_label(def.header, "defined here")
            .with_hint(format!(
                "name each operand: `{name}{} on ...` with {} name{} for {}",
                crate::syntax::format::params_text(def),
                list.len(),
                plural(list.len()),
                list.join(", ")
            ));
            self.report(self.with_call_label(d, &calls));
            return;
        }
        if singles.len() != def.formals.len() {
            let list: Vec<&str> = def.formals.iter().map(|p| p.text.as_str()).collect();
            let d = Diagnostic::error(
                "arity",
                format!(
                    "`{name}` acts on {} operand{}, got {}",
                    def.formals.len(),
                    plural(def.formals.len()),
                    singles.len()
                ),
                operand_span(a),
                format!("{} operand{}", singles.len(), plural(singles.len())),
            )
            .with_label(def.header, "defined here")
            .with_hint(format!(
                "write `{name}{} on {}` with one name for each",
                crate::syntax::format::params_text(def),
                list.join(", "),
            ));
            self.report(self.with_call_label(d, &calls));
            return;
        }
        if self.failed_defs.contains(name) {
            // The body failed once already (its errors are reported); the use
            // itself was checked above. Expanding it again would only repeat
            // them, and for definitions that use each other twice over take
            // exponential time.
            return;
        }
        let bindings = def
            .formals
            .iter()
            .zip(singles)
            .map(|(f, (t, _))| (f.text.clone(), t))
            .collect();
        let file_level = self
            .file_defs
            .get(name)
            .is_some_and(|d| std::ptr::eq(*d, def));
        let inner = Frame {
            def,
            file_level,
            call: a.callee.span.to(operand_span(a)),
            bindings,
            scope: new_scope,
        };
        self.stack.push((name.clone(), inner.call));
        for s in &def.body {
            if self.overflowed {
                break;
            }
            match &s.kind {
                StmtKind::Apply(b) => self.apply(b, s.span, Some(&inner)),
                StmtKind::Unitary(u) => self.unitary(u, s.span, Some(&inner)),
                _ => {}
            }
        }
        self.stack.pop();
        if self.diags.error_count() > errors_before {
            self.failed_defs.insert(name.clone());
        }
    }

    fn herald(&mut self, it: &ast::HeraldItem) {
        let Some(t) = self.lookup(&it.target) else {
            return;
        };
        let Some(count) = self.count(&it.count, "a herald photon number") else {
            return;
        };
        match t {
            Target::Mode(m) if self.circuit.modes[m].role == ModeRole::Ancilla => {
                if let Some(prev) = self.circuit.heralds.iter().find(|h| h.mode == m) {
                    let d = Diagnostic::error(
                        "duplicate",
                        format!("ancilla `{}` is heralded twice", it.target.text),
                        it.span,
                        "second herald",
                    )
                    .with_label(prev.span, "first here");
                    self.report(d);
                    return;
                }
                self.used.insert(m);
                self.circuit.heralds.push(Herald {
                    mode: m,
                    photons: count,
                    span: it.span,
                });
            }
            _ => {
                let what = match t {
                    Target::Qubit(_) => "a qubit",
                    Target::Mode(m)
                        if matches!(self.circuit.modes[m].role, ModeRole::Rail { .. }) =>
                    {
                        "a rail"
                    }
                    Target::Mode(_) => "a mode",
                };
                self.report(
                    Diagnostic::error(
                        "bad-herald",
                        format!(
                            "only ancillas are heralded, and `{}` is {what}",
                            it.target.text
                        ),
                        it.target.span,
                        what,
                    )
                    .with_hint(if what == "a mode" {
                        format!(
                            "declare it with `ancilla {}` to herald it, or count it with `detect`",
                            it.target.text
                        )
                    } else {
                        "qubits and their rails are read by `detect`; heralds read ancilla modes"
                            .to_owned()
                    }),
                );
            }
        }
    }

    fn detect(&mut self, ops: &[Operand], span: Span) {
        if let Some(first) = self.detect_span {
            self.report(
                Diagnostic::error(
                    "duplicate",
                    "a chip has one `detect` line",
                    span,
                    "second detect",
                )
                .with_label(first, "first here")
                .with_hint("list every detected qubit and mode on one line"),
            );
            return;
        }
        self.detect_span = Some(span);
        let Some(ts) = self.operands(ops, None) else {
            return;
        };
        let mut d = Detect {
            qubits: Vec::new(),
            modes: Vec::new(),
            span,
        };
        for (t, sp) in ts {
            match t {
                Target::Qubit(q) => {
                    self.used_qubits.insert(q);
                    d.qubits.push(q);
                }
                Target::Mode(m) if self.circuit.modes[m].role == ModeRole::Ancilla => {
                    let n = self.circuit.modes[m].name.clone();
                    self.report(
                        Diagnostic::error(
                            "bad-detect",
                            format!("`{n}` is an ancilla: ancillas are read by `herald`"),
                            sp,
                            "ancilla",
                        )
                        .with_hint(format!(
                            "write `herald {n} = 1` (or the photon number you expect)"
                        )),
                    );
                }
                Target::Mode(m) => {
                    self.used.insert(m);
                    d.modes.push(m);
                }
            }
        }
        self.circuit.detect = Some(d);
    }

    fn require(&mut self, r: &ast::Require, span: Span) {
        let Some(metric) = Metric::ALL
            .iter()
            .copied()
            .find(|m| m.name() == r.metric.text)
        else {
            let names: Vec<&str> = Metric::ALL.iter().map(|m| m.name()).collect();
            let d = Diagnostic::error(
                "unknown-metric",
                format!("unknown requirement `{}`", r.metric.text),
                r.metric.span,
                "not a metric",
            );
            let d = match super::suggest::nearest(&r.metric.text, names.iter().copied()) {
                Some(s) => d.with_hint(format!("did you mean `{s}`?")),
                None => d.with_hint(format!("requirements: {}", names.join(", "))),
            };
            self.report(d);
            return;
        };
        let limit = match expr::quantity(
            &r.value,
            metric.kind(),
            &Scope::default(),
            &format!("the limit of `require {}`", metric.name()),
        ) {
            Ok(v) => v,
            Err(d) => {
                self.report(d);
                return;
            }
        };
        let bad = match metric.kind() {
            Kind::Fraction => !(0.0..=1.0).contains(&limit),
            _ => limit < 0.0,
        };
        if bad {
            let d = Diagnostic::error(
                "out-of-range",
                format!(
                    "the {} limit {} is out of range",
                    metric.name(),
                    expr::fmt_real(limit)
                ),
                r.value.span,
                "out of range",
            )
            .with_hint(match metric.kind() {
                Kind::Fraction => format!(
                    "{} is a fraction from 0 to 1, or 0 % to 100 %",
                    metric.name()
                ),
                _ => format!("{} is not negative", metric.name()),
            });
            self.report(d);
            return;
        }
        let yield_level = match &r.yield_level {
            None => None,
            Some(q) => {
                match expr::quantity(q, Kind::Fraction, &Scope::default(), "the yield level") {
                    Ok(v) if v > 0.0 && v <= 1.0 => Some(v),
                    Ok(v) => {
                        self.report(
                        Diagnostic::error("out-of-range", format!("a yield level of {} is out of range", expr::fmt_real(v)), q.span, "out of range")
                            .with_hint("a yield is the fraction of chips that must pass: above 0 and at most 100 %"),
                    );
                        return;
                    }
                    Err(d) => {
                        self.report(d);
                        return;
                    }
                }
            }
        };
        self.circuit.requirements.push(Requirement {
            metric,
            op: r.op,
            limit,
            yield_level,
            span,
        });
    }

    fn tolerance(&mut self, entries: &[ast::TolEntry]) {
        for e in entries {
            let Some((key, kind)) = TOLERANCE_KEYS.iter().find(|(k, _)| *k == e.key.text) else {
                let keys: Vec<&str> = TOLERANCE_KEYS.iter().map(|(k, _)| *k).collect();
                let d = Diagnostic::error(
                    "unknown-tolerance",
                    format!("unknown tolerance `{}`", e.key.text),
                    e.key.span,
                    "not a tolerance source",
                );
                let d = match super::suggest::nearest(&e.key.text, keys.iter().copied()) {
                    Some(s) => d.with_hint(format!("did you mean `{s}`?")),
                    None => d.with_hint(format!("tolerances: {}", keys.join(", "))),
                };
                self.report(d);
                continue;
            };
            let earlier = self.tolerance_keys.get(*key).copied();
            self.tolerance_keys
                .entry((*key).to_owned())
                .or_insert(e.key.span);
            if let Some(first) = earlier {
                self.report(
                    Diagnostic::error(
                        "duplicate",
                        format!("tolerance `{key}` is set twice"),
                        e.key.span,
                        "set again",
                    )
                    .with_label(first, "first set here"),
                );
                continue;
            }
            let v = match expr::quantity(
                &e.value,
                *kind,
                &Scope::default(),
                &format!("tolerance `{key}`"),
            ) {
                Ok(v) => v,
                Err(d) => {
                    self.report(d);
                    continue;
                }
            };
            if v < 0.0 {
                self.report(
                    Diagnostic::error(
                        "out-of-range",
                        format!("tolerance `{key}` is a standard deviation and cannot be negative"),
                        e.value.span,
                        "negative",
                    )
                    .with_hint("write 0 to switch this source of error off"),
                );
                continue;
            }
            if *key == "correlation" && v < 1.0 {
                self.report(
                    Diagnostic::error("out-of-range", "the roughness correlation length must be at least 1 um", e.value.span, "too short")
                        .with_hint("roughness correlated over less than 1 um is modelled as a loss, not as a coupling error"),
                );
                continue;
            }
            let t = &mut self.circuit.tolerances;
            let slot = match *key {
                "edge_bias" => &mut t.edge_bias_um,
                "thickness_bias" => &mut t.thickness_bias_um,
                "edge_local" => &mut t.edge_local_um,
                "roughness" => &mut t.roughness_um,
                "correlation" => &mut t.correlation_um,
                "phase" => &mut t.phase_rad,
                _ => &mut t.wavelength_um,
            };
            *slot = Some(v);
        }
    }

    fn band(&mut self, b: &ast::Band, span: Span) {
        if let Some(prev) = self.band_span {
            self.report(
                Diagnostic::error(
                    "duplicate",
                    "a chip has one `band` line",
                    span,
                    "second band",
                )
                .with_label(prev, "first here"),
            );
            return;
        }
        self.band_span = Some(span);
        let wavelength = |this: &mut Self, q: &ast::Quantity| -> Option<f64> {
            match expr::quantity(q, Kind::Length, &Scope::default(), "a wavelength") {
                Ok(v) if (0.2..=20.0).contains(&v) => Some(v),
                Ok(v) => {
                    let hint = if v > 20.0
                        && v <= 20_000.0
                        && matches!(
                            q.expr.kind,
                            ast::ExprKind::WithUnit {
                                unit: ast::Unit::Um,
                                ..
                            }
                        ) {
                        "did you mean nm? optical wavelengths are written like `1550 nm`".to_owned()
                    } else {
                        "optical wavelengths lie between 0.2 um and 20 um, e.g. `1550 nm`"
                            .to_owned()
                    };
                    this.diags.push(
                        Diagnostic::error(
                            "out-of-range",
                            format!(
                                "a wavelength of {} um is not an optical wavelength",
                                expr::fmt_real(v)
                            ),
                            q.span,
                            "out of range",
                        )
                        .with_hint(hint),
                    );
                    None
                }
                Err(d) => {
                    this.diags.push(d);
                    None
                }
            }
        };
        let Some(start) = wavelength(self, &b.from) else {
            return;
        };
        let (stop, steps) = match &b.to {
            None => (start, 1),
            Some((q, c)) => {
                let Some(stop) = wavelength(self, q) else {
                    return;
                };
                let Some(n) = self.count(c, "a step count") else {
                    return;
                };
                if n == 0 {
                    self.report(Diagnostic::error(
                        "out-of-range",
                        "a band needs at least one step",
                        c.span,
                        "zero steps",
                    ));
                    return;
                }
                if stop < start {
                    self.report(
                        Diagnostic::error(
                            "out-of-range",
                            "a band runs from the shorter wavelength to the longer",
                            q.span,
                            "shorter than the start",
                        )
                        .with_label(b.from.span, "start"),
                    );
                    return;
                }
                if n > 1 && stop == start {
                    self.report(
                        Diagnostic::error(
                            "out-of-range",
                            format!("{n} steps from a wavelength to itself repeat one point"),
                            b.from.span.to(q.span),
                            "the same wavelength",
                        )
                        .with_hint(
                            "give two different wavelengths, or write `band 1550 nm` for one",
                        ),
                    );
                    return;
                }
                if n == 1 && stop != start {
                    self.report(
                        Diagnostic::error(
                            "out-of-range",
                            "one step cannot span two wavelengths",
                            c.span,
                            "one step",
                        )
                        .with_hint("use two or more steps, or `band 1550 nm` for one wavelength"),
                    );
                    return;
                }
                (stop, n)
            }
        };
        self.circuit.band = Some(Band {
            start_um: start,
            stop_um: stop,
            steps,
            span,
        });
    }

    /// Linear optics conserves photon number and loss only removes photons:
    /// one photon per qubit plus the heralded photons must all be launched.
    fn photon_budget(&mut self) {
        let Some(first) = self.circuit.heralds.first() else {
            return;
        };
        let launched: u64 = self
            .circuit
            .modes
            .iter()
            .map(|m| u64::from(m.photons))
            .sum();
        let heralded: u64 = self
            .circuit
            .heralds
            .iter()
            .map(|h| u64::from(h.photons))
            .sum();
        let needed = heralded + self.circuit.qubits.len() as u64;
        if needed > launched {
            let span = first
                .span
                .to(self.circuit.heralds.last().map_or(first.span, |h| h.span));
            self.report(
                Diagnostic::error(
                    "photon-count",
                    format!("the heralds expect {heralded} photon{} and the qubits one each ({needed} in all), but the chip launches {launched}", plural(heralded as usize)),
                    span,
                    "cannot all be seen",
                )
                .with_hint("a linear network never adds photons: launch more (`ancilla h = 1 photon`) or herald fewer"),
            );
        }
    }

    fn unused_warnings(&mut self) {
        for (q, qb) in self.circuit.qubits.iter().enumerate() {
            if !self.used_qubits.contains(&q) && !qb.rails.iter().any(|r| self.used.contains(r)) {
                self.diags.push(
                    Diagnostic::warning(
                        "unused",
                        format!("qubit `{}` is never used", qb.name),
                        qb.span,
                        "declared here",
                    )
                    .with_hint(
                        "remove it, or act on it: an idle qubit still costs two rails on the chip",
                    ),
                );
            }
        }
        for (m, md) in self.circuit.modes.iter().enumerate() {
            if !matches!(md.role, ModeRole::Rail { .. }) && !self.used.contains(&m) {
                self.diags.push(
                    Diagnostic::warning(
                        "unused",
                        format!("mode `{}` is never used", md.name),
                        md.span,
                        "declared here",
                    )
                    .with_hint("remove it, or act on it"),
                );
            }
        }
    }
}

fn unknown_callee<'k>(a: &Apply, defs: impl Iterator<Item = &'k str>) -> Diagnostic {
    let name = a.callee.text.as_str();
    let upper = name.chars().next().is_some_and(|c| c.is_ascii_uppercase());
    let mut candidates: Vec<&str> = gates::GATES.iter().map(|g| g.name).collect();
    candidates.extend(gates::ELEMENTS.iter().map(|e| e.name));
    candidates.extend(defs);
    let msg = if upper {
        format!("unknown gate `{name}`")
    } else {
        format!("unknown gate, element or definition `{name}`")
    };
    let d = Diagnostic::error("unknown-gate", msg, a.callee.span, "not known");
    let exact_case = candidates
        .iter()
        .find(|c| c.eq_ignore_ascii_case(name) && **c != name)
        .copied();
    if let Some(c) = exact_case {
        d.with_hint(format!(
            "did you mean `{c}`? gate names are upper case, element and definition names lower case"
        ))
    } else if let Some(s) = super::suggest::nearest(name, candidates.iter().copied()) {
        d.with_hint(format!("did you mean `{s}`?"))
    } else {
        d.with_hint("gates: I X Y Z H S T SDG TDG RX RY RZ P CZ CNOT SWAP; elements: rotate split phase unitary")
    }
}

/// A definition no chip uses is never expanded; its body is still checked
/// for names that are neither gates, elements nor definitions it can see.
fn check_unused_body(def: &Define, visible: &BTreeMap<String, &Define>, diags: &mut Diagnostics) {
    for s in &def.body {
        if let StmtKind::Apply(a) = &s.kind {
            let n = a.callee.text.as_str();
            if gates::gate_spec(n).is_none()
                && gates::element_spec(n).is_none()
                && !visible.contains_key(n)
            {
                diags.push(unknown_callee(a, visible.keys().map(String::as_str)));
            }
        }
    }
}

fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

fn example_operands(n: usize) -> &'static str {
    if n == 1 { "q" } else { "a, b" }
}

fn operand_span(a: &Apply) -> Span {
    match (a.operands.first(), a.operands.last()) {
        (Some(f), Some(l)) => f.span.to(l.span),
        _ => a.callee.span,
    }
}

/// The gate as the user wrote it, for messages: `RZ(0)`.
fn written(a: &Apply) -> String {
    match &a.args {
        None => a.callee.text.clone(),
        Some(args) => {
            let parts: Vec<String> = args
                .iter()
                .map(crate::syntax::format::quantity_text)
                .collect();
            format!("{}({})", a.callee.text, parts.join(", "))
        }
    }
}

/// A diagnostic when `m` is not unitary: the largest entry of U†U - I and the
/// row and column norms that are off.
pub fn unitarity_error(m: &DMatrix<Complex64>, span: Span) -> Option<Diagnostic> {
    let n = m.nrows();
    let dev = &m.adjoint() * m - DMatrix::<Complex64>::identity(n, n);
    let worst = dev.iter().map(|v| v.norm()).fold(0.0, f64::max);
    if worst <= UNITARITY_TOL {
        return None;
    }
    let frob = dev.iter().map(|v| v.norm_sqr()).sum::<f64>().sqrt();
    let mut off = Vec::new();
    for j in 0..n {
        let norm = m.column(j).iter().map(|v| v.norm_sqr()).sum::<f64>().sqrt();
        if (norm - 1.0).abs() > UNITARITY_TOL {
            off.push(format!("column {} has norm {:.6}", j + 1, norm));
        }
    }
    let detail = if off.is_empty() {
        "the columns have unit norm but are not orthogonal".to_owned()
    } else {
        off.join(", ")
    };
    Some(
        Diagnostic::error("not-unitary", format!("the matrix is not unitary: U†U differs from I by {worst:.3e} (largest entry; {frob:.3e} Frobenius)"), span, "not unitary")
            .with_hint(format!("{detail}; a lossless network is unitary to {UNITARITY_TOL:e}")),
    )
}
