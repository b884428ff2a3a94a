//! Process characterisation: the whole `si220_wire` report (materials, mode
//! figures, a 19-gap coupling table, fits, the three-guide check) from its
//! shipped full-vector solution and by the effective index method, and one
//! two-guide effective index solve.
//! Run with `cargo bench --bench process`.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use trilane::process::eim::{self, EffectiveIndex};
use trilane::process::law::characterise;
use trilane::process::presets::preset;

fn bench(c: &mut Criterion) {
    let p = preset("si220_wire").unwrap();
    let mut g = c.benchmark_group("process_si220_wire");
    g.sample_size(30);
    g.bench_function("characterise_shipped_full_vector", |b| {
        b.iter(|| black_box(characterise(&p).unwrap()))
    });
    let rough = p.clone().with_model("effective_index");
    g.bench_function("characterise_effective_index", |b| {
        b.iter(|| black_box(characterise(&rough).unwrap()))
    });
    g.bench_function("coupling_at_200nm", |b| {
        b.iter(|| {
            black_box(
                eim::coupling_per_um(&EffectiveIndex::TE_LIKE, &p.film, 0.5, 0.2, 1.55).unwrap(),
            )
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
