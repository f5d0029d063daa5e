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
    driven_until: Vec<u64>,
    per_node: Vec<FloatingTotals>,
    window: (u64, u64),
    pub totals: FloatingTotals,
}

impl FloatingSweep {
    pub fn new(hazard: Vec<bool>, window: (Picos, Picos)) -> Self {
        let n = hazard.len();
        FloatingSweep {
            hazard,
            driven_until: vec![0; n],
            per_node: vec![FloatingTotals::default(); n],
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
            self.close(node, until, from.min(next_arrival));
        }
        if to > until {
            self.driven_until[node] = to;
        }
    }

    /// Close every receiver's open window at the end of the run.
    pub fn finish(&mut self, end: u64) {
        for node in 0..self.hazard.len() {
            if self.hazard[node] && self.driven_until[node] < end {
                let from = self.driven_until[node];
                self.close(node, from, end);
                self.driven_until[node] = end;
            }
        }
    }

    pub fn node_totals(&self, node: usize) -> FloatingTotals {
        self.per_node[node]
    }

    fn close(&mut self, node: usize, from: u64, to: u64) {
        let from = from.max(self.window.0);
        let to = to.min(self.window.1);
        if to <= from {
            return;
        }
        let len = to - from;
        for t in [&mut self.totals, &mut self.per_node[node]] {
            t.windows += 1;
            t.total_ps += len;
            t.longest_ps = t.longest_ps.max(len);
        }
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
