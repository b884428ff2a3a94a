//! The `trilane` command line. Only argument handling and file access live
//! here; everything else is in the library.

use clap::{Parser, Subcommand};
use serde::Serialize;
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use trilane::circuit::FileLoader;
use trilane::diagnostic::{self, Diagnostic, Diagnostics, Style};
use trilane::source::{self, Source, Span};

/// trilane: a compiler from dual-rail photonic quantum circuits to chips of
/// fabrication-robust three-waveguide cells.
///
/// This release has the front end (`check` validates circuit files, `fmt`
/// formats them), the linear-optical core (`simulate` computes what a chip's
/// network does), the process model (`process`), the cell (`cell` designs
/// one three-waveguide cell) and the chip build (`build`: netlist, GDSII
/// mask checked against the design rules, floorplan picture and reports).
/// The fidelity budget follows.
///
/// Exit codes: 0 success; 1 the input has errors (or a built chip misses a
/// requirement or breaks a design rule); 2 usage error (bad
/// options, unreadable file); 70 internal error (please report it).
#[derive(Parser)]
#[command(
    name = "trilane",
    version,
    about,
    long_about,
    after_help = "Start with: trilane check circuits/bell_pair.trl\n            trilane simulate circuits/bell_pair.trl\n            trilane process\n            trilane cell --theta 0.7854\n            trilane build circuits/bell_pair.trl -o out\nLanguage reference: docs/language.md; physics: docs/physics.md"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Parse, elaborate and validate circuit files; report every problem
    ///
    /// All diagnostics of each file are printed to stderr (errors and
    /// warnings, each with file, line, column and a hint where one exists);
    /// a one-line summary per file goes to stdout. Exit 1 if any file has
    /// an error.
    Check {
        /// Circuit files (.trl)
        #[arg(required = true, value_name = "FILE")]
        files: Vec<PathBuf>,
        /// Print one JSON document on stdout instead of text (diagnostics included)
        #[arg(long)]
        json: bool,
        /// Also print the elaborated circuit (the IR) of each chip
        #[arg(long, conflicts_with = "json")]
        ir: bool,
    },
    /// Rewrite circuit files in the canonical layout, keeping every comment
    ///
    /// Files are rewritten in place, atomically, and only when they change.
    /// A file with syntax errors is reported and left untouched.
    Fmt {
        /// Circuit files (.trl)
        #[arg(required = true, value_name = "FILE")]
        files: Vec<PathBuf>,
        /// Change nothing; list the files that are not formatted and exit 1 if any
        #[arg(long)]
        check: bool,
        /// Print the formatted text to stdout instead of rewriting the file
        #[arg(long, conflicts_with = "check")]
        stdout: bool,
    },
    /// What the ideal network of a chip does: its logical map, success and
    /// fidelity, and the output statistics of the launch state
    ///
    /// The network is the lossless scheme as written: gates become their
    /// linear-optical networks (post-selected CZ with two vacuum ancilla
    /// modes, `CZ heralded` with two ancilla photons), and everything is
    /// computed from the whole network's transfer matrix by permanents.
    /// Warnings go to stderr, the report to stdout.
    Simulate {
        /// Circuit file (.trl)
        #[arg(value_name = "FILE")]
        file: PathBuf,
        /// The chip to simulate, when the file holds several
        #[arg(long, value_name = "NAME")]
        chip: Option<String>,
        /// Replace the launch state: qubits take 0 or 1, modes a photon number
        #[arg(long, value_name = "a=1,b=0,m0=2")]
        launch: Option<String>,
        /// Give the amplitude and probability of this one detection pattern
        /// (photons per mode, in the order of the modes list) instead of the
        /// whole distribution; for photon numbers where that is out of reach
        #[arg(long, value_name = "1,0,2,...")]
        output: Option<String>,
        /// Print one JSON document on stdout instead of the table
        #[arg(long)]
        json: bool,
        /// Simulate the compiled nominal chip (loss included, as `build`
        /// makes it) instead of the ideal network, the ideal figures beside
        #[arg(long)]
        compiled: bool,
        #[command(flatten)]
        compile: CompileArgs,
    },
    /// Compile a chip: netlist, mask, floorplan picture and reports in a folder
    ///
    /// Writes DIR/netlist.json, DIR/layout.gds, DIR/floorplan.svg,
    /// DIR/report.txt and DIR/report.json, each atomically, and prints the
    /// summary. An input error writes nothing; a requirement the nominal
    /// chip misses, or a design rule the drawn mask breaks, still writes
    /// everything and exits 1.
    Build(BuildArgs),
    /// Show a process: materials, the guide's mode, the coupling law and its
    /// fits, design rules, phase shifters, loss and tolerances
    ///
    /// PROCESS is a built-in preset (si220_wire, the default; sin400_strip;
    /// silica_plc) or a process file (.toml) that overrides a preset's
    /// fields. The coupling law comes from the full-vector mode solver (the
    /// presets ship their solutions), the effective index method, or a
    /// table.
    Process {
        /// A preset name or a process file
        #[arg(value_name = "PROCESS", default_value = "si220_wire")]
        target: String,
        /// Compute the law with this model instead of the process's own:
        /// `effective_index` is fast and rough, `full_vector` accurate
        #[arg(long, value_enum)]
        model: Option<ModelArg>,
        /// Solve the process with the full-vector solver now (about a
        /// minute) and print the difference from the law it uses; exits 1
        /// when its full-vector solution is off by more than its stated
        /// discretisation error
        #[arg(long)]
        solve: bool,
        /// With --solve: write the fresh solution to this file, for a
        /// process file to name (`[coupling] solved = "FILE.toml"`)
        #[arg(long, value_name = "FILE.toml", requires = "solve")]
        save: Option<PathBuf>,
        /// Fit this coupling table instead (CSV: `gap_nm,k_per_um` or
        /// `gap_nm,k_per_um@1550nm,k_per_um@1530nm,...`)
        #[arg(long, value_name = "FILE.csv")]
        table: Option<PathBuf>,
        /// Draw k(g) on a log axis with the fits into an SVG file
        #[arg(long, value_name = "FILE.svg")]
        plot: Option<PathBuf>,
        /// Print one JSON document on stdout instead of the summary
        #[arg(long)]
        json: bool,
    },
    /// Design one cell and show it: geometry, transfer matrix, leakage, and
    /// how far the analytic design was from the refined one
    ///
    /// The geometric cell is designed analytically on the process's
    /// exponential fit, then refined on its smooth coupling law with the
    /// rails' path detuning until the split and the leakage into the
    /// auxiliary guide are within 1e-6. `coupler` is the directional-coupler
    /// baseline of the same split, `mzi` two 50:50 couplers around a
    /// thermal phase shifter.
    Cell(CellArgs),
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum ModelArg {
    #[value(name = "full_vector")]
    FullVector,
    #[value(name = "effective_index")]
    EffectiveIndex,
}

impl ModelArg {
    fn name(self) -> &'static str {
        match self {
            ModelArg::FullVector => trilane::process::solved::MODEL,
            ModelArg::EffectiveIndex => "effective_index",
        }
    }
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum CellKindArg {
    Geometric,
    Coupler,
    Mzi,
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum LengthArg {
    Uniform,
    Shortest,
}

/// The front end recurses over expressions (bounded by the parser's
/// limits); a fixed, generous stack makes that safe on every platform,
/// whatever the main thread's default.
const STACK_BYTES: usize = 256 << 20;

fn main() -> ExitCode {
    let cli = Cli::parse();
    trilane::process::solved::report_progress_to(Box::new(
        trilane::report::progress::TerminalBar::stderr(),
    ));
    let work = std::thread::Builder::new()
        .stack_size(STACK_BYTES)
        .spawn(move || match cli.command {
            Command::Check { files, json, ir } => check(&files, json, ir),
            Command::Fmt {
                files,
                check,
                stdout,
            } => fmt(&files, check, stdout),
            Command::Simulate {
                file,
                chip,
                launch,
                output,
                json,
                compiled,
                compile,
            } => simulate(
                &file,
                chip.as_deref(),
                launch.as_deref(),
                output.as_deref(),
                json,
                compiled.then_some(&compile),
            ),
            Command::Build(a) => build(&a),
            Command::Process {
                target,
                model,
                solve,
                save,
                table,
                plot,
                json,
            } => process(ProcessArgs {
                target: &target,
                model,
                solve,
                save: save.as_deref(),
                table: table.as_deref(),
                plot: plot.as_deref(),
                json,
            }),
            Command::Cell(a) => cell(a),
        });
    let code = match work.map(|h| h.join()) {
        Ok(Ok(code)) => code,
        _ => {
            eprintln!(
                "error: trilane stopped on an internal error; please report it with the input that caused it"
            );
            70
        }
    };
    ExitCode::from(code)
}

fn style() -> Style {
    if std::io::stderr().is_terminal() && std::env::var_os("NO_COLOR").is_none() {
        Style::Colour
    } else {
        Style::Plain
    }
}

/// Reads matrix files relative to the circuit file's folder.
struct FolderLoader {
    dir: PathBuf,
}

impl FileLoader for FolderLoader {
    fn load(&self, path: &str) -> Result<String, String> {
        let full = self.dir.join(path);
        let bytes =
            std::fs::read(&full).map_err(|e| format!("{}: {}", full.display(), io_reason(&e)))?;
        String::from_utf8(bytes).map_err(|_| format!("{}: not UTF-8 text", full.display()))
    }
}

fn io_reason(e: &std::io::Error) -> String {
    match e.kind() {
        std::io::ErrorKind::NotFound => "no such file".into(),
        std::io::ErrorKind::PermissionDenied => "permission denied".into(),
        std::io::ErrorKind::IsADirectory => "is a folder, not a file".into(),
        _ => e.to_string(),
    }
}

/// Reads a circuit file; invalid UTF-8 becomes a diagnostic at the first bad byte.
fn read_source(path: &Path) -> Result<(Source, Option<Diagnostic>), String> {
    let bytes = std::fs::read(path)
        .map_err(|e| format!("cannot read {}: {}", path.display(), io_reason(&e)))?;
    let (text, bad) = source::decode(&bytes);
    let src = Source::new(path.display().to_string(), text);
    let diag = bad.map(|at| {
        Diagnostic::error(
            "encoding",
            "the file is not valid UTF-8 text",
            Span::new(at, at + 1),
            "invalid byte here",
        )
        .with_hint("save the file as UTF-8; circuit files are plain text")
    });
    Ok((src, diag))
}

#[derive(Serialize)]
struct JsonReport {
    files: Vec<JsonFile>,
}

#[derive(Serialize)]
struct JsonFile {
    path: String,
    ok: bool,
    /// Why the file could not be read at all (then there are no diagnostics).
    #[serde(skip_serializing_if = "Option::is_none")]
    error: Option<String>,
    chips: Vec<String>,
    diagnostics: Vec<trilane::report::JsonDiagnostic>,
}

fn check(files: &[PathBuf], json: bool, ir: bool) -> u8 {
    let style = style();
    let mut worst = 0u8;
    let mut report = JsonReport { files: Vec::new() };
    let mut stdout = std::io::stdout().lock();
    for path in files {
        let (src, bad) = match read_source(path) {
            Ok(x) => x,
            Err(msg) => {
                eprintln!("error: {msg}");
                if json {
                    report.files.push(JsonFile {
                        path: path.display().to_string(),
                        ok: false,
                        error: Some(msg.clone()),
                        chips: vec![],
                        diagnostics: vec![],
                    });
                }
                worst = 2;
                continue;
            }
        };
        let loader = FolderLoader {
            dir: path.parent().map(Path::to_path_buf).unwrap_or_default(),
        };
        let (diags, program) = match bad {
            Some(d) => (Diagnostics::from(d), None),
            None => match trilane::check(&src, &loader) {
                Ok(p) => (p.warnings.clone(), Some(p)),
                Err(d) => (d, None),
            },
        };
        let ok = !diags.has_errors();
        if !ok {
            worst = worst.max(1);
        }
        if json {
            report.files.push(JsonFile {
                path: src.name.clone(),
                ok,
                error: None,
                chips: program
                    .iter()
                    .flat_map(|p| p.circuits.iter().map(|c| c.name.clone()))
                    .collect(),
                diagnostics: diags
                    .iter()
                    .map(|d| trilane::report::json_diagnostic(d, &src))
                    .collect(),
            });
            continue;
        }
        eprint!("{}", diagnostic::render_all(&diags, &src, style));
        let warnings = diags.len() - diags.error_count();
        let tail = if warnings > 0 {
            format!(
                ", {warnings} warning{}",
                if warnings == 1 { "" } else { "s" }
            )
        } else {
            String::new()
        };
        match &program {
            Some(p) => {
                let chips: Vec<String> = p
                    .circuits
                    .iter()
                    .map(|c| {
                        format!(
                            "chip {}: {} qubit{}, {} mode{}, {} operation{}",
                            c.name,
                            c.qubits.len(),
                            s(c.qubits.len()),
                            c.modes.len(),
                            s(c.modes.len()),
                            c.ops.len(),
                            s(c.ops.len())
                        )
                    })
                    .collect();
                let _ = writeln!(stdout, "{}: ok ({}){}", src.name, chips.join("; "), tail);
                if ir {
                    for c in &p.circuits {
                        let _ = write!(stdout, "{c}");
                    }
                }
            }
            None => {
                let n = diags.error_count();
                let _ = writeln!(stdout, "{}: {} error{}{}", src.name, n, s(n), tail);
            }
        }
    }
    if json {
        let _ = writeln!(
            stdout,
            "{}",
            serde_json::to_string_pretty(&report).expect("report serialises")
        );
    }
    worst
}

fn s(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

fn fmt(files: &[PathBuf], check: bool, to_stdout: bool) -> u8 {
    let style = style();
    let mut worst = 0u8;
    let mut stdout = std::io::stdout().lock();
    for path in files {
        let (src, bad) = match read_source(path) {
            Ok(x) => x,
            Err(msg) => {
                eprintln!("error: {msg}");
                worst = 2;
                continue;
            }
        };
        if let Some(d) = bad {
            eprint!("{}", diagnostic::render(&d, &src, style));
            worst = worst.max(1);
            continue;
        }
        let out = match trilane::syntax::format_source(&src) {
            Ok(o) => o,
            Err(d) => {
                eprint!("{}", diagnostic::render_all(&d, &src, style));
                eprintln!("{}: not formatted (fix the errors first)", src.name);
                worst = worst.max(1);
                continue;
            }
        };
        if to_stdout {
            let _ = stdout.write_all(out.as_bytes());
            continue;
        }
        if out == src.text {
            continue;
        }
        if check {
            let _ = writeln!(stdout, "{}", src.name);
            worst = worst.max(1);
            continue;
        }
        match write_atomically(path, out.as_bytes()) {
            Ok(()) => {
                let _ = writeln!(stdout, "formatted {}", src.name);
            }
            Err(e) => {
                eprintln!("error: cannot write {}: {}", path.display(), io_reason(&e));
                worst = 2;
            }
        }
    }
    worst
}

/// Writes to a temporary file beside the target, then renames it over the
/// target, so a reader never sees half a file.
fn write_atomically(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.trilane-tmp-{}", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        // No fsync: the rename is what makes the file appear whole to a
        // reader; a build is redone, not recovered, after a power cut.
        f.write_all(bytes)?;
        if let Ok(meta) = std::fs::metadata(path) {
            std::fs::set_permissions(&tmp, meta.permissions())?;
        }
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Loads one file through the front end and picks the chip: diagnostics go
/// to stderr; `Err` is the exit code.
fn load_chip(path: &Path, chip: Option<&str>) -> Result<(Source, trilane::circuit::Circuit), u8> {
    let style = style();
    let (src, bad) = read_source(path).map_err(|msg| {
        eprintln!("error: {msg}");
        2u8
    })?;
    if let Some(d) = bad {
        eprint!("{}", diagnostic::render(&d, &src, style));
        return Err(1);
    }
    let loader = FolderLoader {
        dir: path.parent().map(Path::to_path_buf).unwrap_or_default(),
    };
    let program = match trilane::check(&src, &loader) {
        Ok(p) => p,
        Err(d) => {
            eprint!("{}", diagnostic::render_all(&d, &src, style));
            let n = d.error_count();
            eprintln!("{}: {} error{}", src.name, n, s(n));
            return Err(1);
        }
    };
    eprint!("{}", diagnostic::render_all(&program.warnings, &src, style));
    let names: Vec<&str> = program.circuits.iter().map(|c| c.name.as_str()).collect();
    let picked = match chip {
        Some(want) => program
            .circuits
            .iter()
            .find(|c| c.name == want)
            .ok_or_else(|| {
                let hint = trilane::circuit::suggest::nearest(want, names.iter().copied())
                    .map(|n| format!(" (did you mean `{n}`?)"))
                    .unwrap_or_default();
                eprintln!(
                    "error: {} has no chip `{want}`{hint}; its chips: {}",
                    src.name,
                    names.join(", ")
                );
                2u8
            })?,
        None if program.circuits.len() == 1 => &program.circuits[0],
        None if program.circuits.is_empty() => {
            eprintln!("error: {} holds no chip", src.name);
            return Err(1);
        }
        None => {
            eprintln!(
                "error: {} holds {} chips; choose one with --chip NAME: {}",
                src.name,
                names.len(),
                names.join(", ")
            );
            return Err(2);
        }
    };
    let circuit = picked.clone();
    Ok((src, circuit))
}

fn simulate(
    path: &Path,
    chip: Option<&str>,
    launch: Option<&str>,
    output: Option<&str>,
    json: bool,
    compiled: Option<&CompileArgs>,
) -> u8 {
    use trilane::optics::simulate as sim;
    let (src, circuit) = match load_chip(path, chip) {
        Ok(x) => x,
        Err(code) => return code,
    };
    let built = match compiled {
        Some(args) => match compile_chip(path, &src, &circuit, args) {
            Ok(b) => Some(b),
            Err(code) => return code,
        },
        None => None,
    };
    let net = trilane::optics::network(&circuit);
    let launch = match launch.map(|t| sim::parse_launch(&net, t)).transpose() {
        Ok(l) => l,
        Err(msg) => {
            eprintln!("error: --launch: {msg}");
            return 2;
        }
    };
    let output = match output.map(|t| sim::parse_output(&net, t)).transpose() {
        Ok(o) => o,
        Err(msg) => {
            eprintln!("error: {msg}");
            return 2;
        }
    };
    let result = match &built {
        None => sim::simulate_network(&circuit, net, launch.as_deref(), output.as_deref()),
        Some(b) => {
            let fp = &b.chosen.floorplan;
            let summary = format!(
                "{} strategy, {} {} cells, {:.1} um long, transmission {:.4}",
                b.chosen.strategy.name(),
                b.chosen.cells.cells().count(),
                b.chosen.cells.kind.name(),
                fp.length_um,
                b.chosen.figures.transmission
            );
            sim::simulate_compiled(
                &b.circuit,
                &b.network,
                &fp.transfer(),
                summary,
                launch.as_deref(),
                output.as_deref(),
            )
        }
    };
    let result = match result {
        Ok(r) => r,
        Err(e) => {
            eprintln!("error: chip {}: {e}", circuit.name);
            return 1;
        }
    };
    eprint!(
        "{}",
        diagnostic::render_all(&Diagnostics(result.warnings.clone()), &src, style())
    );
    // Nothing computed at all: an error, not an empty report.
    if let (Err(_), sim::Statistics::OutOfReach(why)) = (&result.logical, &result.statistics) {
        eprintln!("error: chip {}: {why}", circuit.name);
        return 1;
    }
    let text = if json {
        let doc = trilane::report::simulate::to_json(&result, &src);
        serde_json::to_string_pretty(&doc).expect("the report serialises") + "\n"
    } else {
        trilane::report::simulate::to_text(&result, &circuit, &src)
    };
    let _ = std::io::stdout().lock().write_all(text.as_bytes());
    0
}

fn render_located(errors: &[trilane::process::file::LocatedErrors]) {
    for e in errors {
        eprint!(
            "{}",
            diagnostic::render_all(&e.diagnostics, &e.source, style())
        );
    }
}

/// Reads a preset or a process file; `Err` is the exit code.
fn load_process(target: &str) -> Result<trilane::process::spec::Process, u8> {
    use trilane::process::presets;
    if let Some(p) = presets::preset(target) {
        return Ok(p);
    }
    let path = Path::new(target);
    if !path.exists() {
        let hint = trilane::circuit::suggest::nearest(target, presets::NAMES)
            .or_else(|| {
                presets::NAMES
                    .iter()
                    .copied()
                    .find(|n| n.starts_with(target))
            })
            .map(|n| format!(" (did you mean `{n}`?)"))
            .unwrap_or_default();
        eprintln!(
            "error: `{target}` is neither a built-in process{hint} nor a file; presets: {}",
            presets::NAMES.join(", ")
        );
        return Err(2);
    }
    let (src, bad) = read_source(path).map_err(|msg| {
        eprintln!("error: {msg}");
        2u8
    })?;
    if let Some(d) = bad {
        eprint!("{}", diagnostic::render(&d, &src, style()));
        return Err(1);
    }
    let loader = FolderLoader {
        dir: path.parent().map(Path::to_path_buf).unwrap_or_default(),
    };
    trilane::process::file::read(&src, &loader).map_err(|errors| {
        render_located(&errors);
        1u8
    })
}

struct ProcessArgs<'a> {
    target: &'a str,
    model: Option<ModelArg>,
    solve: bool,
    save: Option<&'a Path>,
    table: Option<&'a Path>,
    plot: Option<&'a Path>,
    json: bool,
}

fn process(a: ProcessArgs) -> u8 {
    let ProcessArgs {
        target,
        model,
        solve,
        save,
        table,
        plot,
        json,
    } = a;
    use trilane::process::spec::CouplingSource;
    let mut p = match load_process(target) {
        Ok(p) => p,
        Err(code) => return code,
    };
    if let Some(path) = table {
        let (src, bad) = match read_source(path) {
            Ok(x) => x,
            Err(msg) => {
                eprintln!("error: {msg}");
                return 2;
            }
        };
        if let Some(d) = bad {
            eprint!("{}", diagnostic::render(&d, &src, style()));
            return 1;
        }
        match trilane::process::table::parse(&src, p.wavelength_um) {
            Ok(tables) => {
                p.coupling = CouplingSource::Table {
                    g_ref_nm: p.coupling.g_ref_nm(),
                    tables,
                    from: src.name.clone(),
                }
            }
            Err(d) => {
                eprint!("{}", diagnostic::render_all(&d, &src, style()));
                return 1;
            }
        }
    }
    if let Some(m) = model {
        p = p.with_model(m.name());
    }
    let c = match trilane::process::law::characterise(&p) {
        Ok(c) => c,
        Err(e) => {
            eprintln!("error: process {}: {e}", p.name);
            return 1;
        }
    };
    if let Some(path) = plot {
        let svg = match trilane::report::process::coupling_plot_svg(&p, &c) {
            Ok(svg) => svg,
            Err(e) => {
                eprintln!("error: cannot draw the coupling law: {e}");
                return 70;
            }
        };
        if let Err(e) = write_atomically(path, svg.as_bytes()) {
            eprintln!("error: cannot write {}: {}", path.display(), io_reason(&e));
            return 2;
        }
    }
    if solve {
        return solve_process(&p, &c, save, json);
    }
    let text = if json {
        let doc = trilane::report::process::to_json(&p, &c);
        serde_json::to_string_pretty(&doc).expect("the report serialises") + "\n"
    } else {
        trilane::report::process::to_text(&p, &c)
    };
    let _ = std::io::stdout().lock().write_all(text.as_bytes());
    0
}

/// `process --solve`: a fresh full-vector solution against the law in use.
fn solve_process(
    p: &trilane::process::spec::Process,
    c: &trilane::process::law::Characterisation,
    save: Option<&Path>,
    json: bool,
) -> u8 {
    use trilane::process::solved;
    let gaps = c.law().table.gaps_nm.clone();
    let req = solved::Request::standard(p, &gaps, p.coupling.g_ref_nm());
    let bar = trilane::report::progress::TerminalBar::stderr();
    let t = std::time::Instant::now();
    let fresh = match solved::solve(&req, &bar) {
        Ok(s) => s,
        Err(e) => {
            eprintln!(
                "error: process {}: the full-vector solve failed: {e}",
                p.name
            );
            return 1;
        }
    };
    let seconds = t.elapsed().as_secs_f64();
    let mut cmp = trilane::report::solve::compare(&p.name, c, &fresh, seconds);
    // The scheme's order, observed: the nominal strip on three grids.
    let fv = trilane::process::vector::FullVector::te_like(req.grid.spec());
    let strip = trilane::process::eim::Strips::single(p.width_nm * 1e-3);
    match fv.convergence(&p.film, &strip, p.wavelength_um, 3) {
        Ok(conv) => {
            let e = &conv.neff[0];
            cmp.order_check = Some(trilane::report::solve::OrderCheck {
                observed_order: e.observed_order,
                neff_three_levels: e.extrapolated,
                neff_two_levels: fresh.nominal().neff.value,
                finest_step_nm: e.steps_um[2] * 1e3,
            });
        }
        Err(e) => eprintln!("note: the three-grid convergence check did not run: {e}"),
    }
    if let Some(path) = save
        && let Err(e) = write_atomically(path, fresh.to_toml().as_bytes())
    {
        eprintln!("error: cannot write {}: {}", path.display(), io_reason(&e));
        return 2;
    }
    let text = if json {
        serde_json::to_string_pretty(&cmp).expect("the comparison serialises") + "\n"
    } else {
        trilane::report::solve::to_text(&cmp, &fresh)
    };
    let _ = std::io::stdout().lock().write_all(text.as_bytes());
    if cmp.passed == Some(false) {
        eprintln!(
            "error: the full-vector solution of {} differs from a fresh solve by more than its stated discretisation error; if the solver changed on purpose, write a new one with `trilane process {} --solve --save FILE.toml`",
            p.name, p.name
        );
        return 1;
    }
    0
}

/// Options shared by the commands that compile (cli.md).
#[derive(clap::Args, Clone)]
struct CompileArgs {
    /// Cell kind for the mesh's rotations
    #[arg(long = "cell", value_enum, default_value = "geometric")]
    cell: CellKindArg,
    /// How the network becomes a mesh: `auto` builds both and keeps the
    /// better expected fidelity under the tolerances, then the shorter chip
    #[arg(long, value_enum, default_value = "auto")]
    strategy: StrategyArg,
    /// Mesh decomposition
    #[arg(long, value_enum, default_value = "rectangular")]
    mesh: MeshArg,
    /// Phase shifters: thermal (tunable heaters) or passive (widened sections)
    #[arg(long, value_enum, default_value = "thermal")]
    phase: PhaseArg,
    /// Geometric cells: one uniform length for the mesh, or each the shortest for its split
    #[arg(long = "cell-length", value_enum, default_value = "uniform")]
    cell_length: LengthArg,
    /// The process (a preset name or a process file), instead of the chip's `process` line
    #[arg(long, value_name = "NAME|FILE")]
    process: Option<String>,
    /// Compute the coupling law with this model instead of the process's own
    #[arg(long, value_enum)]
    model: Option<ModelArg>,
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum StrategyArg {
    Auto,
    Flat,
    Local,
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum MeshArg {
    Rectangular,
    Triangular,
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum PhaseArg {
    Thermal,
    Passive,
}

#[derive(clap::Args)]
struct BuildArgs {
    /// Circuit file (.trl)
    #[arg(value_name = "FILE")]
    file: PathBuf,
    /// The output folder (made if missing)
    #[arg(short = 'o', long = "out", value_name = "DIR", default_value = "out")]
    out: PathBuf,
    /// The chip to build, when the file holds several
    #[arg(long, value_name = "NAME")]
    chip: Option<String>,
    #[command(flatten)]
    compile: CompileArgs,
    /// Print report.json on stdout instead of the summary
    #[arg(long)]
    json: bool,
    /// Design-rule checks on the drawn polygons: `on` (a violation exits 1)
    /// or `off` for experiments (the report says they were not run)
    #[arg(long, value_enum, default_value = "on")]
    drc: DrcArg,
}

#[derive(Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
enum DrcArg {
    On,
    Off,
}

fn cell_kind(a: CellKindArg) -> trilane::cell::CellKind {
    use trilane::cell::CellKind;
    match a {
        CellKindArg::Geometric => CellKind::Geometric,
        CellKindArg::Coupler => CellKind::Coupler,
        CellKindArg::Mzi => CellKind::Mzi,
    }
}

/// The chip's process (`--process`, or its own line) and its build.
fn compile_chip(
    path: &Path,
    src: &Source,
    circuit: &trilane::circuit::Circuit,
    a: &CompileArgs,
) -> Result<trilane::compile::chip::Build, u8> {
    use trilane::compile::chip::{BuildOptions, StrategyChoice, build};
    use trilane::compile::mesh::Strategy;
    let mut p = match &a.process {
        Some(t) => load_process(t)?,
        None => {
            let loader = FolderLoader {
                dir: path.parent().map(Path::to_path_buf).unwrap_or_default(),
            };
            trilane::process::resolve(circuit.process.as_ref(), &loader).map_err(|d| {
                eprint!("{}", diagnostic::render(&d, src, style()));
                1u8
            })?
        }
    };
    if let Some(m) = a.model {
        p = p.with_model(m.name());
    }
    let o = BuildOptions {
        strategy: match a.strategy {
            StrategyArg::Auto => StrategyChoice::Auto,
            StrategyArg::Flat => StrategyChoice::Only(Strategy::Flat),
            StrategyArg::Local => StrategyChoice::Only(Strategy::Local),
        },
        cell: cell_kind(a.cell),
        mesh: match a.mesh {
            MeshArg::Rectangular => trilane::optics::decompose::Layout::Rectangular,
            MeshArg::Triangular => trilane::optics::decompose::Layout::Triangular,
        },
        tuning: match a.phase {
            PhaseArg::Thermal => trilane::layout::Tuning::Thermal,
            PhaseArg::Passive => trilane::layout::Tuning::Passive,
        },
        rule: match a.cell_length {
            LengthArg::Uniform => trilane::cell::geometric::LengthRule::Uniform,
            LengthArg::Shortest => trilane::cell::geometric::LengthRule::Shortest,
        },
    };
    build(circuit, &p, o).map_err(|e| {
        eprintln!("error: chip {} on {}: {e}", circuit.name, p.name);
        1u8
    })
}

/// `trilane build`: everything computed first, then each file written
/// atomically, so an input error leaves the output folder as it was.
fn build(a: &BuildArgs) -> u8 {
    let (src, circuit) = match load_chip(&a.file, a.chip.as_deref()) {
        Ok(x) => x,
        Err(code) => return code,
    };
    let b = match compile_chip(&a.file, &src, &circuit, &a.compile) {
        Ok(b) => b,
        Err(code) => return code,
    };
    let fp = &b.chosen.floorplan;
    // The outputs are independent: made side by side.
    let (netlist, (svg, mask)) = rayon::join(
        || trilane::layout::netlist::to_json(fp),
        || {
            rayon::join(
                || trilane::layout::svg::floorplan_svg(fp),
                || trilane::layout::mask::build(fp, a.drc == DrcArg::On),
            )
        },
    );
    let netlist = match netlist {
        Ok(t) => t,
        Err(e) => {
            eprintln!("error: internal: the netlist of chip {}: {e}", circuit.name);
            return 70;
        }
    };
    let (gds, mask) = match mask {
        Ok(m) => m,
        Err(e) => {
            eprintln!("error: chip {}: layout.gds: {e}", circuit.name);
            return 1;
        }
    };
    let names = [
        "netlist.json",
        "layout.gds",
        "floorplan.svg",
        "report.txt",
        "report.json",
    ];
    let outputs: Vec<String> = names
        .iter()
        .map(|n| a.out.join(n).display().to_string())
        .collect();
    let checks = trilane::report::build::check_requirements(&b, &src);
    let text = trilane::report::build::to_text(&b, &checks, &mask, &outputs);
    let json = serde_json::to_string_pretty(&trilane::report::build::to_json(
        &b, &checks, &mask, &outputs,
    ))
    .expect("the report serialises")
        + "\n";
    if let Err(e) = std::fs::create_dir_all(&a.out) {
        eprintln!("error: cannot make {}: {}", a.out.display(), io_reason(&e));
        return 2;
    }
    for (name, bytes) in names.iter().zip([
        netlist.as_bytes(),
        gds.as_slice(),
        svg.as_bytes(),
        text.as_bytes(),
        json.as_bytes(),
    ]) {
        let path = a.out.join(name);
        if let Err(e) = write_atomically(&path, bytes) {
            eprintln!("error: cannot write {}: {}", path.display(), io_reason(&e));
            return 2;
        }
    }
    let shown = if a.json { &json } else { &text };
    let _ = std::io::stdout().lock().write_all(shown.as_bytes());
    let failed: Vec<&trilane::report::build::RequirementCheck> =
        checks.iter().filter(|c| c.ok == Some(false)).collect();
    let mut code = 0;
    if !failed.is_empty() {
        for f in &failed {
            eprintln!(
                "error: {}:{}: requirement {} {} {} fails on the nominal chip: {}",
                src.name,
                f.line,
                f.what,
                f.op,
                f.limit,
                f.note.clone().unwrap_or_default()
            );
        }
        code = 1;
    }
    let violations = mask.violations();
    if !violations.is_empty() {
        for v in violations
            .iter()
            .take(trilane::report::build::VIOLATIONS_SHOWN)
        {
            eprintln!(
                "error: chip {}: design rule {}",
                circuit.name,
                trilane::report::build::violation_text(v, fp)
            );
        }
        if violations.len() > trilane::report::build::VIOLATIONS_SHOWN {
            eprintln!(
                "error: ... and {} more design-rule violations (all in report.json)",
                violations.len() - trilane::report::build::VIOLATIONS_SHOWN
            );
        }
        code = 1;
    }
    code
}

#[derive(clap::Args)]
struct CellArgs {
    /// The rotation angle theta in (0, pi/2], radians (cross power sin^2 theta)
    #[arg(
        long,
        value_name = "RAD",
        conflicts_with = "split",
        required_unless_present = "split",
        allow_negative_numbers = true
    )]
    theta: Option<f64>,
    /// The cross power fraction in (0, 1] instead of theta
    #[arg(long, value_name = "C", allow_negative_numbers = true)]
    split: Option<f64>,
    /// The process: a preset name or a process file
    #[arg(long, value_name = "NAME|FILE", default_value = "si220_wire")]
    process: String,
    /// Compute the coupling law with this model instead of the process's
    /// own (`effective_index`: fast and rough)
    #[arg(long, value_enum)]
    model: Option<ModelArg>,
    /// Cell kind
    #[arg(long = "cell", value_enum, default_value = "geometric")]
    kind: CellKindArg,
    /// Geometric cells: the shortest cell for this theta, or the uniform
    /// length a mesh shares
    #[arg(long = "cell-length", value_enum, default_value = "shortest")]
    length: LengthArg,
    /// Guide width(s) in nm: the cell is designed for the first; with
    /// several (`--width 500,600,700`) a width trade table compares
    /// lengths and Monte Carlo fidelity for each
    #[arg(long, value_name = "NM", value_delimiter = ',')]
    width: Vec<f64>,
    /// Write a figure: cross power and auxiliary leakage against the gap
    /// difference, and 1-F against edge bias for both cells
    #[arg(long, value_name = "FILE.svg")]
    sweep: Option<PathBuf>,
    /// Monte Carlo samples per cell (0 switches it off)
    #[arg(long, value_name = "N", default_value_t = 32)]
    samples: usize,
    /// Monte Carlo seed
    #[arg(long, value_name = "S", default_value_t = 1)]
    seed: u64,
    /// Print one JSON document on stdout instead of the summary
    #[arg(long)]
    json: bool,
}

fn cell(a: CellArgs) -> u8 {
    use trilane::cell::{CellDesign, CellKind, geometric::LengthRule};
    let theta = match (a.theta, a.split) {
        (Some(t), _) => t,
        (None, Some(c)) if (0.0..=1.0).contains(&c) && c > 0.0 => c.sqrt().asin(),
        (None, Some(c)) => {
            eprintln!("error: --split takes the cross power, a fraction in (0, 1], got {c}");
            return 2;
        }
        (None, None) => unreachable!("clap requires one"),
    };
    if !(theta > 0.0 && theta <= std::f64::consts::FRAC_PI_2 + 1e-12) {
        eprintln!(
            "error: --theta must be in (0, pi/2] = (0, 1.570796], got {theta} (mesh blocks need no more: the rest is phase shifters)"
        );
        return 2;
    }
    let mut p = match load_process(&a.process) {
        Ok(p) => p,
        Err(code) => return code,
    };
    if let Some(m) = a.model {
        p = p.with_model(m.name());
    }
    if let Some(w) = a.width.iter().find(|w| !(w.is_finite() && **w > 0.0)) {
        eprintln!("error: --width takes guide widths in nm, each above 0, got {w}");
        return 2;
    }
    if let Some(w) = a.width.iter().find(|w| **w < p.rules.min_width_nm) {
        eprintln!(
            "error: --width {w} nm is below {}'s minimum feature width of {} nm",
            p.name, p.rules.min_width_nm
        );
        return 2;
    }
    if let Some(path) = &a.sweep
        && path.extension().and_then(|e| e.to_str()) != Some("svg")
    {
        eprintln!(
            "error: --sweep writes an SVG figure: give a file name ending in .svg, got {}",
            path.display()
        );
        return 2;
    }
    if let Some(&w) = a.width.first() {
        p.width_nm = w;
    }
    let kind = match a.kind {
        CellKindArg::Geometric => CellKind::Geometric,
        CellKindArg::Coupler => CellKind::Coupler,
        CellKindArg::Mzi => CellKind::Mzi,
    };
    let rule = match a.length {
        LengthArg::Uniform => LengthRule::Uniform,
        LengthArg::Shortest => LengthRule::Shortest,
    };
    let (design, c) = match trilane::cell::design(kind, theta, &p, rule) {
        Ok(x) => x,
        Err(e) => {
            eprintln!("error: {e}");
            return 1;
        }
    };
    // The other kind of the same split, side by side.
    let other = match kind {
        CellKind::Geometric => CellKind::Coupler,
        CellKind::Coupler | CellKind::Mzi => CellKind::Geometric,
    };
    let comparison = match trilane::cell::design(other, theta, &p, rule) {
        Ok((d, _)) => d,
        Err(e) => {
            eprintln!("error: the comparison cell: {e}");
            return 1;
        }
    };
    let rows = match trilane::cell::sensitivity::table(&design, &comparison, &p) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("error: sensitivity: {e}");
            return 1;
        }
    };
    let mc = |d: &CellDesign| trilane::cell::sensitivity::monte_carlo(d, &p, a.samples, a.seed);
    let monte_carlo = if a.samples > 0 {
        match (mc(&design), mc(&comparison)) {
            (Ok(x), Ok(y)) => Some((x, y)),
            (Err(e), _) | (_, Err(e)) => {
                eprintln!("error: Monte Carlo: {e}");
                return 1;
            }
        }
    } else {
        None
    };
    let widths = if a.width.len() > 1 {
        match trilane::cell::sensitivity::width_trade(
            kind,
            other,
            theta,
            &p,
            rule,
            &a.width,
            a.samples.max(8),
            a.seed,
        ) {
            Ok(w) => w,
            Err(e) => {
                eprintln!("error: width trade: {e}");
                return 1;
            }
        }
    } else {
        Vec::new()
    };
    let mut sweep_file = None;
    if let Some(path) = &a.sweep {
        let svg = match sweep(&design, &comparison, &p, &c, rule) {
            Ok(s) => s,
            Err(e) => {
                eprintln!("error: the sweep: {e}");
                return 1;
            }
        };
        if let Err(e) = write_atomically(path, svg.as_bytes()) {
            eprintln!("error: cannot write {}: {e}", path.display());
            return 1;
        }
        sweep_file = Some(path.display().to_string());
    }
    let report = trilane::report::cell::CellReport {
        cell: &design,
        comparison: &comparison,
        process: &p,
        characterisation: &c,
        sensitivity: &rows,
        monte_carlo,
        widths: &widths,
        sweep_file,
    };
    let text = if a.json {
        trilane::report::cell::to_json(&report)
    } else {
        trilane::report::cell::to_text(&report)
    };
    let _ = std::io::stdout().lock().write_all(text.as_bytes());
    0
}

/// The `--sweep` figure: the gap sweep of the geometric cell (the design,
/// or the comparison when the design is a baseline) and the bias sweep of
/// both cells.
fn sweep(
    design: &trilane::cell::CellDesign,
    comparison: &trilane::cell::CellDesign,
    p: &trilane::process::spec::Process,
    c: &trilane::process::law::Characterisation,
    rule: trilane::cell::geometric::LengthRule,
) -> Result<String, String> {
    use trilane::cell::{CellDesign, refine::CellContext, sweep};
    let geometric = match (design, comparison) {
        (CellDesign::Geometric(r), _) | (_, CellDesign::Geometric(r)) => r,
        _ => return Err("no geometric cell to sweep".to_owned()),
    };
    let ctx = CellContext::of(p, c, rule, geometric.design.residual);
    let gaps = sweep::gap_sweep(&geometric.design, &ctx, 41).map_err(|e| e.to_string())?;
    let max_bias = (3.0 * p.tolerances.edge_bias_nm).max(1.0);
    let mut bias = Vec::new();
    for d in [design, comparison] {
        bias.push((
            d.kind().name(),
            sweep::bias_sweep(d, p, max_bias, 13).map_err(|e| e.to_string())?,
        ));
    }
    let r = &geometric.rail_block;
    let s = sweep::Sweep {
        theta: geometric.design.theta,
        design_gap_difference_nm: geometric.design.gap_upper_nm - geometric.design.gap_lower_nm,
        design_cross: r[(1, 0)].norm_sqr(),
        design_leakage: geometric.quality.leakage,
        g_c_nm: ctx.fit.g_c_nm,
        gaps,
        bias,
    };
    trilane::report::cell_sweep::sweep_svg(&s, &p.name)
}
