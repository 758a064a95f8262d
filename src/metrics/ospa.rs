//! OSPA, the optimal sub-pattern assignment metric.
//!
//! Source: D. Schuhmacher, B.-T. Vo, B.-N. Vo, "A consistent metric for performance
//! evaluation of multi-object filters", IEEE Trans. Signal Processing 56(8), 2008.
//!
//! With m = |X| <= n = |Y| (swap otherwise):
//! `ospa = ((1/n) (min_pi sum_i min(d,c)^p + c^p (n - m)))^(1/p)`, 0 when both are empty.
//! Units: metres. Window rule: per evaluation step.

use super::{pow_p, root_p};
use crate::metrics::assign::Matching;

/// OSPA from a cutoff matching of `m` references and `n` estimates.
pub fn from_matching(m: usize, n: usize, matching: &Matching, c: f64, p: f64) -> f64 {
    let big = m.max(n);
    if big == 0 {
        return 0.0;
    }
    let cp = pow_p(c, p);
    let g = matching.pairs.len();
    let full = matching.localization + cp * (m.min(n) - g) as f64;
    root_p((full + cp * (big - m.min(n)) as f64) / big as f64, p)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::assign::{match_with_cutoff, MatchScratch, ShortestPath};

    fn ospa(xs: &[[f64; 2]], ys: &[[f64; 2]], c: f64, p: f64) -> f64 {
        let m =
            match_with_cutoff(xs, ys, c, p, true, &mut ShortestPath::default(), &mut MatchScratch::default());
        from_matching(xs.len(), ys.len(), &m, c, p)
    }

    // Worked by hand from Schuhmacher, Vo, Vo (2008), Definition 3.

    #[test]
    fn empty_sets() {
        assert_eq!(ospa(&[], &[], 2.0, 1.0), 0.0);
        // One side empty: the cardinality term alone, ((c^p n)/n)^(1/p) = c.
        assert_eq!(ospa(&[[1.0, 1.0]], &[], 2.0, 1.0), 2.0);
        assert_eq!(ospa(&[], &[[1.0, 1.0], [3.0, 3.0]], 5.0, 2.0), 5.0);
    }

    #[test]
    fn worked_p1_and_p2() {
        // X = {(0,0), (10,0)}, Y = {(1,0), (10,0.5), (50,50)}; c = 2.
        // p = 1: (1 + 0.5 + 2*1) / 3 = 3.5/3.
        let xs = [[0.0, 0.0], [10.0, 0.0]];
        let ys = [[1.0, 0.0], [10.0, 0.5], [50.0, 50.0]];
        assert!((ospa(&xs, &ys, 2.0, 1.0) - 3.5 / 3.0).abs() < 1e-12);
        // p = 2: ((1 + 0.25 + 4) / 3)^(1/2).
        assert!((ospa(&xs, &ys, 2.0, 2.0) - (5.25f64 / 3.0).sqrt()).abs() < 1e-12);
        // Symmetric in its arguments.
        assert!((ospa(&ys, &xs, 2.0, 2.0) - (5.25f64 / 3.0).sqrt()).abs() < 1e-12);
    }

    #[test]
    fn distances_beyond_cutoff_are_cut() {
        // One pair at d = 7 with c = 2: min(d, c) = 2.
        assert_eq!(ospa(&[[0.0, 0.0]], &[[7.0, 0.0]], 2.0, 1.0), 2.0);
    }
}
