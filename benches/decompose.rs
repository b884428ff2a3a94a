//! Mesh decomposition benchmarks: a 256-mode Haar-random unitary
//! (Mezzadri 2007 sampling) into the rectangular (Clements 2016) and
//! triangular (Reck 1994) meshes. Goal: under 50 ms each, one core.

use criterion::{Criterion, criterion_group, criterion_main};
use trilane::optics::decompose;
use trilane::optics::random::{SplitMix64, haar_unitary};

fn bench(c: &mut Criterion) {
    let u = haar_unitary(256, &mut SplitMix64::new(1));
    let mut g = c.benchmark_group("decompose_256");
    g.sample_size(20);
    g.bench_function("rectangular", |b| {
        b.iter(|| decompose::rectangular(&u).unwrap())
    });
    g.bench_function("triangular", |b| {
        b.iter(|| decompose::triangular(&u).unwrap())
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
