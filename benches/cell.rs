//! The geometric cell: one integration of a designed pi/4 cell to 1e-9
//! (fourth-order Magnus, `trilane::cell::integrate`),
//! probing its step count or from a trusted one, and one whole design:
//! the analytic design on the exponential fit and its refinement on the
//! smooth law with path detuning (`trilane::cell::refine`), on si220_wire;
//! and a mesh's worth of cells through the design cache (`trilane::cell::cache`).
//! Run with `cargo bench --bench cell`.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use rayon::prelude::*;
use trilane::cell::cache::DesignCache;
use trilane::cell::geometric::LengthRule;
use trilane::cell::refine::{self, CellContext};
use trilane::optics::random::SplitMix64;
use trilane::process::law::characterise;
use trilane::process::presets::preset;

fn bench(c: &mut Criterion) {
    let p = preset("si220_wire").unwrap();
    let ch = characterise(&p).unwrap();
    let ctx = CellContext::of(&p, &ch, LengthRule::Shortest, 1e-3);
    let cell = refine::refine(std::f64::consts::FRAC_PI_4, &ctx).unwrap();
    let mut g = c.benchmark_group("cell_geometric_pi_over_4");
    g.sample_size(30);
    g.bench_function("integrate_to_1e-9", |b| {
        b.iter(|| black_box(refine::transfer(&ctx, &cell.design, 1e-9).unwrap()))
    });
    let probe = refine::integrate_design(&ctx, &cell.design, 1e-9, None).unwrap();
    g.bench_function("integrate_to_1e-9_trusted_start", |b| {
        b.iter(|| {
            black_box(
                refine::integrate_design(&ctx, &cell.design, 1e-9, Some(probe.steps / 2)).unwrap(),
            )
        })
    });
    g.bench_function("design_and_refine", |b| {
        b.iter(|| black_box(refine::refine(std::f64::consts::FRAC_PI_4, &ctx).unwrap()))
    });
    g.finish();

    // A mesh's worth of cells from the design cache: the cache itself (32
    // refined grid points, in parallel), then 256 cells of seeded random
    // theta polished from it, in parallel.
    let mut g = c.benchmark_group("cell_cache");
    g.sample_size(10);
    g.bench_function("build_32_points", |b| {
        b.iter(|| black_box(DesignCache::build(&ctx, 32).unwrap().points()))
    });
    let cache = DesignCache::build(&ctx, 32).unwrap();
    let mut rng = SplitMix64::new(5);
    let thetas: Vec<f64> = (0..256)
        .map(|_| 1e-3 + (std::f64::consts::FRAC_PI_2 - 1e-3) * rng.uniform())
        .collect();
    g.bench_function("design_256_cells_from_cache", |b| {
        b.iter(|| {
            let cells: Vec<_> = thetas
                .par_iter()
                .map(|&t| cache.design(t).unwrap().design.length_um)
                .collect();
            black_box(cells)
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
