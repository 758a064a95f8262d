//! Track life: switches, fragmentations, establishment and deletion delays.
//!
//! Computed from the GOSPA assignment at each step (SPEC §5):
//! - `track_switches`: a reference id's assigned estimate id differs from the one at its
//!   previous assigned step (count per step).
//! - `fragmentations`: a reference id is assigned again after at least one step at which it
//!   was present (in the region) but unassigned, following an earlier assignment
//!   (count per step).
//! - `establishment_delay_s`: first assigned step minus first step in the region, per
//!   reference id (emitted at the establishing step).
//! - `deletion_delay_s`: an estimate id's last appearance minus the last step at which the
//!   reference object it was last assigned to was present. A tracker that drops the track at
//!   the step its object leaves scores 0. Emitted when the estimate id stops appearing, or at
//!   the end of the run for tracks still alive then. If the estimate is assigned to another
//!   reference, or its reference comes back, before it stops appearing, nothing is emitted.
//!
//! Memory: ids unseen for `forget_after` seconds of event time are forgotten.

use rustc_hash::{FxHashMap as HashMap, FxHashSet as HashSet};

#[derive(Debug, Clone)]
struct RefState {
    first_in_region: f64,
    established: bool,
    last_est: Option<u64>,
    gap_while_present: bool,
    last_present: f64,
    /// The last step (1-based count) it was present at: whether it is present now is one
    /// look-up of its state, not a set of this step's ids.
    present_step: u64,
}

#[derive(Debug, Clone)]
struct EstState {
    last_seen: f64,
    owner: Option<u64>,
    owner_left_at: Option<f64>,
    seen_step: u64,
}

impl EstState {
    fn new(t: f64) -> EstState {
        EstState { last_seen: t, owner: None, owner_left_at: None, seen_step: 0 }
    }
}

/// What one step produced.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TrackLifeStep {
    /// Switches at this step.
    pub switches: u32,
    /// Fragmentations at this step.
    pub fragmentations: u32,
    /// Establishment delays of references first assigned at this step (s).
    pub establishment: Vec<f64>,
    /// Deletion delays of estimates that stopped appearing at this step (s).
    pub deletion: Vec<f64>,
}

/// Track-life state across steps.
#[derive(Debug, Clone)]
pub struct TrackLife {
    refs: HashMap<u64, RefState>,
    ests: HashMap<u64, EstState>,
    /// The estimate ids of the previous step and of this one; their iteration order is
    /// the order deletion delays are emitted in.
    prev_ests: HashSet<u64>,
    cur_ests: HashSet<u64>,
    /// Per estimate of this step, the reference it is assigned to (scratch).
    owner_of: Vec<Option<u64>>,
    forget_after: f64,
    last_t: f64,
    steps: u64,
    /// Ids forgotten so far (memory bound).
    pub forgotten: u64,
}

impl TrackLife {
    /// New state; ids unseen for `forget_after` seconds are dropped.
    pub fn new(forget_after: f64) -> TrackLife {
        TrackLife {
            refs: HashMap::default(),
            ests: HashMap::default(),
            prev_ests: HashSet::default(),
            cur_ests: HashSet::default(),
            owner_of: Vec::new(),
            forget_after,
            last_t: f64::NEG_INFINITY,
            steps: 0,
            forgotten: 0,
        }
    }

    /// One step at time `t`: the reference ids present (in the region), the estimate ids
    /// present (ids unique within each list, as validation makes them), and the assigned
    /// pairs as `(index into refs_present, index into ests_present)`, in reference order.
    pub fn step(
        &mut self,
        t: f64,
        refs_present: &[u64],
        ests_present: &[u64],
        pairs: impl IntoIterator<Item = (usize, usize)>,
        out: &mut TrackLifeStep,
    ) {
        out.switches = 0;
        out.fragmentations = 0;
        out.establishment.clear();
        out.deletion.clear();
        self.last_t = t;
        let step = self.steps + 1;
        self.cur_ests.clear();
        self.cur_ests.extend(ests_present.iter().copied());

        // Each reference's state is looked up once: the pairs come in reference order, so
        // whether it is assigned at this step is the next pair's reference index.
        self.owner_of.clear();
        self.owner_of.resize(ests_present.len(), None);
        let mut next_pair = pairs.into_iter().peekable();
        for (i, &r) in refs_present.iter().enumerate() {
            let st = self.refs.entry(r).or_insert(RefState {
                first_in_region: t,
                established: false,
                last_est: None,
                gap_while_present: false,
                last_present: t,
                present_step: 0,
            });
            st.last_present = t;
            st.present_step = step;
            let Some((_, j)) = next_pair.next_if(|&(pi, _)| pi == i) else {
                if st.last_est.is_some() {
                    st.gap_while_present = true;
                }
                continue;
            };
            let e = ests_present[j];
            if !st.established {
                st.established = true;
                out.establishment.push(t - st.first_in_region);
            }
            if st.last_est.is_some_and(|prev| prev != e) {
                out.switches += 1;
            }
            if st.gap_while_present {
                out.fragmentations += 1;
                st.gap_while_present = false;
            }
            st.last_est = Some(e);
            self.owner_of[j] = Some(r);
        }
        let refs = &self.refs;
        for (j, &e) in ests_present.iter().enumerate() {
            let es = self.ests.entry(e).or_insert_with(|| EstState::new(t));
            es.last_seen = t;
            es.seen_step = step;
            if let Some(r) = self.owner_of[j] {
                // Assigned now: its owner is present.
                es.owner = Some(r);
                es.owner_left_at = None;
            } else if let Some(owner) = es.owner {
                let st = refs.get(&owner);
                if st.is_some_and(|s| s.present_step == step) {
                    es.owner_left_at = None;
                } else if es.owner_left_at.is_none() {
                    es.owner_left_at = st.map(|s| s.last_present);
                }
            }
        }
        // Estimates seen at the previous step and gone now.
        for e in self.prev_ests.iter() {
            let Some(es) = self.ests.get_mut(e) else { continue };
            if es.seen_step == step {
                continue;
            }
            // The owner may have left at this very step, together with the track.
            let left = es.owner_left_at.take().or_else(|| {
                es.owner.and_then(|o| refs.get(&o)).filter(|s| s.present_step != step).map(|s| s.last_present)
            });
            if let Some(left) = left {
                out.deletion.push(es.last_seen - left);
            }
            es.owner = None;
        }
        std::mem::swap(&mut self.prev_ests, &mut self.cur_ests);

        self.steps += 1;
        if self.steps % 64 == 0 {
            self.forget(t);
        }
    }

    fn forget(&mut self, t: f64) {
        let horizon = t - self.forget_after;
        let before = self.refs.len() + self.ests.len();
        self.refs.retain(|_, s| s.last_present >= horizon);
        self.ests.retain(|_, s| s.last_seen >= horizon);
        self.forgotten += (before - self.refs.len() - self.ests.len()) as u64;
    }

    /// End of run: deletion delays of tracks still alive whose reference has left.
    pub fn finish(&mut self) -> Vec<f64> {
        let mut out: Vec<(u64, f64)> = self
            .ests
            .iter_mut()
            .filter(|(id, _)| self.prev_ests.contains(id))
            .filter_map(|(id, es)| es.owner_left_at.take().map(|l| (*id, es.last_seen - l)))
            .collect();
        out.sort_by_key(|&(id, _)| id);
        out.into_iter().map(|(_, d)| d).collect()
    }

    /// Time of the last step.
    pub fn last_t(&self) -> f64 {
        self.last_t
    }

    /// Ids held (reference plus estimate).
    pub fn held(&self) -> usize {
        self.refs.len() + self.ests.len()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    type Step<'a> = (f64, &'a [u64], &'a [u64], &'a [(u64, u64)]);

    fn run(steps: &[Step<'_>]) -> (Vec<TrackLifeStep>, Vec<f64>) {
        let mut tl = TrackLife::new(300.0);
        let mut outs = Vec::new();
        for (t, r, e, p) in steps {
            let mut o = TrackLifeStep::default();
            // Pairs by id, as the cases read, to indices in reference order.
            let pos = |ids: &[u64], id: u64| ids.iter().position(|&x| x == id).unwrap();
            let mut idx: Vec<(usize, usize)> = p.iter().map(|&(a, b)| (pos(r, a), pos(e, b))).collect();
            idx.sort_unstable();
            tl.step(*t, r, e, idx, &mut o);
            outs.push(o);
        }
        let fin = tl.finish();
        (outs, fin)
    }

    #[test]
    fn establishment_switch_and_fragmentation() {
        // Hand-built: ref 1 enters at 0.0, tracked by 10 from 0.2, lost at 0.3 (present,
        // unassigned), re-acquired by 11 at 0.4: one fragmentation and one switch at 0.4.
        let (o, _) = run(&[
            (0.0, &[1], &[], &[]),
            (0.1, &[1], &[], &[]),
            (0.2, &[1], &[10], &[(1, 10)]),
            (0.3, &[1], &[], &[]),
            (0.4, &[1], &[11], &[(1, 11)]),
            (0.5, &[1], &[11], &[(1, 11)]),
        ]);
        assert_eq!(o[2].establishment, vec![0.2]);
        assert_eq!((o[4].switches, o[4].fragmentations), (1, 1));
        assert_eq!((o[5].switches, o[5].fragmentations), (0, 0));
        let total_sw: u32 = o.iter().map(|s| s.switches).sum();
        assert_eq!(total_sw, 1);
    }

    #[test]
    fn swap_of_two_tracks_is_two_switches() {
        let (o, _) = run(&[
            (0.0, &[1, 2], &[10, 20], &[(1, 10), (2, 20)]),
            (0.1, &[1, 2], &[10, 20], &[(1, 20), (2, 10)]),
        ]);
        assert_eq!(o[1].switches, 2);
        assert_eq!(o[1].fragmentations, 0);
    }

    #[test]
    fn absence_is_not_a_fragmentation() {
        // Ref leaves the region (absent) and returns: re-acquisition by the same track is
        // neither a switch nor a fragmentation.
        let (o, _) =
            run(&[(0.0, &[1], &[10], &[(1, 10)]), (0.1, &[], &[], &[]), (0.2, &[1], &[10], &[(1, 10)])]);
        assert_eq!((o[2].switches, o[2].fragmentations), (0, 0));
    }

    #[test]
    fn deletion_delay_from_last_presence() {
        // Ref 1 last present at 1.0; track 10 coasts to 1.3 and is gone at 1.4: 0.3 s.
        let (o, fin) = run(&[
            (1.0, &[1], &[10], &[(1, 10)]),
            (1.1, &[], &[10], &[]),
            (1.2, &[], &[10], &[]),
            (1.3, &[], &[10], &[]),
            (1.4, &[], &[], &[]),
        ]);
        assert_eq!(o[4].deletion.len(), 1);
        assert!((o[4].deletion[0] - 0.3).abs() < 1e-12);
        assert!(fin.is_empty());
        // Track dropped together with its object: 0.
        let (o, _) = run(&[(1.0, &[1], &[10], &[(1, 10)]), (1.1, &[], &[], &[])]);
        assert_eq!(o[1].deletion, vec![0.0]);
        // Still alive at the end of the run: reported at finish.
        let (_, fin) = run(&[(1.0, &[1], &[10], &[(1, 10)]), (1.5, &[], &[10], &[])]);
        assert_eq!(fin, vec![0.5]);
    }
}
