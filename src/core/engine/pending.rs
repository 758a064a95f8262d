//! The one queue of steps waiting for their reference, used by every step family: bounded
//! (the oldest step resolves early when it is full, and is counted), resolved in stamp
//! order when the reference is known or the wait is over. Pure.

use std::collections::VecDeque;

/// A step waiting: its stamp, when its wait ends (arrival clock), and what it needs.
#[derive(Debug)]
pub(super) struct Pending<T> {
    pub(super) t: f64,
    pub(super) deadline: f64,
    pub(super) item: T,
}

/// Steps of one family in arrival order.
#[derive(Debug)]
pub(super) struct Queue<T> {
    items: VecDeque<Pending<T>>,
}

impl<T> Queue<T> {
    pub(super) fn new() -> Queue<T> {
        Queue { items: VecDeque::new() }
    }

    /// Adds a step; when `cap` steps already wait, the oldest comes back to be resolved
    /// early (the caller counts it).
    pub(super) fn push(&mut self, p: Pending<T>, cap: usize) -> Option<Pending<T>> {
        let overflow = if self.items.len() >= cap { self.items.pop_front() } else { None };
        self.items.push_back(p);
        overflow
    }

    /// The oldest step.
    pub(super) fn front(&self) -> Option<&Pending<T>> {
        self.items.front()
    }

    /// The oldest step, taken when it is due: `all` (end of input), its wait over at
    /// `now`, or `ready` (what it reads is known).
    pub(super) fn take_due(&mut self, now: f64, all: bool, ready: bool) -> Option<Pending<T>> {
        let p = self.items.front()?;
        if all || p.deadline < now || ready {
            self.items.pop_front()
        } else {
            None
        }
    }

    /// Steps waiting.
    pub(super) fn len(&self) -> usize {
        self.items.len()
    }

    /// Drops every waiting step and says how many there were.
    pub(super) fn clear(&mut self) -> usize {
        let n = self.items.len();
        self.items.clear();
        n
    }
}
