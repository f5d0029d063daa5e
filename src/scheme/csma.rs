//! Carrier-sense multiple access: non-, 1- and p-persistent, optionally with
//! collision detection (CSMA/CD).
//!
//! Sensing is physical: a node senses the line busy while another driver's
//! occupancy, delayed by the wire and by the node's receiver delay, is at
//! its receiver output ([`World::carrier_until`]). A node with a message:
//! - **senses** (one channel access attempt). Idle: it transmits at once.
//!   Busy: non-persistent reschedules the attempt after a random `backoff`;
//!   p-persistent (1-persistent when p = 1) waits until the activity it sees
//!   ends and senses again;
//! - on an idle line after waiting, a p-persistent node sends with
//!   probability p, or else defers one `slot_time` and senses again.
//!
//! Every carrier sense counts as one channel access attempt (including each
//! re-sense of a waiting persistent node), and a node keeps the interframe
//! gap after its own transmission before it senses again.
//!
//! Without collision detection a frame runs its full length; `ack_timeout`
//! after its end the sender learns its fate (ideal feedback) and, after a
//! failure, reschedules after `backoff`.
//!
//! With collision detection a transmitter notices another driver
//! `detect_delay` after that driver's signal reaches its position (while it
//! is still sending), stops its data, sends `jam_bits` of jam and releases.
//! It then waits k slots, k uniform in 0..2^min(n, 10) − 1 after its n-th
//! collision (binary exponential backoff; a given `backoff` replaces it), and
//! gives up after `max_attempts`.
//! A frame that ends without a detected collision counts as sent.
//!
//! A node that is down (`node-down` faults) does nothing: its timers lapse
//! and its queue fills. Back up, it finishes the message it held (sent if
//! its frame arrived intact, else a fresh attempt) and goes on.

use rand::Rng;
use tracing::debug;

use super::{first_other_node, sample_latency, AccessScheme, SchemeReport, SchemeValue};
use crate::engine::{FrameKind, FrameOut, Reception, World};
use crate::spec::{CsmaSpec, NodeId, Persistence};
use crate::traffic::Message;
use crate::units::Picos;

const ATTEMPT: u64 = 1;
const IDLE: u64 = 2;
const SLOT: u64 = 3;
const OUTCOME: u64 = 4;
const DETECT: u64 = 5;
const DONE: u64 = 6;

#[derive(Clone, Copy, Debug, Default)]
struct NodeState {
    msg: Option<Message>,
    attempts: u32,
    /// Occupancy of the running transmission, and when it releases.
    tx: Option<(u64, Picos)>,
    delivered: bool,
    waiting_idle: bool,
    /// Timers carry this; a newer decision makes older timers stale.
    generation: u64,
}

#[derive(Debug)]
pub struct Csma {
    spec: CsmaSpec,
    nodes: Vec<NodeState>,
    deferrals: u64,
    collisions: u64,
    detected: u64,
    given_up: u64,
    /// Reused buffer of transmissions met (no allocation per transmission).
    scratch: Vec<(NodeId, u64, Picos, Picos, Picos)>,
}

impl Csma {
    pub fn new(spec: CsmaSpec, nodes: usize) -> Self {
        Csma {
            spec,
            nodes: vec![NodeState::default(); nodes],
            deferrals: 0,
            collisions: 0,
            detected: 0,
            given_up: 0,
            scratch: Vec::with_capacity(16),
        }
    }

    fn timer(&mut self, w: &mut World, node: NodeId, at: Picos, kind: u64) {
        let g = self.nodes[node].generation;
        w.set_timer(node, at, (g << 8) | kind);
    }

    /// Invalidate the node's pending timers.
    fn bump(&mut self, node: NodeId) {
        self.nodes[node].generation += 1;
    }

    fn take_next(&mut self, w: &mut World, node: NodeId) {
        if self.nodes[node].msg.is_some() {
            return;
        }
        if let Some(msg) = w.pop_message(node) {
            self.nodes[node].msg = Some(msg);
            self.nodes[node].attempts = 0;
            w.set_holding(node, 1);
            self.attempt(w, node);
        }
    }

    /// A channel access attempt: sense the line. A node that has just sent
    /// keeps the interframe gap first.
    fn attempt(&mut self, w: &mut World, node: NodeId) {
        let earliest = w.earliest_enable(node);
        if w.now() < earliest {
            self.timer(w, node, earliest, ATTEMPT);
            return;
        }
        w.count_access_attempt();
        match w.carrier_until(node) {
            None => self.send(w, node),
            Some(until) => {
                if w.in_window(w.now()) {
                    self.deferrals += 1;
                }
                match self.spec.persistence {
                    Persistence::Non => {
                        let delay = sample_latency(&self.spec.backoff, w.rng(node));
                        self.timer(w, node, w.now() + delay.max(Picos(1)), ATTEMPT);
                    }
                    Persistence::P(_) => self.wait_idle(w, node, until),
                }
            }
        }
    }

    fn wait_idle(&mut self, w: &mut World, node: NodeId, until: Picos) {
        self.nodes[node].waiting_idle = true;
        self.timer(w, node, until, IDLE);
    }

    /// The line looks idle after waiting: the p-persistent trial. Every
    /// carrier sense counts as a channel access attempt.
    fn trial(&mut self, w: &mut World, node: NodeId) {
        w.count_access_attempt();
        if let Some(until) = w.carrier_until(node) {
            self.wait_idle(w, node, until);
            return;
        }
        self.nodes[node].waiting_idle = false;
        let p = match self.spec.persistence {
            Persistence::P(p) => p,
            Persistence::Non => 1.0,
        };
        if p >= 1.0 || w.rng(node).random::<f64>() < p {
            self.send(w, node);
        } else {
            let slot = self.spec.slot_time;
            self.timer(w, node, w.now() + slot, SLOT);
        }
    }

    fn send(&mut self, w: &mut World, node: NodeId) {
        let msg = self.nodes[node].msg.expect("a message in hand");
        let at = w.earliest_enable(node);
        let tx = w.transmit(node, at, &[FrameOut::data(msg, w.spec().frame.overhead_bits)]);
        self.bump(node);
        let st = &mut self.nodes[node];
        st.tx = Some((tx.occupancy, tx.release));
        st.delivered = false;
        st.waiting_idle = false;
        debug!(t_ps = w.now().0, node = %w.spec().nodes[node].name, "transmit");
        if self.spec.collision_detect {
            self.timer(w, node, tx.release, DONE);
            self.arm_detection(w, node, tx.occupancy, tx.enable, tx.release);
        } else {
            self.timer(w, node, tx.last_bit + self.spec.ack_timeout, OUTCOME);
        }
    }

    fn detect_delay(&self, w: &World, node: NodeId) -> Picos {
        self.spec.detect_delay.unwrap_or(w.spec().nodes[node].transceiver.receiver_delay)
    }

    /// Schedule collision detection between the new transmission of `k` and
    /// every other transmission it meets, in both directions.
    fn arm_detection(&mut self, w: &mut World, k: NodeId, occ: u64, a_k: Picos, rel_k: Picos) {
        let mut others = std::mem::take(&mut self.scratch);
        others.clear();
        others.extend(
            w.occupancies()
                .filter(|o| o.node != k && o.id != occ)
                .map(|o| (o.node, o.id, Picos(o.a), Picos(o.release), Picos(o.b))),
        );
        for &(j, occ_j, a_j, rel_j, b_j) in &others {
            // k sees j from a_j + d(j,k) to b_j + d(j,k).
            let d = w.line().delay(j, k);
            if a_j + d < rel_k && b_j + d > a_k {
                let t = (a_j + d).max(a_k) + self.detect_delay(w, k);
                if t < rel_k {
                    self.timer(w, k, t, DETECT);
                }
            }
            // j sees k, if j is one of ours still sending that transmission.
            if self.nodes[j].tx.is_some_and(|(o, _)| o == occ_j) && a_k + d < rel_j {
                let t = (a_k + d).max(a_j) + self.detect_delay(w, j);
                if t < rel_j && t >= w.now() {
                    self.timer(w, j, t, DETECT);
                }
            }
        }
        self.scratch = others;
    }

    fn success(&mut self, w: &mut World, node: NodeId) {
        let st = &mut self.nodes[node];
        st.msg = None;
        st.tx = None;
        w.set_holding(node, 0);
        self.take_next(w, node);
    }

    fn failure(&mut self, w: &mut World, node: NodeId, free_at: Picos) {
        let counted = w.in_window(w.now());
        if counted {
            self.collisions += 1;
        }
        let st = &mut self.nodes[node];
        st.tx = None;
        st.attempts += 1;
        if self.spec.max_attempts > 0 && st.attempts >= self.spec.max_attempts {
            st.msg = None;
            w.set_holding(node, 0);
            w.count_given_up();
            if counted {
                self.given_up += 1;
            }
            self.take_next(w, node);
            return;
        }
        let delay = if self.spec.collision_detect && !self.spec.backoff_given {
            let n = st.attempts.min(10);
            let k = w.rng(node).random_range(0..(1u64 << n));
            super::capped_delay(u128::from(k) * u128::from(self.spec.slot_time.0))
        } else {
            sample_latency(&self.spec.backoff, w.rng(node))
        };
        self.timer(w, node, free_at.max(w.now()) + delay, ATTEMPT);
    }

    /// After an abort shortens a transmission, nodes waiting for the line to
    /// go idle look again.
    fn rewake_waiters(&mut self, w: &mut World) {
        for node in 0..self.nodes.len() {
            if self.nodes[node].waiting_idle {
                self.bump(node);
                match w.carrier_until(node) {
                    Some(until) => self.timer(w, node, until, IDLE),
                    None => self.timer(w, node, w.now(), IDLE),
                }
            }
        }
    }
}

impl AccessScheme for Csma {
    fn name(&self) -> &'static str {
        "csma"
    }

    fn resends_corrupted(&self) -> bool {
        // With collision detection a frame that ends undisturbed counts as sent.
        !self.spec.collision_detect
    }

    fn holds(&self, msg: &crate::traffic::Message) -> bool {
        self.nodes[msg.source].msg.is_some_and(|m| m == *msg)
    }

    fn default_destination(&self, source: NodeId) -> NodeId {
        first_other_node(source)
    }

    fn start(&mut self, _w: &mut World) {}

    fn on_message(&mut self, w: &mut World, node: NodeId) {
        if !w.is_down(node) {
            self.take_next(w, node);
        }
    }

    fn on_node_fault(&mut self, w: &mut World, node: NodeId, down: bool) {
        self.bump(node); // its pending timers lapse either way
        if down {
            return;
        }
        let st = &mut self.nodes[node];
        st.tx = None;
        st.waiting_idle = false;
        match st.msg {
            Some(_) if st.delivered => self.success(w, node),
            Some(_) => self.attempt(w, node),
            None => self.take_next(w, node),
        }
    }

    fn on_timer(&mut self, w: &mut World, node: NodeId, tag: u64) {
        if tag >> 8 != self.nodes[node].generation || w.is_down(node) {
            return; // superseded, or the node is down
        }
        match tag & 0xff {
            ATTEMPT => self.attempt(w, node),
            IDLE | SLOT => self.trial(w, node),
            OUTCOME => {
                if self.nodes[node].delivered {
                    self.success(w, node);
                } else {
                    self.failure(w, node, w.now());
                }
            }
            DONE => self.success(w, node),
            DETECT => {
                let Some((occ, release)) = self.nodes[node].tx else {
                    return;
                };
                if w.now() >= release {
                    return;
                }
                if w.in_window(w.now()) {
                    self.detected += 1;
                }
                debug!(t_ps = w.now().0, node = %w.spec().nodes[node].name, "collision detected; jamming");
                let tx = w.abort_tx(node, occ, self.spec.jam_bits);
                self.bump(node);
                self.failure(w, node, tx.release);
                self.rewake_waiters(w);
            }
            _ => unreachable!("csma sets only its own timers"),
        }
    }

    fn on_receive(&mut self, _w: &mut World, rx: &Reception) {
        if rx.kind != FrameKind::Data || rx.corrupted {
            return;
        }
        if let Some(m) = rx.message {
            let st = &mut self.nodes[m.source];
            if st.tx.is_some_and(|(o, _)| o == rx.occupancy) {
                st.delivered = true;
            }
        }
    }

    fn report(&self, _w: &World) -> SchemeReport {
        let p = match self.spec.persistence {
            Persistence::Non => 0.0,
            Persistence::P(p) => p,
        };
        SchemeReport {
            name: "csma",
            fields: vec![
                ("persistence", SchemeValue::Fraction(p)),
                ("collision_detect", SchemeValue::Flag(self.spec.collision_detect)),
                ("slot_time_s", SchemeValue::Seconds(self.spec.slot_time.as_secs_f64())),
                ("deferrals", SchemeValue::Count(self.deferrals)),
                ("collisions", SchemeValue::Count(self.collisions)),
                ("collisions_detected", SchemeValue::Count(self.detected)),
                ("given_up", SchemeValue::Count(self.given_up)),
            ],
        }
    }
}
