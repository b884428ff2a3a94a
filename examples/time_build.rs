//! Times the stages of one chip build (development aid):
//! `cargo run --release --example time_build -- 32`.
use std::time::Instant;
use trilane::compile::{cells, mesh};
use trilane::optics::decompose::Layout;
use trilane::optics::random::{SplitMix64, haar_unitary};
use trilane::process::law::characterise;
use trilane::process::presets::preset;

fn main() {
    let n: usize = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(32);
    let p = preset("si220_wire").unwrap();
    let u = haar_unitary(n, &mut SplitMix64::new(7));
    let t = Instant::now();
    let c = characterise(&p).unwrap();
    eprintln!("characterise {:?}", t.elapsed());
    let t = Instant::now();
    let d = trilane::optics::decompose::rectangular(&u).unwrap();
    eprintln!("decompose {:?}", t.elapsed());
    let net = trilane::optics::ModeNetwork {
        chip: "h".into(),
        modes: Vec::new(),
        qubits: Vec::new(),
        elements: Vec::new(),
        unitary: u.clone(),
        detect: false,
        detected_qubits: Vec::new(),
        detected_modes: Vec::new(),
        post_selected: Vec::new(),
    };
    let _ = d;
    let t = Instant::now();
    let m = mesh::flat(&net, Layout::Rectangular).unwrap();
    eprintln!("mesh {:?}", t.elapsed());
    let t = Instant::now();
    let cm = cells::realise(
        &m,
        trilane::cell::CellKind::Geometric,
        trilane::cell::geometric::LengthRule::Uniform,
        &p,
        &c,
    )
    .unwrap();
    eprintln!("cells {:?} ({} cells)", t.elapsed(), cm.cells().count());
    let mut hist = std::collections::BTreeMap::new();
    for c in cm.cells() {
        if let trilane::cell::CellDesign::Geometric(r) = &*c.design {
            *hist.entry(r.iterations).or_insert(0) += 1;
        }
    }
    eprintln!("iterations {:?}", hist);
    let names: Vec<String> = (0..n).map(|i| format!("m{i}")).collect();
    let t = Instant::now();
    let fp = trilane::layout::place(
        "h",
        &names,
        &u,
        &cm,
        &p,
        &c,
        trilane::layout::Tuning::Thermal,
        &vec![false; n],
    )
    .unwrap();
    eprintln!(
        "place {:?} ({} components)",
        t.elapsed(),
        fp.components.len()
    );
    let t = Instant::now();
    let tu = fp.transfer();
    eprintln!("transfer {:?}", t.elapsed());
    let t = Instant::now();
    let w = trilane::layout::netlist::netlist(&fp).unwrap();
    eprintln!("netlist struct {:?}", t.elapsed());
    let t2 = Instant::now();
    let s = serde_json::to_string_pretty(&w).unwrap();
    eprintln!("netlist text {:?} {}", t2.elapsed(), s.len());
    let t2 = Instant::now();
    let s = serde_json::to_string(&w).unwrap();
    eprintln!("netlist compact text {:?} {}", t2.elapsed(), s.len());
    let t = Instant::now();
    let nl = trilane::layout::netlist::to_json(&fp).unwrap();
    eprintln!("netlist {:?} ({} bytes)", t.elapsed(), nl.len());
    let t = Instant::now();
    let svg = trilane::layout::svg::floorplan_svg(&fp);
    eprintln!("svg {:?} ({} bytes)", t.elapsed(), svg.len());
    let t = Instant::now();
    let m = trilane::layout::mask::mask(&fp);
    eprintln!("mask {:?} ({} structures)", t.elapsed(), m.structures.len());
    let t = Instant::now();
    let g = trilane::layout::mask::to_gds(&m, &fp).unwrap();
    eprintln!("gds {:?} ({} bytes)", t.elapsed(), g.len());
    let t = Instant::now();
    let shapes = m.flat(&fp);
    let r = trilane::layout::mask::rules(&fp);
    let d = trilane::layout::drc::check(&shapes, &r);
    eprintln!(
        "drc {:?} ({} shapes, {} guides, {} violations)",
        t.elapsed(),
        d.shapes,
        d.guides,
        d.violations.len()
    );
    let (f, _) = trilane::optics::logical::mode_fidelity(&u, &tu);
    eprintln!("1-F {:e}", 1.0 - f);
}
