//! Permanent benchmarks: the Glynn kernel (`trilane::optics::permanent`) on
//! a seeded random complex 20 x 20 matrix, in a 1-thread and a 2-thread
//! rayon pool, and around the parallel threshold (`PARALLEL_MIN_N`).
//! Run with `cargo bench --bench permanent`.

use std::hint::black_box;
use std::time::Duration;

use criterion::{BenchmarkId, Criterion, criterion_group, criterion_main};
use nalgebra::DMatrix;
use num_complex::Complex64;
use trilane::optics::permanent::permanent;

/// SplitMix64, seeded: the same matrix on every run.
fn random_matrix(n: usize, seed: u64) -> DMatrix<Complex64> {
    let mut state = seed;
    let mut unit = move || {
        state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 52) as f64 - 1.0
    };
    DMatrix::from_fn(n, n, |_, _| Complex64::new(unit(), unit()))
}

fn pool(threads: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("a rayon thread pool")
}

fn bench(c: &mut Criterion) {
    let m = random_matrix(20, 20);
    let mut g = c.benchmark_group("permanent_20x20");
    g.sample_size(20);
    g.measurement_time(Duration::from_secs(4));
    for threads in [1, 2] {
        let p = pool(threads);
        g.bench_function(BenchmarkId::new("glynn_threads", threads), |b| {
            p.install(|| b.iter(|| permanent(black_box(&m)).unwrap()))
        });
    }
    g.finish();

    // Around the threshold: below PARALLEL_MIN_N both pools run the serial
    // path; from it on, the 2-thread pool should be faster.
    let mut g = c.benchmark_group("permanent_threshold");
    g.sample_size(20);
    g.measurement_time(Duration::from_secs(1));
    g.warm_up_time(Duration::from_millis(500));
    for n in [11, 12, 13, 14, 16] {
        let m = random_matrix(n, n as u64);
        for threads in [1, 2] {
            let p = pool(threads);
            g.bench_function(BenchmarkId::new(format!("n{n}_threads"), threads), |b| {
                p.install(|| b.iter(|| permanent(black_box(&m)).unwrap()))
            });
        }
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
