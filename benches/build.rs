//! The whole chip build (`trilane::compile::chip::build`) of an N-mode
//! Haar-random unitary (Mezzadri, Notices AMS 54, 592, 2007), one mesh of
//! N(N-1)/2 cells, each designed and refined on si220_wire's full-vector
//! law, placed, its phases solved and its transfer multiplied out. Goal
//! (issue 7): 32 modes (496 cells) under 0.3 s on 2 cores. Also 8, 16 and
//! 64 modes, for how the time grows. Run with `cargo bench --bench build`.

use criterion::{Criterion, criterion_group, criterion_main};
use std::fmt::Write;
use trilane::circuit::{Circuit, FileLoader};
use trilane::compile::chip::{BuildOptions, StrategyChoice, build};
use trilane::compile::mesh::Strategy;
use trilane::optics::random::{SplitMix64, haar_unitary};
use trilane::process::presets::preset;
use trilane::source::Source;

struct Matrix(String);

impl FileLoader for Matrix {
    fn load(&self, _: &str) -> Result<String, String> {
        Ok(self.0.clone())
    }
}

/// A chip of `n` free modes holding one Haar-random unitary.
pub fn haar_chip(n: usize, seed: u64) -> Circuit {
    let u = haar_unitary(n, &mut SplitMix64::new(seed));
    let mut csv = String::new();
    for i in 0..n {
        let row: Vec<String> = (0..n)
            .map(|j| format!("{:+.17e}{:+.17e}i", u[(i, j)].re, u[(i, j)].im))
            .collect();
        let _ = writeln!(csv, "{}", row.join(", "));
    }
    let modes: Vec<String> = (0..n).map(|i| format!("m{i}")).collect();
    let text = format!(
        "chip haar{n} {{\n    mode {}\n    launch m0 = 1 photon\n    unitary on m0 ... m{} from \"u.csv\"\n}}\n",
        modes.join(", "),
        n - 1
    );
    let src = Source::new("haar.trl", &text);
    trilane::check(&src, &Matrix(csv))
        .unwrap_or_else(|d| panic!("{d:?}"))
        .circuits
        .remove(0)
}

fn bench(c: &mut Criterion) {
    let p = preset("si220_wire").unwrap();
    let o = BuildOptions {
        strategy: StrategyChoice::Only(Strategy::Flat),
        ..Default::default()
    };
    let mut g = c.benchmark_group("build_haar_mesh");
    g.sample_size(10);
    for n in [8, 16, 32, 64] {
        let chip = haar_chip(n, 7);
        g.bench_function(format!("{n}_modes"), |b| {
            b.iter(|| build(&chip, &p, o).unwrap())
        });
    }
    g.finish();
    // The mask of the 32-mode chip: polygons, GDSII stream and design-rule
    // checks (issue goal: under 0.2 s added to the build).
    let chip = haar_chip(32, 7);
    let fp = build(&chip, &p, o).unwrap().chosen.floorplan;
    let mut g = c.benchmark_group("mask_haar_mesh");
    g.sample_size(10);
    g.bench_function("32_modes_gds_and_drc", |b| {
        b.iter(|| trilane::layout::mask::build(&fp, true).unwrap())
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
