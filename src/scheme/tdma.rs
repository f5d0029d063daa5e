//! Time-division multiple access with a beacon.
//!
//! The timekeeper opens every cycle: after a guard it sends a beacon to all
//! nodes. Each node resynchronises on the instant its receiver output shows
//! the end of the beacon, optionally corrected for its known wire and
//! receiver delay (`compensate`), and counts its slots from there with its
//! own clock, which runs fast or slow by its drift. Slot k spans local
//! offsets [O_k, O_k + L_k) after the beacon's end; its owner asserts its
//! enable at O_k + guard and sends the queued messages that fit before the
//! slot ends (a message that does not fit waits for the next cycle). Bit
//! timing is nominal; only slot timing drifts.
//!
//! The hand-over from slot k (owner P) to slot k+1 (owner R) is safe when,
//! in true time, P's disable tail has passed R's position before R enables:
//!
//! ```text
//! guard/(1+ε_R) ≥ disable_P + d(P,R) + O_(k+1)·(1/(1+ε_P) − 1/(1+ε_R))   (+ uncompensated lag difference)
//! ```
//!
//! i.e. guard ≥ disable time + wire delay between consecutive owners + the
//! clock error accumulated since the beacon (at most about cycle × 2·ppm).
//!
//! **Holdover** (`holdover = h`): a node that has had no beacon a guard
//! after it expected one (corrupted, or the timekeeper is down) takes the
//! expected instant, on its own clock, as the beacon's end and keeps its
//! slots, for h beacon periods in a row; then it stops sending until a beacon
//! comes. Clock drift accumulates meanwhile, and where it exceeds the guard
//! the hand-overs contend. A timekeeper that is down sends no beacon; it
//! resumes at its next beacon time once back. A node that is down sends in
//! no slot.

use rand::Rng;
use tracing::debug;

use super::{AccessScheme, SchemeReport, SchemeValue};
use crate::engine::shortcut::Shortcuts;
use crate::engine::{Dest, FrameKind, FrameOut, Reception, World};
use crate::periodic::{Periodic, Visit, VisitExt};
use crate::spec::{Drift, NodeId, TdmaSpec};
use crate::units::Picos;

const BEACON: u64 = 1;
const SLOT: u64 = 2;
/// A guard after a node's expected beacon: no beacon came, hold over.
const EXPECT: u64 = 3;

/// Timer tag: the node's resync generation (low 32 bits), an index, a kind.
fn tag(generation: u64, index: u64, kind: u64) -> u64 {
    ((generation & 0xffff_ffff) << 32) | (index << 8) | kind
}

#[derive(Debug)]
pub struct Tdma {
    spec: TdmaSpec,
    /// Clock rate error of each node (fraction, not ppm).
    eps: Vec<f64>,
    /// Local offset of each slot's start after the beacon's end.
    offset: Vec<Picos>,
    /// True time at which each slot ends, as its owner computed it this cycle.
    slot_end: Vec<Picos>,
    /// Release of the latest beacon (true time).
    beacon_release: Picos,
    cycle_local: Picos,
    beacons: u64,
    missed: u64,
    used: u64,
    overruns: u64,
    /// Per node: generation of its slot schedule (bumped at every resync).
    generation: Vec<u64>,
    /// Per node: the beacon end its current schedule counts from.
    reference: Vec<Picos>,
    /// Per node: beacon periods held over in a row.
    held_over: Vec<u32>,
    free_running: u64,
    expired: u64,
    /// Whole cycles done in closed form.
    shortcuts: Shortcuts,
}

impl Tdma {
    pub fn new(spec: TdmaSpec) -> Self {
        let mut offset = Vec::with_capacity(spec.slots.len());
        let mut o = Picos::ZERO;
        for s in &spec.slots {
            offset.push(o);
            o += s.length;
        }
        let n = spec.slots.len();
        Tdma {
            eps: vec![0.0; spec.drift.len()],
            slot_end: vec![Picos::ZERO; n],
            offset,
            spec,
            beacon_release: Picos::ZERO,
            cycle_local: Picos::ZERO,
            beacons: 0,
            missed: 0,
            used: 0,
            overruns: 0,
            generation: Vec::new(),
            reference: Vec::new(),
            held_over: Vec::new(),
            free_running: 0,
            expired: 0,
            shortcuts: Shortcuts::default(),
        }
    }

    /// True duration of `local` time on `node`'s clock.
    fn true_span(&self, node: NodeId, local: Picos) -> Picos {
        Picos((local.0 as f64 / (1.0 + self.eps[node])).round() as u64)
    }

    fn schedule_beacon(&self, w: &mut World, cycle: u64) {
        let tk = self.spec.timekeeper;
        let local = Picos(cycle * self.cycle_local.0) + self.spec.guard;
        let at = self.true_span(tk, local).max(w.now());
        w.set_timer(tk, at, (cycle << 8) | BEACON);
    }

    /// `node` takes `t_ref` as the end of the beacon: arm its slots (and,
    /// with holdover, a check that the next beacon comes).
    fn resync(&mut self, w: &mut World, node: NodeId, t_ref: Picos) {
        self.generation[node] += 1;
        self.reference[node] = t_ref;
        let g = self.generation[node];
        for k in 0..self.spec.slots.len() {
            if self.spec.slots[k].owner != node {
                continue;
            }
            let start = t_ref + self.true_span(node, self.offset[k] + self.spec.guard);
            self.slot_end[k] = t_ref + self.true_span(node, self.offset[k] + self.spec.slots[k].length);
            w.set_timer(node, start.max(w.now()), tag(g, k as u64, SLOT));
        }
        if self.spec.holdover > 0 && node != self.spec.timekeeper {
            let expect = t_ref + self.true_span(node, self.cycle_local + self.spec.guard);
            w.set_timer(node, expect.max(w.now()), tag(g, 0, EXPECT));
        }
    }

    /// No beacon came by a guard after `node` expected it: hold over on its
    /// own clock, or stop after `holdover` periods.
    fn no_beacon(&mut self, w: &mut World, node: NodeId) {
        if w.is_down(node) {
            return; // it waits for a beacon once back
        }
        let counted = w.in_window(w.now());
        if self.held_over[node] >= self.spec.holdover {
            if counted {
                self.expired += 1;
            }
            debug!(t_ps = w.now().0, node = %w.spec().nodes[node].name, "holdover over: silent until a beacon");
            return;
        }
        self.held_over[node] += 1;
        if counted {
            self.free_running += 1;
        }
        let t_ref = self.reference[node] + self.true_span(node, self.cycle_local);
        self.resync(w, node, t_ref);
    }

    fn run_slot(&mut self, w: &mut World, node: NodeId, k: usize) {
        if w.is_down(node) {
            return;
        }
        let end = self.slot_end[k];
        let now = w.earliest_enable(node);
        let frame = w.spec().frame.clone();
        let overhead = frame.overhead_bits;
        let mut cursor = now + w.enable_lead(node);
        let mut sent = 0;
        while w.queue_len(node) > 0 {
            let msg = w.pop_message(node).expect("queue checked");
            let f = FrameOut::data(msg, overhead);
            let gap = if sent > 0 { frame.interframe_gap } else { Picos::ZERO };
            // A frame goes out only if its longest duration fits the slot.
            let f_end = cursor + gap + frame.wire_max(f.data_bits);
            if f_end > end {
                w.push_front(node, msg);
                break;
            }
            if sent == 0 {
                w.begin_tx(node, now);
            }
            w.count_access_attempt();
            w.add_frame(f);
            cursor = f_end;
            sent += 1;
        }
        if sent > 0 {
            let tx = w.finish_tx();
            // The cycle the slot belongs to in the timekeeper's schedule (a
            // later one than the latest beacon's while nodes hold over).
            let cycles = (now - self.beacon_release.min(now)).0 / self.cycle_local.0.max(1);
            let cycle_start = self.beacon_release + Picos(cycles * self.cycle_local.0);
            let nominal_end = cycle_start + self.offset[k] + self.spec.slots[k].length;
            if w.in_window(now) {
                self.used += 1;
                if tx.release > nominal_end {
                    self.overruns += 1;
                }
            }
            debug!(t_ps = now.0, node = %w.spec().nodes[node].name, slot = k, frames = sent, "slot");
        }
    }
}

impl Periodic for Tdma {
    /// Every field, for closed-form cycles (`engine::shortcut`); the
    /// timekeeper's clock is exact (see the beacon timer).
    fn visit(&mut self, v: &mut dyn Visit) {
        // Beacons come at whole cycles: a period of another length would
        // not stay on the timekeeper's schedule.
        v.same(self.cycle_local.0);
        v.picos(&mut self.beacon_release);
        for t in self.slot_end.iter_mut().chain(self.reference.iter_mut()) {
            v.picos(t);
        }
        for &h in &self.held_over {
            v.same(u64::from(h));
        }
        for g in &mut self.generation {
            v.tally(g);
        }
        for x in [
            &mut self.beacons,
            &mut self.missed,
            &mut self.used,
            &mut self.overruns,
            &mut self.free_running,
            &mut self.expired,
        ] {
            v.tally(x);
        }
    }
}

impl AccessScheme for Tdma {
    fn name(&self) -> &'static str {
        "tdma"
    }

    fn default_destination(&self, source: NodeId) -> NodeId {
        if source == self.spec.timekeeper {
            super::first_other_node(source)
        } else {
            self.spec.timekeeper
        }
    }

    fn start(&mut self, w: &mut World) {
        for node in 0..self.eps.len() {
            self.eps[node] = match self.spec.drift[node] {
                Drift::Fixed(ppm) => ppm * 1e-6,
                Drift::Within(ppm) => w.rng(node).random_range(-ppm..=ppm) * 1e-6,
            };
        }
        let tk = self.spec.timekeeper;
        self.cycle_local = self.spec.cycle(&w.spec().frame, w.spec().nodes[tk].transceiver.enable_time);
        let n = self.eps.len();
        self.generation = vec![0; n];
        self.reference = vec![Picos::ZERO; n];
        self.held_over = vec![0; n];
        self.schedule_beacon(w, 0);
    }

    fn on_timer(&mut self, w: &mut World, node: NodeId, tag: u64) {
        let kind = tag & 0xff;
        if kind != BEACON && tag >> 32 != self.generation[node] & 0xffff_ffff {
            return; // a schedule replaced by a later resync
        }
        let n = (tag >> 8) & 0xff_ffff;
        match kind {
            BEACON if w.is_down(node) => {
                // A down timekeeper sends nothing; it keeps its cycle count.
                self.schedule_beacon(w, (tag >> 8) + 1);
            }
            BEACON => {
                let mut n = tag >> 8;
                // A cycle begins on time on an exact clock: the cycles that
                // repeat the last one may be done in closed form.
                if self.eps[node] == 0.0 && w.now().0 == n * self.cycle_local.0 + self.spec.guard.0 {
                    let mut shortcuts = std::mem::take(&mut self.shortcuts);
                    let cycle = self.cycle_local.0;
                    if let Some(s) = shortcuts.at_period_start(w, self, Some(cycle)) {
                        n += s.periods;
                    }
                    self.shortcuts = shortcuts;
                }
                let beacon = FrameOut::control(FrameKind::Beacon, Dest::All, self.spec.beacon_bits);
                let tx = w.transmit(node, w.now(), &[beacon]);
                self.beacon_release = tx.last_bit;
                if w.in_window(w.now()) {
                    self.beacons += 1;
                }
                // The timekeeper knows its own beacon's end exactly.
                self.resync(w, node, tx.last_bit);
                self.schedule_beacon(w, n + 1);
            }
            SLOT => self.run_slot(w, node, n as usize),
            EXPECT => self.no_beacon(w, node),
            _ => unreachable!("tdma sets only its own timers"),
        }
    }

    fn on_receive(&mut self, w: &mut World, rx: &Reception) {
        if rx.kind != FrameKind::Beacon {
            return;
        }
        if rx.corrupted {
            if w.in_window(w.now()) {
                self.missed += 1;
            }
            return;
        }
        let node = rx.at;
        let lag = if self.spec.compensate {
            w.line().delay(rx.from, node) + w.spec().nodes[node].transceiver.receiver_delay
        } else {
            Picos::ZERO
        };
        let t_ref = w.now() - lag;
        self.held_over[node] = 0;
        self.resync(w, node, t_ref);
    }

    fn report(&self, w: &World) -> SchemeReport {
        let cycle = self.cycle_local.as_secs_f64();
        let usable: f64 = self
            .spec
            .slots
            .iter()
            .map(|s| (s.length - self.spec.guard - w.spec().nodes[s.owner].transceiver.enable_time).as_secs_f64())
            .sum();
        SchemeReport {
            name: "tdma",
            fields: vec![
                ("cycle_s", SchemeValue::Seconds(cycle)),
                ("guard_s", SchemeValue::Seconds(self.spec.guard.as_secs_f64())),
                ("usable_fraction", SchemeValue::Fraction(if cycle > 0.0 { usable / cycle } else { 0.0 })),
                ("beacons", SchemeValue::Count(self.beacons)),
                ("beacons_missed", SchemeValue::Count(self.missed)),
                ("slots_used", SchemeValue::Count(self.used)),
                ("slot_overruns", SchemeValue::Count(self.overruns)),
            ]
            .into_iter()
            .chain(
                (self.spec.holdover > 0)
                    .then_some([
                        ("free_running_cycles", SchemeValue::Count(self.free_running)),
                        ("holdovers_expired", SchemeValue::Count(self.expired)),
                    ])
                    .into_iter()
                    .flatten(),
            )
            .collect(),
        }
    }
}
