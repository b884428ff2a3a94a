//! The binary as a user meets it: exit codes (0 ok, 1 input errors, 2 usage),
//! the `--json` shape of cli.md, `fmt` in place and `--check`, and every
//! example in circuits/ checking clean.

use assert_cmd::Command;
use std::path::Path;

fn trilane() -> Command {
    let mut c = Command::cargo_bin("trilane").unwrap();
    c.env("NO_COLOR", "1");
    c
}

fn write(dir: &Path, name: &str, text: &str) -> std::path::PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

const GOOD: &str = "chip ok {\n    dualrail a, b\n    H on a\n    CZ on a, b\n}\n";
const BAD: &str = "chip bad {\n    dualrail a\n    HH on a\n    CZ on a, c\n}\n";

#[test]
fn every_example_circuit_checks_clean() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("circuits");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "trl"))
        .collect();
    files.sort();
    assert!(files.len() >= 6, "circuits/ holds at least six examples");
    for f in &files {
        let out = trilane().arg("check").arg(f).output().unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(out.status.success(), "{}:\n{stderr}", f.display());
        assert!(stderr.is_empty(), "{} has warnings:\n{stderr}", f.display());
    }
    // ... and is already in canonical form.
    trilane()
        .arg("fmt")
        .arg("--check")
        .args(&files)
        .assert()
        .code(0)
        .stdout("");
}

#[test]
fn check_exit_codes() {
    let t = tempfile::tempdir().unwrap();
    let good = write(t.path(), "good.trl", GOOD);
    let bad = write(t.path(), "bad.trl", BAD);
    trilane().arg("check").arg(&good).assert().code(0);
    let out = trilane()
        .arg("check")
        .arg(&good)
        .arg(&bad)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let stderr = String::from_utf8(out.stderr).unwrap();
    // Both errors of the file, each located.
    assert!(
        stderr.contains("unknown gate `HH`") && stderr.contains("bad.trl:3:5"),
        "{stderr}"
    );
    assert!(
        stderr.contains("`c` is not declared") && stderr.contains("bad.trl:4:14"),
        "{stderr}"
    );
    assert!(stderr.contains("did you mean `H`?"), "{stderr}");
    // Usage errors and unreadable files exit 2.
    trilane().arg("check").assert().code(2);
    trilane()
        .arg("check")
        .arg("--frobnicate")
        .arg(&good)
        .assert()
        .code(2);
    trilane()
        .arg("check")
        .arg(t.path().join("missing.trl"))
        .assert()
        .code(2);
    trilane().arg("launch-rockets").assert().code(2);
}

#[test]
fn check_json_has_the_documented_shape() {
    let t = tempfile::tempdir().unwrap();
    let good = write(t.path(), "good.trl", GOOD);
    let bad = write(t.path(), "bad.trl", BAD);
    let out = trilane()
        .arg("check")
        .arg("--json")
        .arg(&good)
        .arg(&bad)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let files = v["files"].as_array().unwrap();
    assert_eq!(files.len(), 2);
    assert_eq!(files[0]["ok"], true);
    assert_eq!(files[0]["chips"][0], "ok");
    assert_eq!(files[1]["ok"], false);
    let d = &files[1]["diagnostics"][0];
    for key in ["severity", "message", "line", "column", "hint", "code"] {
        assert!(d.get(key).is_some(), "missing {key} in {d}");
    }
    assert_eq!(d["severity"], "error");
    assert_eq!(d["line"], 3);
    assert_eq!(d["column"], 5);
    assert_eq!(d["code"], "unknown-gate");
    // Diagnostics go to stdout in JSON mode, nothing to stderr.
    assert!(out.stderr.is_empty());
}

#[test]
fn invalid_utf8_is_a_located_error() {
    let t = tempfile::tempdir().unwrap();
    let p = t.path().join("latin1.trl");
    std::fs::write(&p, b"// caf\xe9\nchip a { dualrail q H on q }\n").unwrap();
    let out = trilane().arg("check").arg(&p).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(
        stderr.contains("not valid UTF-8") && stderr.contains("latin1.trl:1:7"),
        "{stderr}"
    );
}

#[test]
fn fmt_rewrites_in_place_checks_and_never_touches_broken_files() {
    let t = tempfile::tempdir().unwrap();
    let messy = "chip  m{dualrail a,b // qubits\nH on a   CZ on a,b}\n";
    let p = write(t.path(), "m.trl", messy);
    trilane()
        .arg("fmt")
        .arg("--check")
        .arg(&p)
        .assert()
        .code(1)
        .stdout(format!("{}\n", p.display()));
    assert_eq!(
        std::fs::read_to_string(&p).unwrap(),
        messy,
        "--check changes nothing"
    );
    trilane().arg("fmt").arg(&p).assert().code(0);
    let formatted = std::fs::read_to_string(&p).unwrap();
    assert_eq!(
        formatted,
        "chip m {\n    dualrail a, b // qubits\n    H on a\n    CZ on a, b\n}\n"
    );
    trilane()
        .arg("fmt")
        .arg("--check")
        .arg(&p)
        .assert()
        .code(0)
        .stdout("");
    // A file that does not parse is left byte-identical, and no temporary remains.
    let broken = "chip b {\n    H on\n}\n";
    let q = write(t.path(), "b.trl", broken);
    trilane().arg("fmt").arg(&q).assert().code(1);
    assert_eq!(std::fs::read_to_string(&q).unwrap(), broken);
    let names: Vec<_> = std::fs::read_dir(t.path())
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(names.len(), 2, "{names:?}");
    // --stdout prints and writes nothing.
    trilane()
        .arg("fmt")
        .arg("--stdout")
        .arg(&p)
        .assert()
        .code(0)
        .stdout(formatted);
}

#[test]
fn matrix_files_are_read_beside_the_circuit() {
    let t = tempfile::tempdir().unwrap();
    write(t.path(), "swap.csv", "0, 1\n1, 0\n");
    write(t.path(), "half.csv", "0.5, 0\n0, 1\n");
    let ok = write(
        t.path(),
        "a.trl",
        "chip a {\n    mode m0, m1\n    unitary on m0 ... m1 from \"swap.csv\"\n}\n",
    );
    let bad = write(
        t.path(),
        "b.trl",
        "chip b {\n    mode m0, m1\n    unitary on m0 ... m1 from \"half.csv\"\n}\n",
    );
    let missing = write(
        t.path(),
        "c.trl",
        "chip c {\n    mode m0, m1\n    unitary on m0 ... m1 from \"nowhere.csv\"\n}\n",
    );
    // Run from another folder: the path is relative to the circuit file.
    trilane()
        .current_dir(std::env::temp_dir())
        .arg("check")
        .arg(&ok)
        .assert()
        .code(0);
    let out = trilane().arg("check").arg(&bad).output().unwrap();
    assert!(String::from_utf8_lossy(&out.stderr).contains("not unitary"));
    let out = trilane().arg("check").arg(&missing).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no such file"));
}

#[test]
fn help_reads_well() {
    let out = trilane().arg("--help").output().unwrap();
    let s = String::from_utf8(out.stdout).unwrap();
    assert!(
        s.contains("check") && s.contains("fmt") && s.contains("Exit codes"),
        "{s}"
    );
    let out = trilane().args(["check", "--help"]).output().unwrap();
    let s = String::from_utf8(out.stdout).unwrap();
    assert!(s.contains("--json") && s.contains("FILE"), "{s}");
}

fn simulate_json(args: &[&str]) -> serde_json::Value {
    let out = trilane()
        .arg("simulate")
        .args(args)
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn every_example_simulates() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("circuits");
    for (file, chip) in [
        ("bell_pair.trl", None),
        ("ghz3.trl", None),
        ("splitter_calibration.trl", None),
        ("interferometer4.trl", Some("dft4_adjacent")),
        ("interferometer4.trl", Some("dft4_cyclic")),
        ("heralded_cz.trl", None),
        ("definitions.trl", None),
        ("two_processes.trl", Some("prep_preset")),
    ] {
        let path = dir.join(file);
        let mut args = vec![path.to_str().unwrap()];
        if let Some(c) = chip {
            args.extend(["--chip", c]);
        }
        let doc = simulate_json(&args);
        let total = doc["total_probability"].as_f64().unwrap();
        // A lossless network keeps every photon.
        assert!((total - 1.0).abs() < 1e-12, "{file}: total {total}");
        if let Some(f) = doc["process_fidelity"].as_f64() {
            assert!(
                f > 1.0 - 1e-9,
                "{file}: the example's ideal network does what it says ({f})"
            );
        }
    }
}

#[test]
fn simulate_json_has_the_documented_shape() {
    let dir = tempfile::tempdir().unwrap();
    let f = write(dir.path(), "g.trl", GOOD);
    let doc = simulate_json(&[f.to_str().unwrap()]);
    for key in [
        "chip",
        "qubits",
        "modes",
        "mode_unitary",
        "logical_basis",
        "logical_map",
        "success_probability",
        "process_fidelity",
        "fidelity_kind",
        "warnings",
        "distribution",
    ] {
        assert!(doc.get(key).is_some(), "missing {key}");
    }
    assert_eq!(doc["modes"].as_array().unwrap().len(), 6);
    assert_eq!(doc["mode_unitary"]["re"].as_array().unwrap().len(), 6);
    assert_eq!(doc["logical_basis"][3], "11");
    assert_eq!(doc["fidelity_kind"], "process");
    // Ralph et al. (2002): success 1/9.
    assert!((doc["success_probability"].as_f64().unwrap() - 1.0 / 9.0).abs() < 1e-12);
    let first = &doc["distribution"][0];
    assert!(first["occupation"].is_array() && first.get("logical").is_some());
}

#[test]
fn simulate_launch_and_output() {
    let dir = tempfile::tempdir().unwrap();
    let f = write(
        dir.path(),
        "hom.trl",
        "chip hom {\n    mode m0, m1\n    launch m0 = 1 photon\n    split(0.5) on m0, m1\n}\n",
    );
    let path = f.to_str().unwrap();
    // Hong, Ou & Mandel (1987): with both inputs lit, no coincidences at 50:50.
    let doc = simulate_json(&[path, "--launch", "m1=1", "--output", "1,1"]);
    assert!(doc["probability"].as_f64().unwrap() < 1e-30);
    assert!(doc.get("distribution").is_none());
    let doc = simulate_json(&[path, "--launch", "m1=1", "--output", "2,0"]);
    assert!((doc["probability"].as_f64().unwrap() - 0.5).abs() < 1e-15);
    // Usage errors: exit 2, a message naming what is wrong.
    let out = trilane()
        .args(["simulate", path, "--output", "1,0,0"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("m0 m1"), "{err}");
    let out = trilane()
        .args(["simulate", path, "--launch", "m3=1"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("did you mean `m0`"));
    // Several chips need --chip; a wrong name gets the list.
    let two = write(
        dir.path(),
        "two.trl",
        "chip one {\n    mode m\n}\nchip two {\n    mode m\n}\n",
    );
    let out = trilane().arg("simulate").arg(&two).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("one, two"));
    // Input errors: exit 1, nothing on stdout.
    let bad = write(dir.path(), "bad.trl", BAD);
    let out = trilane().arg("simulate").arg(&bad).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert!(out.stdout.is_empty());
}

#[test]
fn simulate_refuses_what_it_cannot_finish() {
    // 12 photons in 40 modes: about 1.5e10 patterns, refused at once with a
    // pointer to --output.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("chip big {\n    mode m0");
    for i in 1..40 {
        text.push_str(&format!(", m{i}"));
    }
    text.push_str("\n    launch ");
    let lits: Vec<String> = (0..12).map(|i| format!("m{i} = 1 photon")).collect();
    text.push_str(&lits.join(", "));
    text.push_str("\n    split(0.5) on m0, m1\n}\n");
    let f = write(dir.path(), "big.trl", &text);
    let out = trilane().arg("simulate").arg(&f).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("--output"), "{err}");
}
