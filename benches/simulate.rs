//! `simulate --output` at large photon numbers: 20 photons in a 40-mode
//! network given as a seeded Haar-random `unitary ... from "U40.csv"`
//! (Mezzadri 2007 sampling), one detection pattern asked for.
//!
//! Two measurements: the whole process as a user runs it (the release
//! binary, start to exit: reading, parsing the 1600-entry CSV, lowering,
//! one 20 x 20 permanent, the report), and the library call alone.
//! Run with `cargo bench --bench simulate`.

use std::hint::black_box;
use std::time::Duration;

use criterion::{Criterion, criterion_group, criterion_main};
use trilane::optics::random::{SplitMix64, haar_unitary};

const MODES: usize = 40;
const PHOTONS: usize = 20;

/// Writes the circuit and its matrix file into `dir`; returns the circuit
/// path and the `--output` pattern.
fn scenario(dir: &std::path::Path) -> (std::path::PathBuf, String) {
    let mut rng = SplitMix64::new(40);
    let u = haar_unitary(MODES, &mut rng);
    let mut csv = String::new();
    for i in 0..MODES {
        let row: Vec<String> = (0..MODES)
            .map(|j| {
                let z = u[(i, j)];
                format!("{:.17e}{:+.17e}i", z.re, z.im)
            })
            .collect();
        csv.push_str(&row.join(","));
        csv.push('\n');
    }
    std::fs::write(dir.join("U40.csv"), csv).unwrap();
    let names: Vec<String> = (0..MODES).map(|i| format!("m{i}")).collect();
    let launch: Vec<String> = (0..PHOTONS)
        .map(|i| format!("m{} = 1 photon", 2 * i))
        .collect();
    let text = format!(
        "// A boson-sampling style benchmark network.\nchip sampler {{\n    mode {}\n    launch {}\n    unitary on m0 ... m{} from \"U40.csv\"\n}}\n",
        names.join(", "),
        launch.join(", "),
        MODES - 1
    );
    let path = dir.join("sampler.trl");
    std::fs::write(&path, text).unwrap();
    // Photons leave in the first 20 modes, one each.
    let pattern: Vec<&str> = (0..MODES)
        .map(|i| if i < PHOTONS { "1" } else { "0" })
        .collect();
    (path, pattern.join(","))
}

fn bench(c: &mut Criterion) {
    let dir = tempfile::tempdir().unwrap();
    let (path, pattern) = scenario(dir.path());
    let exe = env!("CARGO_BIN_EXE_trilane");
    let mut g = c.benchmark_group("simulate_output_20_photons_40_modes");
    g.sample_size(20);
    g.measurement_time(Duration::from_secs(6));
    g.bench_function("whole_process", |b| {
        b.iter(|| {
            let out = std::process::Command::new(exe)
                .arg("simulate")
                .arg(&path)
                .args(["--output", &pattern, "--json"])
                .output()
                .unwrap();
            assert!(out.status.success());
            black_box(out.stdout.len())
        })
    });
    let text = std::fs::read_to_string(&path).unwrap();
    let src = trilane::source::Source::new("sampler.trl", text);
    struct Dir(std::path::PathBuf);
    impl trilane::circuit::FileLoader for Dir {
        fn load(&self, p: &str) -> Result<String, String> {
            std::fs::read_to_string(self.0.join(p)).map_err(|e| e.to_string())
        }
    }
    let loader = Dir(dir.path().to_path_buf());
    let occ: Vec<u32> = pattern.split(',').map(|x| x.parse().unwrap()).collect();
    g.bench_function("library_call", |b| {
        b.iter(|| {
            let p = trilane::check(&src, &loader).unwrap();
            let s = trilane::optics::simulate::simulate(&p.circuits[0], None, Some(&occ)).unwrap();
            black_box(s.launch.len())
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
