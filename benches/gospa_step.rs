//! One GOSPA step (matching with the cutoff, GOSPA, OSPA) for 10, 50 and 200 objects per
//! side, in dense scenes (every object within the cutoff of many others: one large
//! component) and mostly-sparse scenes (estimates near their own object only).

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use plumbline::metrics::assign::{match_bounded, match_with_cutoff, MatchScratch, ShortestPath};
use plumbline::metrics::{gospa, ospa};
use rand::{Rng, SeedableRng};

fn scene(n: usize, dense: bool, seed: u64) -> (Vec<[f64; 2]>, Vec<[f64; 2]>) {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    // Dense: all objects in a 3 m square (cutoff 2 m). Sparse: spread over 200 m, each
    // estimate 0.3 m from its object on average.
    let side = if dense { 3.0 } else { 200.0 };
    let xs: Vec<[f64; 2]> =
        (0..n).map(|_| [rng.random_range(0.0..side), rng.random_range(0.0..side)]).collect();
    let ys =
        xs.iter().map(|p| [p[0] + rng.random_range(-0.3..0.3), p[1] + rng.random_range(-0.3..0.3)]).collect();
    (xs, ys)
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("gospa_step");
    for &dense in &[false, true] {
        for &n in &[10usize, 50, 200] {
            let (xs, ys) = scene(n, dense, n as u64);
            let mut solver = ShortestPath::default();
            let mut scratch = MatchScratch::default();
            let name = if dense { "dense" } else { "sparse" };
            g.bench_with_input(BenchmarkId::new(name, n), &n, |b, _| {
                b.iter(|| {
                    let m = match_with_cutoff(&xs, &ys, 2.0, 1.0, true, &mut solver, &mut scratch);
                    let gs = gospa::from_matching(xs.len(), ys.len(), &m, 2.0, 1.0, 2.0);
                    let o = ospa::from_matching(xs.len(), ys.len(), &m, 2.0, 1.0);
                    std::hint::black_box((gs.total, o))
                })
            });
        }
    }
    // limits.max_objects (10,000) per side in one 3 m cluster: one component of 10^8
    // candidate pairs, assigned greedily past the edge budget (target: under 200 ms).
    let (xs, ys) = scene(10_000, true, 10_000);
    let (mut solver, mut scratch) = (ShortestPath::default(), MatchScratch::default());
    g.sample_size(10);
    g.bench_function("cluster/10000", |b| {
        b.iter(|| {
            let exact = plumbline::core::EXACT_CELLS;
            let m = match_bounded(&xs, &ys, 2.0, 1.0, true, exact, &mut solver, &mut scratch);
            let gs = gospa::from_matching(xs.len(), ys.len(), &m, 2.0, 1.0, 2.0);
            std::hint::black_box((gs.total, m.approximate))
        })
    });
    // The largest component solved exactly by default (700 x 700 in a 3 m square).
    let (xs, ys) = scene(700, true, 700);
    g.bench_function("cluster/700-exact", |b| {
        b.iter(|| {
            let exact = plumbline::core::EXACT_CELLS;
            let m = match_bounded(&xs, &ys, 2.0, 1.0, true, exact, &mut solver, &mut scratch);
            std::hint::black_box((m.localization, m.approximate))
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
