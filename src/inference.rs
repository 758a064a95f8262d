//! Statistics across runs: the Clopper-Pearson interval for a failure rate and the
//! two-sample Kolmogorov-Smirnov test. Pure computation.
//!
//! - Clopper-Pearson (Clopper and Pearson, Biometrika 26, 1934): with x failures in n runs,
//!   the two-sided 1 - a interval is `[B(a/2; x, n - x + 1), B(1 - a/2; x + 1, n - x)]`,
//!   B the beta quantile (0 and 1 at the ends). For x = 0 the one-sided 95% upper bound is
//!   about 3/n (the rule of three; Hanley and Lippman-Hand, JAMA 249, 1983).
//! - Kolmogorov-Smirnov two-sample: D = max |F1 - F2| over the pooled values. The two-sided
//!   p-value P(D >= d) is exact for n1 n2 up to 10^7: the probability that a uniformly random
//!   lattice path from (0, 0) to (n1, n2) leaves the band |i n2 - j n1| < d n1 n2 (Hodges
//!   1957; the method behind scipy's exact mode). Beyond, Smirnov's asymptotic
//!   `Q(sqrt(n1 n2 / (n1 + n2)) d)` with `Q(l) = 2 sum (-1)^(k-1) exp(-2 k^2 l^2)`.

use serde::Serialize;
use statrs::distribution::{Beta, ContinuousCDF};

/// A failure rate with its confidence interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Rate {
    /// Failures.
    pub failures: u64,
    /// Runs.
    pub runs: u64,
    /// failures / runs.
    pub rate: f64,
    /// Lower bound.
    pub lower: f64,
    /// Upper bound.
    pub upper: f64,
}

/// The two-sided Clopper-Pearson interval at confidence `1 - alpha`.
pub fn clopper_pearson(x: u64, n: u64, alpha: f64) -> Option<Rate> {
    if n == 0 || x > n {
        return None;
    }
    let (xf, nf) = (x as f64, n as f64);
    let lower = if x == 0 { 0.0 } else { Beta::new(xf, nf - xf + 1.0).ok()?.inverse_cdf(alpha / 2.0) };
    let upper = if x == n { 1.0 } else { Beta::new(xf + 1.0, nf - xf).ok()?.inverse_cdf(1.0 - alpha / 2.0) };
    Some(Rate { failures: x, runs: n, rate: xf / nf, lower, upper })
}

/// The one-sided upper bound at confidence `1 - alpha` (for zero failures: 1 - alpha^(1/n)).
pub fn upper_one_sided(x: u64, n: u64, alpha: f64) -> Option<f64> {
    if n == 0 || x > n {
        return None;
    }
    if x == n {
        return Some(1.0);
    }
    Some(Beta::new(x as f64 + 1.0, (n - x) as f64).ok()?.inverse_cdf(1.0 - alpha))
}

/// A two-sample KS result.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Ks {
    /// The statistic D.
    pub statistic: f64,
    /// Two-sided p-value P(D >= d).
    pub p_value: f64,
    /// Sizes.
    pub n1: usize,
    /// Sizes.
    pub n2: usize,
    /// Whether the p-value is exact.
    pub exact: bool,
}

/// The two-sample Kolmogorov-Smirnov test (two-sided).
pub fn ks_2samp(a: &[f64], b: &[f64]) -> Option<Ks> {
    let (n1, n2) = (a.len(), b.len());
    if n1 == 0 || n2 == 0 {
        return None;
    }
    let mut x = a.to_vec();
    let mut y = b.to_vec();
    x.sort_by(f64::total_cmp);
    y.sort_by(f64::total_cmp);
    // D in integer units of 1 / (n1 n2): |i n2 - j n1| at every pooled value.
    let (mut i, mut j) = (0usize, 0usize);
    let mut h: u128 = 0;
    while i < n1 && j < n2 {
        let v = if x[i] <= y[j] { x[i] } else { y[j] };
        while i < n1 && x[i] == v {
            i += 1;
        }
        while j < n2 && y[j] == v {
            j += 1;
        }
        h = h.max((i as i128 * n2 as i128 - j as i128 * n1 as i128).unsigned_abs());
    }
    let prod = n1 as u128 * n2 as u128;
    let d = h as f64 / prod as f64;
    let (p, exact) =
        if prod <= 10_000_000 { (p_outside(n1, n2, h), true) } else { (smirnov(n1, n2, d), false) };
    Some(Ks { statistic: d, p_value: p.clamp(0.0, 1.0), n1, n2, exact })
}

/// P(a random lattice path from (0,0) to (n1,n2) touches |i n2 - j n1| >= h).
fn p_outside(n1: usize, n2: usize, h: u128) -> f64 {
    if h == 0 {
        return 1.0;
    }
    let inside = |i: usize, j: usize| ((i as i128 * n2 as i128 - j as i128 * n1 as i128).unsigned_abs()) < h;
    // prob[j] = probability of reaching (i, j) without leaving the band, row by row.
    let mut prob = vec![0.0f64; n2 + 1];
    prob[0] = 1.0;
    for j in 1..=n2 {
        let left = n2 - (j - 1);
        prob[j] = if inside(0, j) { prob[j - 1] * left as f64 / (n1 + left) as f64 } else { 0.0 };
    }
    for i in 1..=n1 {
        for j in 0..=n2 {
            // From (i-1, j) by an i-step, or from (i, j-1) by a j-step.
            let (ri, rj) = ((n1 - (i - 1)) as f64, (n2 - j) as f64);
            let from_up = prob[j] * ri / (ri + rj);
            let from_left = if j > 0 {
                let (ri, rj) = ((n1 - i) as f64, (n2 - (j - 1)) as f64);
                prob[j - 1] * rj / (ri + rj)
            } else {
                0.0
            };
            prob[j] = if inside(i, j) || (i == n1 && j == n2) { from_up + from_left } else { 0.0 };
        }
    }
    1.0 - prob[n2]
}

/// Smirnov's asymptotic two-sided p-value.
fn smirnov(n1: usize, n2: usize, d: f64) -> f64 {
    let en = (n1 as f64 * n2 as f64) / (n1 + n2) as f64;
    let l = en.sqrt() * d;
    if l < 0.2 {
        return 1.0;
    }
    let mut s = 0.0;
    for k in 1..200 {
        let kf = k as f64;
        let term = (-2.0 * kf * kf * l * l).exp();
        s += if k % 2 == 1 { term } else { -term };
        if term < 1e-16 {
            break;
        }
    }
    2.0 * s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rule_of_three() {
        // Zero failures in n runs: the one-sided 95% upper bound is 1 - 0.05^(1/n), close to
        // 3/n (Hanley and Lippman-Hand 1983).
        for n in [30u64, 100, 300, 1000] {
            let u = upper_one_sided(0, n, 0.05).unwrap();
            assert!((u - (1.0 - 0.05f64.powf(1.0 / n as f64))).abs() < 1e-9);
            assert!((u - 3.0 / n as f64).abs() < 0.1 * 3.0 / n as f64, "n={n}: {u}");
        }
    }

    #[test]
    fn ks_by_hand() {
        // a = {1, 2, 3}, b = {4, 5}: F1 reaches 1 before F2 moves: D = 1; the only paths
        // staying inside are none, so p = P(D >= 1) = 2 / C(5, 2) = 0.2.
        let k = ks_2samp(&[1.0, 2.0, 3.0], &[4.0, 5.0]).unwrap();
        assert_eq!(k.statistic, 1.0);
        assert!((k.p_value - 0.2).abs() < 1e-12, "{}", k.p_value);
        let same = ks_2samp(&[1.0, 2.0, 3.0], &[1.0, 2.0, 3.0]).unwrap();
        assert_eq!((same.statistic, same.p_value), (0.0, 1.0));
    }
}
