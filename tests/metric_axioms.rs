//! Metric axioms as property tests. Both papers prove GOSPA (for 0 < alpha <= 2, p >= 1;
//! Rahmathullah, García-Fernández, Svensson, FUSION 2017, Proposition 1) and OSPA
//! (Schuhmacher, Vo, Vo, IEEE TSP 2008, Proposition 1) are metrics on finite sets:
//! identity, symmetry and the triangle inequality. A failure here is a bug.

use plumbline::metrics::gospa_ospa;
use proptest::prelude::*;

fn set() -> impl Strategy<Value = Vec<[f64; 2]>> {
    prop::collection::vec((0.0f64..12.0, 0.0f64..12.0).prop_map(|(x, y)| [x, y]), 0..8)
}

fn params() -> impl Strategy<Value = (f64, f64, f64)> {
    (
        prop::sample::select(vec![0.5, 2.0, 5.0]),
        prop::sample::select(vec![1.0, 2.0, 3.0]),
        prop::sample::select(vec![2.0, 1.0, 0.5]),
    )
}

fn both(a: &[[f64; 2]], b: &[[f64; 2]], (c, p, alpha): (f64, f64, f64)) -> (f64, f64) {
    let (g, o) = gospa_ospa(a, b, c, p, alpha);
    (g.total, o)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn identity(x in set(), prm in params()) {
        let (g, o) = both(&x, &x, prm);
        prop_assert!(g.abs() < 1e-9 && o.abs() < 1e-9);
        // A set and the same set with one more point are different, so the distance is > 0.
        let mut y = x.clone();
        y.push([50.0, 50.0]);
        let (g, o) = both(&x, &y, prm);
        prop_assert!(g > 0.0 && o > 0.0);
    }

    #[test]
    fn symmetry(x in set(), y in set(), prm in params()) {
        let (g1, o1) = both(&x, &y, prm);
        let (g2, o2) = both(&y, &x, prm);
        prop_assert!((g1 - g2).abs() < 1e-9, "gospa {} vs {}", g1, g2);
        prop_assert!((o1 - o2).abs() < 1e-9, "ospa {} vs {}", o1, o2);
    }

    #[test]
    fn triangle_inequality(x in set(), y in set(), z in set(), prm in params()) {
        let (gxz, oxz) = both(&x, &z, prm);
        let (gxy, oxy) = both(&x, &y, prm);
        let (gyz, oyz) = both(&y, &z, prm);
        prop_assert!(gxz <= gxy + gyz + 1e-9, "gospa {} > {} + {}", gxz, gxy, gyz);
        prop_assert!(oxz <= oxy + oyz + 1e-9, "ospa {} > {} + {}", oxz, oxy, oyz);
    }

    #[test]
    fn bounded_and_parts_consistent(x in set(), y in set(), prm in params()) {
        let (c, p, alpha) = prm;
        let (g, o) = gospa_ospa(&x, &y, c, p, alpha);
        // OSPA never exceeds the cutoff; GOSPA^p is at least its cardinality term
        // c^p/alpha * ||X| - |Y||.
        prop_assert!(o <= c + 1e-9 && o >= 0.0);
        let card = c.powf(p) / alpha * (x.len() as f64 - y.len() as f64).abs();
        prop_assert!(g.total.powf(p) + 1e-9 >= card);
        if alpha == 2.0 {
            prop_assert_eq!(g.assigned + g.missed_count, x.len());
            prop_assert_eq!(g.assigned + g.false_count, y.len());
            let sum = g.localization + g.missed + g.false_;
            prop_assert!((sum.powf(1.0 / p) - g.total).abs() < 1e-9);
        }
    }
}
