//! The merge of a sharded campaign: 10,000 runs' rows (14 rules, 41 metrics each, as the
//! rig profile gives) in 10 partial results as JSON text, read, checked and merged, then
//! aggregated: what `campaign --merge` does after reading the files.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a bench reads the rig profile

use std::collections::BTreeMap;

use criterion::{criterion_group, criterion_main, Criterion};
use plumbline::campaign::{aggregate, merge, shard_of, Partial, RowVerdict, RunRow, RunState};
use plumbline::config::Config;
use plumbline::metrics::Metric;
use plumbline::rules::Outcome;
use plumbline::stats::Stats;

const RUNS: u64 = 10_000;
const SHARDS: u64 = 10;

fn rig() -> Config {
    let text =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/config/rig.toml")).expect("rig.toml");
    Config::load(Some(("config/rig.toml", &text)), &[]).expect("rig profile")
}

fn row(i: u64, cfg: &Config) -> RunRow {
    let x = (i % 97) as f64 / 97.0;
    let verdicts = cfg
        .rules
        .iter()
        .map(|r| RowVerdict {
            rule: r.name.clone(),
            verdict: if x > 0.9 { Outcome::Fail } else { Outcome::Pass },
            fails_run: x > 0.95,
            worst: Some(r.threshold * (0.5 + x)),
        })
        .collect();
    let metrics: BTreeMap<String, Stats> = Metric::ALL
        .iter()
        .map(|m| {
            let v = 1.0 + x;
            let st = Stats {
                count: 600,
                mean: v,
                min: 0.0,
                max: 2.0 * v,
                p50: v,
                p95: 1.5 * v,
                p99: 1.9 * v,
                sum: 600.0 * v,
            };
            (m.name().to_string(), st)
        })
        .collect();
    RunRow {
        index: i,
        input: format!("runs/run-{i:05}.plb"),
        run: RunState::Replayed {
            input_digest: format!("sha256:{i:064x}"),
            evaluable: true,
            damaged: false,
            verdicts,
            metrics,
        },
    }
}

fn bench(c: &mut Criterion) {
    let cfg = rig();
    let digest = cfg.digest();
    let names: Vec<String> = (0..RUNS).map(|i| format!("runs/run-{i:05}.plb")).collect();
    let texts: Vec<(String, String)> = (1..=SHARDS)
        .map(|k| {
            let rows = (0..RUNS).filter(|&i| shard_of(i, SHARDS) == k).map(|i| row(i, &cfg)).collect();
            let p = Partial::new(&digest, k, SHARDS, &names, rows);
            (format!("part-{k}.json"), serde_json::to_string(&p).expect("json"))
        })
        .collect();
    let bytes: usize = texts.iter().map(|t| t.1.len()).sum();
    eprintln!("campaign_merge: {RUNS} runs in {SHARDS} partials, {} MB of JSON", bytes / 1_000_000);
    let mut g = c.benchmark_group("campaign_merge");
    g.sample_size(10);
    g.bench_function("read_merge_aggregate_10000_runs", |b| {
        b.iter(|| {
            let parts: Vec<(String, Partial)> =
                texts.iter().map(|(f, t)| (f.clone(), serde_json::from_str(t).expect("partial"))).collect();
            let rows = merge(&parts, &digest).expect("merge");
            aggregate(&cfg.rules, &digest, &rows)
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
