//! One T-GOSPA window: 100 steps (10 s at 10 Hz) with 20 objects a side in an urban-like
//! scene of our own (a campus crossing: vehicles on two crossing streets, pedestrians in
//! small groups on the pavements, so some objects come within the cutoff of others),
//! estimates with noise, a missed stretch, a false track and one label swap; cutoff 2 m,
//! p = 1, gamma = 2 m.

use criterion::{criterion_group, criterion_main, Criterion};
use plumbline::metrics::tgospa::{tgospa, tgospa_on, Costs, Trajectory};
use plumbline::threads::Pooled;
use rand::{Rng, SeedableRng};

fn scene(seed: u64) -> (Vec<Trajectory>, Vec<Trajectory>) {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let steps = 100;
    let mut xs = Vec::new();
    for i in 0..20 {
        // 8 vehicles, 12 pedestrians in groups of 3.
        let (start, vel) = if i < 8 {
            let lane = (i % 4) as f64 * 3.5;
            if i < 4 {
                ([-60.0 + rng.random_range(0.0..20.0), lane], [rng.random_range(5.0..10.0), 0.0])
            } else {
                ([lane, -60.0 + rng.random_range(0.0..20.0)], [0.0, rng.random_range(5.0..10.0)])
            }
        } else {
            let group = ((i - 8) / 3) as f64;
            let base = [-10.0 + group * 7.0, 16.0];
            ([base[0] + rng.random_range(-1.0..1.0), base[1] + rng.random_range(-1.0..1.0)], [1.2, 0.0])
        };
        let t: Trajectory = (0..steps)
            .map(|k| {
                let dt = k as f64 * 0.1;
                Some([start[0] + vel[0] * dt, start[1] + vel[1] * dt])
            })
            .collect();
        xs.push(t);
    }
    let mut ys: Vec<Trajectory> = xs
        .iter()
        .enumerate()
        .map(|(i, x)| {
            x.iter()
                .enumerate()
                .map(|(k, s)| {
                    // Object 3 is missed for 2 s.
                    if i == 3 && (40..60).contains(&k) {
                        return None;
                    }
                    s.map(|p| [p[0] + rng.random_range(-0.4..0.4), p[1] + rng.random_range(-0.4..0.4)])
                })
                .collect()
        })
        .collect();
    // Pedestrians 8 and 9 swap labels halfway.
    let (first, second) = ys.split_at_mut(9);
    first[8][50..].swap_with_slice(&mut second[0][50..]);
    // A false track for 3 s.
    ys[19] = (0..steps).map(|k| (20..50).contains(&k).then_some([30.0, 30.0])).collect();
    (xs, ys)
}

fn bench(c: &mut Criterion) {
    let (xs, ys) = scene(7);
    let k = Costs::metric(2.0, 1.0, 2.0);
    let g = tgospa(&xs, &ys, &k, 1_000_000).unwrap();
    eprintln!(
        "tgospa window: {} components, largest {} variables, switches {}, integral {}",
        g.components, g.largest, g.switches, g.integral
    );
    // One thread (the pure layers' runner), then the components on rayon's pool (both
    // cores here), as replay and the watcher run them.
    c.bench_function("tgospa_window/100x20", |b| {
        b.iter(|| std::hint::black_box(tgospa(&xs, &ys, &k, 1_000_000).unwrap().total))
    });
    c.bench_function("tgospa_window/100x20_pooled", |b| {
        b.iter(|| std::hint::black_box(tgospa_on(&Pooled, &xs, &ys, &k, 1_000_000).unwrap().total))
    });
}

criterion_group!(benches, bench);
criterion_main!(benches);
