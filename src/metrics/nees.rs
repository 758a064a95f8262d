//! NEES, the normalised estimation error squared, and its chi-square consistency test.
//!
//! Source: Y. Bar-Shalom, X. R. Li, T. Kirubarajan, "Estimation with Applications to
//! Tracking and Navigation", Wiley 2001, §5.4.2. For an assigned pair whose estimate carries
//! the 2x2 position covariance P, `nees = e^T P^-1 e` with e = estimate - reference position
//! (dimensionless). For N such values of a consistent estimator, `N * mean` is chi-square
//! with 2N degrees of freedom, so the two-sided 95% interval for the mean is
//! `[chi2.ppf(0.025, 2N) / N, chi2.ppf(0.975, 2N) / N]`; for N = 1 that is the plain
//! 2-degree-of-freedom interval [0.0506, 7.378].
//! Window rule: the per-step value is the mean over the step's pairs; the consistency test
//! pools every pair of the window.

use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// NEES of one pair, or `None` when the covariance is not invertible.
pub fn nees(est: [f64; 2], reference: [f64; 2], cov: &[f64; 4]) -> Option<f64> {
    let (e0, e1) = (est[0] - reference[0], est[1] - reference[1]);
    let (a, b, c, d) = (cov[0], cov[1], cov[2], cov[3]);
    let det = a * d - b * c;
    if det.is_nan() || det <= 0.0 {
        return None;
    }
    // e^T P^-1 e with P^-1 = [d, -b; -c, a] / det.
    let v = (d * e0 * e0 - (b + c) * e0 * e1 + a * e1 * e1) / det;
    v.is_finite().then_some(v)
}

/// The two-sided 95% chi-square interval for the mean of `n` NEES values (2 dof each).
pub fn interval95(n: u64) -> Option<(f64, f64)> {
    if n == 0 {
        return None;
    }
    let k = 2.0 * n as f64;
    let chi = ChiSquared::new(k).ok()?;
    Some((chi.inverse_cdf(0.025) / n as f64, chi.inverse_cdf(0.975) / n as f64))
}

/// Pooled NEES over a window, with the consistency verdict.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, serde::Deserialize)]
pub struct Consistency {
    /// Pairs pooled.
    pub n: u64,
    /// Mean NEES.
    pub mean: f64,
    /// Lower bound of the 95% interval.
    pub lower: f64,
    /// Upper bound of the 95% interval.
    pub upper: f64,
    /// Whether the mean lies inside.
    pub inside: bool,
}

/// Accumulates pair NEES values for the pooled test.
#[derive(Debug, Clone, Default)]
pub struct NeesPool {
    n: u64,
    sum: f64,
}

impl NeesPool {
    /// Adds one pair's NEES.
    pub fn add(&mut self, v: f64) {
        self.n += 1;
        self.sum += v;
    }

    /// The verdict, if any value was added.
    pub fn consistency(&self) -> Option<Consistency> {
        let (lower, upper) = interval95(self.n)?;
        let mean = self.sum / self.n as f64;
        Some(Consistency { n: self.n, mean, lower, upper, inside: mean >= lower && mean <= upper })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nees_by_hand() {
        // e = (1, 2), P = diag(1, 4): 1/1 + 4/4 = 2.
        assert_eq!(nees([1.0, 2.0], [0.0, 0.0], &[1.0, 0.0, 0.0, 4.0]), Some(2.0));
        // Correlated: P = [[2, 1], [1, 2]], e = (1, 1): P^-1 = [[2,-1],[-1,2]]/3 -> 2/3.
        let v = nees([1.0, 1.0], [0.0, 0.0], &[2.0, 1.0, 1.0, 2.0]).unwrap();
        assert!((v - 2.0 / 3.0).abs() < 1e-15);
        assert_eq!(nees([1.0, 1.0], [0.0, 0.0], &[1.0, 1.0, 1.0, 1.0]), None);
    }

    #[test]
    fn interval_for_one_sample_matches_chi_square_table() {
        // Chi-square table, 2 degrees of freedom (e.g. NIST/SEMATECH e-Handbook of
        // Statistical Methods, table 1.3.6.7.4): 0.025 -> 0.0506, 0.975 -> 7.378.
        let (lo, hi) = interval95(1).unwrap();
        assert!((lo - 0.0506).abs() < 5e-4, "{lo}");
        assert!((hi - 7.378).abs() < 5e-3, "{hi}");
        // Closed form for 2 dof: ppf(q) = -2 ln(1 - q).
        assert!((lo - (-2.0 * (0.975f64).ln())).abs() < 1e-9);
        assert!((hi - (-2.0 * (0.025f64).ln())).abs() < 1e-9);
    }
}
