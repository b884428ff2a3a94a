//! Times cached cell designs across theta (development aid).
use std::time::Instant;
use trilane::cell::cache::DesignCache;
use trilane::cell::geometric::LengthRule;
use trilane::cell::refine::CellContext;
use trilane::process::law::characterise;
use trilane::process::presets::preset;
fn main() {
    let p = preset("si220_wire").unwrap();
    let c = characterise(&p).unwrap();
    for rule in [LengthRule::Shortest, LengthRule::Uniform] {
        let ctx = CellContext::of(&p, &c, rule, 1e-3);
        let t = Instant::now();
        let cache = DesignCache::build(&ctx, 32).unwrap();
        eprintln!("{rule:?} cache {:?}", t.elapsed());
        let mut slow = Vec::new();
        let t0 = Instant::now();
        for k in 0..60 {
            let th = 0.01 + k as f64 * 1.55 / 60.0;
            let t = Instant::now();
            let cell = cache.design(th).unwrap();
            let e = t.elapsed();
            if e.as_micros() > 2000 {
                slow.push((th, e, cell.iterations, cell.analytic_quality.is_some()));
            }
        }
        eprintln!("{rule:?} 60 cells {:?}; slow: {:?}", t0.elapsed(), slow);
    }
}
