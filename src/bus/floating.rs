//! Floating-line windows: intervals at a receiver's position with no driver on the line.
//!
//! Occupancies are fed in order of their enable time. For each hazard receiver
//! (one whose thresholds leave a 0 V input undefined) the sweep keeps the time
//! until which the line at that position is known to be driven; a new
//! occupancy whose signal arrives after it opens a window. The caller passes
//! the earliest arrival, at each receiver, of any occupancy that is known but
//! not yet fed, so a later-enabled driver whose signal arrives first (only
//! possible when the two contend) still closes the window at the right time.
//!
//! ## Fast path
//! On a well-behaved bus one driver hands over to the next, and right after
//! driver p's occupancy every receiver i is driven until b_p + d(p,i): the
//! state is *dominated* by p and needs no per-receiver array. The window the
//! next driver k opens at receiver i is then g + u_i with g = a_k − b_p and
//! u_i = d(k,i) − d(p,i), so with the u_i of the pair (p, k) sorted once (and
//! their suffix sums), the count, total and longest window over all
//! receivers take one binary search instead of a pass over every receiver.
//! The result is exactly that of the per-receiver pass (integer arithmetic);
//! anything unusual (a bound from a later occupancy, clipping at the window
//! edges, a next driver that does not dominate) takes the per-receiver pass.
//!
//! ## Settling receivers
//! On a biased line, a receiver whose thresholds the idle voltage clears
//! still floats for a while after each release, until the line has relaxed
//! past its threshold (`line::settled`): its window is the gap, cut at that
//! settling time. Such receivers always take the per-receiver pass.

use rustc_hash::FxHashMap;

use crate::units::Picos;

/// Window statistics over all hazard receivers.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct FloatingTotals {
    pub windows: u64,
    /// Summed over receivers, so it can exceed the window many times over.
    pub total_ps: u128,
    pub longest_ps: u64,
}

/// The u_i = d(k,i) − d(p,i) over hazard receivers of one driver pair:
/// their range and sum (enough when the gap opens every window or none, the
/// usual case, in O(1)), and, built only when a gap splits them, the sorted
/// values with suffix sums.
#[derive(Debug)]
struct PairProfile {
    umin: i64,
    umax: i64,
    /// Σ u_i.
    sum: i64,
    /// Largest d(k,i) over hazard receivers.
    max_dk: u64,
    /// (sorted u_i, `suffix[j]` = Σ sorted[j..]), when needed.
    sorted: Option<(Vec<i64>, Vec<i64>)>,
}

/// Most pair profiles kept (bounds memory on very large buses).
const PROFILE_BUDGET_VALUES: usize = 1 << 21;

#[derive(Debug)]
pub struct FloatingSweep {
    /// Per node: how long a gap at it counts as floating (0: never, a
    /// failsafe receiver; `u64::MAX`: all of it; else a settling time).
    settle: Vec<u64>,
    hazard_ids: Vec<usize>,
    /// Every hazard receiver floats for the whole gap (the fast path's premise).
    whole_gaps: bool,
    /// Per node: until when its position is driven. Valid only when `dominant` is `None`.
    driven_until: Vec<u64>,
    /// `Some((p, b_p))` when every hazard receiver i is driven until exactly b_p + d(p,i).
    dominant: Option<(usize, u64)>,
    profiles: FxHashMap<u32, PairProfile>,
    profile_values: usize,
    fast_path: bool,
    window: (u64, u64),
    pub totals: FloatingTotals,
}

impl FloatingSweep {
    /// `settle[i]`: how long a gap at receiver i counts (see the field).
    pub fn new(settle: Vec<u64>, window: (Picos, Picos)) -> Self {
        let n = settle.len();
        FloatingSweep {
            hazard_ids: (0..n).filter(|&i| settle[i] > 0).collect(),
            whole_gaps: settle.iter().all(|&s| s == 0 || s == u64::MAX),
            settle,
            driven_until: vec![0; n],
            dominant: None,
            profiles: FxHashMap::default(),
            profile_values: 0,
            fast_path: true,
            window: (window.0 .0, window.1 .0),
            totals: FloatingTotals::default(),
        }
    }

    /// The sweep's state and totals, for a closed-form stretch (the pair
    /// profiles are a cache; the longest window does not change when a
    /// period repeats).
    pub fn visit(&mut self, v: &mut dyn crate::periodic::Visit) {
        match &mut self.dominant {
            Some((p, b)) => {
                v.same(1);
                v.same(*p as u64);
                v.time(b);
            }
            None => {
                v.same(0);
                for &i in &self.hazard_ids {
                    v.time(&mut self.driven_until[i]);
                }
            }
        }
        v.tally(&mut self.totals.windows);
        v.tally_wide(&mut self.totals.total_ps);
    }

    /// Turn the fast path off (for tests that compare the two paths).
    pub fn without_fast_path(mut self) -> Self {
        self.fast_path = false;
        self
    }

    /// Feed an occupancy as seen at receiver `node` only: it arrives at `from`
    /// and leaves at `to`; `next_arrival` bounds the window from above.
    pub fn feed(&mut self, node: usize, from: u64, to: u64, next_arrival: u64) {
        self.materialize(|_, _| unreachable!("no dominant state without delays"));
        let until = self.driven_until[node];
        if from > until {
            self.close(until, from.min(next_arrival).min(until.saturating_add(self.settle[node])));
        }
        if to > until {
            self.driven_until[node] = to;
        }
    }

    /// Feed driver `k`'s occupancy `[a, b)` to every hazard receiver.
    /// `delay(x, i)` is the wire delay from node x to node i; `next[i]`, when
    /// given, bounds each window from above (see the module docs).
    #[inline]
    pub fn feed_occupancy<D: Fn(usize, usize) -> u64>(
        &mut self,
        k: usize,
        a: u64,
        b: u64,
        delay: D,
        next: Option<&[u64]>,
    ) {
        if self.hazard_ids.is_empty() {
            return;
        }
        if self.fast_path && self.whole_gaps && next.is_none() && self.try_fast(k, a, b, &delay) {
            return;
        }
        self.materialize(&delay);
        let (w0, w1) = self.window;
        let (mut windows, mut total, mut longest) = (0u64, 0u128, self.totals.longest_ps);
        let mut dominates = true;
        // Branch-free: when the signal arrives before `until` the clipped
        // window is empty, because then to ≤ from ≤ until ≤ max(until, w0).
        let settle = &self.settle;
        let mut one = |i: usize, until: &mut u64| {
            let d = delay(k, i);
            let from = a + d;
            let to = match next {
                None => from,
                Some(n) => from.min(n[i]),
            }
            .min((*until).saturating_add(settle[i]));
            let len = to.min(w1).saturating_sub((*until).max(w0));
            windows += u64::from(len > 0);
            total += u128::from(len);
            longest = longest.max(len);
            dominates &= b + d >= *until;
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
        if dominates && next.is_none() {
            self.dominant = Some((k, b));
        }
    }

    /// The closed-form hand-over from the dominant driver p to k. Returns
    /// false (and changes nothing) when its preconditions do not hold.
    fn try_fast<D: Fn(usize, usize) -> u64>(&mut self, k: usize, a: u64, b: u64, delay: &D) -> bool {
        let Some((p, bp)) = self.dominant else {
            return false;
        };
        let (w0, w1) = self.window;
        // No clipping: every window starts at or after w0 and ends by w1.
        if bp < w0 {
            return false;
        }
        if p > 0xffff || k > 0xffff {
            return false;
        }
        let key = (p as u32) << 16 | k as u32;
        if !self.profiles.contains_key(&key) {
            let (mut umin, mut umax, mut sum, mut max_dk) = (i64::MAX, i64::MIN, 0i64, 0u64);
            for &i in &self.hazard_ids {
                let dk = delay(k, i);
                let u = dk as i64 - delay(p, i) as i64;
                (umin, umax, sum, max_dk) = (umin.min(u), umax.max(u), sum + u, max_dk.max(dk));
            }
            self.profiles.insert(key, PairProfile { umin, umax, sum, max_dk, sorted: None });
        }
        let prof = &self.profiles[&key];
        let (umin, umax) = (prof.umin, prof.umax);
        // k must dominate afterwards: b + d(k,i) ≥ b_p + d(p,i) for every i.
        if (b as i64 - bp as i64) < -umin {
            return false;
        }
        if a + prof.max_dk > w1 {
            return false;
        }
        let g = a as i64 - bp as i64;
        let n = self.hazard_ids.len();
        // Windows where g + u_i > 0 (a sum over receivers: in 128 bits).
        // Every receiver or none, in O(1); otherwise the sorted profile.
        let (count, above) = if g + umin > 0 {
            (n, prof.sum)
        } else if g + umax <= 0 {
            (0, 0)
        } else {
            if prof.sorted.is_none() {
                if self.profile_values + n > PROFILE_BUDGET_VALUES {
                    return false;
                }
                let mut sorted: Vec<i64> =
                    self.hazard_ids.iter().map(|&i| delay(k, i) as i64 - delay(p, i) as i64).collect();
                sorted.sort_unstable();
                let mut suffix = vec![0i64; sorted.len() + 1];
                for j in (0..sorted.len()).rev() {
                    suffix[j] = suffix[j + 1] + sorted[j];
                }
                self.profile_values += n;
                self.profiles.get_mut(&key).expect("inserted above").sorted = Some((sorted, suffix));
            }
            let (sorted, suffix) = self.profiles[&key].sorted.as_ref().expect("built above");
            let first = sorted.partition_point(|&u| u <= -g);
            (n - first, suffix[first])
        };
        if count > 0 {
            let total = count as i128 * i128::from(g) + i128::from(above);
            self.totals.windows += count as u64;
            self.totals.total_ps += total as u128;
            self.totals.longest_ps = self.totals.longest_ps.max((g + umax) as u64);
        }
        self.dominant = Some((k, b));
        true
    }

    /// The receivers that can read an undriven line as undefined (their indices, ascending).
    pub fn hazard_ids(&self) -> &[usize] {
        &self.hazard_ids
    }

    /// Write the implicit dominated state into the per-receiver array.
    fn materialize<D: Fn(usize, usize) -> u64>(&mut self, delay: D) {
        if let Some((p, bp)) = self.dominant.take() {
            for &i in &self.hazard_ids {
                self.driven_until[i] = bp + delay(p, i);
            }
        }
    }

    /// Move the end of the measured window earlier (never before its start).
    pub fn end_window_at(&mut self, end: u64) {
        self.window.1 = self.window.1.min(end).max(self.window.0);
    }

    /// Close every receiver's open window at the end of the run.
    pub fn finish<D: Fn(usize, usize) -> u64>(&mut self, end: u64, delay: D) {
        self.materialize(delay);
        for node in 0..self.settle.len() {
            if self.settle[node] > 0 && self.driven_until[node] < end {
                let from = self.driven_until[node];
                self.close(from, end.min(from.saturating_add(self.settle[node])));
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
        t.total_ps += u128::from(len);
        t.longest_ps = t.longest_ps.max(len);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn gaps_between_occupancies_are_windows() {
        let mut f = FloatingSweep::new(vec![u64::MAX, 0], (Picos(0), Picos(1000)));
        f.feed(0, 100, 300, u64::MAX);
        f.feed(0, 350, 600, u64::MAX);
        f.feed(0, 500, 900, u64::MAX); // overlaps: no window
        f.finish(1000, |_, _| 0);
        // 0..100, 300..350, 900..1000
        assert_eq!(f.totals, FloatingTotals { windows: 3, total_ps: 250, longest_ps: 100 });
    }

    #[test]
    fn a_settling_receiver_floats_only_until_the_line_has_settled() {
        // Settling time 30 ps: of the gaps 0..100, 300..350 and 900..1000 it
        // floats 0..30, 300..330 and 900..930.
        let mut f = FloatingSweep::new(vec![30], (Picos(0), Picos(1000)));
        f.feed(0, 100, 300, u64::MAX);
        f.feed(0, 350, 600, u64::MAX);
        f.feed(0, 500, 900, u64::MAX);
        f.finish(1000, |_, _| 0);
        assert_eq!(f.totals, FloatingTotals { windows: 3, total_ps: 90, longest_ps: 30 });
    }

    #[test]
    fn window_bounded_by_earlier_arrival() {
        let mut f = FloatingSweep::new(vec![u64::MAX], (Picos(0), Picos(1000)));
        f.feed(0, 0, 100, u64::MAX);
        // Next fed occupancy arrives at 400, but another known one arrives at 250.
        f.feed(0, 400, 500, 250);
        assert_eq!(f.totals.total_ps, 150);
    }

    proptest! {
        // The closed-form hand-over gives exactly the per-receiver result.
        #[test]
        fn fast_path_equals_per_receiver_pass(
            positions in proptest::collection::vec(0u64..3000, 2..8),
            hazard in proptest::collection::vec(prop::bool::ANY, 8),
            steps in proptest::collection::vec((0usize..8, 0u64..400, 1u64..2000), 1..40),
            w0 in 0u64..2000,
        ) {
            let n = positions.len();
            let delay = |x: usize, i: usize| positions[x].abs_diff(positions[i]);
            let window = (Picos(w0), Picos(60_000));
            let hz: Vec<u64> = hazard[..n].iter().map(|&h| if h { u64::MAX } else { 0 }).collect();
            let mut fast = FloatingSweep::new(hz.clone(), window);
            let mut slow = FloatingSweep::new(hz, window).without_fast_path();
            let mut t = 0u64;
            for (node, gap, len) in steps {
                let node = node % n;
                let a = t + gap;
                let b = a + len;
                fast.feed_occupancy(node, a, b, delay, None);
                slow.feed_occupancy(node, a, b, delay, None);
                t = a + len / 2; // sometimes overlapping, sometimes not
            }
            fast.finish(60_000, delay);
            slow.finish(60_000, delay);
            prop_assert_eq!(fast.totals, slow.totals);
        }
    }
}
