//! Cost of one metric update through 3 sliding windows and 20 rules (all on the updated
//! metric: the worst case), and the memory of one windowed metric.

use criterion::{criterion_group, criterion_main, Criterion};
use plumbline::config::Config;
use plumbline::metrics::Metric;
use plumbline::rules::RuleSet;
use plumbline::windows::WindowSet;

fn config() -> Config {
    let stats = ["mean", "max", "p95", "last", "min"];
    let windows = ["1s", "10s", "60s"];
    let mut text = String::new();
    for i in 0..20 {
        text += &format!(
            "[[rule]]\nname = \"r{i}\"\nmetric = \"gospa\"\nwindow = \"{}\"\nstat = \"{}\"\nabove = {}\nsustain = \"1s\"\nclear_after = \"1s\"\n",
            windows[i % 3],
            stats[i % 5],
            1.0 + i as f64 * 0.1
        );
    }
    Config::load(Some(("bench.toml", &text)), &[]).expect("config")
}

fn bench(c: &mut Criterion) {
    let cfg = config();
    let mut windows = WindowSet::new(&cfg.windows, cfg.window_buckets);
    let mut rules = RuleSet::new(cfg.rules.clone());
    let mut events = Vec::new();
    let mut k = 0u64;
    c.bench_function("update_3_windows_20_rules", |b| {
        b.iter(|| {
            k += 1;
            let t = k as f64 * 0.05; // 20 Hz
            let v = 1.0 + ((k * 7919) % 1000) as f64 / 500.0;
            windows.add(Metric::Gospa, None, t, v);
            rules.observe(t, Metric::Gospa, None, &windows, &mut events);
            events.clear();
        })
    });
    let mut only_windows = WindowSet::new(&cfg.windows, cfg.window_buckets);
    let mut j = 0u64;
    c.bench_function("update_3_windows_no_rules", |b| {
        b.iter(|| {
            j += 1;
            only_windows.add(Metric::Gospa, None, j as f64 * 0.05, 1.0 + (j % 100) as f64 * 0.01);
        })
    });
    eprintln!("heap bytes of one metric with 3 windows at 20 Hz: {}", windows.heap_bytes());
}

criterion_group!(benches, bench);
criterion_main!(benches);
