//! Clearance per ego pose against 500 obstacles (with the R-tree), path clearance for a
//! 50 m plan, and the grid search on a 200 m x 200 m site at 0.2 m.

use criterion::{criterion_group, criterion_main, Criterion};
use plumbline::geometry::{Body, Footprint, ObstacleId, ObstacleIndex};
use plumbline::metrics::path::{densify, Grid};
use rand::{Rng, SeedableRng};

fn site(n: usize, side: f64) -> Vec<Body> {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
    (0..n)
        .map(|i| {
            let (x, y) = (rng.random_range(0.0..side), rng.random_range(0.0..side));
            if i % 2 == 0 {
                Body::disc(ObstacleId::Map(i as u64), [x, y], rng.random_range(0.2..1.5))
            } else {
                let (l, w, yaw) =
                    (rng.random_range(0.5..6.0), rng.random_range(0.5..3.0), rng.random_range(-3.0..3.0));
                Body::poly(ObstacleId::Map(i as u64), &plumbline::geometry::box_corners(x, y, yaw, l, w))
            }
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let fp = Footprint { length: 4.0, width: 1.8, origin_to_rear: 1.0 };
    let bodies = site(500, 200.0);
    let index = ObstacleIndex::new(bodies.clone());
    let mut k = 0u64;
    c.bench_function("clearance_500_obstacles", |b| {
        b.iter(|| {
            k += 1;
            let (x, y, yaw) = ((k % 200) as f64, ((k * 7) % 200) as f64, (k % 6) as f64);
            let placed = fp.place(x, y, yaw);
            index.nearest(&placed, [x, y], fp.circumradius())
        })
    });
    // A 50 m plan densified to 0.5 m: the footprint at each of its 101 poses.
    let plan: Vec<[f64; 2]> =
        (0..=50).map(|i| [50.0 + i as f64, 100.0 + (i as f64 * 0.1).sin() * 3.0]).collect();
    let dense = densify(&plan, 0.5);
    c.bench_function("path_clearance_50m", |b| {
        b.iter(|| {
            dense
                .iter()
                .map(|p| {
                    index
                        .nearest(&fp.place(p[0], p[1], 0.0), *p, fp.circumradius())
                        .map_or(f64::INFINITY, |n| n.distance)
                })
                .fold(f64::INFINITY, f64::min)
        })
    });
    let mut g = c.benchmark_group("grid");
    g.sample_size(10);
    g.bench_function("grid_build_and_search_200m_at_0.2m", |b| {
        b.iter(|| {
            let grid = Grid::build([0.0, 0.0], [200.0, 200.0], 0.2, 2_000_000, bodies.iter(), 0.9);
            grid.shortest([1.0, 1.0], [199.0, 199.0])
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
