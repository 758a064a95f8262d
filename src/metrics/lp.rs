//! Linear programs, behind an interface of ours so a faster solver can replace the one
//! used (`microlp`, a pure-Rust revised simplex). Only what the T-GOSPA relaxation needs:
//! non-negative variables, a cost each, and equality, at-most or at-least rows. Pure: the solver
//! is deterministic for the same problem (no time limit is set).

use microlp::{ComparisonOp, OptimizationDirection, Problem, Variable};

/// A minimisation over non-negative variables.
#[derive(Debug)]
pub struct Lp {
    problem: Problem,
    vars: Vec<Variable>,
}

/// Why a program has no answer.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("linear program not solved: {0}")]
pub struct LpError(pub String);

impl Default for Lp {
    fn default() -> Self {
        Lp::new()
    }
}

impl Lp {
    /// An empty program.
    pub fn new() -> Lp {
        Lp { problem: Problem::new(OptimizationDirection::Minimize), vars: Vec::new() }
    }

    /// A variable `x >= 0` with cost `cost`; its index.
    pub fn var(&mut self, cost: f64) -> usize {
        self.vars.push(self.problem.add_var(cost, (0.0, f64::INFINITY)));
        self.vars.len() - 1
    }

    /// Variables so far.
    pub fn len(&self) -> usize {
        self.vars.len()
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.vars.is_empty()
    }

    fn row(&self, terms: &[(usize, f64)]) -> Vec<(Variable, f64)> {
        terms.iter().map(|&(i, a)| (self.vars[i], a)).collect()
    }

    /// `sum a_i x_i = rhs`.
    pub fn eq(&mut self, terms: &[(usize, f64)], rhs: f64) {
        let row = self.row(terms);
        self.problem.add_constraint(&row[..], ComparisonOp::Eq, rhs);
    }

    /// `sum a_i x_i <= rhs`.
    pub fn le(&mut self, terms: &[(usize, f64)], rhs: f64) {
        let row = self.row(terms);
        self.problem.add_constraint(&row[..], ComparisonOp::Le, rhs);
    }

    /// `sum a_i x_i >= rhs`.
    pub fn ge(&mut self, terms: &[(usize, f64)], rhs: f64) {
        let row = self.row(terms);
        self.problem.add_constraint(&row[..], ComparisonOp::Ge, rhs);
    }

    /// A variable `0 <= x <= upper` with cost `cost`; its index.
    pub fn bounded(&mut self, cost: f64, upper: f64) -> usize {
        self.vars.push(self.problem.add_var(cost, (0.0, upper)));
        self.vars.len() - 1
    }

    /// The minimiser's values, by variable index.
    pub fn solve(&self) -> Result<Vec<f64>, LpError> {
        // No presolve: the programs built here have no redundant rows for it to find (the
        // builder leaves them out), and on the T-GOSPA bench window it cost a third of the
        // solve time (48 ms with it, 30 ms without).
        let mut opts = microlp::SolveOptions::default();
        opts.presolve = false;
        let outcome = self.problem.solve_with(opts).map_err(|e| LpError(e.to_string()))?;
        let sol = outcome.into_solution().map_err(|e| LpError(format!("{e:?}")))?;
        Ok(self.vars.iter().map(|&v| sol.var_value(v)).collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A 2x2 assignment as a program: costs [[1, 3], [2, 5]] (rows sum to 1, columns sum
    /// to 1): the optimum pairs (0,1) and (1,0) for 3 + 2 = 5 against 1 + 5 = 6 (by
    /// enumeration of the two permutations).
    #[test]
    fn a_small_assignment_is_solved_at_a_vertex() {
        let mut lp = Lp::new();
        let x: Vec<usize> = [1.0, 3.0, 2.0, 5.0].iter().map(|&c| lp.var(c)).collect();
        lp.eq(&[(x[0], 1.0), (x[1], 1.0)], 1.0);
        lp.eq(&[(x[2], 1.0), (x[3], 1.0)], 1.0);
        lp.eq(&[(x[0], 1.0), (x[2], 1.0)], 1.0);
        lp.eq(&[(x[1], 1.0), (x[3], 1.0)], 1.0);
        let v = lp.solve().unwrap();
        let cost: f64 = [1.0, 3.0, 2.0, 5.0].iter().zip(&v).map(|(c, x)| c * x).sum();
        assert!((cost - 5.0).abs() < 1e-12, "{v:?}");
        assert!((v[1] - 1.0).abs() < 1e-12 && (v[2] - 1.0).abs() < 1e-12, "{v:?}");
    }

    #[test]
    fn an_infeasible_program_is_an_error() {
        let mut lp = Lp::new();
        let x = lp.var(1.0);
        lp.eq(&[(x, 1.0)], -1.0);
        assert!(lp.solve().is_err());
    }
}
