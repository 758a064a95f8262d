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

/// Trajectories for T-GOSPA: up to 4 a side over `steps` steps, present or not at each.
fn trajectories(steps: usize) -> impl Strategy<Value = Vec<plumbline::metrics::tgospa::Trajectory>> {
    let state = prop::option::weighted(0.8, (0.0f64..8.0, 0.0f64..8.0).prop_map(|(x, y)| [x, y]));
    prop::collection::vec(prop::collection::vec(state, steps), 0..4)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(150))]

    /// With gamma = 0 switches are free, so each step takes its own best assignment:
    /// T-GOSPA^p is the sum over the steps of GOSPA^p (alpha = 2). The relaxation is exact
    /// here since each step's assignment problem has integral optima (a bipartite
    /// matching polytope). Against the existing GOSPA, step by step.
    #[test]
    fn tgospa_with_free_switches_is_the_sum_of_step_gospa(
        xs in trajectories(5), ys in trajectories(5),
        c in prop::sample::select(vec![1.0, 2.0, 3.0]), p in prop::sample::select(vec![1.0, 2.0]),
    ) {
        use plumbline::metrics::tgospa::{tgospa, Costs};
        let g = tgospa(&xs, &ys, &Costs::metric(c, p, 0.0), 1_000_000).unwrap();
        let mut sum = 0.0;
        for k in 0..5 {
            let a: Vec<[f64; 2]> = xs.iter().filter_map(|t| t[k]).collect();
            let b: Vec<[f64; 2]> = ys.iter().filter_map(|t| t[k]).collect();
            sum += gospa_ospa(&a, &b, c, p, 2.0).0.total.powf(p);
        }
        let got = g.localization + g.missed + g.false_ + g.switch;
        prop_assert!((got - sum).abs() <= 1e-9 * sum.max(1.0), "{} vs {}", got, sum);
        prop_assert_eq!(g.switch, 0.0);
    }

    /// T-GOSPA is a metric (the relaxation too: the paper's Section IV): identity, symmetry
    /// and the triangle inequality on random trajectory sets.
    #[test]
    fn tgospa_axioms(
        x in trajectories(4), y in trajectories(4), z in trajectories(4),
        gamma in prop::sample::select(vec![0.5, 1.0, 3.0]), p in prop::sample::select(vec![1.0, 2.0]),
    ) {
        use plumbline::metrics::tgospa::{tgospa, Costs};
        let k = Costs::metric(2.0, p, gamma);
        let d = |a: &[_], b: &[_]| tgospa(a, b, &k, 1_000_000).unwrap().total;
        prop_assert!(d(&x, &x) < 1e-9);
        prop_assert!((d(&x, &y) - d(&y, &x)).abs() < 1e-9);
        prop_assert!(d(&x, &z) <= d(&x, &y) + d(&y, &z) + 1e-9);
    }
}

/// GOSPA with missed and false objects costed apart (`missed`, `false_` in m^p).
fn gospa_costs(x: &[[f64; 2]], y: &[[f64; 2]], missed: f64, false_: f64, p: f64) -> f64 {
    use plumbline::metrics::assign::{match_with_cutoff, MatchScratch, ShortestPath};
    use plumbline::metrics::gospa::{cost_cutoff, from_matching_costs};
    let c = cost_cutoff(missed, false_, p);
    let m = match_with_cutoff(x, y, c, p, true, &mut ShortestPath::default(), &mut MatchScratch::default());
    from_matching_costs(x.len(), y.len(), &m, missed, false_, p).total
}

fn unequal_costs() -> impl Strategy<Value = (f64, f64, f64)> {
    (
        prop::sample::select(vec![0.5, 2.0, 4.0]),
        prop::sample::select(vec![0.25, 1.0, 3.0]),
        prop::sample::select(vec![1.0, 2.0]),
    )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    /// Equal costs of c^p/2 are GOSPA exactly, bit for bit.
    #[test]
    fn equal_costs_are_gospa_bit_for_bit(x in set(), y in set(), c in prop::sample::select(vec![0.5f64, 2.0, 5.0]), p in prop::sample::select(vec![1.0f64, 2.0, 3.0])) {
        let half = plumbline::metrics::pow_p(c, p) / 2.0;
        let g = gospa_costs(&x, &y, half, half, p);
        prop_assert_eq!(g.to_bits(), gospa_ospa(&x, &y, c, p, 2.0).0.total.to_bits());
    }

    /// With missed and false costed apart, GOSPA is a quasi-metric (GOSPA and T-GOSPA
    /// quasi-metrics, García-Fernández et al., arXiv 2507.13706): identity and the
    /// triangle inequality hold; symmetry is lost.
    #[test]
    fn unequal_costs_give_a_quasi_metric(x in set(), y in set(), z in set(), (missed, false_, p) in unequal_costs()) {
        let d = |a: &[[f64; 2]], b: &[[f64; 2]]| gospa_costs(a, b, missed, false_, p);
        prop_assert!(d(&x, &x).abs() < 1e-12);
        prop_assert!(d(&x, &z) <= d(&x, &y) + d(&y, &z) + 1e-9, "{} > {} + {}", d(&x, &z), d(&x, &y), d(&y, &z));
    }

    /// The same for T-GOSPA over trajectories.
    #[test]
    fn tgospa_with_unequal_costs_is_a_quasi_metric(
        x in trajectories(4), y in trajectories(4), z in trajectories(4), (missed, false_, p) in unequal_costs(),
    ) {
        use plumbline::metrics::tgospa::{tgospa, Costs};
        let k = Costs { order: p, missed, false_, switch: 1.0 };
        let d = |a: &[_], b: &[_]| tgospa(a, b, &k, 1_000_000).unwrap().total;
        prop_assert!(d(&x, &x) < 1e-9);
        prop_assert!(d(&x, &z) <= d(&x, &y) + d(&y, &z) + 1e-9);
    }
}

/// Symmetry is lost with unequal costs: one reference and nothing estimated is one missed
/// object (missed cost 2 m^1), the other way round one false object (0.5): p = 1.
#[test]
fn unequal_costs_are_not_symmetric() {
    use plumbline::metrics::tgospa::{tgospa, Costs};
    let (a, none): (Vec<[f64; 2]>, Vec<[f64; 2]>) = (vec![[1.0, 1.0]], vec![]);
    assert_eq!((gospa_costs(&a, &none, 2.0, 0.5, 1.0), gospa_costs(&none, &a, 2.0, 0.5, 1.0)), (2.0, 0.5));
    let k = Costs { order: 1.0, missed: 2.0, false_: 0.5, switch: 1.0 };
    let tr = vec![vec![Some([1.0, 1.0]), Some([1.0, 1.0])]];
    // Two states: 2 x 2 missed one way, 2 x 0.5 false the other.
    assert_eq!(tgospa(&tr, &[], &k, 100).unwrap().total, 4.0);
    assert_eq!(tgospa(&[], &tr, &k, 100).unwrap().total, 1.0);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(100))]

    /// The run total by blocks (README: Run total): blocks of 4 steps over 12, against the
    /// batch value over all 12: sum of blocks <= batch <= sum + gamma^p * R, R the
    /// reference trajectories found in the two blocks around each boundary.
    #[test]
    fn block_totals_bound_the_batch_value(
        xs in trajectories(12), ys in trajectories(12),
        gamma in prop::sample::select(vec![0.5, 1.0, 3.0]), p in prop::sample::select(vec![1.0, 2.0]),
    ) {
        use plumbline::metrics::tgospa::{tgospa, Costs, Trajectory};
        let k = Costs::metric(2.0, p, gamma);
        let parts = |g: plumbline::metrics::tgospa::TGospa| g.localization + g.missed + g.false_ + g.switch;
        let cut = |side: &[Trajectory], b: usize| -> Vec<Trajectory> {
            side.iter().map(|t| t[4 * b..4 * b + 4].to_vec()).filter(|t: &Trajectory| t.iter().any(Option::is_some)).collect()
        };
        let batch = parts(tgospa(&xs, &ys, &k, 1_000_000).unwrap());
        let blocks: f64 = (0..3).map(|b| parts(tgospa(&cut(&xs, b), &cut(&ys, b), &k, 1_000_000).unwrap())).sum();
        let r: usize = (0..2)
            .map(|b| xs.iter().filter(|t| t[4 * b..4 * b + 8].iter().any(Option::is_some)).count())
            .sum();
        prop_assert!(blocks <= batch + 1e-9, "{} > {}", blocks, batch);
        prop_assert!(batch <= blocks + k.switch * r as f64 + 1e-9, "{} > {} + {}", batch, blocks, k.switch * r as f64);
    }
}
