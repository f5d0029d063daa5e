//! The physics every access scheme shares: who occupies the line when,
//! contention between drivers, corruption at receivers, carrier sense and
//! floating-line windows.
//!
//! ## Occupancy
//! A driver occupies the line at its own position from the instant its enable
//! is asserted (`a`) until `disable_time` after the enable is released (`b`).
//! A point at wire delay d from the driver sees the same interval shifted by d.
//!
//! ## Bookkeeping
//! Occupancies live in a log sorted by `a`. An occupancy is *processed*
//! (contention against earlier ones, floating windows, utilization edges) once
//! its end is final, its frames are resolved and `now ≥ a + max wire delay`:
//! after that no new occupancy can arrive anywhere before this one's signal.
//! Processed entries stay only while they can still overlap something, so the
//! log holds a handful of entries whatever the run length.

pub mod contention;
pub mod floating;
mod log;
pub mod trace;

use crate::line::LineModel;
use crate::spec::{NodeId, Spec};
use crate::stats::slack::HandoverStats;
use crate::stats::utilization::{Piece, UtilizationSweep};
use crate::units::Picos;
use contention::{worst_overlap, Span};
use floating::FloatingSweep;
use trace::{BusEvent, BusEventKind, Trace};

/// How many contention events the report lists in full.
pub const CONTENTION_LISTED: usize = 10;

/// One driver occupancy.
#[derive(Clone, Copy, Debug)]
pub struct Occupancy {
    pub id: u64,
    pub node: NodeId,
    /// Enable asserted.
    pub a: u64,
    /// End of the last bit (the release for a dominant drive).
    pub last_bit: u64,
    /// Enable released (`last_bit + release_after_stop`).
    pub release: u64,
    /// Output high-impedance: `release + disable_time`.
    pub b: u64,
    /// Frames not yet delivered.
    pub pending: u32,
    /// A dominant-state drive of wired-AND signalling (bitwise arbitration):
    /// two dominant drives at once are the mechanism, not a fault.
    pub dominant: bool,
}

/// A contention event: two occupancies overlapping somewhere on the line.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ContentionEvent {
    pub at: Picos,
    pub first: NodeId,
    pub second: NodeId,
    pub position_m: f64,
    pub overlap: Picos,
}

/// Contention in the measured window: events that begin inside it, each
/// overlap counted up to the window's end.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ContentionTotals {
    pub events: u64,
    /// Summed over events, so it can exceed the window many times over.
    pub overlap_total_ps: u128,
    pub overlap_max_ps: u64,
    pub listed: Vec<ContentionEvent>,
}

#[derive(Debug)]
pub struct Bus {
    log: log::Log,
    processed: usize,
    next_id: u64,
    positions: Vec<f64>,
    receiver_delay: Vec<u64>,
    max_rx_delay: u64,
    max_delay: u64,
    window: (u64, u64),
    pub util: UtilizationSweep,
    pub floating: FloatingSweep,
    pub contention: ContentionTotals,
    /// Reused per-receiver buffer (no allocation per occupancy).
    scratch: Vec<u64>,
    /// Every hand-over of the line from one driver to another.
    pub handover: HandoverStats,
    /// The latest processed non-dominant occupancy (id, node, output off):
    /// the one a hand-over starts from.
    prev: Option<(u64, NodeId, u64)>,
    /// Keep processed occupancies this much longer (the silence rule looks back at them).
    keep: u64,
    /// Hand-overs recorded since a closed-form stretch's mark (from, to,
    /// slack, contended), while one is marked (`journal_on`).
    journal: Vec<(u32, u32, i64, bool)>,
    journal_on: bool,
}

impl Bus {
    pub fn new(spec: &Spec, line: &LineModel) -> Self {
        let window = (spec.warmup.0, spec.duration.0);
        let receiver_delay: Vec<u64> = spec.nodes.iter().map(|n| n.transceiver.receiver_delay.0).collect();
        // A receiver floats through every gap when the undriven line (biased or
        // not) reads undefined there, and on a biased line until it has settled.
        let hazard = (0..spec.nodes.len())
            .map(|i| match (line.idle_state(spec, i), line.settled.settle[i]) {
                (crate::line::IdleState::Undefined, _) => u64::MAX,
                (_, Some(t)) => t.0,
                (_, None) => 0,
            })
            .collect();
        Bus {
            log: log::Log::with_capacity(128),
            processed: 0,
            next_id: 0,
            positions: spec.nodes.iter().map(|n| n.position_m).collect(),
            max_rx_delay: receiver_delay.iter().copied().max().unwrap_or(0),
            receiver_delay,
            max_delay: line.max_node_delay.0,
            window,
            util: UtilizationSweep::new(window.0, window.1),
            floating: FloatingSweep::new(hazard, (spec.warmup, spec.duration)),
            contention: ContentionTotals::default(),
            scratch: Vec::with_capacity(spec.nodes.len()),
            handover: HandoverStats::new(spec.nodes.len(), spec.duration.0),
            prev: None,
            keep: spec.frame.silence.map_or(0, |t| t.0),
            journal: Vec::new(),
            journal_on: false,
        }
    }

    /// Record a new occupancy. `a` must not lie before any processed entry's
    /// processing time (the engine guarantees `a ≥ now`).
    pub fn insert(&mut self, occ: Occupancy) {
        let a = occ.a;
        let mut at = self.log.len();
        while at > self.processed && self.log[at - 1].a > a {
            at -= 1;
        }
        self.log.insert(at, occ);
    }

    /// A fresh occupancy id, for frames created before their occupancy is inserted.
    pub fn reserve_id(&mut self) -> u64 {
        self.next_id += 1;
        self.next_id - 1
    }

    /// The id the next occupancy will get.
    pub fn next_id(&self) -> u64 {
        self.next_id
    }

    /// Start journalling hand-overs afresh (`on`), or stop (closed-form stretches).
    pub fn journal_handovers(&mut self, on: bool) {
        self.journal.clear();
        self.journal_on = on;
    }

    /// Record every journalled hand-over `k` more times.
    pub fn replay_handovers(&mut self, k: u64) {
        for &(from, to, slack, contended) in &self.journal {
            self.handover.record_n(from as usize, to as usize, slack, contended, k);
        }
    }

    /// The bus's state and tallies, for a closed-form stretch
    /// (`crate::engine::shortcut`). Hand-overs are journalled instead.
    pub fn visit(&mut self, v: &mut dyn crate::periodic::Visit) {
        use crate::periodic::VisitExt;
        v.same(self.log.len() as u64);
        v.same(self.processed as u64);
        for o in self.log.iter_mut() {
            v.id(&mut o.id);
            v.same(o.node as u64);
            v.time(&mut o.a);
            v.time(&mut o.last_bit);
            v.time(&mut o.release);
            v.time(&mut o.b);
            v.same(u64::from(o.pending));
            v.flag(o.dominant);
        }
        v.id(&mut self.next_id);
        v.flag(self.prev.is_some());
        if let Some((id, node, b)) = &mut self.prev {
            v.id(id);
            v.same(*node as u64);
            v.time(b);
        }
        // Contention in the period would repeat with its listed events: none may come.
        v.same(self.contention.events);
        self.util.visit(v);
        self.floating.visit(v);
    }

    /// A frame of occupancy `id` has been delivered.
    pub fn frame_resolved(&mut self, id: u64) {
        if let Some(o) = self.log.iter_mut().rev().find(|o| o.id == id) {
            o.pending = o.pending.saturating_sub(1);
        }
    }

    /// Shorten an occupancy whose driver released early (the new release time
    /// must not lie in the past).
    pub fn cut_short(&mut self, id: u64, release: u64, b: u64) {
        if let Some(o) = self.log.iter_mut().rev().find(|o| o.id == id) {
            // The line carries bits (jam, or the dominant level) up to the release.
            o.last_bit = release;
            o.release = release;
            o.b = b;
        }
    }

    /// Does another driver's occupancy overlap the data bits `[s, e)` of a
    /// frame from `src` at the receiver of `dest`?
    pub fn is_corrupted(&self, line: &LineModel, src: NodeId, dest: NodeId, s: u64, e: u64) -> bool {
        let shift = line.delay_ps(src, dest);
        let (s, e) = (s + shift, e + shift);
        self.log.iter().any(|o| {
            if o.node == src {
                return false;
            }
            let d = line.delay_ps(o.node, dest);
            o.a + d < e && o.b + d > s
        })
    }

    /// The latest end of a frame-carrying occupancy's last bit, as it
    /// reaches `r`, at or before `t` (other than occupancy `exclude`): the
    /// previous frame `r` heard, for the silence rule.
    pub fn last_frame_end_at(&self, line: &LineModel, r: NodeId, t: u64, exclude: u64) -> Option<u64> {
        self.log
            .iter()
            .filter(|o| !o.dominant && o.id != exclude)
            .map(|o| o.last_bit + line.delay_ps(o.node, r))
            .filter(|&x| x <= t)
            .max()
    }

    /// If the receiver of `node` shows another driver at `t`, until when the
    /// activity it shows at `t` lasts (signals that reach it later are not
    /// known to it yet).
    pub fn sensed_until(&self, line: &LineModel, node: NodeId, t: u64) -> Option<u64> {
        let rx = self.receiver_delay[node];
        self.log
            .iter()
            .filter(|o| o.node != node)
            .filter_map(|o| {
                let lag = line.delay_ps(o.node, node) + rx;
                (o.a + lag <= t && t < o.b + lag).then_some(o.b + lag)
            })
            .max()
    }

    /// Every occupancy the bus still holds (recent and scheduled ones).
    pub fn occupancies(&self) -> impl Iterator<Item = &Occupancy> {
        self.log.iter()
    }

    /// Process every occupancy that is ready (all of them when `finish`).
    pub fn process(&mut self, line: &LineModel, now: u64, finish: bool, trace: &mut Trace) {
        while self.processed < self.log.len() {
            let k = self.log[self.processed];
            let ready = k.b <= now && k.pending == 0 && k.a + self.max_delay <= now;
            if !ready && !finish {
                break;
            }
            self.process_one(line, self.processed, trace);
            self.processed += 1;
        }
        let frontier = self.frontier(now);
        self.util.advance(frontier);
        // Drop processed entries that can no longer overlap, corrupt or be sensed.
        let horizon = frontier.saturating_sub(self.max_delay + self.max_rx_delay);
        while self.processed > 0 && self.log[0].b.max(self.log[0].last_bit) + self.keep <= horizon {
            self.log.pop_front();
            self.processed -= 1;
        }
    }

    /// No occupancy enabled before this instant is still unprocessed.
    pub fn frontier(&self, now: u64) -> u64 {
        match self.log.get(self.processed) {
            Some(o) => o.a.min(now),
            None => now,
        }
    }

    fn process_one(&mut self, line: &LineModel, idx: usize, trace: &mut Trace) {
        let k = self.log[idx];
        // The hand-over from the previous driver, if it was another one.
        let from = self.prev.filter(|&(_, node, _)| !k.dominant && node != k.node);
        let mut contended = false;
        // Contention against every earlier entry that can still overlap.
        for j in &self.log[..idx] {
            if j.b + self.max_delay <= k.a || j.node == k.node || (j.dominant && k.dominant) {
                continue;
            }
            let sj = Span { from: j.a, to: j.b, position_m: self.positions[j.node] };
            let sk = Span { from: k.a, to: k.b, position_m: self.positions[k.node] };
            if let Some(o) = worst_overlap(sj, sk, line.delay_ps(j.node, k.node)) {
                contended |= from.is_some_and(|(id, _, _)| id == j.id);
                if o.start_ps >= self.window.0 && o.start_ps < self.window.1 {
                    // The part of the overlap inside the measured window.
                    let overlap = o.overlap_ps.min(self.window.1 - o.start_ps);
                    let c = &mut self.contention;
                    c.events += 1;
                    c.overlap_total_ps += u128::from(overlap);
                    c.overlap_max_ps = c.overlap_max_ps.max(overlap);
                    if c.listed.len() < CONTENTION_LISTED {
                        c.listed.push(ContentionEvent {
                            at: Picos(o.start_ps),
                            first: j.node,
                            second: k.node,
                            position_m: o.position_m,
                            overlap: Picos(overlap),
                        });
                    }
                }
                trace.push(BusEvent {
                    t: o.start_ps,
                    node: j.node,
                    kind: BusEventKind::Contention {
                        other: k.node,
                        position_m: o.position_m,
                        overlap_ps: o.overlap_ps,
                    },
                });
            }
        }
        // Floating windows at every hazard receiver. Later entries already in
        // the log can reach a receiver before this one (only when they contend
        // with it); their earliest arrival bounds the window.
        // The log is sorted by enable time, so if the next entry enables at
        // least the largest wire delay after this one, no later entry can
        // reach any receiver first and no bound is needed.
        // Without hazard receivers there are no windows to bound; with a few,
        // only their bounds are formed (the sweep reads no others).
        let needs_bound =
            !self.floating.hazard_ids().is_empty() && self.log.get(idx + 1).is_some_and(|m| m.a < k.a + self.max_delay);
        let next = if !needs_bound {
            None
        } else {
            self.scratch.clear();
            self.scratch.resize(self.positions.len(), u64::MAX);
            let hazards = self.floating.hazard_ids();
            for m in &self.log[idx + 1..] {
                for &i in hazards {
                    self.scratch[i] = self.scratch[i].min(m.a + line.delay_ps(m.node, i));
                }
            }
            Some(self.scratch.as_slice())
        };
        self.floating.feed_occupancy(k.node, k.a, k.b, |x, i| line.delay_ps(x, i), next);
        if let Some((_, node, b)) = from {
            if k.a >= self.window.0 && k.a < self.window.1 {
                let slack = i128::from(k.a) - i128::from(b) - i128::from(line.delay_ps(node, k.node));
                // Times are below 2^60 ps, so a difference fits i64. An
                // overlap with the previous driver was found above, if there
                // is one: an entry dropped from the log can no longer overlap.
                self.handover.record(node, k.node, slack as i64, contended);
                if self.journal_on {
                    self.journal.push((node as u32, k.node as u32, slack as i64, contended));
                }
            }
        }
        if !k.dominant {
            self.prev = Some((k.id, k.node, k.b));
        }
        self.util.add(if k.dominant { Piece::Dominant } else { Piece::Occupancy }, k.a, k.b);
        trace.push(BusEvent { t: k.a, node: k.node, kind: BusEventKind::DriverEnable { dominant: k.dominant } });
        trace.push(BusEvent { t: k.release, node: k.node, kind: BusEventKind::DriverRelease });
        trace.push(BusEvent { t: k.b, node: k.node, kind: BusEventKind::DriverOff });
    }

    /// The measured window ends earlier than planned (a co-simulation cut
    /// short): nothing after `end` is counted.
    pub fn end_window_at(&mut self, end: u64) {
        self.window.1 = self.window.1.min(end).max(self.window.0);
        self.util.end_window_at(self.window.1);
        self.floating.end_window_at(self.window.1);
    }

    /// Close the run: process everything (as of `now`, which may lie past
    /// the end when in-flight frames were followed) and end open floating
    /// windows at `end`.
    pub fn finish(&mut self, line: &LineModel, now: u64, end: u64, trace: &mut Trace) {
        self.process(line, now, true, trace);
        self.floating.finish(end, |x, i| line.delay_ps(x, i));
        self.util.finish();
    }
}
