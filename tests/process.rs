//! `trilane process` as a user meets it, and the process model through the
//! binary: presets, process files, coupling tables, the figure.

use assert_cmd::Command;
use std::path::Path;

fn trilane() -> Command {
    let mut c = Command::cargo_bin("trilane").unwrap();
    c.env("NO_COLOR", "1");
    c
}

fn json(args: &[&str]) -> serde_json::Value {
    let out = trilane()
        .arg("process")
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
fn every_preset_reports_with_the_documented_fields() {
    for name in ["si220_wire", "sin400_strip", "silica_plc"] {
        let doc = json(&[name]);
        for key in [
            "materials",
            "neff",
            "group_index",
            "coupling",
            "rules",
            "tolerances",
            "sources",
        ] {
            assert!(doc.get(key).is_some(), "{name}: missing {key}");
        }
        let c = &doc["coupling"];
        for key in [
            "model",
            "k_ref_per_um",
            "g_ref_nm",
            "g_c_nm",
            "fit_rms",
            "table",
        ] {
            assert!(c.get(key).is_some(), "{name}: coupling.{key}");
        }
        // The presets' laws come from their shipped full-vector solutions.
        assert_eq!(c["model"], "full_vector");
        assert_eq!(doc["solution"]["from"], "shipped with the preset");
        assert!(c["table"].as_array().unwrap().len() >= 10);
        assert!(c["table"][0]["k_error_per_um"].as_f64().unwrap() > 0.0);
    }
}

#[test]
fn the_default_process_is_the_silicon_wire() {
    // checks.md (computed independently): a full-vector solver gives
    // n_eff = 2.4458 for a 500 x 220 nm silicon strip, group index 4.18,
    // k(200 nm) = 0.0416 rad/um; the effective index method 2.4919 and
    // 0.062 rad/um. The shipped solution is this project's own solver's
    // (tests/process.rs runs that solver; compiler/process/vector tests it
    // against these values at coarser grids).
    let doc = json(&[]);
    assert_eq!(doc["name"], "si220_wire");
    assert!((doc["neff"].as_f64().unwrap() - 2.4458).abs() < 3e-4);
    assert!((doc["group_index"].as_f64().unwrap() - 4.18).abs() < 0.05);
    let k200 = |doc: &serde_json::Value| {
        doc["coupling"]["table"]
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r["gap_nm"] == 200.0)
            .unwrap()["k_per_um"]
            .as_f64()
            .unwrap()
    };
    assert!((k200(&doc) / 0.0416 - 1.0).abs() < 0.02);
    // The fast, rough model on request, and the report says what it gets
    // wrong.
    let rough = json(&["--model", "effective_index"]);
    assert_eq!(rough["coupling"]["model"], "effective_index");
    assert!((rough["neff"].as_f64().unwrap() - 2.4919).abs() < 2e-3);
    assert!((k200(&rough) / 0.062 - 1.0).abs() < 0.02);
    let out = trilane()
        .args(["process", "--model", "effective_index"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("effective_index") && text.contains("overstates"),
        "{text}"
    );
    let out = trilane().arg("process").output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("full_vector") && text.contains("shipped with the preset"),
        "{text}"
    );
}

#[test]
fn a_table_is_fitted_back_to_the_law_it_came_from() {
    // Generated from k = 0.0416 exp(-(g - 200 nm) / 113.5 nm), the shape of
    // checks.md's full-vector fit: the fit must return the law.
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("gap_nm,k_per_um\n");
    for g in (100..=400).step_by(25) {
        let k = 0.0416 * (-(f64::from(g) - 200.0) / 113.5).exp();
        text.push_str(&format!("{g},{k:.10e}\n"));
    }
    let csv = dir.path().join("k.csv");
    std::fs::write(&csv, text).unwrap();
    let doc = json(&["si220_wire", "--table", csv.to_str().unwrap()]);
    let c = &doc["coupling"];
    assert_eq!(c["model"], "table");
    assert!((c["k_ref_per_um"].as_f64().unwrap() - 0.0416).abs() < 1e-9);
    assert!((c["g_c_nm"].as_f64().unwrap() - 113.5).abs() < 1e-6);
    assert!(c["fit_rms"].as_f64().unwrap() < 1e-9);
}

#[test]
fn the_plot_is_an_svg_with_its_labels() {
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("k.svg");
    trilane()
        .args(["process", "si220_wire", "--plot"])
        .arg(&svg)
        .assert()
        .success();
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.starts_with("<svg") || text.contains("<svg"));
    assert!(text.contains("edge-to-edge gap (nm)") && text.contains("exponential fit"));
}

#[test]
fn process_files_and_their_errors() {
    // The example's process file overrides its base.
    let ex = Path::new(env!("CARGO_MANIFEST_DIR")).join("circuits/fab/run7.toml");
    let doc = json(&[ex.to_str().unwrap()]);
    assert_eq!(doc["name"], "run7");
    assert_eq!(doc["width_nm"], 480.0);
    assert_eq!(doc["rules"]["min_gap_nm"], 120.0);
    // Unknown keys and bad values: exit 1, located, with a hint.
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, "base = \"si220_wire\"\n[rules]\nmin_gap_nm = -5\n").unwrap();
    let out = trilane().arg("process").arg(&bad).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("bad.toml:3:14") && err.contains("min_gap_nm"),
        "{err}"
    );
    std::fs::write(&bad, "base = \"si221_wire\"\n").unwrap();
    let out = trilane().arg("process").arg(&bad).output().unwrap();
    assert!(String::from_utf8_lossy(&out.stderr).contains("did you mean `si220_wire`"));
    // A name that is neither a preset nor a file: a usage error.
    let out = trilane().args(["process", "si220"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    // A broken table: exit 1, the cell located.
    let csv = dir.path().join("k.csv");
    std::fs::write(&csv, "gap_nm,k_per_um\n100,0.15\n150,x\n200,0.06\n").unwrap();
    let out = trilane()
        .args(["process", "--table"])
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("k.csv:3:5"));
}

#[test]
fn the_examples_in_docs_process_md_work() {
    // The TOML and CSV examples of the manual, run as a user would copy them.
    let doc =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/process.md"))
            .unwrap();
    // The block that starts with `fence` (its first line included after the backticks).
    let block = |fence: &str| {
        let start = doc.find(fence).unwrap() + fence.find('\n').unwrap() + 1;
        doc[start..start + doc[start..].find("```").unwrap()].to_owned()
    };
    let dir = tempfile::tempdir().unwrap();
    let toml = dir.path().join("doc.toml");
    std::fs::write(&toml, block("```toml\n")).unwrap();
    let d = json(&[toml.to_str().unwrap()]);
    assert_eq!(d["name"], "run7");
    let csv = dir.path().join("doc.csv");
    std::fs::write(&csv, block("```\n# measured")).unwrap();
    let d = json(&["--table", csv.to_str().unwrap()]);
    assert_eq!(d["coupling"]["by_wavelength"].as_array().unwrap().len(), 2);
}

#[test]
fn a_cell_is_designed_and_refined() {
    // physics.md section 3: the refined geometric cell reaches 1e-6 in
    // split and leakage; the analytic design on the exponential fit misses.
    let out = trilane()
        .args(["cell", "--theta", "0.7853981633974483", "--json"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in [
        "kind",
        "theta",
        "gap_upper_nm",
        "gap_lower_nm",
        "bend_per_m",
        "length_um",
        "width_nm",
        "coupling",
        "transfer",
        "rail_block",
        "leakage",
        "analytic",
    ] {
        assert!(d.get(key).is_some(), "missing {key}");
    }
    assert!(d["split_error"].as_f64().unwrap() < 1e-6 && d["leakage"].as_f64().unwrap() < 1e-6);
    assert!(d["analytic"]["split_error"].as_f64().unwrap() > 1e-4);
    assert!(d["gap_lower_nm"].as_f64().unwrap() >= 100.0 - 0.01);
    // The sensitivity table, side by side with the coupler: under the edge
    // bias the geometric cell's split moves less (physics.md section 3).
    let rows = d["sensitivity"].as_array().unwrap();
    let edge = rows.iter().find(|r| r["source"] == "edge_bias").unwrap();
    assert_eq!(edge["comparison_kind"], "coupler");
    assert!(
        edge["cell"]["split_error"].as_f64().unwrap().abs()
            < edge["comparison"]["split_error"].as_f64().unwrap().abs()
    );
    // The coupler of the same split, by --split.
    let out = trilane()
        .args(["cell", "--split", "0.5", "--cell", "coupler", "--json"])
        .output()
        .unwrap();
    let c: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let cross = c["rail_block"]["re"][1][0].as_f64().unwrap().powi(2)
        + c["rail_block"]["im"][1][0].as_f64().unwrap().powi(2);
    assert!((cross - 0.5).abs() < 1e-9);
    // Out of range: a usage error.
    let out = trilane().args(["cell", "--theta", "2"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn the_cell_sweep_figure_and_the_baselines() {
    // `trilane cell --theta 0.7854 --sweep s.svg`: one SVG with the three
    // panels; the Monte Carlo and the first-order columns in the JSON; the
    // MZI baseline; and the width trade with longer cells for wider guides
    // (weaker evanescent coupling: Marcuse 1991, ch. 3).
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("s.svg");
    let out = trilane()
        .args(["cell", "--theta", "0.7854", "--samples", "8", "--sweep"])
        .arg(&svg)
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let d: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.starts_with("<svg") && text.trim_end().ends_with("</svg>"));
    for caption in [
        "cross power vs gap difference",
        "power left in the auxiliary guide",
        "1 - F against edge bias",
    ] {
        assert!(text.contains(caption), "{caption}");
    }
    assert_eq!(d["sweep_file"], svg.display().to_string());
    assert_eq!(d["monte_carlo"]["samples"], 8);
    let mc = &d["monte_carlo"];
    assert!(mc["infidelity_p95"].as_f64().unwrap() >= mc["infidelity_median"].as_f64().unwrap());
    assert!(
        mc["calibrated_infidelity_mean"].as_f64().unwrap()
            <= mc["infidelity_mean"].as_f64().unwrap()
    );
    let rows = d["sensitivity"].as_array().unwrap();
    assert!(
        rows.iter()
            .any(|r| r["source"] == "roughness" && r["first_order"].is_null())
    );
    let edge = rows.iter().find(|r| r["source"] == "edge_bias").unwrap();
    let (exact, lin) = (
        edge["cell"]["split_error"].as_f64().unwrap(),
        edge["first_order"]["split_error"].as_f64().unwrap(),
    );
    assert!((exact - lin).abs() < 0.2 * exact.abs(), "{exact} {lin}");

    // MZI: two 50:50 couplers and the textbook phase pi - 2 theta.
    let out = trilane()
        .args([
            "cell",
            "--theta",
            "0.5",
            "--cell",
            "mzi",
            "--samples",
            "0",
            "--json",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let m: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(m["kind"], "mzi");
    assert_eq!(m["comparison_kind"], "geometric");
    assert!((m["phase_rad"].as_f64().unwrap() - (std::f64::consts::PI - 1.0)).abs() < 1e-3);
    assert!(m.get("monte_carlo").is_none());

    // The width trade.
    let out = trilane()
        .args([
            "cell",
            "--theta",
            "0.7854",
            "--width",
            "500,650",
            // 650 nm is beyond the reach of the shipped full-vector
            // solution, which would be solved afresh (about a minute in a
            // release build): the rough model keeps this test quick.
            "--model",
            "effective_index",
            "--samples",
            "8",
            "--json",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let w: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows = w["width_trade"].as_array().unwrap();
    assert_eq!(rows.len(), 2);
    assert!(rows[1]["length_um"].as_f64().unwrap() > rows[0]["length_um"].as_f64().unwrap());
    assert_eq!(w["width_nm"], 500.0);

    // Usage errors, and no figure written.
    let bad = dir.path().join("s.png");
    let out = trilane()
        .args(["cell", "--theta", "0.7854", "--sweep"])
        .arg(&bad)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains(".svg"));
    assert!(!bad.exists());
    let out = trilane()
        .args(["cell", "--theta", "0.7854", "--width", "20"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("minimum feature width"));
}
