//! Token passing on a logical ring.
//!
//! The holder of the token, once its receiver output has shown the end of
//! the token frame, waits its turnaround plus a response latency, asserts its
//! enable and sends what was queued at that instant (up to `max_per_token`
//! data frames, and within `token_hold`), then the token frame to the next
//! node in `order`, all in one transmission. With nothing queued it sends
//! the token alone.
//!
//! Zero-load rotation, with e, r, T as for polling and Lt the line bits of a token:
//!
//! ```text
//! rotation = Σ_i [ T_i + e_i + Lt·tb + d(i, i+1) + r_(i+1) ]
//! ```
//!
//! **Token loss** (`faults = [{ at, kind = "lose-token" }]`): the first token
//! frame sent at or after `at` is lost (it occupies the wire, but its
//! addressee never accepts it). The recovery node watches the line: when its
//! receiver has shown no driver for `token_timeout`, it regenerates the token
//! and acts as the holder. The watchdog runs all the time, so a timeout that
//! is shorter than a normal silent gap regenerates a token that was not lost,
//! with the duplicate tokens that follow on a real ring.
//!
//! **Ring repair** (`successor_timeout`): a holder that sees nothing from
//! its successor for `successor_timeout` after the end of its pass drops the
//! successor from the ring and passes the token, alone, to the next member.
//! Every `solicit_every` rotations the ring's head passes the token to a
//! dropped node instead; one that uses it rejoins, and if it stays silent the
//! head passes on after the same timeout. A dropped node ignores any other
//! token. A node that is down (`node-down` faults) never takes the token.
//! If the recovery node itself is down, the next node in `order` regenerates
//! after `token_timeout` plus one zero-load rotation, so a ring always has a
//! recovery.

use tracing::debug;

use super::{first_other_node, sample_latency, AccessScheme, DurationStat, SchemeReport, SchemeValue};
use crate::engine::shortcut::Shortcuts;
use crate::engine::{Dest, FrameKind, FrameOut, Reception, TxTimes, World};
use crate::periodic::{Periodic, Visit, VisitExt};
use crate::spec::{NodeId, TokenSpec};
use crate::units::Picos;

const WATCHDOG: u64 = 1;
const SUCCESSOR: u64 = 2;

#[derive(Debug)]
pub struct Token {
    spec: TokenSpec,
    /// Position in `order` of each node's successor, by node (usize::MAX if not in the ring).
    next_of: Vec<usize>,
    /// The occupancy carrying a lost token frame.
    lost: Option<u64>,
    /// When the lost token frame left the wire at its sender (release).
    lost_at: Option<Picos>,
    /// Regenerations with no token lost (a watchdog shorter than a normal gap).
    spurious: u64,
    next_fault: usize,
    /// Watchdog: deadline and generation of the live timer.
    deadline: Picos,
    generation: u64,
    last_head_visit: Option<Picos>,
    rotations: DurationStat,
    recoveries: DurationStat,
    passes: u64,
    lost_tokens: u64,
    /// Per node: in the ring (not dropped by a repair).
    in_ring: Vec<bool>,
    /// Per node: its position in `order`.
    pos_of: Vec<usize>,
    /// The pass the holder watches: (holder, successor, generation, deadline).
    awaiting: Option<(NodeId, NodeId, u64, Picos)>,
    succ_gen: u64,
    /// The dropped node the head has just solicited.
    soliciting: Option<NodeId>,
    head_visits: u64,
    /// The latest pass: its addressee and the end of the token frame.
    last_pass: Option<(NodeId, Picos)>,
    /// Position in `order` of the latest node solicited.
    solicit_cursor: usize,
    repairs: u64,
    readmissions: u64,
    /// Whole rotations done in closed form.
    shortcuts: Shortcuts,
}

impl Token {
    pub fn new(spec: TokenSpec) -> Self {
        let n = spec.turnaround.len();
        let mut next_of = vec![usize::MAX; n];
        let mut pos_of = vec![usize::MAX; n];
        let mut in_ring = vec![false; n];
        for (i, &node) in spec.order.iter().enumerate() {
            next_of[node] = spec.order[(i + 1) % spec.order.len()];
            pos_of[node] = i;
            in_ring[node] = true;
        }
        Token {
            spec,
            next_of,
            lost: None,
            lost_at: None,
            spurious: 0,
            next_fault: 0,
            deadline: Picos::MAX,
            generation: 0,
            last_head_visit: None,
            rotations: DurationStat::default(),
            recoveries: DurationStat::default(),
            passes: 0,
            lost_tokens: 0,
            in_ring,
            pos_of,
            awaiting: None,
            succ_gen: 0,
            soliciting: None,
            head_visits: 0,
            last_pass: None,
            solicit_cursor: 0,
            repairs: 0,
            readmissions: 0,
            shortcuts: Shortcuts::default(),
        }
    }

    /// The next ring member after `node` in `order` (itself if it is alone).
    fn successor(&self, node: NodeId) -> NodeId {
        if self.spec.successor_timeout.is_none() {
            return self.next_of[node];
        }
        let order = &self.spec.order;
        let at = self.pos_of[node];
        (1..=order.len()).map(|k| order[(at + k) % order.len()]).find(|&m| self.in_ring[m]).unwrap_or(node)
    }

    /// Where `node` passes the token now: a dropped node to solicit (the
    /// head, every `solicit_every` visits), else its successor.
    fn pass_target(&mut self, node: NodeId) -> NodeId {
        let next = self.successor(node);
        let order = &self.spec.order;
        let head = order.iter().copied().find(|&m| self.in_ring[m]);
        if self.spec.successor_timeout.is_some() && head == Some(node) {
            // The first member in order solicits the dropped nodes in turn.
            self.head_visits += 1;
            if self.head_visits.is_multiple_of(u64::from(self.spec.solicit_every)) || next == node {
                let n = order.len();
                let from = self.solicit_cursor;
                if let Some(k) = (1..=n).map(|k| (from + k) % n).find(|&k| !self.in_ring[order[k]]) {
                    self.solicit_cursor = k;
                    let d = order[k];
                    self.soliciting = Some(d);
                    return d;
                }
            }
        }
        if next == node {
            // Alone in the ring: pass to its original successor, as a solicitation.
            let d = self.next_of[node];
            self.soliciting = Some(d);
            return d;
        }
        next
    }

    /// `node` holds the token and asserts its enable at `enable`.
    fn hold(&mut self, w: &mut World, node: NodeId, enable: Picos) {
        // A node that already holds a token (a duplicate after a spurious
        // regeneration) sends the second after the first, never over it.
        let enable = enable.max(w.earliest_enable(node));
        self.answered(w, node, enable);
        if node == self.spec.order[0] {
            if let Some(prev) = self.last_head_visit {
                if prev >= w.spec().warmup && w.in_window(enable) {
                    self.rotations.record((enable - prev).0);
                }
            }
            self.last_head_visit = Some(enable);
        }
        let limit = match self.spec.max_per_token {
            0 => usize::MAX,
            n => n as usize,
        };
        let overhead = w.spec().frame.overhead_bits;
        let first_bit = enable + w.enable_lead(node);
        let mut end = first_bit;
        let mut sent = 0usize;
        w.begin_tx(node, enable);
        while sent < limit && w.queue_len(node) > 0 {
            let msg = w.pop_message(node).expect("queue checked");
            let frame = FrameOut::data(msg, overhead);
            let gap = if sent > 0 { w.spec().frame.interframe_gap } else { Picos::ZERO };
            let frame_end = end + gap + w.spec().frame.wire_max(frame.data_bits);
            if let Some(hold) = self.spec.token_hold {
                if sent > 0 && frame_end - enable > hold {
                    w.push_front(node, msg);
                    break;
                }
            }
            w.count_access_attempt();
            w.add_frame(frame);
            end = frame_end;
            sent += 1;
        }
        let next = self.pass_target(node);
        w.add_frame(FrameOut::control(FrameKind::Token, Dest::Node(next), self.spec.token_bits));
        let tx = w.finish_tx();
        self.last_pass = Some((next, tx.last_bit));
        self.await_successor(w, node, next, &tx);
        if w.in_window(enable) {
            self.passes += 1;
        }
        if self.next_fault < self.spec.lose_token_at.len() && self.spec.lose_token_at[self.next_fault] <= enable {
            self.next_fault += 1;
            self.lost = Some(tx.occupancy);
            self.lost_at = Some(tx.last_bit);
            if w.in_window(enable) {
                self.lost_tokens += 1;
            }
            debug!(t_ps = enable.0, holder = %w.spec().nodes[node].name, "token lost");
        }
        debug!(t_ps = w.now().0, holder = %w.spec().nodes[node].name, frames = sent, enable_ps = enable.0, "token held");
        self.watch(w, node, tx);
    }

    /// `node`, holding the token, asserts its enable at `enable`: it answers
    /// the pass its predecessor watches, and a node back from a fault answers.
    fn answered(&mut self, w: &mut World, node: NodeId, enable: Picos) {
        if let Some((holder, succ, _, deadline)) = self.awaiting {
            if succ == node && w.seen_at(node, holder, enable) <= deadline {
                self.awaiting = None;
            }
        }
        if w.is_node_back(node) {
            w.node_answered(node);
        }
    }

    /// With ring repair, the holder watches its successor after a pass.
    fn await_successor(&mut self, w: &mut World, holder: NodeId, succ: NodeId, tx: &TxTimes) {
        let Some(timeout) = self.spec.successor_timeout else { return };
        self.succ_gen += 1;
        let deadline = tx.off + timeout;
        self.awaiting = Some((holder, succ, self.succ_gen, deadline));
        w.set_timer(holder, deadline, (self.succ_gen << 8) | SUCCESSOR);
    }

    /// The successor stayed silent: drop it (unless it was only solicited)
    /// and pass the token, alone, to the next member.
    fn successor_silent(&mut self, w: &mut World, holder: NodeId, succ: NodeId) {
        self.awaiting = None;
        if w.is_down(holder) {
            return; // the token dies with its holder; the watchdog recovers it
        }
        if self.soliciting == Some(succ) {
            self.soliciting = None;
        } else if self.in_ring[succ] {
            self.in_ring[succ] = false;
            if w.in_window(w.now()) {
                self.repairs += 1;
            }
            w.node_found_silent(succ);
            debug!(t_ps = w.now().0, dropped = %w.spec().nodes[succ].name, "ring repaired");
        }
        let next = self.successor(holder);
        let next = if next == holder { self.next_of[holder] } else { next };
        if next == holder {
            return;
        }
        let tx =
            w.transmit(holder, w.now(), &[FrameOut::control(FrameKind::Token, Dest::Node(next), self.spec.token_bits)]);
        self.last_pass = Some((next, tx.last_bit));
        if w.in_window(tx.enable) {
            self.passes += 1;
        }
        self.await_successor(w, holder, next, &tx);
        self.watch(w, holder, tx);
    }

    /// Re-arm the recovery node's silence watchdog for a new transmission.
    fn watch(&mut self, w: &mut World, node: NodeId, tx: TxTimes) {
        let Some(timeout) = self.spec.token_timeout else {
            return;
        };
        let r = self.spec.recovery_node;
        let starts = w.seen_at(node, r, tx.enable);
        if starts >= self.deadline {
            // The watchdog fires before this signal reaches the recovery node.
            return;
        }
        self.deadline = w.seen_at(node, r, tx.off) + timeout;
        self.generation += 1;
        w.set_timer(r, self.deadline, (self.generation << 8) | WATCHDOG);
        if let Some((r2, after)) = self.spec.second_recovery {
            // Fires only if the recovery node, being down, did not regenerate first.
            w.set_timer(r2, w.seen_at(node, r2, tx.off) + after, (self.generation << 8) | WATCHDOG);
        }
    }
}

impl Periodic for Token {
    /// Every field, for closed-form rotations (`engine::shortcut`). Draws,
    /// a lost or pending lost token, ring repair and a solicitation refuse
    /// them (their timers, like the watchdog's, also stop a stretch).
    fn visit(&mut self, v: &mut dyn Visit) {
        use crate::engine::delays::draws;
        if draws(&self.spec.response_latency)
            || self.lost.is_some()
            || self.lost_at.is_some()
            || self.next_fault < self.spec.lose_token_at.len()
            || self.spec.successor_timeout.is_some()
            || self.awaiting.is_some()
            || self.soliciting.is_some()
        {
            v.refuse();
        }
        for &n in &self.next_of {
            v.same(n as u64);
        }
        for &r in &self.in_ring {
            v.flag(r);
        }
        v.picos(&mut self.deadline);
        v.opt_picos(&mut self.last_head_visit);
        v.flag(self.last_pass.is_some());
        if let Some((to, at)) = &mut self.last_pass {
            v.same(*to as u64);
            v.picos(at);
        }
        v.same(self.solicit_cursor as u64);
        v.same(self.recoveries.count);
        for x in [self.lost_tokens, self.repairs, self.readmissions] {
            v.same(x);
        }
        v.tally(&mut self.rotations.count);
        v.tally_wide(&mut self.rotations.sum_ps);
        for x in [&mut self.spurious, &mut self.generation, &mut self.passes, &mut self.succ_gen, &mut self.head_visits]
        {
            v.tally(x);
        }
    }
}

impl AccessScheme for Token {
    fn name(&self) -> &'static str {
        "token"
    }

    fn default_destination(&self, source: NodeId) -> NodeId {
        first_other_node(source)
    }

    fn start(&mut self, w: &mut World) {
        let head = self.spec.order[0];
        self.hold(w, head, Picos::ZERO);
    }

    fn on_timer(&mut self, w: &mut World, node: NodeId, tag: u64) {
        if tag & 0xff == SUCCESSOR {
            if let Some((holder, succ, generation, _)) = self.awaiting {
                if generation == tag >> 8 && holder == node {
                    self.successor_silent(w, holder, succ);
                }
            }
            return;
        }
        if tag & 0xff != WATCHDOG || tag >> 8 != self.generation || w.is_down(node) {
            return; // superseded by later activity, or its watcher is down
        }
        // Silence for token_timeout at the recovery node: regenerate the token.
        self.deadline = Picos::MAX;
        // A token passed to a node that is down is lost as surely as a lost frame.
        let swallowed = self.last_pass.filter(|&(to, _)| w.is_down(to)).map(|(_, at)| at);
        match self.lost_at.take().or(swallowed) {
            // Recovery time: from the end of the lost token frame.
            Some(at) if w.in_window(w.now()) => self.recoveries.record((w.now() - at.min(w.now())).0),
            Some(_) => {}
            None if w.in_window(w.now()) => self.spurious += 1,
            None => {}
        }
        debug!(t_ps = w.now().0, node = %w.spec().nodes[node].name, "token regenerated");
        self.lost = None;
        self.hold(w, node, w.now());
    }

    fn on_receive(&mut self, w: &mut World, rx: &Reception) {
        if rx.kind != FrameKind::Token || rx.corrupted {
            return;
        }
        if !self.in_ring[rx.at] {
            if self.soliciting != Some(rx.at) {
                return; // a dropped node takes only a solicitation
            }
            self.soliciting = None;
            self.in_ring[rx.at] = true;
            if w.in_window(w.now()) {
                self.readmissions += 1;
            }
            debug!(t_ps = w.now().0, node = %w.spec().nodes[rx.at].name, "rejoins the ring");
        }
        if self.lost.is_some_and(|occ| occ == rx.occupancy) {
            return; // the lost token: nobody accepts it
        }
        let node = rx.at;
        if node == self.spec.order[0] && !crate::engine::delays::draws(&self.spec.response_latency) {
            // A rotation begins: the rotations that repeat the last one
            // exactly may be done in closed form (moving `now` on).
            let mut shortcuts = std::mem::take(&mut self.shortcuts);
            shortcuts.at_period_start(w, self, None);
            self.shortcuts = shortcuts;
        }
        let wait = self.spec.turnaround[node] + sample_latency(&self.spec.response_latency, w.rng(node));
        let enable = w.now() + wait;
        self.hold(w, node, enable);
    }

    fn report(&self, _w: &World) -> SchemeReport {
        SchemeReport {
            name: "token",
            fields: vec![
                ("rotation_mean_s", SchemeValue::Seconds(self.rotations.mean_s())),
                ("rotation_max_s", SchemeValue::Seconds(self.rotations.max_s())),
                ("rotations", SchemeValue::Count(self.rotations.count)),
                ("token_passes", SchemeValue::Count(self.passes)),
                ("tokens_lost", SchemeValue::Count(self.lost_tokens)),
                ("recoveries", SchemeValue::Count(self.recoveries.count)),
                ("recovery_mean_s", SchemeValue::Seconds(self.recoveries.mean_s())),
                ("recovery_max_s", SchemeValue::Seconds(self.recoveries.max_s())),
                ("spurious_regenerations", SchemeValue::Count(self.spurious)),
            ]
            .into_iter()
            .chain(
                self.spec
                    .successor_timeout
                    .map(|_| {
                        [
                            ("ring_repairs", SchemeValue::Count(self.repairs)),
                            ("readmissions", SchemeValue::Count(self.readmissions)),
                        ]
                    })
                    .into_iter()
                    .flatten(),
            )
            .collect(),
        }
    }
}
