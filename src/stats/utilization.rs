//! How the line's time divides between payload, overhead, gaps, idle and waste.
//!
//! Time is classified at the drivers' own positions (wire delay is not added),
//! instant by instant:
//! - no driver occupies the line: **idle**;
//! - two or more drivers occupy it at once: **wasted** (contention);
//! - one driver: the bits it sends at that instant decide. Payload bits of a
//!   delivered data frame are **payload**; overhead bits of a delivered data
//!   frame, and every bit of a delivered control frame (poll, empty reply,
//!   token, beacon), are **overhead**; any bit of a corrupted frame is
//!   **wasted**; an occupied instant with no bit on it (enable lead-in,
//!   interframe gap, disable tail) is a **gap**.
//!
//! The classes partition the measured window, so the fractions sum to 1.
//!
//! Pieces arrive out of order (a frame's fate is known only when it is
//! delivered), so the sweep keeps their edges sorted and advances only up to
//! a frontier before which no new piece can start. It holds the edges of the
//! few transmissions in flight, so memory stays flat; edges arrive nearly in
//! order, so a sorted array with insertion from the back beats a heap here.
//! The array's consumed front is dropped in bulk (plain indexing is cheaper
//! than a ring buffer's on this path, which runs after every event).

/// What a piece contributes to the sweep.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Piece {
    /// A driver's occupancy: counts drivers on the line.
    Occupancy,
    Overhead,
    Payload,
    Wasted,
    /// A dominant drive of bitwise arbitration: overhead, and several at
    /// once are normal (wired-AND), but not together with a frame's driver.
    Dominant,
}

const OCC: u8 = 0;
const DOM: u8 = 4;
const LABELS: usize = 3; // Overhead, Payload, Wasted

/// Accumulated time per class, in picoseconds.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct UtilizationTotals {
    pub payload: u64,
    pub overhead: u64,
    pub gaps: u64,
    pub idle: u64,
    pub wasted: u64,
}

impl UtilizationTotals {
    pub fn sum(&self) -> u64 {
        self.payload + self.overhead + self.gaps + self.idle + self.wasted
    }
}

/// The incremental sweep.
#[derive(Debug)]
pub struct UtilizationSweep {
    /// Edges sorted by time: (time, kind << 1 | is_end); those before
    /// `head` are consumed.
    edges: Vec<(u64, u8)>,
    head: usize,
    last: u64,
    drivers: u32,
    dominant: u32,
    labels: [u32; LABELS],
    window: (u64, u64),
    pub totals: UtilizationTotals,
}

impl UtilizationSweep {
    /// Measures the window `start..end` (picoseconds).
    pub fn new(start: u64, end: u64) -> Self {
        UtilizationSweep {
            edges: Vec::with_capacity(128),
            head: 0,
            last: 0,
            drivers: 0,
            dominant: 0,
            labels: [0; LABELS],
            window: (start, end),
            totals: UtilizationTotals::default(),
        }
    }

    /// Add a piece `[from, to)`. Empty pieces are ignored.
    pub fn add(&mut self, piece: Piece, from: u64, to: u64) {
        if to <= from {
            return;
        }
        let kind = piece as u8;
        self.insert(from, kind << 1);
        self.insert(to, (kind << 1) | 1);
    }

    #[inline(always)]
    fn insert(&mut self, t: u64, code: u8) {
        if self.head >= 64 && self.head * 2 >= self.edges.len() {
            // Drop the consumed front now and then (amortised O(1)).
            self.edges.drain(..self.head);
            self.head = 0;
        }
        let mut at = self.edges.len();
        while at > self.head && self.edges[at - 1].0 > t {
            at -= 1;
        }
        if at == self.edges.len() {
            self.edges.push((t, code));
        } else {
            self.edges.insert(at, (t, code));
        }
    }

    /// Classify all time before `frontier`. The caller promises that no piece
    /// added later starts before `frontier`.
    pub fn advance(&mut self, frontier: u64) {
        while let Some(&(t, code)) = self.edges.get(self.head) {
            if t > frontier {
                break;
            }
            self.head += 1;
            self.account(t);
            let kind = code >> 1;
            let end = code & 1 == 1;
            if kind == OCC {
                if end {
                    self.drivers -= 1;
                } else {
                    self.drivers += 1;
                }
            } else if kind == DOM {
                if end {
                    self.dominant -= 1;
                } else {
                    self.dominant += 1;
                }
            } else {
                let slot = &mut self.labels[(kind - 1) as usize];
                if end {
                    *slot -= 1;
                } else {
                    *slot += 1;
                }
            }
        }
        self.account(frontier);
    }

    /// The sweep's state and totals, for a closed-form stretch.
    pub fn visit(&mut self, v: &mut dyn crate::periodic::Visit) {
        v.same((self.edges.len() - self.head) as u64);
        for e in &mut self.edges[self.head..] {
            v.time(&mut e.0);
            v.same(u64::from(e.1));
        }
        v.time(&mut self.last);
        v.same(u64::from(self.drivers));
        v.same(u64::from(self.dominant));
        for l in self.labels {
            v.same(u64::from(l));
        }
        let t = &mut self.totals;
        for x in [&mut t.payload, &mut t.overhead, &mut t.gaps, &mut t.idle, &mut t.wasted] {
            v.tally(x);
        }
    }

    /// Move the end of the window earlier (never before its start).
    pub fn end_window_at(&mut self, end: u64) {
        self.window.1 = self.window.1.min(end).max(self.window.0);
    }

    /// Classify everything up to the end of the window.
    pub fn finish(&mut self) -> UtilizationTotals {
        // Edges beyond the window do not matter once the window is classified.
        self.advance(self.window.1);
        self.totals
    }

    fn account(&mut self, t: u64) {
        if t <= self.last {
            return;
        }
        let (w0, w1) = self.window;
        let from = self.last.max(w0);
        let to = t.min(w1);
        self.last = t;
        if to <= from {
            return;
        }
        let span = to - from;
        let slot = if self.drivers == 0 && self.dominant == 0 {
            &mut self.totals.idle
        } else if self.drivers == 0 {
            &mut self.totals.overhead
        } else if self.drivers >= 2 || self.dominant > 0 || self.labels[2] > 0 {
            &mut self.totals.wasted
        } else if self.labels[1] > 0 {
            &mut self.totals.payload
        } else if self.labels[0] > 0 {
            &mut self.totals.overhead
        } else {
            &mut self.totals.gaps
        };
        *slot += span;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn single_driver_classes() {
        let mut u = UtilizationSweep::new(0, 100);
        u.add(Piece::Occupancy, 10, 40); // gap 10..15 and 35..40
        u.add(Piece::Overhead, 15, 20);
        u.add(Piece::Payload, 20, 35);
        let t = u.finish();
        assert_eq!(t, UtilizationTotals { payload: 15, overhead: 5, gaps: 10, idle: 70, wasted: 0 });
        assert_eq!(t.sum(), 100);
    }

    #[test]
    fn overlap_is_wasted_and_window_is_clipped() {
        let mut u = UtilizationSweep::new(20, 80);
        u.add(Piece::Occupancy, 10, 50);
        u.add(Piece::Payload, 12, 48);
        u.add(Piece::Occupancy, 45, 70);
        u.add(Piece::Wasted, 46, 66);
        u.advance(30);
        let t = u.finish();
        // 20..45 payload (25), 45..50 two drivers (5), 50..66 wasted frame (16),
        // 66..70 gap (4), 70..80 idle (10).
        assert_eq!(t, UtilizationTotals { payload: 25, overhead: 0, gaps: 4, idle: 10, wasted: 21 });
        assert_eq!(t.sum(), 60);
    }
}
