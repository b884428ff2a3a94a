//! The full-vector mode solver (`trilane::process::vector`) on the
//! 500 x 220 nm silicon strip in oxide at 1550 nm:
//!
//! - one TE0 solve at 10 nm in the core (`GridSpec::default()`);
//! - a coupling table: the two-guide supermodes at 10 gaps (100 to 550 nm),
//!   one solve per gap at 10 nm, the gaps in parallel (rayon);
//! - the same table with the recommended model (the coarse grid and its
//!   halving, Richardson-extrapolated).
//!
//! Run with `cargo bench --bench modesolver`.

use std::hint::black_box;
use std::time::Duration;

use criterion::{Criterion, criterion_group, criterion_main};
use rayon::prelude::*;
use trilane::process::eim::{Film, Strips, WaveguideModel, coupling_per_um};
use trilane::process::material::Material;
use trilane::process::vector::{FullVector, GridSpec};

fn si220() -> Film {
    Film {
        core: Material::SiliconLi1980,
        lower: Material::SilicaMalitson1965,
        upper: Material::SilicaMalitson1965,
        thickness_um: 0.22,
    }
}

fn table(model: &FullVector, film: &Film) -> Vec<f64> {
    (0..10)
        .into_par_iter()
        .map(|k| {
            let gap = 0.1 + 0.05 * k as f64;
            coupling_per_um(model as &dyn WaveguideModel, film, 0.5, gap, 1.55).unwrap()
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let film = si220();
    let ten_nm = FullVector::te_like(GridSpec::default());
    let mut g = c.benchmark_group("modesolver_si220");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(20));
    g.bench_function("te0_solve_10nm", |b| {
        b.iter(|| black_box(ten_nm.solve(&film, &Strips::single(0.5), 1.55).unwrap()))
    });
    g.bench_function("coupling_table_10_gaps_10nm", |b| {
        b.iter(|| black_box(table(&ten_nm, &film)))
    });
    g.bench_function("coupling_table_10_gaps_recommended", |b| {
        b.iter(|| black_box(table(&FullVector::recommended(), &film)))
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
