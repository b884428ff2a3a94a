//! Front-end benchmarks: parse + elaborate (what `trilane check` does) and
//! the formatter, on a generated 100,000-line circuit file (50,000 angle
//! gates with comments and 50,000 CZ gates). Run with `cargo bench`.

use criterion::{Criterion, criterion_group, criterion_main};
use trilane::circuit::NoFiles;
use trilane::source::Source;

fn long_file() -> Source {
    let mut text = String::from("chip long {\n    dualrail a, b\n");
    for k in 0..50_000 {
        text.push_str(&format!(
            "    RZ({k}*pi/1000 + 1) on a // step {k}\n    CZ on a, b\n"
        ));
    }
    text.push_str("}\n");
    Source::new("long.trl", text)
}

fn bench(c: &mut Criterion) {
    let src = long_file();
    let mut g = c.benchmark_group("front_end_100k_lines");
    g.sample_size(10);
    g.bench_function("parse", |b| {
        b.iter(|| trilane::syntax::parse(&src).unwrap())
    });
    g.bench_function("check", |b| {
        b.iter(|| trilane::check(&src, &NoFiles).unwrap())
    });
    g.bench_function("fmt", |b| {
        b.iter(|| trilane::syntax::format_source(&src).unwrap())
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
