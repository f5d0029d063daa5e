//! Floating-line windows: intervals at a receiver's position with no driver on the line.
//!
//! Occupancies are fed in order of their enable time. For each hazard receiver
//! (one whose thresholds leave a 0 V input undefined) the sweep keeps the time
//! until which the line at that position is known to be driven; a new
//! occupancy whose signal arrives after it opens a window. The caller passes
//! the earliest arrival, at this receiver, of any occupancy that is known but
//! not yet fed, so a later-enabled driver whose signal arrives first (only
//! possible when the two contend) still closes the window at the right time.

use crate::units::Picos;

/// Window statistics over all hazard receivers.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct FloatingTotals {
    pub windows: u64,
    pub total_ps: u64,
    pub longest_ps: u64,
}

#[derive(Debug)]
pub struct FloatingSweep {
    /// Per node: is its receiver a hazard, and until when is its position driven.
    hazard: Vec<bool>,
    hazard_ids: Vec<usize>,
    driven_until: Vec<u64>,
    window: (u64, u64),
    pub totals: FloatingTotals,
}

impl FloatingSweep {
    pub fn new(hazard: Vec<bool>, window: (Picos, Picos)) -> Self {
        let n = hazard.len();
        FloatingSweep {
            hazard_ids: (0..n).filter(|&i| hazard[i]).collect(),
            hazard,
            driven_until: vec![0; n],
            window: (window.0 .0, window.1 .0),
            totals: FloatingTotals::default(),
        }
    }

    pub fn is_hazard(&self, node: usize) -> bool {
        self.hazard[node]
    }

    /// Feed an occupancy as seen at receiver `node`: it arrives at `from` and
    /// leaves at `to`; `next_arrival` bounds the window from above (see module docs).
    #[inline]
    pub fn feed(&mut self, node: usize, from: u64, to: u64, next_arrival: u64) {
        let until = self.driven_until[node];
        if from > until {
            self.close(until, from.min(next_arrival));
        }
        if to > until {
            self.driven_until[node] = to;
        }
    }

    /// Feed one occupancy `[a, b)` of a driver to every hazard receiver at
    /// once. `delays[i]` is the wire delay from the driver to node i;
    /// `next[i]`, when given, bounds each window from above (see [`Self::feed`]).
    /// This is the hot path: totals are gathered in locals and per-node
    /// figures are not kept.
    #[inline]
    pub fn feed_all(&mut self, a: u64, b: u64, delays: &[u64], next: Option<&[u64]>) {
        let (w0, w1) = self.window;
        let (mut windows, mut total, mut longest) = (0u64, 0u64, self.totals.longest_ps);
        // Branch-free: when the signal arrives before `until` the clipped
        // window is empty, because then to ≤ from ≤ until ≤ max(until, w0).
        let mut one = |i: usize, until: &mut u64| {
            let d = delays[i];
            let from = a + d;
            let to = match next {
                None => from,
                Some(n) => from.min(n[i]),
            };
            let len = to.min(w1).saturating_sub((*until).max(w0));
            windows += u64::from(len > 0);
            total += len;
            longest = longest.max(len);
            *until = (*until).max(b + d);
        };
        if self.hazard_ids.len() == self.driven_until.len() {
            for (i, until) in self.driven_until.iter_mut().enumerate() {
                one(i, until);
            }
        } else {
            for &i in &self.hazard_ids {
                one(i, &mut self.driven_until[i]);
            }
        }
        self.totals.windows += windows;
        self.totals.total_ps += total;
        self.totals.longest_ps = longest;
    }

    /// Close every receiver's open window at the end of the run.
    pub fn finish(&mut self, end: u64) {
        for node in 0..self.hazard.len() {
            if self.hazard[node] && self.driven_until[node] < end {
                let from = self.driven_until[node];
                self.close(from, end);
                self.driven_until[node] = end;
            }
        }
    }

    fn close(&mut self, from: u64, to: u64) {
        let from = from.max(self.window.0);
        let to = to.min(self.window.1);
        if to <= from {
            return;
        }
        let len = to - from;
        let t = &mut self.totals;
        t.windows += 1;
        t.total_ps += len;
        t.longest_ps = t.longest_ps.max(len);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaps_between_occupancies_are_windows() {
        let mut f = FloatingSweep::new(vec![true, false], (Picos(0), Picos(1000)));
        f.feed(0, 100, 300, u64::MAX);
        f.feed(0, 350, 600, u64::MAX);
        f.feed(0, 500, 900, u64::MAX); // overlaps: no window
        f.finish(1000);
        // 0..100, 300..350, 900..1000
        assert_eq!(
            f.totals,
            FloatingTotals {
                windows: 3,
                total_ps: 250,
                longest_ps: 100
            }
        );
    }

    #[test]
    fn window_bounded_by_earlier_arrival() {
        let mut f = FloatingSweep::new(vec![true], (Picos(0), Picos(1000)));
        f.feed(0, 0, 100, u64::MAX);
        // Next fed occupancy arrives at 400, but another known one arrives at 250.
        f.feed(0, 400, 500, 250);
        assert_eq!(f.totals.total_ps, 150);
    }
}
