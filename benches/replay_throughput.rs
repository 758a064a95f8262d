//! Replay throughput end to end (read, frame, decode, align, every metric on) in object
//! states per second, on a generated 60 s, 20 Hz campus log with 80 objects over the run
//! (about 43 present at a time), in both log forms. The 10-minute figures in the notes come
//! from `plumbline replay` on the same scenario with `--duration 600`.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use plumbline::config::Config;
use plumbline::logio::LogWriter;
use plumbline::replay::{replay, ReplayOptions};
use plumbline::scenario::{generate, ScenarioParams};

fn bench(c: &mut Criterion) {
    let cfg = Config::defaults();
    let dir = tempfile::tempdir().expect("temp dir");
    let mut g = c.benchmark_group("replay_throughput");
    g.sample_size(10);
    for minimal in [true, false] {
        let p = ScenarioParams { duration: 60.0, objects: 80, rate_hz: 20.0, minimal, ..Default::default() };
        let records = generate(&cfg.roles, &p);
        let states: u64 = records.iter().map(|r| r.msg.object_count() as u64).sum();
        for ext in ["jsonl", "plb"] {
            let path = dir.path().join(format!("bench-{minimal}.{ext}"));
            let mut w = LogWriter::create(&cfg.log(), &path).expect("create");
            for r in &records {
                w.write(r).expect("write");
            }
            w.finish().expect("flush");
            g.throughput(Throughput::Elements(states));
            let label = format!("{}-{ext}", if minimal { "lean" } else { "full" });
            g.bench_function(label, |b| {
                b.iter(|| {
                    let opts = ReplayOptions { series: None, progress: &|_| {}, on_samples: None };
                    replay(&cfg, &path, opts).expect("replay").report.steps.tracking.evaluated
                })
            });
        }
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
