//! GOSPA, the generalised optimal sub-pattern assignment metric.
//!
//! Source: A. S. Rahmathullah, Á. F. García-Fernández, L. Svensson, "Generalized optimal
//! sub-pattern assignment metric", FUSION 2017.
//!
//! For alpha = 2 (SPEC §5):
//! `gospa = (min_g [ sum_{(i,j) in g} d(x_i,y_j)^p + c^p/2 (|X| + |Y| - 2|g|) ])^(1/p)`,
//! where an assignment g pairs only x, y with d < c. The three terms of gospa^p are the
//! localization, missed (c^p/2 per missed reference) and false (c^p/2 per false estimate)
//! parts, in m^p; for p = 1 they add up to gospa (m).
//!
//! For other alpha, the paper's permutation form with |X| = m <= n = |Y|:
//! `gospa = (min_pi sum_i min(d, c)^p(x_i, y_pi(i)) + c^p/alpha (n - m))^(1/p)`.
//! The permutation minimising `sum min(d,c)^p` is the one the alpha = 2 matching gives
//! (filling unassigned pairs at cost c^p), so one solve serves every alpha.
//! Window rule: per evaluation step; windows aggregate the per-step values.

use super::{pow_p, root_p};
use crate::metrics::assign::Matching;

/// GOSPA at one step.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Gospa {
    /// The total (m).
    pub total: f64,
    /// Localization term of gospa^p (alpha = 2 only).
    pub localization: f64,
    /// Missed term of gospa^p (alpha = 2 only).
    pub missed: f64,
    /// False term of gospa^p (alpha = 2 only).
    pub false_: f64,
    /// Assigned pairs.
    pub assigned: usize,
    /// Missed reference objects.
    pub missed_count: usize,
    /// False estimates.
    pub false_count: usize,
}

/// GOSPA from a cutoff matching of `m` references and `n` estimates.
pub fn from_matching(m: usize, n: usize, matching: &Matching, c: f64, p: f64, alpha: f64) -> Gospa {
    let cp = pow_p(c, p);
    let mut out = from_matching_costs(m, n, matching, cp / 2.0, cp / 2.0, p);
    if alpha != 2.0 {
        // Full permutation cost: unassigned pairs of the shorter side cost c^p each.
        let full = matching.localization + cp * (m.min(n) - out.assigned) as f64;
        out.total = root_p(full + cp / alpha * m.abs_diff(n) as f64, p);
    }
    out
}

/// GOSPA (alpha = 2) with a missed reference costing `missed` and a false estimate costing
/// `false_` (m^p) instead of `c^p / 2` each: `(min_g [sum_{(i,j) in g} d^p + missed (|X| -
/// |g|) + false (|Y| - |g|)])^(1/p)`. A pair is worth assigning only below `d^p = missed +
/// false`, so `matching` must be the cutoff matching at [`cost_cutoff`]. With unequal costs
/// the result is a quasi-metric: swapping the sets swaps the costs, so it is not symmetric
/// (identity and the triangle inequality remain; tests/metric_axioms.rs checks all three).
/// With `missed = false = c^p / 2` it is [`from_matching`] exactly.
pub fn from_matching_costs(
    m: usize,
    n: usize,
    matching: &Matching,
    missed: f64,
    false_: f64,
    p: f64,
) -> Gospa {
    let g = matching.pairs.len();
    let (missed, false_) = (missed * (m - g) as f64, false_ * (n - g) as f64);
    Gospa {
        total: root_p(matching.localization + missed + false_, p),
        localization: matching.localization,
        missed,
        false_,
        assigned: g,
        missed_count: m - g,
        false_count: n - g,
    }
}

/// The cutoff a matching for [`from_matching_costs`] uses: `(missed + false)^(1/p)`.
pub fn cost_cutoff(missed: f64, false_: f64, p: f64) -> f64 {
    root_p(missed + false_, p)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::assign::{match_with_cutoff, MatchScratch, ShortestPath};

    fn gospa(xs: &[[f64; 2]], ys: &[[f64; 2]], c: f64, p: f64, alpha: f64) -> Gospa {
        let m =
            match_with_cutoff(xs, ys, c, p, true, &mut ShortestPath::default(), &mut MatchScratch::default());
        from_matching(xs.len(), ys.len(), &m, c, p, alpha)
    }

    // Worked examples derived by hand from the definition in Rahmathullah,
    // García-Fernández, Svensson (FUSION 2017), eq. (1) and Proposition 1 (alpha = 2 form).

    #[test]
    fn both_empty_is_zero() {
        let g = gospa(&[], &[], 2.0, 1.0, 2.0);
        assert_eq!(g.total, 0.0);
        assert_eq!((g.assigned, g.missed_count, g.false_count), (0, 0, 0));
    }

    #[test]
    fn all_missed() {
        // 3 references, no estimates, c = 2, p = 1: 3 * 2/2 = 3.
        let g = gospa(&[[0.0, 0.0], [5.0, 0.0], [9.0, 9.0]], &[], 2.0, 1.0, 2.0);
        assert_eq!(g.total, 3.0);
        assert_eq!(g.missed, 3.0);
        assert_eq!(g.missed_count, 3);
        // p = 2: (3 * 4/2)^(1/2) = sqrt(6).
        let g = gospa(&[[0.0, 0.0], [5.0, 0.0], [9.0, 9.0]], &[], 2.0, 2.0, 2.0);
        assert!((g.total - 6f64.sqrt()).abs() < 1e-15);
    }

    #[test]
    fn all_false() {
        let g = gospa(&[], &[[1.0, 1.0], [2.0, 2.0]], 3.0, 1.0, 2.0);
        assert_eq!(g.total, 3.0); // 2 * 3/2
        assert_eq!(g.false_count, 2);
        assert_eq!(g.false_, 3.0);
    }

    #[test]
    fn pair_exactly_at_cutoff_counts_as_missed_and_false() {
        let g = gospa(&[[0.0, 0.0]], &[[2.0, 0.0]], 2.0, 1.0, 2.0);
        assert_eq!(g.total, 2.0); // 2/2 + 2/2
        assert_eq!((g.assigned, g.missed_count, g.false_count), (0, 1, 1));
    }

    #[test]
    fn mixed_scene_p1_parts_add_up() {
        // x1=(0,0) with y1=(0.5,0): d = 0.5; x2=(10,0) with y2=(10,1.5): d = 1.5;
        // x3=(20,0) missed; y3=(30,0) false. c = 2, p = 1:
        // 0.5 + 1.5 + 1 + 1 = 4.
        let xs = [[0.0, 0.0], [10.0, 0.0], [20.0, 0.0]];
        let ys = [[0.5, 0.0], [10.0, 1.5], [30.0, 0.0]];
        let g = gospa(&xs, &ys, 2.0, 1.0, 2.0);
        assert!((g.total - 4.0).abs() < 1e-12);
        assert!((g.localization - 2.0).abs() < 1e-12);
        assert_eq!((g.missed, g.false_), (1.0, 1.0));
        assert!((g.localization + g.missed + g.false_ - g.total).abs() < 1e-12);
    }

    #[test]
    fn mixed_scene_p2() {
        // Same scene, p = 2: 0.25 + 2.25 + 2 + 2 = 6.5, gospa = sqrt(6.5).
        let xs = [[0.0, 0.0], [10.0, 0.0], [20.0, 0.0]];
        let ys = [[0.5, 0.0], [10.0, 1.5], [30.0, 0.0]];
        let g = gospa(&xs, &ys, 2.0, 2.0, 2.0);
        assert!((g.total - 6.5f64.sqrt()).abs() < 1e-12);
        assert!((g.localization - 2.5).abs() < 1e-12);
    }

    #[test]
    fn alpha_one() {
        // Permutation form, alpha = 1, c = 2, p = 1. X = {(0,0)}, Y = {(0.5,0), (9,9)}:
        // m = 1, n = 2: min_pi min(d,c) = 0.5, plus c/alpha * (n - m) = 2 -> 2.5.
        let g = gospa(&[[0.0, 0.0]], &[[0.5, 0.0], [9.0, 9.0]], 2.0, 1.0, 1.0);
        assert!((g.total - 2.5).abs() < 1e-12);
        // With alpha = 2 the same scene gives 0.5 + 1 = 1.5.
        let g = gospa(&[[0.0, 0.0]], &[[0.5, 0.0], [9.0, 9.0]], 2.0, 1.0, 2.0);
        assert!((g.total - 1.5).abs() < 1e-12);
        // alpha = 1, X = {(0,0), (5,5)}, Y = {(9,9)}: the only pair is at d > c, so
        // min(d,c) = 2, plus c/1 * 1 = 2 -> 4.
        let g = gospa(&[[0.0, 0.0], [5.0, 5.0]], &[[9.0, 9.0]], 2.0, 1.0, 1.0);
        assert!((g.total - 4.0).abs() < 1e-12);
    }

    #[test]
    fn assignment_prefers_cheaper_total_not_nearest_first() {
        // Greedy nearest-first would pair x1 with y1 (d=0.9) and leave x2 with y2 at d = 1.9,
        // total 2.8; the optimum pairs x1-y2 (1.0) and x2-y1 (1.0) = 2.0. c = 3, p = 1.
        let xs = [[0.0, 0.0], [1.9, 0.0]];
        let ys = [[0.9, 0.0], [-1.0, 0.0]];
        let g = gospa(&xs, &ys, 3.0, 1.0, 2.0);
        assert!((g.total - 2.0).abs() < 1e-12, "{}", g.total);
    }
}
