//! Optimal assignment behind our own interface, and the cutoff-aware matcher.
//!
//! [`Assigner`] solves a rectangular linear sum assignment problem (minimum total cost,
//! every row of the shorter side assigned). The shipped solver, [`ShortestPath`], is the
//! shortest-augmenting-path method of Jonker and Volgenant in the rectangular form of
//! D. F. Crouse, "On implementing 2D rectangular assignment algorithms", IEEE TAES 52(4),
//! 2016 (the method behind scipy's `linear_sum_assignment`). It is written here because
//! the crates we looked at did not fit: `pathfinding`'s Kuhn-Munkres takes only integer
//! (`Ord`) weights, so metre costs would have to be quantised, and `lapjv` takes only square
//! dense `ndarray` matrices. A faster solver can replace it by implementing the trait.
//!
//! [`match_with_cutoff`] exploits the cutoff: pairs at distance >= c can never be assigned
//! (they cost the same as leaving both unassigned), so the bipartite graph of pairs closer
//! than c splits into connected components that are solved independently. The sum over
//! components equals the dense optimum; a test and a property test check that.
//!
//! Pure computation, no I/O.

use super::pow_p;

/// Solves rectangular linear sum assignment problems.
pub trait Assigner {
    /// `cost` is row-major `rows x cols`, all finite. Writes into `row_to_col` the column
    /// assigned to each row (`None` for rows left over when `rows > cols`) and returns the
    /// total cost of the assignment.
    fn solve(&mut self, rows: usize, cols: usize, cost: &[f64], row_to_col: &mut Vec<Option<usize>>) -> f64;
}

/// Shortest augmenting path solver (see the module note). Keeps its scratch buffers
/// between calls so that a monitor allocates nothing per step once warmed up.
#[derive(Debug, Default, Clone)]
pub struct ShortestPath {
    u: Vec<f64>,
    v: Vec<f64>,
    shortest: Vec<f64>,
    path: Vec<usize>,
    col4row: Vec<usize>,
    row4col: Vec<usize>,
    sr: Vec<bool>,
    sc: Vec<bool>,
    remaining: Vec<usize>,
    transposed: Vec<f64>,
}

const NONE: usize = usize::MAX;

impl Assigner for ShortestPath {
    fn solve(&mut self, rows: usize, cols: usize, cost: &[f64], row_to_col: &mut Vec<Option<usize>>) -> f64 {
        row_to_col.clear();
        row_to_col.resize(rows, None);
        if rows == 0 || cols == 0 {
            return 0.0;
        }
        if rows <= cols {
            self.solve_wide(rows, cols, cost);
            let mut total = 0.0;
            for (i, slot) in row_to_col.iter_mut().enumerate() {
                let j = self.col4row[i];
                *slot = Some(j);
                total += cost[i * cols + j];
            }
            total
        } else {
            // Solve the transpose (cols rows, rows cols), then read it back.
            let mut t = std::mem::take(&mut self.transposed);
            t.clear();
            t.resize(rows * cols, 0.0);
            for i in 0..rows {
                for j in 0..cols {
                    t[j * rows + i] = cost[i * cols + j];
                }
            }
            self.solve_wide(cols, rows, &t);
            self.transposed = t;
            let mut total = 0.0;
            for j in 0..cols {
                let i = self.col4row[j];
                row_to_col[i] = Some(j);
                total += cost[i * cols + j];
            }
            total
        }
    }
}

impl ShortestPath {
    /// rows <= cols. Leaves the answer in `col4row`.
    fn solve_wide(&mut self, nr: usize, nc: usize, cost: &[f64]) {
        self.u.clear();
        self.u.resize(nr, 0.0);
        self.v.clear();
        self.v.resize(nc, 0.0);
        self.shortest.clear();
        self.shortest.resize(nc, f64::INFINITY);
        self.path.clear();
        self.path.resize(nc, NONE);
        self.col4row.clear();
        self.col4row.resize(nr, NONE);
        self.row4col.clear();
        self.row4col.resize(nc, NONE);
        self.sr.clear();
        self.sr.resize(nr, false);
        self.sc.clear();
        self.sc.resize(nc, false);
        self.remaining.clear();
        self.remaining.resize(nc, 0);

        for cur_row in 0..nr {
            let (sink, min_val) = self.augmenting_path(nc, cost, cur_row);
            // With finite costs a sink always exists; guard anyway.
            let Some(sink) = sink else { return };
            self.u[cur_row] += min_val;
            for i in 0..nr {
                if self.sr[i] && i != cur_row {
                    self.u[i] += min_val - self.shortest[self.col4row[i]];
                }
            }
            for j in 0..nc {
                if self.sc[j] {
                    self.v[j] -= min_val - self.shortest[j];
                }
            }
            let mut j = sink;
            loop {
                let i = self.path[j];
                self.row4col[j] = i;
                std::mem::swap(&mut self.col4row[i], &mut j);
                if i == cur_row {
                    break;
                }
            }
        }
    }

    fn augmenting_path(&mut self, nc: usize, cost: &[f64], cur_row: usize) -> (Option<usize>, f64) {
        let mut min_val = 0.0;
        let mut num_remaining = nc;
        for (it, r) in self.remaining.iter_mut().enumerate() {
            *r = nc - it - 1;
        }
        self.sr.iter_mut().for_each(|x| *x = false);
        self.sc.iter_mut().for_each(|x| *x = false);
        self.shortest.iter_mut().for_each(|x| *x = f64::INFINITY);
        let mut sink = None;
        let mut i = cur_row;
        while sink.is_none() {
            let mut index = NONE;
            let mut lowest = f64::INFINITY;
            self.sr[i] = true;
            for it in 0..num_remaining {
                let j = self.remaining[it];
                let r = min_val + cost[i * nc + j] - self.u[i] - self.v[j];
                if r < self.shortest[j] {
                    self.path[j] = i;
                    self.shortest[j] = r;
                }
                if self.shortest[j] < lowest || (self.shortest[j] == lowest && self.row4col[j] == NONE) {
                    lowest = self.shortest[j];
                    index = it;
                }
            }
            min_val = lowest;
            if index == NONE || !min_val.is_finite() {
                return (None, min_val);
            }
            let j = self.remaining[index];
            if self.row4col[j] == NONE {
                sink = Some(j);
            } else {
                i = self.row4col[j];
            }
            self.sc[j] = true;
            num_remaining -= 1;
            self.remaining[index] = self.remaining[num_remaining];
        }
        (sink, min_val)
    }
}

/// The outcome of a cutoff-aware matching.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Matching {
    /// Assigned pairs `(reference index, estimate index, distance)`, all with distance < c,
    /// sorted by reference index.
    pub pairs: Vec<(usize, usize, f64)>,
    /// Sum of `d^p` over the assigned pairs.
    pub localization: f64,
    /// Whether part of the step was assigned greedily rather than optimally (a component
    /// over the exact budget, or more candidate pairs than the edge budget). Any feasible
    /// assignment's cost bounds the optimum from above, so GOSPA and OSPA computed from
    /// it are upper bounds of the exact values.
    pub approximate: bool,
}

/// Candidate pairs a step may list per cell of the exact budget before the whole step is
/// assigned greedily (the list itself would otherwise grow with m x n: 10,000 objects in
/// one 3 m cluster are 10^8 pairs).
pub const MAX_EDGES_PER_CELL: usize = 2;

/// Greedy nearest-neighbour assignment: each row in turn (in the order given) takes the
/// nearest column not yet taken, if it is closer than `c`. O((r + k) log k) with an R-tree
/// (rstar's `pop_nearest_neighbor`): bounded whatever the density, where the exact solve
/// of one dense component is cubic. The result is feasible (each pair closer than `c`,
/// each point used once), so its cost is an upper bound on the optimum. Pairs are
/// appended in row order.
fn greedy(
    rows: &[usize],
    cols: &[usize],
    xs: &[[f64; 2]],
    ys: &[[f64; 2]],
    c: f64,
    out: &mut Vec<(usize, usize, f64)>,
) {
    use rstar::primitives::GeomWithData;
    let pts: Vec<GeomWithData<[f64; 2], usize>> = cols.iter().map(|&j| GeomWithData::new(ys[j], j)).collect();
    let mut tree = rstar::RTree::bulk_load(pts);
    let c2 = c * c;
    for &i in rows {
        let Some(near) = tree.nearest_neighbor(&xs[i]) else { break };
        let j = near.data;
        let (dx, dy) = (xs[i][0] - ys[j][0], xs[i][1] - ys[j][1]);
        let d2 = dx * dx + dy * dy;
        if d2 < c2 {
            let d = d2.sqrt();
            if d < c {
                let taken = *near;
                tree.remove(&taken);
                out.push((i, j, d));
            }
        }
    }
}

/// Reusable scratch for [`match_with_cutoff`].
#[derive(Debug, Default)]
pub struct MatchScratch {
    parent: Vec<usize>,
    edges: Vec<(usize, usize, f64)>,
    ysort: Vec<(u64, usize)>,
    roots: Vec<usize>,
    count: Vec<usize>,
    slot: Vec<usize>,
    comp_rows: Vec<usize>,
    comp_cols: Vec<usize>,
    local_row: Vec<usize>,
    local_col: Vec<usize>,
    order: Vec<usize>,
    cost: Vec<f64>,
    cell_edge: Vec<usize>,
    out: Vec<Option<usize>>,
}

/// A key that sorts finite floats in their numeric order as plain integers.
#[inline]
fn order_key(v: f64) -> u64 {
    let b = v.to_bits();
    if b >> 63 == 1 {
        !b
    } else {
        b | 1 << 63
    }
}

fn find(parent: &mut [usize], mut a: usize) -> usize {
    while parent[a] != a {
        parent[a] = parent[parent[a]];
        a = parent[a];
    }
    a
}

/// Minimum-cost matching of `xs` (reference) to `ys` (estimates) where a pair costs `d^p`,
/// only pairs with `d < c` may be assigned, and each unassigned point costs `c^p / 2`.
/// Solved per connected component of the graph of pairs closer than `c` when `sparse`,
/// else as one dense problem. Both give the same optimum.
pub fn match_with_cutoff(
    xs: &[[f64; 2]],
    ys: &[[f64; 2]],
    c: f64,
    p: f64,
    sparse: bool,
    solver: &mut dyn Assigner,
    s: &mut MatchScratch,
) -> Matching {
    match_bounded(xs, ys, c, p, sparse, usize::MAX, solver, s)
}

/// [`match_with_cutoff`] within a budget: a component of more than `exact_cells` rows x
/// columns, a component past [`MAX_EDGES_PER_CELL`] x `exact_cells` cells solved exactly
/// in the step so far, or a step with more than [`MAX_EDGES_PER_CELL`] x `exact_cells`
/// candidate pairs, is assigned by [`greedy`] and the matching is marked `approximate`. Below the
/// budget the result is the exact optimum, as [`match_with_cutoff`] gives it.
#[allow(clippy::too_many_arguments)]
pub fn match_bounded(
    xs: &[[f64; 2]],
    ys: &[[f64; 2]],
    c: f64,
    p: f64,
    sparse: bool,
    exact_cells: usize,
    solver: &mut dyn Assigner,
    s: &mut MatchScratch,
) -> Matching {
    let (m, n) = (xs.len(), ys.len());
    let mut out = Matching::default();
    if m == 0 || n == 0 {
        return out;
    }
    out.pairs.reserve(m.min(n));
    let cp = pow_p(c, p);
    let c2 = c * c;
    let edge_budget = exact_cells.saturating_mul(MAX_EDGES_PER_CELL);
    // Cells the exact solves of this step may still take (many mid-sized components
    // would otherwise add up: 14 components of 700 x 700 in 10,000 objects).
    let mut cells_left = edge_budget;
    let whole_greedy = |out: &mut Matching| {
        let (rows, cols): (Vec<usize>, Vec<usize>) = ((0..m).collect(), (0..n).collect());
        greedy(&rows, &cols, xs, ys, c, &mut out.pairs);
        out.approximate = true;
        finish(out, p);
    };
    if !sparse && m.saturating_mul(n) > exact_cells {
        whole_greedy(&mut out);
        return out;
    }
    if !sparse {
        s.cost.clear();
        s.cost.reserve(m * n);
        for x in xs {
            for y in ys {
                let (dx, dy) = (x[0] - y[0], x[1] - y[1]);
                let d2 = dx * dx + dy * dy;
                s.cost.push(if d2 < c2 { pow_p(d2.sqrt(), p) } else { cp });
            }
        }
        solver.solve(m, n, &s.cost, &mut s.out);
        for (i, j) in s.out.iter().enumerate() {
            if let Some(j) = *j {
                let d = dist(xs[i], ys[j]);
                if d < c {
                    out.pairs.push((i, j, d));
                }
            }
        }
        finish(&mut out, p);
        return out;
    }

    // Edges of the graph of pairs closer than c, found by a sweep over the estimates
    // sorted by x: a pair whose x coordinates differ by c or more is no edge, so each
    // reference looks only at the estimates inside its x band.
    s.ysort.clear();
    // Sorted by integer keys of x (computed once, not at every comparison).
    s.ysort.extend(ys.iter().enumerate().map(|(j, y)| (order_key(y[0]), j)));
    s.ysort.sort_unstable();
    // The band is a hair wider than c so that rounding in its bounds never drops a pair;
    // the test on d below stays the exact rule.
    let band = c * (1.0 + 1e-9);
    s.edges.clear();
    for (i, x) in xs.iter().enumerate() {
        let first = s.edges.len();
        let (from, to) = (order_key(x[0] - band), order_key(x[0] + band));
        let lo = s.ysort.partition_point(|&(k, _)| k < from);
        for &(k, j) in &s.ysort[lo..] {
            if k > to {
                break;
            }
            let (dx, dy) = (x[0] - ys[j][0], x[1] - ys[j][1]);
            let d2 = dx * dx + dy * dy;
            if d2 < c2 {
                let d = d2.sqrt();
                // sqrt can round a d2 just under c2 up to c; keep the strict rule on d.
                if d < c {
                    s.edges.push((i, j, d));
                }
            }
        }
        // Edges in (reference, estimate) order, as a scan of every pair lists them.
        if s.edges.len() - first > 1 {
            s.edges[first..].sort_unstable_by_key(|&(_, j, _)| j);
        }
        if s.edges.len() > edge_budget {
            s.edges.clear();
            whole_greedy(&mut out);
            return out;
        }
    }
    if s.edges.is_empty() {
        return out;
    }
    // Union-find over m + n nodes: references 0..m, estimates m..m+n.
    s.parent.clear();
    s.parent.extend(0..m + n);
    for &(i, j, _) in &s.edges {
        let (a, b) = (find(&mut s.parent, i), find(&mut s.parent, m + j));
        if a != b {
            s.parent[a] = b;
        }
    }
    // Group edges by component root with a counting sort (roots are node numbers below
    // m + n), keeping each component's edges in their listed order; components with a
    // single edge are trivial.
    let mut roots = std::mem::take(&mut s.roots);
    roots.clear();
    roots.extend(s.edges.iter().map(|&(i, _, _)| find(&mut s.parent, i)));
    s.count.clear();
    s.count.resize(m + n + 1, 0);
    for &r in &roots {
        s.count[r + 1] += 1;
    }
    for k in 1..s.count.len() {
        s.count[k] += s.count[k - 1];
    }
    s.order.clear();
    s.order.resize(s.edges.len(), 0);
    for (e, &r) in roots.iter().enumerate() {
        s.order[s.count[r]] = e;
        s.count[r] += 1;
    }
    s.local_row.clear();
    s.local_row.resize(m, NONE);
    s.local_col.clear();
    s.local_col.resize(n, NONE);
    // Each reference's assigned edge, read out in reference order at the end.
    s.slot.clear();
    s.slot.resize(m, NONE);
    let mut start = 0;
    while start < s.order.len() {
        let root = roots[s.order[start]];
        let mut end = start;
        while end < s.order.len() && roots[s.order[end]] == root {
            end += 1;
        }
        if end - start == 1 {
            let e = s.order[start];
            s.slot[s.edges[e].0] = e;
        } else if !solve_component(s, start, end, cp, p, exact_cells, &mut cells_left, solver, xs, ys, c) {
            out.approximate = true;
        }
        start = end;
    }
    s.roots = roots;
    out.pairs.extend(s.slot.iter().filter(|&&e| e != NONE).map(|&e| s.edges[e]));
    finish(&mut out, p);
    out
}

/// Solves one component: exactly when its rows x columns fit `exact_cells` and what is
/// left of the step's cells (returns true, and takes them), else greedily (returns false).
#[allow(clippy::too_many_arguments)]
fn solve_component(
    s: &mut MatchScratch,
    start: usize,
    end: usize,
    cp: f64,
    p: f64,
    exact_cells: usize,
    cells_left: &mut usize,
    solver: &mut dyn Assigner,
    xs: &[[f64; 2]],
    ys: &[[f64; 2]],
    c: f64,
) -> bool {
    s.comp_rows.clear();
    s.comp_cols.clear();
    for k in start..end {
        let (i, j, _) = s.edges[s.order[k]];
        if s.local_row[i] == NONE {
            s.local_row[i] = s.comp_rows.len();
            s.comp_rows.push(i);
        }
        if s.local_col[j] == NONE {
            s.local_col[j] = s.comp_cols.len();
            s.comp_cols.push(j);
        }
    }
    let (r, nc) = (s.comp_rows.len(), s.comp_cols.len());
    let cells = r.saturating_mul(nc);
    if cells > exact_cells || cells > *cells_left {
        // Rows in reference order, so the greedy pass is the same whatever the edge order.
        s.comp_rows.sort_unstable();
        let mut pairs = Vec::with_capacity(r.min(nc));
        greedy(&s.comp_rows, &s.comp_cols, xs, ys, c, &mut pairs);
        for (i, j, d) in pairs {
            s.edges.push((i, j, d));
            s.slot[i] = s.edges.len() - 1;
        }
        for &i in &s.comp_rows {
            s.local_row[i] = NONE;
        }
        for &j in &s.comp_cols {
            s.local_col[j] = NONE;
        }
        return false;
    }
    *cells_left -= cells;
    let c = nc;
    s.cost.clear();
    s.cost.resize(r * c, cp);
    // Which edge each cell holds, so an assigned cell finds its edge in O(1).
    s.cell_edge.clear();
    s.cell_edge.resize(r * c, NONE);
    for k in start..end {
        let e = s.order[k];
        let (i, j, d) = s.edges[e];
        let cell = s.local_row[i] * c + s.local_col[j];
        s.cost[cell] = pow_p(d, p);
        s.cell_edge[cell] = e;
    }
    solver.solve(r, c, &s.cost, &mut s.out);
    for (li, lj) in s.out.iter().enumerate() {
        let Some(lj) = *lj else { continue };
        // Only an edge (d < c) is a real assignment; a c^p filler means "both unassigned".
        let e = s.cell_edge[li * c + lj];
        if e != NONE {
            s.slot[s.comp_rows[li]] = e;
        }
    }
    for &i in &s.comp_rows {
        s.local_row[i] = NONE;
    }
    for &j in &s.comp_cols {
        s.local_col[j] = NONE;
    }
    true
}

fn finish(out: &mut Matching, p: f64) {
    out.localization = out.pairs.iter().map(|&(_, _, d)| pow_p(d, p)).sum();
}

#[inline]
fn dist(a: [f64; 2], b: [f64; 2]) -> f64 {
    let (dx, dy) = (a[0] - b[0], a[1] - b[1]);
    (dx * dx + dy * dy).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Brute-force enumeration of every injective map of the shorter side into the longer.
    fn brute(rows: usize, cols: usize, cost: &[f64]) -> f64 {
        fn rec(r: usize, rows: usize, cols: usize, cost: &[f64], used: &mut Vec<bool>) -> f64 {
            if r == rows {
                return 0.0;
            }
            let mut best = f64::INFINITY;
            for j in 0..cols {
                if !used[j] {
                    used[j] = true;
                    best = best.min(cost[r * cols + j] + rec(r + 1, rows, cols, cost, used));
                    used[j] = false;
                }
            }
            best
        }
        if rows <= cols {
            rec(0, rows, cols, cost, &mut vec![false; cols])
        } else {
            let mut t = vec![0.0; rows * cols];
            for i in 0..rows {
                for j in 0..cols {
                    t[j * rows + i] = cost[i * cols + j];
                }
            }
            rec(0, cols, rows, &t, &mut vec![false; rows])
        }
    }

    #[test]
    fn small_worked_example() {
        // The example of scipy.optimize.linear_sum_assignment's documentation:
        // [[4, 1, 3], [2, 0, 5], [3, 2, 2]] has optimum 5 with rows -> columns 1, 0, 2.
        let cost = [4.0, 1.0, 3.0, 2.0, 0.0, 5.0, 3.0, 2.0, 2.0];
        let mut out = Vec::new();
        let total = ShortestPath::default().solve(3, 3, &cost, &mut out);
        assert_eq!(total, 5.0);
        assert_eq!(out, vec![Some(1), Some(0), Some(2)]);
    }

    #[test]
    fn matches_brute_force_on_random_rectangles() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut solver = ShortestPath::default();
        let mut out = Vec::new();
        for _ in 0..400 {
            let rows = rng.random_range(0..7);
            let cols = rng.random_range(0..7);
            let cost: Vec<f64> = (0..rows * cols).map(|_| rng.random_range(0.0..10.0)).collect();
            let got = solver.solve(rows, cols, &cost, &mut out);
            let want = if rows == 0 || cols == 0 { 0.0 } else { brute(rows, cols, &cost) };
            assert!((got - want).abs() < 1e-9, "{rows}x{cols}: {got} vs {want}");
            let assigned = out.iter().flatten().count();
            assert_eq!(assigned, rows.min(cols));
        }
    }

    #[test]
    fn sparse_equals_dense() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let mut solver = ShortestPath::default();
        let mut s = MatchScratch::default();
        for _ in 0..300 {
            let m = rng.random_range(0..25);
            let n = rng.random_range(0..25);
            let side = rng.random_range(2.0..40.0);
            let pts = |rng: &mut rand_chacha::ChaCha8Rng, k| -> Vec<[f64; 2]> {
                (0..k).map(|_| [rng.random_range(0.0..side), rng.random_range(0.0..side)]).collect()
            };
            let xs = pts(&mut rng, m);
            let ys = pts(&mut rng, n);
            for p in [1.0, 2.0, 1.5] {
                let a = match_with_cutoff(&xs, &ys, 2.0, p, true, &mut solver, &mut s);
                let b = match_with_cutoff(&xs, &ys, 2.0, p, false, &mut solver, &mut s);
                let cost = |mm: &Matching| {
                    mm.localization + 2f64.powf(p) / 2.0 * (m + n - 2 * mm.pairs.len()) as f64
                };
                assert!((cost(&a) - cost(&b)).abs() < 1e-9, "{} vs {}", cost(&a), cost(&b));
            }
        }
    }

    #[test]
    fn sweep_keeps_every_pair_at_large_coordinates() {
        // Points on a lattice of spacing c / 2 far from the origin (UTM-like eastings), so
        // many pairs sit at exactly c or a rounding step from it: the band sweep must find
        // the same pairs as the dense solve, which looks at every pair.
        let mut solver = ShortestPath::default();
        let mut s = MatchScratch::default();
        let c = 2.0;
        for offset in [0.0, 4.3e5, 5.1e6] {
            let xs: Vec<[f64; 2]> =
                (0..12).map(|k| [offset + (k % 4) as f64 * 1.0, offset + (k / 4) as f64 * 1.0]).collect();
            let ys: Vec<[f64; 2]> = (0..12)
                .map(|k| [offset + (k % 4) as f64 * 1.0 + 0.3, offset + (k / 4) as f64 * 2.0])
                .collect();
            let a = match_with_cutoff(&xs, &ys, c, 1.0, true, &mut solver, &mut s);
            let b = match_with_cutoff(&xs, &ys, c, 1.0, false, &mut solver, &mut s);
            assert_eq!(a.pairs.len(), b.pairs.len(), "offset {offset}");
            assert!((a.localization - b.localization).abs() < 1e-9, "offset {offset}");
            // x distance exactly c, no y offset: never a pair; a hair under: a pair.
            let m = match_with_cutoff(
                &[[offset, offset]],
                &[[offset + c, offset]],
                c,
                1.0,
                true,
                &mut solver,
                &mut s,
            );
            assert!(m.pairs.is_empty(), "offset {offset}");
            let under = offset + c - (offset + c) * f64::EPSILON;
            let m =
                match_with_cutoff(&[[offset, offset]], &[[under, offset]], c, 1.0, true, &mut solver, &mut s);
            assert_eq!(m.pairs.len(), usize::from(under - offset < c), "offset {offset}");
        }
    }

    /// Over the budget: the matching is feasible (every pair closer than c, every point
    /// used once), flagged approximate, and never cheaper than the exact optimum (any
    /// feasible assignment bounds it from above); under the budget it is the optimum.
    #[test]
    fn over_the_budget_the_greedy_matching_is_a_feasible_upper_bound() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut solver = ShortestPath::default();
        let mut s = MatchScratch::default();
        let (c, p) = (2.0, 1.0);
        let mut worse = 0;
        for round in 0..200 {
            let (m, n) = (rng.random_range(1..40), rng.random_range(1..40));
            let side = rng.random_range(1.0..12.0);
            let pts = |rng: &mut rand_chacha::ChaCha8Rng, k| -> Vec<[f64; 2]> {
                (0..k).map(|_| [rng.random_range(0.0..side), rng.random_range(0.0..side)]).collect()
            };
            let (xs, ys) = (pts(&mut rng, m), pts(&mut rng, n));
            let cost = |mm: &Matching| mm.localization + c / 2.0 * (m + n - 2 * mm.pairs.len()) as f64;
            let exact = match_with_cutoff(&xs, &ys, c, p, true, &mut solver, &mut s);
            assert!(!exact.approximate);
            let same = match_bounded(&xs, &ys, c, p, true, m * n, &mut solver, &mut s);
            assert_eq!(same, exact, "within the budget the result is the exact one");
            // A tiny budget: components greedily (4 cells), or the whole step (edges > 8).
            for budget in [4, if round % 2 == 0 { 1 } else { 3 }] {
                let g = match_bounded(&xs, &ys, c, p, true, budget, &mut solver, &mut s);
                let (mut used_x, mut used_y) = (vec![false; m], vec![false; n]);
                for &(i, j, d) in &g.pairs {
                    assert!(d < c && (dist(xs[i], ys[j]) - d).abs() < 1e-12);
                    assert!(!used_x[i] && !used_y[j], "each point used once");
                    (used_x[i], used_y[j]) = (true, true);
                }
                assert!(g.pairs.windows(2).all(|w| w[0].0 < w[1].0), "pairs in reference order");
                assert!(cost(&g) >= cost(&exact) - 1e-9, "{} < {}", cost(&g), cost(&exact));
                if cost(&g) > cost(&exact) + 1e-9 {
                    assert!(g.approximate);
                    worse += 1;
                }
            }
        }
        assert!(worse > 0, "the budget was reached in some rounds");
    }

    /// 3000 objects in a 3 m square (one dense component, 9e6 candidate pairs): bounded by
    /// the edge budget, assigned greedily, and every reference finds a partner.
    #[test]
    fn a_dense_cluster_is_assigned_within_the_budget() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let xs: Vec<[f64; 2]> =
            (0..3000).map(|_| [rng.random_range(0.0..3.0), rng.random_range(0.0..3.0)]).collect();
        let ys: Vec<[f64; 2]> = xs.iter().map(|p| [p[0] + 0.01, p[1]]).collect();
        let mut s = MatchScratch::default();
        let m = match_bounded(&xs, &ys, 2.0, 1.0, true, 490_000, &mut ShortestPath::default(), &mut s);
        assert!(m.approximate);
        assert_eq!(m.pairs.len(), 3000);
        // The list stops at the budget (980,000 edges; its capacity at most twice that).
        assert!(s.edges.capacity() <= 4 * 490_000, "edge list bounded: {}", s.edges.capacity());
    }

    #[test]
    fn pair_at_exactly_the_cutoff_is_unassigned() {
        let mut solver = ShortestPath::default();
        let mut s = MatchScratch::default();
        let m = match_with_cutoff(&[[0.0, 0.0]], &[[2.0, 0.0]], 2.0, 1.0, true, &mut solver, &mut s);
        assert!(m.pairs.is_empty());
        let m = match_with_cutoff(&[[0.0, 0.0]], &[[1.999, 0.0]], 2.0, 1.0, true, &mut solver, &mut s);
        assert_eq!(m.pairs.len(), 1);
    }

    #[test]
    fn agrees_with_pathfinding_kuhn_munkres_on_integer_costs() {
        // Independent cross-check: the pathfinding crate's Hungarian method on integer weights.
        use pathfinding::prelude::{kuhn_munkres_min, Matrix};
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(99);
        let mut solver = ShortestPath::default();
        let mut out = Vec::new();
        for _ in 0..200 {
            let rows = rng.random_range(1..9);
            let cols = rng.random_range(rows..10);
            let ints: Vec<i64> = (0..rows * cols).map(|_| rng.random_range(0..1000)).collect();
            let cost: Vec<f64> = ints.iter().map(|&v| v as f64).collect();
            let got = solver.solve(rows, cols, &cost, &mut out);
            let w = Matrix::from_vec(rows, cols, ints).unwrap();
            let (want, _) = kuhn_munkres_min(&w);
            assert_eq!(got, want as f64);
        }
    }
}
