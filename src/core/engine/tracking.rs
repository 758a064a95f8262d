//! Tracking steps: the estimated objects against the reference objects at the set's stamp
//! (GOSPA with its parts and counts, OSPA, NEES, track life). Pure.

use super::{miss_reason, Engine, PointSet, Sample};
use crate::core::align::{self, Point};
use crate::metrics::assign::match_bounded;
use crate::metrics::nees::nees;
use crate::metrics::{gospa, ospa, Metric};

impl Engine {
    /// A tracking step at the estimate set's stamp `t` (skipped, and counted, when the
    /// reference at `t` is not known).
    pub(super) fn eval_tracking(&mut self, t: f64, est: &PointSet, out: &mut Vec<Sample>) {
        self.last_track_t = Some(t);
        let how = match self.reference_at(t) {
            Ok(h) => h,
            Err(reason) => return self.counters.tracking.skip(reason),
        };
        // The step's time is the set's stamp, so its frame pose is the one `ref_points` uses.
        let (mut ys, mut scratch) = (std::mem::take(&mut self.ys), std::mem::take(&mut self.wa));
        ys.clear();
        let frame = self.ref_points(est, &mut scratch).map(|p| ys.extend_from_slice(p));
        (self.ys, self.wa) = (ys, scratch);
        if let Err(reason) = frame {
            return self.counters.tracking.skip(reason);
        }
        if self.tp.region > 0.0 {
            let ego = match align::resolve(&self.ref_ego, t, self.ap.tolerance) {
                Ok(r) => align::pose_at(r, t).0,
                Err(m) => return self.counters.tracking.skip(miss_reason(m, "ego")),
            };
            let (r, r_est) = (self.tp.region, self.tp.region + self.tp.cutoff);
            let near = |o: &Point, lim: f64| (o.x - ego.x).hypot(o.y - ego.y) <= lim;
            self.xs.retain(|o| near(o, r));
            self.ys.retain(|o| near(o, r_est));
        }
        self.counters.tracking.hit(how);
        self.score(t, out);
    }

    fn score(&mut self, t: f64, out: &mut Vec<Sample>) {
        let (c, p, alpha) = (self.tp.cutoff, self.tp.order, self.tp.alpha);
        self.xp.clear();
        self.xp.extend(self.xs.iter().map(|o| [o.x, o.y]));
        self.yp.clear();
        self.yp.extend(self.ys.iter().map(|o| [o.x, o.y]));
        let m = match_bounded(
            &self.xp,
            &self.yp,
            c,
            p,
            true,
            self.tp.exact_cells,
            &mut self.solver,
            &mut self.scratch,
        );
        if m.approximate {
            self.counters.tracking.approximate += 1;
        }
        let (nx, ny) = (self.xp.len(), self.yp.len());
        let g = if self.tp.has_own_costs() {
            // Missed and false objects costed apart: GOSPA's own matching at its cutoff;
            // OSPA, NEES and track life keep the cutoff matching.
            let (missed, false_) = self.tp.state_costs();
            let cg = gospa::cost_cutoff(missed, false_, p);
            let (xp, yp) = (&self.xp, &self.yp);
            let mg =
                match_bounded(xp, yp, cg, p, true, self.tp.exact_cells, &mut self.solver, &mut self.scratch2);
            gospa::from_matching_costs(nx, ny, &mg, missed, false_, p)
        } else {
            gospa::from_matching(nx, ny, &m, c, p, alpha)
        };
        let mut push = |metric, value| out.push(Sample { t, metric, role: None, value });
        push(Metric::Gospa, g.total);
        if alpha == 2.0 {
            push(Metric::GospaLocalization, g.localization);
            push(Metric::GospaMissed, g.missed);
            push(Metric::GospaFalse, g.false_);
            push(Metric::AssignedCount, g.assigned as f64);
            push(Metric::MissedCount, g.missed_count as f64);
            push(Metric::FalseCount, g.false_count as f64);
        }
        push(Metric::Ospa, ospa::from_matching(nx, ny, &m, c, p));

        let (mut sum, mut n) = (0.0, 0u32);
        for &(i, j, _) in &m.pairs {
            if let Some(cov) = &self.ys[j].cov {
                if let Some(v) = nees(self.yp[j], self.xp[i], cov) {
                    self.nees_pool.add(v);
                    sum += v;
                    n += 1;
                }
            }
        }
        if n > 0 {
            push(Metric::Nees, sum / n as f64);
        }

        let (refs, ests) = &mut self.ids;
        refs.clear();
        refs.extend(self.xs.iter().map(|o| o.id));
        ests.clear();
        ests.extend(self.ys.iter().map(|o| o.id));
        let pairs = m.pairs.iter().map(|&(i, j, _)| (i, j));
        self.tracklife.step(t, refs, ests, pairs, &mut self.tl_step);
        push(Metric::TrackSwitches, self.tl_step.switches as f64);
        push(Metric::Fragmentations, self.tl_step.fragmentations as f64);
        for &d in &self.tl_step.establishment {
            push(Metric::EstablishmentDelay, d);
        }
        for &d in &self.tl_step.deletion {
            push(Metric::DeletionDelay, d);
        }
        for job in self.tgospa_step(t) {
            self.run_or_keep(job, out);
        }
    }
}
