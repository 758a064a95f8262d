//! T-GOSPA, the trajectory GOSPA metric, over a window of steps.
//!
//! Source: Á. F. García-Fernández, A. S. Rahmathullah, L. Svensson, "A metric on the space
//! of finite sets of trajectories for evaluation of multi-target tracking algorithms",
//! IEEE Transactions on Signal Processing 68 (2020), with alpha = 2.
//!
//! Over steps k = 1..T, reference trajectories X_i and estimated trajectories Y_j, each
//! present at some steps. An assignment at step k pairs each reference with at most one
//! estimate. Per step, a pair of present states costs `min(d^p, m + f)` (with the default
//! `m = f = c^p/2` that is `min(d, c)^p`), a present reference left without a present
//! partner costs `m` (missed), a present estimate left so costs `f` (false). Changing a
//! reference's partner between two steps costs `gamma^p` for a full switch (one partner to
//! another) and `gamma^p / 2` for a half switch (a partner to none, or none to one).
//! T-GOSPA^p is the minimum over the assignments of every step.
//!
//! What is computed is the paper's linear-programming relaxation (its Section IV), itself
//! a metric: per step, weights `W_ij >= 0` on the pairs with a dummy column and row
//! (`u_i`: reference i unassigned, `v_j`: estimate j unassigned), each reference's and each
//! estimate's weights summing to 1, and `e_ij^k >= |W_ij^k - W_ij^(k+1)|` on real pairs;
//! objective `sum_k D^k . W^k + gamma^p/2 sum e`. [`TGospa::integral`] says whether the
//! optimum found is an assignment (then it is T-GOSPA itself).
//!
//! Sizing, exact: a pair that is never within the cap `m + f` at a common step costs, at
//! every step, what leaving both alone costs, and using it never saves a switch, so it is
//! dropped; what remains falls apart into connected components, each solved on its own
//! over the steps its members span. A trajectory in no kept pair costs only its missed or
//! false states.
//!
//! Parts at the optimum (their sum is T-GOSPA^p): localisation (pairs within the cap),
//! missed and false (`m`, `f` per state left alone, or paired beyond the cap), switch
//! (`gamma^p/2 sum |W^k - W^(k+1)|`), and the switch count `sum |W^k - W^(k+1)| / 2`: a
//! full switch counts 1 and a half switch 1/2, so the switch part is `gamma^p` times it.
//!
//! With unequal `m` and `f` (missed and false objects costed differently) the result is a
//! quasi-metric: swapping the two sets swaps the costs, so symmetry is lost.

use super::lp::Lp;
use super::{pow_p, root_p};

/// One trajectory cut to the window: its state at each step, `None` where absent.
pub type Trajectory = Vec<Option<[f64; 2]>>;

/// The costs of T-GOSPA, in p-th power units (m^p).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Costs {
    /// Order p (>= 1).
    pub order: f64,
    /// Cost of a reference state left alone (`c^p / 2` for GOSPA).
    pub missed: f64,
    /// Cost of an estimated state left alone (`c^p / 2` for GOSPA).
    pub false_: f64,
    /// gamma^p: the cost of a full switch.
    pub switch: f64,
}

impl Costs {
    /// The metric's costs for cutoff `c`, order `p` and switch cost `gamma` (metres).
    pub fn metric(c: f64, p: f64, gamma: f64) -> Costs {
        let half = pow_p(c, p) / 2.0;
        Costs { order: p, missed: half, false_: half, switch: pow_p(gamma, p) }
    }
}

/// T-GOSPA of one window.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct TGospa {
    /// T-GOSPA (m): the p-th root of the sum of the parts.
    pub total: f64,
    /// Localisation part (m^p).
    pub localization: f64,
    /// Missed part (m^p).
    pub missed: f64,
    /// False part (m^p).
    pub false_: f64,
    /// Switch part (m^p).
    pub switch: f64,
    /// Switches: full ones count 1, half ones 1/2.
    pub switches: f64,
    /// Whether the optimum found is an assignment at every step.
    pub integral: bool,
    /// Linear programs solved (connected components).
    pub components: usize,
    /// Variables of the largest.
    pub largest: usize,
}

/// Why a window was not solved.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum Skip {
    /// A component needs more variables than allowed.
    #[error("a component needs {needed} variables, more than the {limit} allowed")]
    TooLarge {
        /// Variables needed.
        needed: usize,
        /// The limit.
        limit: usize,
    },
    /// The solver gave no answer (it should not: every program here is feasible and
    /// bounded).
    #[error("{0}")]
    Solver(String),
}

impl Skip {
    /// A short reason code.
    pub fn code(&self) -> &'static str {
        match self {
            Skip::TooLarge { .. } => "too_large",
            Skip::Solver(_) => "solver",
        }
    }
}

/// Values this close to 0 or 1 are that integer (the simplex's round-off).
const SNAP: f64 = 1e-9;

fn snap(x: f64) -> f64 {
    if x.abs() < SNAP {
        0.0
    } else if (x - 1.0).abs() < SNAP {
        1.0
    } else {
        x
    }
}

fn find(parent: &mut [usize], mut a: usize) -> usize {
    while parent[a] != a {
        parent[a] = parent[parent[a]];
        a = parent[a];
    }
    a
}

/// The cost of pairing two states at one step.
fn pair_cost(x: Option<[f64; 2]>, y: Option<[f64; 2]>, k: &Costs) -> (f64, Part) {
    match (x, y) {
        (Some(a), Some(b)) => {
            let d = pow_p((a[0] - b[0]).hypot(a[1] - b[1]), k.order);
            if d < k.missed + k.false_ {
                (d, Part::Localization)
            } else {
                (k.missed + k.false_, Part::MissedAndFalse)
            }
        }
        (Some(_), None) => (k.missed, Part::Missed),
        (None, Some(_)) => (k.false_, Part::False),
        (None, None) => (0.0, Part::None),
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Part {
    Localization,
    MissedAndFalse,
    Missed,
    False,
    None,
}

/// Adds a pair's step cost, taken with weight `val`, into its part.
fn add_pair(out: &mut TGospa, (cost, part): (f64, Part), val: f64, k: &Costs) {
    match part {
        Part::Localization => out.localization += cost * val,
        Part::MissedAndFalse => {
            out.missed += k.missed * val;
            out.false_ += k.false_ * val;
        }
        Part::Missed => out.missed += k.missed * val,
        Part::False => out.false_ += k.false_ * val,
        Part::None => {}
    }
}

/// T-GOSPA of the references `xs` and the estimates `ys` (all of the same length, the
/// window's steps), with at most `max_vars` variables in any one program.
pub fn tgospa(xs: &[Trajectory], ys: &[Trajectory], k: &Costs, max_vars: usize) -> Result<TGospa, Skip> {
    tgospa_on(&InOrder, xs, ys, k, max_vars)
}

/// Runs a window's components, which are independent programs: `solve(i)` for every `i`
/// in `0..n`, in any order and on any thread, the results returned by index. The pure
/// layers run them one after another ([`InOrder`]); a driver that owns threads may run
/// them at once. The value does not depend on the runner: each component sums into its own
/// parts, and the parts are added in component order.
pub trait Components: Send + Sync + std::fmt::Debug {
    /// `solve(i)` for `i` in `0..n`, by index.
    fn each(&self, n: usize, solve: &Solve) -> Vec<Result<TGospa, Skip>>;
}

/// One component's solve, by its index, as a runner is handed it.
pub type Solve<'a> = dyn Fn(usize) -> Result<TGospa, Skip> + Sync + 'a;

/// One component after another, on the calling thread.
#[derive(Debug, Clone, Copy, Default)]
pub struct InOrder;

impl Components for InOrder {
    fn each(&self, n: usize, solve: &Solve) -> Vec<Result<TGospa, Skip>> {
        (0..n).map(solve).collect()
    }
}

/// [`tgospa`] with the components run by `runner`.
pub fn tgospa_on(
    runner: &dyn Components,
    xs: &[Trajectory],
    ys: &[Trajectory],
    k: &Costs,
    max_vars: usize,
) -> Result<TGospa, Skip> {
    let steps = xs.iter().chain(ys).map(Vec::len).max().unwrap_or(0);
    let at = |t: &Trajectory, s: usize| t.get(s).copied().flatten();
    let (nx, ny) = (xs.len(), ys.len());
    // Pairs ever within the cap at a common step: per step, the estimates sorted by x and
    // each reference's neighbours found within the cap's distance by binary search, so the
    // work is the states and the close pairs, not all pairs of the window. More pairs than
    // `max_vars` cannot fit (each needs a variable), and the search stops there.
    let cap = k.missed + k.false_;
    let reach = root_p(cap, k.order);
    let mut pairs: Vec<(usize, usize)> = Vec::new();
    let mut by_x: Vec<(f64, f64, usize)> = Vec::new();
    for s in 0..steps {
        by_x.clear();
        by_x.extend(ys.iter().enumerate().filter_map(|(j, y)| at(y, s).map(|b| (b[0], b[1], j))));
        by_x.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        for (i, x) in xs.iter().enumerate() {
            let Some(a) = at(x, s) else { continue };
            let from = by_x.partition_point(|e| e.0 < a[0] - reach);
            for &(bx, by, j) in by_x[from..].iter().take_while(|e| e.0 <= a[0] + reach) {
                if pow_p((a[0] - bx).hypot(a[1] - by), k.order) < cap {
                    pairs.push((i, j));
                }
            }
            if pairs.len() > 4 * max_vars {
                pairs.sort_unstable();
                pairs.dedup();
                if pairs.len() > max_vars {
                    return Err(Skip::TooLarge { needed: pairs.len(), limit: max_vars });
                }
            }
        }
    }
    pairs.sort_unstable();
    pairs.dedup();
    if pairs.len() > max_vars {
        return Err(Skip::TooLarge { needed: pairs.len(), limit: max_vars });
    }
    // Components over references 0..nx and estimates nx..nx+ny.
    let mut parent: Vec<usize> = (0..nx + ny).collect();
    for &(i, j) in &pairs {
        let (a, b) = (find(&mut parent, i), find(&mut parent, nx + j));
        if a != b {
            parent[a.max(b)] = a.min(b);
        }
    }
    let mut out = TGospa { integral: true, ..TGospa::default() };
    let present = |t: &Trajectory| t.iter().filter(|s| s.is_some()).count() as f64;
    let mut paired = vec![false; nx + ny];
    for &(i, j) in &pairs {
        (paired[i], paired[nx + j]) = (true, true);
    }
    // Members and pairs grouped by their component's root, in index order.
    let mut members: Vec<(usize, usize)> = Vec::new();
    for n in 0..nx + ny {
        if !paired[n] {
            if n < nx {
                out.missed += k.missed * present(&xs[n]);
            } else {
                out.false_ += k.false_ * present(&ys[n - nx]);
            }
        } else {
            members.push((find(&mut parent, n), n));
        }
    }
    members.sort_unstable();
    let mut comp_pairs: Vec<(usize, (usize, usize))> =
        pairs.iter().map(|&(i, j)| (find(&mut parent, i), (i, j))).collect();
    comp_pairs.sort_unstable();
    let mut comps: Vec<Component> = Vec::new();
    let (mut a, mut b) = (0, 0);
    while a < members.len() {
        let root = members[a].0;
        let end = a + members[a..].partition_point(|m| m.0 == root);
        let refs: Vec<usize> = members[a..end].iter().map(|m| m.1).filter(|&n| n < nx).collect();
        let ests: Vec<usize> =
            members[a..end].iter().map(|m| m.1).filter(|&n| n >= nx).map(|n| n - nx).collect();
        let pend = b + comp_pairs[b..].partition_point(|p| p.0 == root);
        let pairs: Vec<(usize, usize)> = comp_pairs[b..pend].iter().map(|p| p.1).collect();
        comps.push(Component { refs, ests, pairs });
        (a, b) = (end, pend);
    }
    // Largest (most pairs) first, so that a runner with threads ends sooner; the results
    // come back by component.
    let mut order: Vec<usize> = (0..comps.len()).collect();
    order.sort_by_key(|&c| std::cmp::Reverse(comps[c].pairs.len()));
    let mut solved: Vec<(usize, Result<TGospa, Skip>)> = order
        .iter()
        .copied()
        .zip(runner.each(order.len(), &|o| {
            let Component { refs, ests, pairs } = &comps[order[o]];
            let mut part = TGospa { integral: true, ..TGospa::default() };
            solve_component(xs, ys, refs, ests, pairs, k, max_vars, &mut part).map(|()| part)
        }))
        .collect();
    solved.sort_unstable_by_key(|s| s.0);
    for (_, part) in solved {
        let part = part?;
        out.localization += part.localization;
        out.missed += part.missed;
        out.false_ += part.false_;
        out.switch += part.switch;
        out.switches += part.switches;
        out.integral &= part.integral;
        out.components += part.components;
        out.largest = out.largest.max(part.largest);
    }
    out.total = root_p(out.localization + out.missed + out.false_ + out.switch, k.order);
    Ok(out)
}

/// A connected component: its references, its estimates and its pairs, in index order.
struct Component {
    refs: Vec<usize>,
    ests: Vec<usize>,
    pairs: Vec<(usize, usize)>,
}

/// One connected component's program, solved and added into `out`.
#[allow(clippy::too_many_arguments)]
fn solve_component(
    xs: &[Trajectory],
    ys: &[Trajectory],
    refs: &[usize],
    ests: &[usize],
    pairs: &[(usize, usize)],
    k: &Costs,
    max_vars: usize,
    out: &mut TGospa,
) -> Result<(), Skip> {
    let at = |t: &Trajectory, s: usize| t.get(s).copied().flatten();
    // The steps the members span: outside them nobody is present, so every cost is 0 and
    // the assignment can stay as it is.
    let span = |t: &Trajectory| {
        let first = t.iter().position(Option::is_some);
        let last = t.iter().rposition(Option::is_some);
        first.zip(last)
    };
    let (mut k0, mut k1) = (usize::MAX, 0);
    for (a, b) in refs.iter().map(|&i| &xs[i]).chain(ests.iter().map(|&j| &ys[j])).filter_map(span) {
        k0 = k0.min(a);
        k1 = k1.max(b);
    }
    // Steps at which no pair is within the cap cost the same whatever the assignment (each
    // present state its missed or false cost), so the assignment may as well stay as it
    // is across them: they are left out and their cost added as it is. Exact, for the
    // relaxation too: the switch cost obeys the triangle inequality (|a - c| <= |a - b| +
    // |b - c|), so a change across a left-out step costs no more at the next kept one.
    let close = |st: usize| {
        pairs
            .iter()
            .any(|&(i, j)| matches!(pair_cost(at(&xs[i], st), at(&ys[j], st), k).1, Part::Localization))
    };
    let mut steps: Vec<usize> = Vec::with_capacity(k1 + 1 - k0);
    for st in k0..=k1 {
        if close(st) {
            steps.push(st);
        } else {
            out.missed += k.missed * refs.iter().filter(|&&i| at(&xs[i], st).is_some()).count() as f64;
            out.false_ += k.false_ * ests.iter().filter(|&&j| at(&ys[j], st).is_some()).count() as f64;
        }
    }
    let t = steps.len();
    if let [(i, j)] = pairs {
        single_pair(&xs[*i], &ys[*j], &steps, k, out);
        return Ok(());
    }
    // The dummies are eliminated: reference i is left alone with weight
    // `u_i = 1 - sum_j W_ij`, estimate j with `v_j = 1 - sum_i W_ij`, so a pair's weight
    // costs what pairing saves over leaving both alone: `d^p - (m + f)` (< 0) for a pair
    // within the cap and 0 otherwise (beyond the cap, or one of the two absent), and each
    // reference's and estimate's weights sum to at most 1. The objective is the original
    // one less the constant `sum m + sum f` of the present states. Same optimum, a third
    // fewer variables.
    let (np, cap) = (pairs.len(), k.missed + k.false_);
    // Per pair and step (index `q * t + s`): the step's cost and part, and whether the
    // pair is within the cap there.
    let mut parts = Vec::with_capacity(t * np);
    for &(i, j) in pairs {
        for &step in &steps {
            parts.push(pair_cost(at(&xs[i], step), at(&ys[j], step), k));
        }
    }
    let near = |q: usize, s: usize| parts[q * t + s].1 == Part::Localization;
    // Each member's pairs (a member with one pair needs no row: its weight's bound is 1).
    let of_ref: Vec<Vec<usize>> =
        refs.iter().map(|&i| (0..np).filter(|&q| pairs[q].0 == i).collect()).collect();
    let of_est: Vec<Vec<usize>> =
        ests.iter().map(|&j| (0..np).filter(|&q| pairs[q].1 == j).collect()).collect();
    // A pair is contested at a step where another pair of one of its two members is within
    // the cap too.
    let mut near_count = vec![0u32; (refs.len() + ests.len()) * t];
    let mut member_of = vec![(0usize, 0usize); np];
    for (r, qs) in of_ref.iter().chain(&of_est).enumerate() {
        for &q in qs {
            if r < refs.len() {
                member_of[q].0 = r;
            } else {
                member_of[q].1 = r;
            }
            for s in 0..t {
                near_count[r * t + s] += u32::from(near(q, s));
            }
        }
    }
    let contested = |q: usize, s: usize| {
        let (r, c) = member_of[q];
        near_count[r * t + s] > 1 || near_count[c * t + s] > 1
    };
    // Runs of steps that share one weight, exact: some optimum is constant on them.
    // - A run of steps where the pair is beyond the cap or a member absent (no saving):
    //   given any feasible point, lowering the run's weights to `min(before, after, the
    //   run's least)` keeps every row (their coefficients are >= 0), saves nothing less,
    //   and its change `(before - c) + (after - c)` is no more than the path's.
    // - A run of steps within the cap and uncontested (at each, every other pair of both
    //   members is beyond the cap, so, after the first kind, those pairs hold one weight
    //   each over the run and the rows bound this pair by the same value at every step):
    //   by the layer-cake identity (the objective is the integral over levels of the 0/1
    //   paths `1[w > level]`), and at each level a constant 0/1 path is never worse than a
    //   block of ones (a block costs at least the changes a constant costs, and savings
    //   are >= 0), some constant path is optimal.
    // The two kinds never touch (a contested step is a run of its own), so both hold at
    // once. Each run is one variable; its cost is the sum of its steps' savings.
    let mut run_of = vec![0usize; t * np];
    let mut runs: Vec<(usize, f64)> = Vec::new(); // (pair, cost)
    for q in 0..np {
        for s in 0..t {
            let joined = s > 0
                && ((!near(q, s) && !near(q, s - 1))
                    || (near(q, s) && near(q, s - 1) && !contested(q, s) && !contested(q, s - 1)));
            if !joined {
                runs.push((q, 0.0));
            }
            let r = runs.len() - 1;
            run_of[q * t + s] = r;
            let (cost, part) = parts[q * t + s];
            if part == Part::Localization {
                runs[r].1 += cost - cap;
            }
        }
    }
    let falls = runs.len() - np;
    let needed = runs.len() + falls;
    if needed > max_vars {
        return Err(Skip::TooLarge { needed, limit: max_vars });
    }
    // Switches with one row each: over a pair's chain of weights the total change is
    // `sum |dW| = 2 sum max(0, W^k - W^(k+1)) + W^T - W^1` (the rises less the falls is
    // the net change), so only the falls get a variable (`e >= W^k - W^(k+1)`, cost
    // gamma^p), and the first and last weights carry `-gamma^p/2` and `+gamma^p/2`.
    let mut lp = Lp::new();
    for (r, &(q, cost)) in runs.iter().enumerate() {
        let first = r == run_of[q * t];
        let last = r == run_of[q * t + t - 1];
        let edge = match (first, last) {
            (true, false) => -k.switch / 2.0,
            (false, true) => k.switch / 2.0,
            _ => 0.0,
        };
        lp.bounded(cost + edge, 1.0);
    }
    for r in 0..runs.len() - 1 {
        if runs[r].0 == runs[r + 1].0 {
            let e = lp.var(k.switch);
            lp.ge(&[(e, 1.0), (r, -1.0), (r + 1, 1.0)], 0.0);
        }
    }
    // A member's row at a step, unless it is the row of the step before (its pairs in the
    // same runs).
    let mut row: Vec<(usize, f64)> = Vec::new();
    for qs in of_ref.iter().chain(&of_est).filter(|qs| qs.len() > 1) {
        for s in 0..t {
            if s > 0 && qs.iter().all(|&q| run_of[q * t + s] == run_of[q * t + s - 1]) {
                continue;
            }
            row.clear();
            row.extend(qs.iter().map(|&q| (run_of[q * t + s], 1.0)));
            lp.le(&row, 1.0);
        }
    }
    let x: Vec<f64> = lp.solve().map_err(|e| Skip::Solver(e.to_string()))?.into_iter().map(snap).collect();
    out.components += 1;
    out.largest = out.largest.max(lp.len());
    let weight = |q: usize, s: usize| x[run_of[q * t + s]];
    // Every run covers a step, so the runs' weights are the assignment's.
    let integral = x[..runs.len()].iter().all(|&v| v == 0.0 || v == 1.0);
    for s in 0..t {
        for q in 0..np {
            add_pair(out, parts[q * t + s], weight(q, s), k);
        }
    }
    for (s, &step) in steps.iter().enumerate() {
        let alone = |qs: &[usize]| snap(1.0 - qs.iter().map(|&q| weight(q, s)).sum::<f64>());
        for (r, &i) in refs.iter().enumerate() {
            if at(&xs[i], step).is_some() {
                out.missed += k.missed * alone(&of_ref[r]);
            }
        }
        for (c, &j) in ests.iter().enumerate() {
            if at(&ys[j], step).is_some() {
                out.false_ += k.false_ * alone(&of_est[c]);
            }
        }
    }
    // The switches from the assignments themselves (with gamma = 0 the program leaves e
    // free above |dW|).
    let mut moved = 0.0;
    for s in 0..t - 1 {
        for q in 0..np {
            moved += (weight(q, s) - weight(q, s + 1)).abs();
        }
    }
    out.switch += k.switch / 2.0 * moved;
    out.switches += moved / 2.0;
    out.integral &= integral;
    Ok(())
}

/// A component of one reference and one estimate, by dynamic programming over the two
/// states of each step (paired or not). Exact for the relaxation too: with one pair the
/// program is `min sum_k a_k w_k + b + gamma^p/2 sum |w_k - w_(k+1)|` over `w` in
/// `[0, 1]^T`, and both terms are additive over level sets (for any `w`, `F(w)` is the
/// integral over `s` in `(0, 1)` of `F(1[w > s])`, the layer-cake identity of linear terms
/// and of total variation), so a 0/1 point is never worse: the optimum is an assignment.
/// (This is the common component, and the solver's set-up alone costs far more.)
fn single_pair(x: &Trajectory, y: &Trajectory, steps: &[usize], k: &Costs, out: &mut TGospa) {
    let t = steps.len();
    let at = |tr: &Trajectory, s: usize| tr.get(s).copied().flatten();
    let alone = |s: usize| {
        let (a, b) = (at(x, s), at(y, s));
        (if a.is_some() { k.missed } else { 0.0 }, if b.is_some() { k.false_ } else { 0.0 })
    };
    // best[state] = (cost so far, back-pointers kept as a path of states)
    let mut cost = [0.0f64; 2];
    let mut back: Vec<[u8; 2]> = Vec::with_capacity(t);
    for (s, &step) in steps.iter().enumerate() {
        let (m, f) = alone(step);
        let here = [m + f, pair_cost(at(x, step), at(y, step), k).0];
        if s == 0 {
            cost = here;
            back.push([0, 1]);
            continue;
        }
        let mut next = [0.0; 2];
        let mut from = [0u8; 2];
        for st in 0..2 {
            let stay = cost[st];
            let change = cost[1 - st] + k.switch / 2.0;
            // Ties keep the state (fewer switches among equal costs).
            (next[st], from[st]) = if stay <= change { (stay, st as u8) } else { (change, 1 - st as u8) };
            next[st] += here[st];
        }
        cost = next;
        back.push(from);
    }
    let mut st = if cost[0] <= cost[1] { 0 } else { 1 };
    let mut states = vec![0u8; t];
    for s in (0..t).rev() {
        states[s] = st as u8;
        st = back[s][st] as usize;
    }
    for s in 0..t {
        let (m, f) = alone(steps[s]);
        if states[s] == 1 {
            add_pair(out, pair_cost(at(x, steps[s]), at(y, steps[s]), k), 1.0, k);
        } else {
            out.missed += m;
            out.false_ += f;
        }
        if s + 1 < t && states[s] != states[s + 1] {
            out.switch += k.switch / 2.0;
            out.switches += 0.5;
        }
    }
    out.components += 1;
}

/// Groups of three references 0.4 m apart (every pair of a group within c = 2 m of each
/// other's estimates, so each group is a program with rivals at every step), 30 m from
/// the next group, and estimates off by a pseudo-random 0.3 m at most (a fixed LCG).
#[cfg(test)]
pub(crate) fn groups(n: usize, steps: usize) -> (Vec<Trajectory>, Vec<Trajectory>) {
    let mut seed = 12345u64;
    let mut noise = || {
        seed = seed.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        ((seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 0.6
    };
    let mut xs = Vec::new();
    let mut ys = Vec::new();
    for g in 0..n {
        for m in 0..3 {
            let at = |k: usize| [g as f64 * 30.0 + m as f64 * 0.4 + k as f64 * 0.1, m as f64 * 0.2];
            xs.push((0..steps).map(|k| Some(at(k))).collect());
            ys.push((0..steps).map(|k| Some([at(k)[0] + noise(), at(k)[1] + noise()])).collect());
        }
    }
    (xs, ys)
}

#[cfg(test)]
mod tests {
    use super::*;

    const BIG: usize = 1_000_000;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-9 * b.abs().max(1.0)
    }

    // Hand-worked cases from the definition (García-Fernández, Rahmathullah, Svensson,
    // IEEE TSP 2020, alpha = 2), each with its arithmetic.

    /// A reference at (0,0) for 4 steps, followed by track A at (0,0.5) for steps 1-2 and
    /// by track B at (0,0.5) for steps 3-4 (A and B absent otherwise). p = 2, c = 3,
    /// gamma = 2: staying with A then B costs 4 x 0.25 = 1 localisation plus one full
    /// switch 2^2 = 4: total 5. Leaving the reference alone at steps 3-4 instead costs
    /// 2 x 0.25 + 2 x (4.5 + 4.5) = 18.5 plus a half switch 2: worse. T-GOSPA^2 = 5.
    /// With gamma = 5 a full switch costs 25 (1 + 25 = 26) and a half one 12.5; with no
    /// switch at all, the reference stays with A throughout (A absent at steps 3-4: missed
    /// 2 x 4.5 = 9) and B's states are false (2 x 4.5 = 9): 2 x 0.25 + 9 + 9 = 18.5, the
    /// cheapest (staying with B throughout costs the same).
    #[test]
    fn a_reference_followed_by_one_track_then_another() {
        let x = vec![Some([0.0, 0.0]); 4];
        let a = vec![Some([0.0, 0.5]), Some([0.0, 0.5]), None, None];
        let b = vec![None, None, Some([0.0, 0.5]), Some([0.0, 0.5])];
        let g = tgospa(std::slice::from_ref(&x), &[a.clone(), b.clone()], &Costs::metric(3.0, 2.0, 2.0), BIG)
            .unwrap();
        assert!(close(g.total * g.total, 5.0), "{g:?}");
        assert!(close(g.localization, 1.0) && close(g.switch, 4.0) && close(g.switches, 1.0), "{g:?}");
        assert_eq!((g.missed, g.false_, g.integral), (0.0, 0.0, true));
        let g = tgospa(&[x], &[a, b], &Costs::metric(3.0, 2.0, 5.0), BIG).unwrap();
        assert!(close(g.total * g.total, 18.5), "{g:?}");
        assert_eq!((g.switch, g.switches), (0.0, 0.0));
        assert!(close(g.localization, 0.5) && close(g.missed, 9.0) && close(g.false_, 9.0), "{g:?}");
    }

    /// Two references at (0,0) and (10,0) for 4 steps; one track at (0,0.5) at steps 1-2
    /// and (10,0.5) at steps 3-4. p = 2, c = 3, gamma = 1: the track moves from the first
    /// reference to the second: the first loses its partner (half switch, 0.5) and the
    /// second gains one (half switch, 0.5); localisation 4 x 0.25 = 1; the first reference
    /// alone at steps 3-4 and the second at 1-2: 4 missed states x 4.5 = 18. Total 20,
    /// 1 switch (two halves). Staying with the first throughout costs 1 x 0.5 (steps 1-2)
    /// + 2 x 9 (steps 3-4, beyond the cap) + 4 x 4.5 (the second, alone) = 36.5: worse.
    #[test]
    fn a_track_that_moves_from_one_reference_to_another() {
        let x1 = vec![Some([0.0, 0.0]); 4];
        let x2 = vec![Some([10.0, 0.0]); 4];
        let y = vec![Some([0.0, 0.5]), Some([0.0, 0.5]), Some([10.0, 0.5]), Some([10.0, 0.5])];
        let g = tgospa(&[x1, x2], &[y], &Costs::metric(3.0, 2.0, 1.0), BIG).unwrap();
        assert!(close(g.total * g.total, 20.0), "{g:?}");
        assert!(close(g.switch, 1.0) && close(g.switches, 1.0) && close(g.missed, 18.0), "{g:?}");
        assert_eq!((g.false_, g.integral), (0.0, true));
    }

    /// A reference for 5 steps and a track on it (d = 0.5) that ends after step 3. p = 1,
    /// c = 2, gamma = 1: localisation 3 x 0.5 = 1.5, then the reference is missed at steps
    /// 4-5: 2 x 1 = 2. Keeping the pair while the track is absent costs the same missed 1
    /// per step and needs no switch, so no switch: total 3.5.
    #[test]
    fn a_track_that_ends_early_is_missed_not_switched() {
        let x = vec![Some([0.0, 0.0]); 5];
        let y = vec![Some([0.5, 0.0]), Some([0.5, 0.0]), Some([0.5, 0.0]), None, None];
        let g = tgospa(&[x], &[y], &Costs::metric(2.0, 1.0, 1.0), BIG).unwrap();
        assert!(close(g.total, 3.5) && close(g.localization, 1.5) && close(g.missed, 2.0), "{g:?}");
        assert_eq!((g.switch, g.switches, g.false_), (0.0, 0.0, 0.0));
    }

    /// Two objects crossing: reference 1 goes (0,0) -> (4,0) and reference 2 (4,0) -> (0,0)
    /// over steps x = 0, 1, 3, 4 (never at the same place); track A follows reference 1
    /// for steps 1-2 and reference 2 for steps 3-4 (exactly on them), track B the other
    /// way round: the labels swap. p = 1, c = 2, gamma = 1: following the labels costs
    /// nothing but two full switches (one per reference): 2 x 1 = 2. Keeping the partners
    /// costs steps 3-4 at d = 2 and 4 (both beyond the cap 2): 2 references x 2 steps x 2
    /// = 8. T-GOSPA = 2, 2 switches.
    #[test]
    fn crossing_objects_whose_labels_swap() {
        let xs: [f64; 4] = [0.0, 1.0, 3.0, 4.0];
        let r1: Trajectory = xs.iter().map(|&x| Some([x, 0.0])).collect();
        let r2: Trajectory = xs.iter().map(|&x| Some([4.0 - x, 0.0])).collect();
        let a: Trajectory = (0..4).map(|s| if s < 2 { r1[s] } else { r2[s] }).collect();
        let b: Trajectory = (0..4).map(|s| if s < 2 { r2[s] } else { r1[s] }).collect();
        let g = tgospa(&[r1, r2], &[a, b], &Costs::metric(2.0, 1.0, 1.0), BIG).unwrap();
        assert!(close(g.total, 2.0) && close(g.switches, 2.0) && close(g.switch, 2.0), "{g:?}");
        assert_eq!((g.localization, g.missed, g.false_), (0.0, 0.0, 0.0));
    }

    #[test]
    fn empty_sides_cost_their_states() {
        // 3 reference states and 2 estimated ones far apart, c = 2, p = 1: 3 x 1 + 2 x 1.
        let x = vec![Some([0.0, 0.0]), Some([0.0, 0.0]), Some([0.0, 0.0])];
        let y = vec![None, Some([50.0, 0.0]), Some([50.0, 0.0])];
        let g = tgospa(&[x], &[y], &Costs::metric(2.0, 1.0, 1.0), BIG).unwrap();
        assert_eq!((g.total, g.missed, g.false_, g.components), (5.0, 3.0, 2.0, 0));
        assert_eq!(tgospa(&[], &[], &Costs::metric(2.0, 1.0, 1.0), BIG).unwrap().total, 0.0);
    }

    /// A hostile scene: 3 000 objects a side in one 3 m square for 3 steps (9 million
    /// close pairs per step): the pair search stops past the limit instead of listing them.
    #[test]
    fn a_dense_crowd_is_refused_without_listing_its_pairs() {
        let side = |shift: f64| -> Vec<Trajectory> {
            (0..3000)
                .map(|i| {
                    let p = [(i % 55) as f64 * 0.05 + shift, (i / 55) as f64 * 0.05];
                    vec![Some(p); 3]
                })
                .collect()
        };
        let e = tgospa(&side(0.0), &side(0.01), &Costs::metric(2.0, 1.0, 1.0), 20_000).unwrap_err();
        assert!(matches!(e, Skip::TooLarge { limit: 20_000, .. }), "{e:?}");
    }

    /// A reference at (0,0) for 10 steps, track A on it at d = 0.1 throughout and track B
    /// at d = 0.2 at steps 5-6 only. p = 1, c = 2, gamma = 1: staying with A costs
    /// 10 x 0.1 = 1 localisation and B's two states are false, 2 x 1 = 2: total 3 (taking
    /// B at steps 5-6 instead costs two full switches, 2, and 0.2 more localisation).
    /// Runs: A is uncontested at steps 1-4 and 7-10 and contested at 5 and 6 (4 runs); B is
    /// absent at 1-4 and 7-10 and within the cap at 5 and 6 (4 runs): 8 weights and 6
    /// falls, 14 variables, where a weight per step would need 2 x 10 + 2 x 9 = 38.
    #[test]
    fn steps_without_a_rival_share_one_weight() {
        let x = vec![Some([0.0, 0.0]); 10];
        let a = vec![Some([0.1, 0.0]); 10];
        let b: Trajectory = (0..10).map(|s| (4..6).contains(&s).then_some([0.0, 0.2])).collect();
        let k = Costs::metric(2.0, 1.0, 1.0);
        let g = tgospa(std::slice::from_ref(&x), &[a.clone(), b.clone()], &k, BIG).unwrap();
        assert!(close(g.total, 3.0) && close(g.localization, 1.0) && close(g.false_, 2.0), "{g:?}");
        assert_eq!((g.switches, g.largest, g.integral), (0.0, 14, true));
        let e = tgospa(&[x], &[a, b], &k, 13).unwrap_err();
        assert_eq!(e, Skip::TooLarge { needed: 14, limit: 13 });
    }

    #[test]
    fn a_component_beyond_the_limit_is_skipped() {
        // One reference, two estimates near it: 10 steps x 2 pairs + 9 x 2 switch
        // variables = 38 (the dummies are eliminated; both pairs are contested at every step,
        // so no run is shared). (A single pair needs no program.)
        let x = vec![Some([0.0, 0.0]); 10];
        let ys = [vec![Some([0.1, 0.0]); 10], vec![Some([0.0, 0.2]); 10]];
        let e = tgospa(std::slice::from_ref(&x), &ys, &Costs::metric(2.0, 1.0, 1.0), 37).unwrap_err();
        assert_eq!(e, Skip::TooLarge { needed: 38, limit: 37 });
        assert!(tgospa(std::slice::from_ref(&x), &ys, &Costs::metric(2.0, 1.0, 1.0), 38).is_ok());
        assert!(tgospa(&[x], &ys[..1], &Costs::metric(2.0, 1.0, 1.0), 1).is_ok());
    }

    /// The components, last first (a runner may take them in any order).
    #[derive(Debug)]
    struct LastFirst;

    impl Components for LastFirst {
        fn each(&self, n: usize, solve: &Solve) -> Vec<Result<TGospa, Skip>> {
            let mut out: Vec<_> = (0..n).rev().map(solve).collect();
            out.reverse();
            out
        }
    }

    /// Components are independent programs: the window's value is the sum of each group's
    /// alone (exact decomposition, to round-off), and it is the same to the bit whatever
    /// order the runner takes them in.
    #[test]
    fn components_add_up_and_do_not_depend_on_the_order_they_are_run() {
        let (xs, ys) = groups(4, 12);
        let k = Costs::metric(2.0, 1.0, 1.0);
        let (one, two) =
            (tgospa(&xs, &ys, &k, BIG).unwrap(), tgospa_on(&LastFirst, &xs, &ys, &k, BIG).unwrap());
        // Each group: 9 pairs contested at all 12 steps, 9 x 12 weights and 9 x 11 falls.
        assert_eq!((one.components, one.largest), (4, 207), "{one:?}");
        let bits = |g: &TGospa| {
            [g.total, g.localization, g.missed, g.false_, g.switch, g.switches].map(f64::to_bits)
        };
        assert_eq!(bits(&one), bits(&two));
        assert_eq!((one.integral, one.largest), (two.integral, two.largest));
        let mut sum = TGospa::default();
        for g in 0..4 {
            let part = tgospa(&xs[3 * g..3 * g + 3], &ys[3 * g..3 * g + 3], &k, BIG).unwrap();
            assert_eq!(part.components, 1);
            sum.localization += part.localization;
            sum.missed += part.missed;
            sum.false_ += part.false_;
            sum.switch += part.switch;
        }
        assert!(
            close(one.localization, sum.localization) && close(one.switch, sum.switch),
            "{one:?} {sum:?}"
        );
        assert!(close(one.missed, sum.missed) && close(one.false_, sum.false_), "{one:?} {sum:?}");
        assert!(one.localization > 0.0, "{one:?}");
    }
}
