//! The chip build (`compile::chip::build`, `trilane build`): strategies,
//! floorplan, netlist and reports, checked against the network they must
//! realise (physics.md sections 2, 5 and 7) and against what cli.md says
//! the command does.

use assert_cmd::Command;
use std::path::Path;
use trilane::circuit::{Circuit, NoFiles};
use trilane::compile::chip::{BuildOptions, StrategyChoice, build};
use trilane::compile::mesh::Strategy;
use trilane::layout::floorplan::Kind;
use trilane::optics::decompose::Layout;
use trilane::process::presets::preset;
use trilane::source::Source;

fn chip(text: &str) -> Circuit {
    let src = Source::new("t.trl", text);
    let p = trilane::check(&src, &NoFiles).unwrap_or_else(|d| panic!("{d:?}"));
    p.circuits.into_iter().next().unwrap()
}

fn example(name: &str) -> Circuit {
    chip(&std::fs::read_to_string(format!("circuits/{name}")).unwrap())
}

fn only(s: Strategy) -> BuildOptions {
    BuildOptions {
        strategy: StrategyChoice::Only(s),
        ..Default::default()
    }
}

/// A small chip of our own: one qubit and a free pair, three rotations.
const TINY: &str = "chip tiny {
    dualrail q
    mode m0, m1
    launch q = |0>, m0 = 1 photon
    H on q
    split(30%) on m0, m1
    rotate(0.4, 1.1) on q.1, m0
}
";

#[test]
fn every_strategy_cell_and_mesh_realises_the_network() {
    // The nominal chip's transfer (the product of the floorplan's
    // components, loss included) against the network's unitary: F_U of
    // physics.md section 7 (loss-normalised). Phases are solved exactly and
    // the loss is balanced per column, so what is left is the cells' own
    // split error (below 1e-6 in amplitude: cell/refine.rs), squared.
    let p = preset("si220_wire").unwrap();
    let c = example("bell_pair.trl");
    for cell in [
        trilane::cell::CellKind::Geometric,
        trilane::cell::CellKind::Coupler,
        trilane::cell::CellKind::Mzi,
    ] {
        for s in [Strategy::Flat, Strategy::Local] {
            for mesh in [Layout::Rectangular, Layout::Triangular] {
                let o = BuildOptions {
                    cell,
                    mesh,
                    ..only(s)
                };
                let b = build(&c, &p, o).unwrap();
                let f = &b.chosen.figures;
                assert!(
                    1.0 - f.mode_fidelity < 1e-9,
                    "{cell:?} {s:?} {mesh:?}: 1-F {:e}",
                    1.0 - f.mode_fidelity
                );
                let l = f.logical.as_ref().unwrap();
                assert!(1.0 - l.fidelity < 1e-9);
                // Success: the scheme's 1/9 (Ralph et al., PRA 65, 062324,
                // 2002) times the two photons' transmission.
                assert!((l.scheme_success - 1.0 / 9.0).abs() < 1e-12);
                let want = l.scheme_success * f.transmission * f.transmission;
                assert!(
                    (l.success_probability / want - 1.0).abs() < 1e-6,
                    "{} vs {want}",
                    l.success_probability
                );
            }
        }
    }
}

#[test]
fn every_path_loses_the_same_with_balancing_sections() {
    // physics.md section 7: idle rails get balancing sections so every
    // path has the same loss; without them the edge rails of a mesh pass
    // fewer cells and shifters.
    let p = preset("si220_wire").unwrap();
    for name in ["bell_pair.trl", "ghz3.trl"] {
        let b = build(&example(name), &p, only(Strategy::Flat)).unwrap();
        let fp = &b.chosen.floorplan;
        let (lo, hi) = fp
            .path_loss_db
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
        // Differences below BALANCE_TOL_DB per column are left alone.
        assert!(hi - lo < 1e-4, "{name}: spread {:e} dB", hi - lo);
        let (ulo, uhi) = fp
            .path_loss_unbalanced_db
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
        assert!(
            uhi - ulo > 0.1,
            "{name}: without balancing {:e} dB",
            uhi - ulo
        );
        // The transmission is the common path loss.
        let t = 10f64.powf(-lo / 10.0);
        assert!((b.chosen.figures.transmission / t - 1.0).abs() < 1e-4);
    }
}

#[test]
fn the_floorplan_adds_up_and_keeps_the_rules() {
    let p = preset("si220_wire").unwrap();
    let b = build(&example("ghz3.trl"), &p, only(Strategy::Local)).unwrap();
    let fp = &b.chosen.floorplan;
    let columns: f64 = fp.columns.iter().map(|c| c.length_um).sum();
    let edges = 2.0 * trilane::layout::floorplan::EDGE_RUN_UM;
    assert!((fp.length_um - columns - fp.final_section.length_um - edges).abs() < 1e-9);
    assert!((fp.width_um - (fp.modes.len() + 1) as f64 * p.rules.rail_pitch_um).abs() < 1e-9);
    let mut ports = 0;
    for c in &fp.components {
        match &c.kind {
            Kind::Bend { radius_um, .. } => assert!(*radius_um >= p.rules.min_bend_radius_um),
            Kind::Port { .. } => {
                ports += 1;
                assert!(c.x_um == 0.0 || (c.x_um - fp.length_um).abs() < 1e-9);
            }
            Kind::Cell { cell, .. } => {
                if let trilane::cell::CellDesign::Geometric(r) = &**cell {
                    assert!(r.design.gap_upper_nm >= p.rules.min_gap_nm - 1e-6);
                    assert!(r.design.gap_lower_nm >= p.rules.min_gap_nm - 1e-6);
                }
            }
            _ => {}
        }
        assert!(
            c.x_um >= 0.0 && c.x_um + c.length_um <= fp.length_um + 1e-9,
            "{}",
            c.id
        );
    }
    assert_eq!(ports, 2 * fp.modes.len());
    // Each rail: components in x order, touching end to end.
    for m in 0..fp.modes.len() {
        let mut x = 0.0;
        for c in fp.components.iter().filter(|c| c.modes.contains(&m)) {
            if matches!(c.kind, Kind::Terminator { .. }) {
                continue;
            }
            assert!(
                (c.x_um - x).abs() < 1e-9,
                "mode {m}: {} starts at {} not {x}",
                c.id,
                c.x_um
            );
            x = c.x_um + c.length_um;
        }
        assert!((x - fp.length_um).abs() < 1e-9);
    }
    // Heater power: P_pi x phase / pi summed (physics.md section 5).
    let power: f64 = fp
        .components
        .iter()
        .filter_map(|c| match c.kind {
            Kind::PhaseShifter { power_mw, .. } => Some(power_mw),
            _ => None,
        })
        .sum();
    assert!((power - fp.heater_power_mw).abs() < 1e-9);
}

#[test]
fn auto_picks_by_the_stated_rule() {
    // Flat and local differ on bell_pair (local keeps the gates' own small
    // meshes and routes the ancillas with crossings). With no requirement
    // to tell them apart, the better tolerance mean wins unless within
    // twice the combined standard error, then the shorter.
    let p = preset("si220_wire").unwrap();
    let c = example("bell_pair.trl");
    let mut c = c;
    c.requirements.clear();
    let b = build(&c, &p, BuildOptions::default()).unwrap();
    let other = b.other.as_ref().expect("auto built both");
    assert_ne!(b.chosen.strategy, other.strategy);
    let (t1, t2) = (
        b.chosen.tolerance.clone().unwrap(),
        other.tolerance.clone().unwrap(),
    );
    let noise = 2.0 * (t1.standard_error.powi(2) + t2.standard_error.powi(2)).sqrt();
    if (t1.mean - t2.mean).abs() > noise {
        assert!(t1.mean > t2.mean, "{}", b.strategy_reason);
        assert!(b.strategy_reason.contains("better expected fidelity"));
    } else {
        assert!(b.chosen.floorplan.length_um <= other.floorplan.length_um);
        assert!(b.strategy_reason.contains("shorter"));
    }
    // A requirement only the other chip meets overrides the fidelity.
    let loser = other.strategy;
    let limit = other.floorplan.length_um.max(b.chosen.floorplan.length_um);
    let need = if other.floorplan.length_um < b.chosen.floorplan.length_um {
        format!(
            "require length <= {} um",
            (other.floorplan.length_um + limit) / 2.0
        )
    } else {
        format!(
            "require width <= 1 mm\n    require length >= {} um",
            (other.floorplan.length_um + b.chosen.floorplan.length_um) / 2.0
        )
    };
    let text = std::fs::read_to_string("circuits/bell_pair.trl").unwrap();
    let text = text.replace("require length <= 6 mm", &need);
    let mut c2 = chip(&text);
    c2.requirements
        .retain(|r| r.metric == trilane::circuit::Metric::Length);
    let b2 = build(&c2, &p, BuildOptions::default()).unwrap();
    assert_eq!(b2.chosen.strategy, loser, "{}", b2.strategy_reason);
    assert!(
        b2.strategy_reason.contains("meets more"),
        "{}",
        b2.strategy_reason
    );
}

#[test]
fn a_chip_of_one_element_has_one_mesh() {
    let p = preset("si220_wire").unwrap();
    let c = chip(
        "chip one {\n    mode m0, m1, m2\n    launch m0 = 1 photon\n    unitary on m0, m1, m2 = [[0, 1, 0], [0, 0, 1], [1, 0, 0]]\n}\n",
    );
    let b = build(&c, &p, BuildOptions::default()).unwrap();
    assert!(b.other.is_none());
    assert!(
        b.strategy_reason.contains("same mesh"),
        "{}",
        b.strategy_reason
    );
}

// ---- the command line -------------------------------------------------

fn trilane() -> Command {
    let mut c = Command::cargo_bin("trilane").unwrap();
    c.env("NO_COLOR", "1");
    c
}

fn snapshot(name: &str, text: &str) {
    let path = Path::new("tests/data/build").join(name);
    if std::env::var_os("TRILANE_BLESS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, text).unwrap();
        return;
    }
    let want = std::fs::read_to_string(&path)
        .unwrap_or_else(|_| panic!("{} is missing; run with TRILANE_BLESS=1", path.display()));
    assert_eq!(
        text,
        want,
        "{} differs (TRILANE_BLESS=1 rewrites it)",
        path.display()
    );
}

/// A readable dump of a netlist: one line per component, rounded.
fn netlist_dump(json: &serde_json::Value) -> String {
    let mut s = format!(
        "{} v{} chip {} strategy {} mesh {} cells {} tuning {}\n",
        json["format"].as_str().unwrap(),
        json["version"],
        json["chip"].as_str().unwrap(),
        json["strategy"].as_str().unwrap(),
        json["mesh"].as_str().unwrap(),
        json["cell_kind"].as_str().unwrap(),
        json["phase_tuning"].as_str().unwrap()
    );
    s += &format!(
        "process {} model {} length {:.2} um width {:.2} um\n",
        json["process"]["name"].as_str().unwrap(),
        json["process"]["coupling"]["model"].as_str().unwrap(),
        json["length_um"].as_f64().unwrap(),
        json["width_um"].as_f64().unwrap()
    );
    for c in json["components"].as_array().unwrap() {
        let p = &c["params"];
        let extra = match c["kind"].as_str().unwrap() {
            "geometric_cell" => format!(
                " theta {:.4} gaps {:.2}/{:.2} nm L {:.2} um",
                p["theta"].as_f64().unwrap(),
                p["gap_upper_nm"].as_f64().unwrap(),
                p["gap_lower_nm"].as_f64().unwrap(),
                p["length_um"].as_f64().unwrap()
            ),
            "phase_shifter" => format!(" phase {:.3} rad", p["phase_rad"].as_f64().unwrap()),
            _ => String::new(),
        };
        s += &format!(
            "{:<22} {:<15} {:<7} x {:>8.2} len {:>7.2}{extra}\n",
            c["id"].as_str().unwrap(),
            c["kind"].as_str().unwrap(),
            format!(
                "{:?}",
                c["modes"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|m| m.as_u64().unwrap())
                    .collect::<Vec<_>>()
            ),
            c["x_um"].as_f64().unwrap(),
            c["length_um"].as_f64().unwrap()
        );
    }
    s += &format!(
        "{} connections\n",
        json["connections"].as_array().unwrap().len()
    );
    s
}

#[test]
fn build_writes_the_outputs_and_snapshots_hold() {
    let dir = tempfile::tempdir().unwrap();
    let src = dir.path().join("tiny.trl");
    std::fs::write(&src, TINY).unwrap();
    let out = dir.path().join("out");
    let r = trilane()
        .args(["build", src.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(
        r.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    for f in [
        "netlist.json",
        "layout.gds",
        "floorplan.svg",
        "report.txt",
        "report.json",
    ] {
        assert!(out.join(f).exists(), "{f}");
    }
    // The GDSII stream as readable records (never raw bytes).
    let gds = trilane::layout::gds::dump(&std::fs::read(out.join("layout.gds")).unwrap()).unwrap();
    assert!(gds.starts_with("HEADER 600\n") && gds.ends_with("ENDLIB\n"));
    snapshot("tiny.gds.txt", &gds);
    let netlist: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("netlist.json")).unwrap()).unwrap();
    assert_eq!(netlist["format"], "trilane-netlist");
    assert_eq!(netlist["version"], 1);
    assert_eq!(netlist["process"]["coupling"]["model"], "full_vector");
    snapshot("tiny.netlist.txt", &netlist_dump(&netlist));
    let report = std::fs::read_to_string(out.join("report.txt")).unwrap();
    // The folder names differ per run: drop the last line.
    let report: String = report
        .lines()
        .filter(|l| !l.starts_with("written:"))
        .map(|l| format!("{l}\n"))
        .collect();
    snapshot("tiny.report.txt", &report);
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    for k in [
        "chip",
        "strategy",
        "strategy_reason",
        "cell_kind",
        "modes",
        "cells",
        "phase_shifters",
        "length_um",
        "width_um",
        "footprint_mm2",
        "heater_power_mw",
        "mode_fidelity",
        "process_fidelity",
        "fidelity_kind",
        "scheme_success",
        "success_probability",
        "transmission",
        "columns",
        "requirements",
    ] {
        assert!(json.get(k).is_some(), "report.json lacks {k}");
    }
    assert_eq!(
        String::from_utf8_lossy(&r.stdout).lines().next(),
        report.lines().next()
    );
}

fn folder_bytes(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

#[test]
fn an_input_error_leaves_the_output_folder_byte_identical() {
    // cli.md: an input error writes nothing.
    let dir = tempfile::tempdir().unwrap();
    let good = dir.path().join("tiny.trl");
    std::fs::write(&good, TINY).unwrap();
    let out = dir.path().join("out");
    trilane()
        .args(["build", good.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .assert()
        .code(0);
    let before = folder_bytes(&out);
    let bad = dir.path().join("bad.trl");
    std::fs::write(&bad, TINY.replace("H on q", "H on nobody")).unwrap();
    let r = trilane()
        .args(["build", bad.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&r.stderr).contains("nobody"));
    assert_eq!(folder_bytes(&out), before);
    // A process that does not exist: a usage error, nothing written.
    let r = trilane()
        .args([
            "build",
            good.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--process",
            "si221_wire",
        ])
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&r.stderr).contains("did you mean `si220_wire`"));
    assert_eq!(folder_bytes(&out), before);
}

#[test]
fn a_failed_requirement_exits_1_and_still_writes_the_outputs() {
    let dir = tempfile::tempdir().unwrap();
    let src = dir.path().join("tiny.trl");
    std::fs::write(
        &src,
        TINY.replace(
            "rotate(0.4, 1.1) on q.1, m0",
            "rotate(0.4, 1.1) on q.1, m0\n    require length <= 100 um",
        ),
    )
    .unwrap();
    let out = dir.path().join("out");
    let r = trilane()
        .args(["build", src.to_str().unwrap(), "-o", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(1));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.contains("requirement length <= 100 fails on the nominal chip: misses by"),
        "{err}"
    );
    for f in ["netlist.json", "floorplan.svg", "report.txt", "report.json"] {
        assert!(out.join(f).exists(), "{f}");
    }
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    let req = &json["requirements"][0];
    assert_eq!(req["what"], "length");
    assert_eq!(req["ok"], false);
    assert!(req["value"].as_f64().unwrap() > 100.0);
}

#[test]
fn simulate_compiled_puts_the_chip_beside_the_ideal_network() {
    let r = trilane()
        .args([
            "simulate",
            "circuits/bell_pair.trl",
            "--compiled",
            "--strategy",
            "flat",
            "--json",
        ])
        .output()
        .unwrap();
    assert_eq!(
        r.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&r.stdout).unwrap();
    assert_eq!(j["network"], "compiled");
    let ideal = j["compiled"]["ideal_success_probability"].as_f64().unwrap();
    assert!((ideal - 1.0 / 9.0).abs() < 1e-12);
    let chip = j["success_probability"].as_f64().unwrap();
    assert!(chip < ideal && chip > 0.2 * ideal, "{chip}");
    assert!(j["process_fidelity"].as_f64().unwrap() > 1.0 - 1e-9);
    // The launch |00>'s outcomes: the chip's probabilities are the ideal
    // ones times the two photons' transmission squared.
    let d = j["distribution"].as_array().unwrap();
    let (p, q): (f64, f64) = d
        .iter()
        .filter(|o| o["logical"].is_string())
        .map(|o| {
            (
                o["probability"].as_f64().unwrap(),
                o["ideal_probability"].as_f64().unwrap(),
            )
        })
        .fold((0.0, 0.0), |a, b| (a.0 + b.0, a.1 + b.1));
    assert!((p / q - chip / ideal).abs() < 1e-6, "{p} {q}");
    let text = trilane()
        .args(["simulate", "circuits/bell_pair.trl", "--compiled"])
        .output()
        .unwrap();
    let t = String::from_utf8_lossy(&text.stdout);
    assert!(
        t.contains("compiled nominal chip") && t.contains("ideal network fidelity"),
        "{t}"
    );
}

/// A process whose rule deck asks for wider gaps than the design rules
/// the cells were made to (a foundry deck stricter than the design).
const STRICT_DECK: &str = "name = \"strict_deck\"
base = \"si220_wire\"
[drc]
min_gap_nm = 400
";

#[test]
fn a_rule_deck_stricter_than_the_design_fails_with_located_violations() {
    let dir = tempfile::tempdir().unwrap();
    let src = dir.path().join("tiny.trl");
    std::fs::write(&src, TINY).unwrap();
    let deck = dir.path().join("strict.toml");
    std::fs::write(&deck, STRICT_DECK).unwrap();
    let out = dir.path().join("out");
    let run = |extra: &[&str]| {
        let mut args = vec![
            "build",
            src.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--process",
            deck.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        trilane().args(&args).output().unwrap()
    };
    let r = run(&[]);
    let stderr = String::from_utf8_lossy(&r.stderr);
    assert_eq!(r.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("design rule min_gap"), "{stderr}");
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    let netlist: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("netlist.json")).unwrap()).unwrap();
    let drc = &report["mask"]["drc"];
    assert_eq!(drc["status"], "failed");
    assert_eq!(drc["min_gap_nm"], 400.0);
    let cells: Vec<&serde_json::Value> = netlist["components"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["kind"] == "geometric_cell")
        .collect();
    let violations = drc["violations"].as_array().unwrap();
    // Every cell closes both its gaps below 400 nm at its centre: one
    // violation per rail (rail against auxiliary guide), located there.
    assert_eq!(violations.len(), 2 * cells.len(), "{violations:#?}");
    for v in violations {
        assert_eq!(v["rule"], "min_gap");
        let cell = cells
            .iter()
            .find(|c| c["id"] == v["component"])
            .unwrap_or_else(|| panic!("{v} is not at a cell"));
        let p = &cell["params"];
        let (x0, len) = (
            cell["x_um"].as_f64().unwrap(),
            p["length_um"].as_f64().unwrap(),
        );
        let x = v["x_um"].as_f64().unwrap();
        // The gaps are smallest at the cell's centre, where the rails'
        // parabolas have their vertex (a drawn vertex).
        assert!((x - (x0 + len / 2.0)).abs() < 1e-6, "{v}");
        let measured_nm = v["measured_um"].as_f64().unwrap() * 1e3;
        let designed = [
            p["gap_upper_nm"].as_f64().unwrap(),
            p["gap_lower_nm"].as_f64().unwrap(),
        ];
        assert!(
            designed.iter().any(|g| (g - measured_nm).abs() < 1e-6),
            "{v}: {designed:?}"
        );
        assert!(stderr.contains(&format!("x = {x:.3} um")), "{stderr}");
    }
    let text = std::fs::read_to_string(out.join("report.txt")).unwrap();
    assert!(text.contains("design rules FAILED"), "{text}");
    // Switched off, the same chip builds and the report says so.
    let r = run(&["--drc", "off"]);
    assert_eq!(
        r.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    let text = std::fs::read_to_string(out.join("report.txt")).unwrap();
    assert!(text.contains("NOT CHECKED (--drc off)"), "{text}");
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    assert_eq!(report["mask"]["drc"]["status"], "off");
}
