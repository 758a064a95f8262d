//! The drivers' pool for pure work that splits into independent parts: a T-GOSPA window's
//! components, run on rayon's pool (the global one, or the one a driver installed). The
//! pure layers never start a thread; they take a [`Components`] runner instead.

use rayon::prelude::*;

use crate::metrics::tgospa::{Components, Skip, Solve, TGospa};

/// Runs each component as a task of its own on the current rayon pool.
#[derive(Debug, Clone, Copy, Default)]
pub struct Pooled;

impl Components for Pooled {
    fn each(&self, n: usize, solve: &Solve) -> Vec<Result<TGospa, Skip>> {
        (0..n).into_par_iter().with_max_len(1).map(solve).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::tgospa::{groups, tgospa, tgospa_on, Costs};

    /// A window of four groups with rivals (four programs): the same to the bit on one
    /// thread, in order, and on a pool of two, whichever component finishes first.
    #[test]
    fn a_pool_gives_the_values_of_one_thread() {
        let (xs, ys) = groups(4, 12);
        let k = Costs::metric(2.0, 1.0, 1.0);
        let alone = tgospa(&xs, &ys, &k, 1_000_000).unwrap();
        let pool = rayon::ThreadPoolBuilder::new().num_threads(2).build().unwrap();
        let pooled = pool.install(|| tgospa_on(&Pooled, &xs, &ys, &k, 1_000_000).unwrap());
        let bits = |g: &TGospa| {
            [g.total, g.localization, g.missed, g.false_, g.switch, g.switches].map(f64::to_bits)
        };
        assert_eq!(alone.components, 4);
        assert_eq!(bits(&alone), bits(&pooled));
        assert_eq!((alone.integral, alone.largest), (pooled.integral, pooled.largest));
    }
}
