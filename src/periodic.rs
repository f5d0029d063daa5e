//! Reading and moving a run's state by whole periods, for closed-form
//! stretches (`crate::engine::shortcut` explains the method). Every stateful
//! part of a run lists its fields through [`Visit`] once; one visitor takes a
//! fingerprint of them, another moves them on, so the two cannot disagree.

/// What a state or tally field is to a stretch.
pub trait Visit {
    /// An instant (ps): relative to now in the fingerprint, moved by k·P.
    fn time(&mut self, t: &mut u64);
    /// An instant used only as a lower bound on instants at or after now
    /// (a driver's earliest next enable): one at or before now is as good
    /// as "never", and stays where it is.
    fn bound(&mut self, t: &mut u64);
    /// A bus occupancy id: relative to the next id, moved by the ids of k periods.
    fn id(&mut self, id: &mut u64);
    /// A value that must be equal at both period starts, and stays.
    fn same(&mut self, x: u64);
    /// A count or sum that grows: it grows k times its growth over the period.
    fn tally(&mut self, x: &mut u64);
    /// A wide tally.
    fn tally_wide(&mut self, x: &mut u128);
    /// The state cannot be taken at this point: no shortcut.
    fn refuse(&mut self);
}

/// Convenience forms over [`Visit`].
pub trait VisitExt: Visit {
    fn picos(&mut self, t: &mut crate::units::Picos) {
        self.time(&mut t.0);
    }
    fn opt_picos(&mut self, t: &mut Option<crate::units::Picos>) {
        self.same(u64::from(t.is_some()));
        if let Some(t) = t {
            self.time(&mut t.0);
        }
    }
    fn flag(&mut self, b: bool) {
        self.same(u64::from(b));
    }
}

impl<V: Visit + ?Sized> VisitExt for V {}

/// "Never" instants and ids, which do not move.
fn is_never(x: u64) -> bool {
    x == 0 || x == u64::MAX
}

/// The fingerprint and tallies at one period start.
#[derive(Debug, Default)]
pub struct Record {
    pub now: u64,
    pub next_id: u64,
    pub words: Vec<u64>,
    pub tallies: Vec<u128>,
    pub refused: bool,
}

impl Record {
    pub fn clear(&mut self, now: u64, next_id: u64) {
        self.now = now;
        self.next_id = next_id;
        self.words.clear();
        self.tallies.clear();
        self.refused = false;
    }
}

const NEVER: u64 = 0xA5A5_5A5A_0F0F_F0F0;

impl Visit for Record {
    fn time(&mut self, t: &mut u64) {
        self.words.push(if is_never(*t) { NEVER ^ *t } else { t.wrapping_sub(self.now) });
        // Keep "never" apart from a relative time of the same bits.
        self.words.push(u64::from(is_never(*t)));
    }
    fn bound(&mut self, t: &mut u64) {
        if *t <= self.now {
            self.words.push(NEVER);
            self.words.push(1);
        } else {
            self.time(t);
        }
    }
    fn id(&mut self, id: &mut u64) {
        self.words.push(if *id == u64::MAX { NEVER } else { id.wrapping_sub(self.next_id) });
        self.words.push(u64::from(*id == u64::MAX));
    }
    fn same(&mut self, x: u64) {
        self.words.push(x);
    }
    fn tally(&mut self, x: &mut u64) {
        self.tallies.push(u128::from(*x));
    }
    fn tally_wide(&mut self, x: &mut u128) {
        self.tallies.push(*x);
    }
    fn refuse(&mut self) {
        self.refused = true;
    }
}

/// Moves a state on by k periods.
pub struct Advance<'a> {
    /// The clock before the move: bounds at or before it stay.
    pub now: u64,
    /// Added to every instant.
    pub dt: u64,
    /// Added to every id.
    pub did: u64,
    /// Periods.
    pub k: u128,
    /// Each tally's growth over one period, in visiting order.
    pub growth: &'a [u128],
    pub at: usize,
}

impl Advance<'_> {
    fn next_growth(&mut self) -> u128 {
        let g = self.growth[self.at];
        self.at += 1;
        g * self.k
    }
}

impl Visit for Advance<'_> {
    fn time(&mut self, t: &mut u64) {
        if !is_never(*t) {
            *t += self.dt;
        }
    }
    fn bound(&mut self, t: &mut u64) {
        if *t > self.now {
            self.time(t);
        }
    }
    fn id(&mut self, id: &mut u64) {
        if *id != u64::MAX {
            *id += self.did;
        }
    }
    fn same(&mut self, _: u64) {}
    fn tally(&mut self, x: &mut u64) {
        let g = self.next_growth();
        *x += u64::try_from(g).expect("a tally grown by a stretch is one the event path reaches");
    }
    fn tally_wide(&mut self, x: &mut u128) {
        *x += self.next_growth();
    }
    fn refuse(&mut self) {}
}

/// A state a stretch can read and move (a scheme's own fields).
pub trait Periodic {
    fn visit(&mut self, v: &mut dyn Visit);
}
