//! Checks against fixtures made by tests/reference/gen_fixtures.py from general-purpose
//! reference libraries (scipy, numpy). The fixtures are committed; Python is not needed here.

use plumbline::core::assign::{Assigner, ShortestPath};
use plumbline::metrics::{gospa_ospa, nees::interval95};
use plumbline::stats::Summary;
use serde_json::Value;

fn load(name: &str) -> Vec<Value> {
    let path = format!("{}/tests/fixtures/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).expect("fixture present");
    serde_json::from_str(&text).expect("fixture is JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

fn points(v: &Value) -> Vec<[f64; 2]> {
    v.as_array().unwrap().iter().map(|p| [f(&p[0]), f(&p[1])]).collect()
}

/// Source: scipy.optimize.linear_sum_assignment on random rectangular matrices.
#[test]
fn assignment_matches_scipy_linear_sum_assignment() {
    let mut solver = ShortestPath::default();
    let mut out = Vec::new();
    for case in load("lsap.json") {
        let rows = case["rows"].as_u64().unwrap() as usize;
        let cols = case["cols"].as_u64().unwrap() as usize;
        let cost: Vec<f64> = case["cost"].as_array().unwrap().iter().map(f).collect();
        let got = solver.solve(rows, cols, &cost, &mut out);
        let want = f(&case["optimum"]);
        assert!((got - want).abs() < 1e-9, "{rows}x{cols}: {got} vs scipy {want}");
    }
}

/// Source: GOSPA (Rahmathullah et al. 2017) and OSPA (Schuhmacher et al. 2008) computed in
/// Python from their definitions over scipy's assignment.
#[test]
fn gospa_and_ospa_match_the_scipy_reference() {
    let cases = load("gospa_ospa.json");
    assert!(cases.len() >= 100);
    for (k, case) in cases.iter().enumerate() {
        let xs = points(&case["x"]);
        let ys = points(&case["y"]);
        let (c, p) = (f(&case["c"]), f(&case["p"]));
        let (g, o) = gospa_ospa(&xs, &ys, c, p, 2.0);
        let tol = 1e-9 * (1.0 + f(&case["gospa"]).abs());
        assert!(
            (g.total - f(&case["gospa"])).abs() < tol,
            "case {k}: gospa {} vs {}",
            g.total,
            case["gospa"]
        );
        assert!((g.localization - f(&case["loc"])).abs() < 1e-9 * (1.0 + g.localization), "case {k}: loc");
        assert!((g.missed - f(&case["missed"])).abs() < 1e-9, "case {k}: missed");
        assert!((g.false_ - f(&case["false"])).abs() < 1e-9, "case {k}: false");
        assert_eq!(g.assigned as u64, case["assigned"].as_u64().unwrap(), "case {k}: assigned");
        assert!((o - f(&case["ospa"])).abs() < 1e-9, "case {k}: ospa {o} vs {}", case["ospa"]);
    }
}

/// Source: scipy.stats.chi2.ppf(0.025 | 0.975, 2N) / N.
#[test]
fn nees_interval_matches_scipy_chi2() {
    for case in load("chi2.json") {
        let n = case["n"].as_u64().unwrap();
        let (lo, hi) = interval95(n).unwrap();
        let (wl, wh) = (f(&case["lower"]), f(&case["upper"]));
        assert!((lo - wl).abs() < 1e-6 * wl, "N={n}: lower {lo} vs {wl}");
        assert!((hi - wh).abs() < 1e-6 * wh, "N={n}: upper {hi} vs {wh}");
    }
}

/// Source: numpy.percentile, default linear method.
#[test]
fn exact_percentiles_match_numpy() {
    for case in load("percentiles.json") {
        let mut s = Summary::new(1 << 20, 3);
        for v in case["values"].as_array().unwrap() {
            s.add(f(v));
        }
        let st = s.stats().unwrap();
        for (got, key) in [(st.p50, "p50"), (st.p95, "p95"), (st.p99, "p99")] {
            let want = f(&case[key]);
            assert!((got - want).abs() < 1e-12 * (1.0 + want.abs()), "{key}: {got} vs numpy {want}");
        }
    }
}
