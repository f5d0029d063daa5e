//! Closed-form stretches: skipping whole periods of a cyclic scheme that
//! are known to repeat exactly.
//!
//! A cyclic scheme (a polling cycle, a token rotation, a TDMA frame) calls
//! [`Shortcuts::at_period_start`] at the same point of every period. The
//! call writes the whole state of the run, the scheme's included, into a
//! *fingerprint* in which every time is relative to now and every bus id
//! relative to the next one; the tallies (counters, sums) go beside it. When
//! the fingerprint equals the one taken at the previous period start and
//! nothing from outside the scheme (a message arrival, a fault, an external
//! node) happened in between, the run is deterministic from here on exactly
//! as it was from there, shifted by the period P: the next periods repeat the
//! last one until something from outside comes. So the k periods that fit
//! before the next queued event (and the end of the measured window, and any
//! trace window) are done in closed form: every tally grows by k times its
//! growth over the last period, every time in the state moves by k·P, every
//! id by k times the ids one period uses, and the clock by k·P. The scheme
//! then carries on from there on the event path.
//!
//! Exactness rests on the fingerprint holding everything the future depends
//! on. What it cannot hold refuses the shortcut (the run takes the event
//! path): random draws per exchange, noise, UART framing, co-simulation,
//! node faults, a down node, messages waiting, contention in the period.
//! Hand-overs go to per-pair slack statistics whose state is the multiset of
//! slacks; they are journalled over the period and recorded k times each.
//! Maxima (longest window, longest cycle) do not change when a period
//! repeats. Times that equal 0 or `u64::MAX` mean "never" and do not move.
//!
//! `Spec::shortcuts = false` (the CLI's `--no-shortcuts`) turns all of this
//! off; the two paths give byte-identical reports (tests/e2e/shortcuts.rs).

use super::World;
use crate::periodic::{Advance, Periodic, Record};

/// Periods skipped: how many, of what length.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Skipped {
    pub periods: u64,
    pub period_ps: u64,
}

/// A scheme's closed-form stretches (one per run; see the module docs).
#[derive(Debug, Default)]
pub struct Shortcuts {
    /// The fingerprint at the latest period start.
    mark: Record,
    marked: bool,
    /// Events from outside the scheme seen by the run at the mark.
    outside_at_mark: u64,
    scratch: Record,
    /// Each tally's growth over the last period (reused).
    growth: Vec<u128>,
    /// Periods done in closed form so far.
    pub periods: u64,
}

impl Shortcuts {
    /// Call at the same point of every period. When the last period repeats
    /// and at least one more fits before anything else happens, the world
    /// and `own` are moved on by whole periods (the clock too) and this says
    /// by how many; the caller then carries on from the new `now`. With
    /// `period`, only periods of exactly that length are skipped (a scheme
    /// whose schedule counts whole periods from time zero).
    pub fn at_period_start(&mut self, w: &mut World, own: &mut dyn Periodic, period: Option<u64>) -> Option<Skipped> {
        if !w.shortcuts_allowed() {
            return None;
        }
        // Something came from outside in the last period: it does not
        // repeat, so this period start can only be a mark for the next.
        let fresh = w.outside_events != self.outside_at_mark;
        let now = w.now.0;
        if now == self.mark.now {
            // A period that takes no time (a stalled run): nothing to skip,
            // and the state may be growing, so do not even look.
            return None;
        }
        let next_id = w.bus.next_id();
        self.scratch.clear(now, next_id);
        w.visit_state(&mut self.scratch);
        if !self.scratch.refused {
            own.visit(&mut self.scratch);
        }
        let skipped = if fresh { None } else { self.try_skip(w, own, period) };
        // This period start (moved on, if periods were skipped) is the mark for the next.
        std::mem::swap(&mut self.mark, &mut self.scratch);
        if skipped.is_some() {
            self.mark.clear(w.now.0, w.bus.next_id());
            w.visit_state(&mut self.mark);
            own.visit(&mut self.mark);
        }
        self.marked = !self.mark.refused;
        self.outside_at_mark = w.outside_events;
        w.bus.journal_handovers(self.marked);
        skipped
    }

    fn try_skip(&mut self, w: &mut World, own: &mut dyn Periodic, required: Option<u64>) -> Option<Skipped> {
        let (a, b) = (&self.mark, &self.scratch);
        if !self.marked || b.refused || a.words != b.words {
            return None;
        }
        debug_assert_eq!(a.tallies.len(), b.tallies.len(), "the same fields were visited");
        let period = b.now - a.now;
        let ids = b.next_id - a.next_id;
        if period == 0 || required.is_some_and(|p| p != period) {
            return None;
        }
        let k = w.periods_that_fit(b.now, period, a.now)?;
        self.growth.clear();
        self.growth.extend(a.tallies.iter().zip(&b.tallies).map(|(x, y)| y - x));
        let mut adv =
            Advance { now: b.now, dt: k * period, did: k * ids, k: u128::from(k), growth: &self.growth, at: 0 };
        w.visit_state(&mut adv);
        own.visit(&mut adv);
        w.bus.replay_handovers(k);
        w.now.0 += k * period;
        self.periods += k;
        w.closed_form_periods += k;
        Some(Skipped { periods: k, period_ps: period })
    }
}
