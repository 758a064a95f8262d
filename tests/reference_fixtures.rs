//! Checks against fixtures made by tests/reference/gen_fixtures.py from general-purpose
//! reference libraries (scipy, numpy). The fixtures are committed; Python is not needed here.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

use plumbline::metrics::assign::{Assigner, ShortestPath};
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

/// Source: scipy.stats.beta.ppf(0.025, x, n - x + 1) and ppf(0.975, x + 1, n - x).
#[test]
fn clopper_pearson_matches_scipy_beta_quantiles() {
    for case in load("clopper_pearson.json") {
        let (x, n) = (case["x"].as_u64().unwrap(), case["n"].as_u64().unwrap());
        let r = plumbline::inference::clopper_pearson(x, n, 0.05).unwrap();
        let (wl, wh) = (f(&case["lower"]), f(&case["upper"]));
        assert!((r.lower - wl).abs() < 1e-7, "{x}/{n}: lower {} vs {wl}", r.lower);
        assert!((r.upper - wh).abs() < 1e-7, "{x}/{n}: upper {} vs {wh}", r.upper);
    }
}

/// Source: scipy.stats.ks_2samp(a, b, method="exact").
#[test]
fn ks_matches_scipy_ks_2samp() {
    for (k, case) in load("ks.json").iter().enumerate() {
        let a: Vec<f64> = case["a"].as_array().unwrap().iter().map(f).collect();
        let b: Vec<f64> = case["b"].as_array().unwrap().iter().map(f).collect();
        let r = plumbline::inference::ks_2samp(&a, &b).unwrap();
        assert!(r.exact);
        assert!(
            (r.statistic - f(&case["statistic"])).abs() < 1e-12,
            "case {k}: D {} vs {}",
            r.statistic,
            case["statistic"]
        );
        let want = f(&case["p_value"]);
        assert!((r.p_value - want).abs() < 1e-9 + 1e-6 * want, "case {k}: p {} vs scipy {want}", r.p_value);
    }
}

/// Source: tests/reference/gen_tgospa.py: the T-GOSPA relaxation built in full (every pair
/// and step, no pruning or components) and solved by scipy.optimize.linprog with HiGHS, on
/// 240 random cases with births, deaths and gaps; and, on the cases with at most 3
/// trajectories a side, T-GOSPA itself by exhaustive enumeration of integral assignments.
#[test]
fn tgospa_matches_scipy_highs_and_exhaustive_enumeration() {
    use plumbline::metrics::tgospa::{tgospa, Costs, Trajectory};
    let path = format!("{}/tests/fixtures/tgospa.json", env!("CARGO_MANIFEST_DIR"));
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let side = |v: &Value| -> Vec<Trajectory> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|t| {
                t.as_array().unwrap().iter().map(|s| (!s.is_null()).then(|| [f(&s[0]), f(&s[1])])).collect()
            })
            .collect()
    };
    let (mut enumerated, mut integral, mut fractional) = (0, 0, 0);
    let cases = doc["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 240);
    for (n, case) in cases.iter().enumerate() {
        let k = Costs {
            order: f(&case["order"]),
            missed: f(&case["missed"]),
            false_: f(&case["false"]),
            switch: f(&case["switch"]),
        };
        let g = tgospa(&side(&case["xs"]), &side(&case["ys"]), &k, 1_000_000).unwrap();
        let got = g.localization + g.missed + g.false_ + g.switch;
        let want = f(&case["lp"]);
        assert!((got - want).abs() <= 1e-9 * want.abs().max(1.0), "case {n}: {got} vs HiGHS {want} ({g:?})");
        assert!((g.total - got.powf(1.0 / k.order)).abs() < 1e-12);
        if let Some(best) = case["integral"].as_f64() {
            enumerated += 1;
            // The relaxation never exceeds the integral optimum, and meets it when its
            // optimum is an assignment.
            assert!(got <= best + 1e-9 * best.max(1.0), "case {n}: {got} above the enumerated {best}");
            if g.integral {
                integral += 1;
                assert!((got - best).abs() <= 1e-9 * best.max(1.0), "case {n}: {got} vs enumerated {best}");
            } else {
                fractional += 1;
            }
        }
    }
    eprintln!("T-GOSPA: 240 cases against HiGHS; {enumerated} enumerated, {integral} of them integral, {fractional} fractional");
    assert!(
        enumerated >= 80 && integral >= 60,
        "{enumerated} enumerated, {integral} integral, {fractional} not"
    );
}
