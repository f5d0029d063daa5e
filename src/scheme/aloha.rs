//! ALOHA, pure and slotted.
//!
//! A node with a message and nothing in flight transmits at once (pure) or
//! at the next slot boundary, a multiple of `slot_time` (slotted). It does
//! not listen first. `ack_timeout` after the end of its frame it learns the
//! outcome (ideal feedback: the engine's verdict at the destination). On a
//! failure it waits a random `backoff` (rounded up to a slot boundary when
//! slotted) and sends the same message again, up to `max_attempts`.
//! Every transmission is one channel access attempt.

use tracing::debug;

use super::{first_other_node, sample_latency, AccessScheme, SchemeReport, SchemeValue};
use crate::engine::{FrameKind, FrameOut, Reception, World};
use crate::spec::{AlohaSpec, NodeId};
use crate::traffic::Message;
use crate::units::Picos;

const OUTCOME: u64 = 1;
const RETRY: u64 = 2;

#[derive(Clone, Copy, Debug)]
struct InFlight {
    msg: Message,
    attempts: u32,
    delivered: bool,
}

#[derive(Debug)]
pub struct Aloha {
    spec: AlohaSpec,
    /// Per node: the message being sent or waiting to be re-sent.
    flight: Vec<Option<InFlight>>,
    collisions: u64,
    retries: u64,
    given_up: u64,
    /// Per node: the timer that fired while it was down (acted on once it is back).
    lapsed: Vec<Option<u64>>,
}

impl Aloha {
    pub fn new(spec: AlohaSpec, nodes: usize) -> Self {
        Aloha { spec, flight: vec![None; nodes], collisions: 0, retries: 0, given_up: 0, lapsed: vec![None; nodes] }
    }

    /// The next instant at or after `t` a transmission may start.
    fn start_time(&self, t: Picos) -> Picos {
        if !self.spec.slotted {
            return t;
        }
        let slot = self.spec.slot_time.0;
        Picos(t.0.div_ceil(slot) * slot)
    }

    fn send(&mut self, w: &mut World, node: NodeId, at: Picos) {
        let f = self.flight[node].as_mut().expect("a message in flight");
        f.delivered = false;
        w.count_access_attempt();
        let frame = FrameOut::data(f.msg, w.spec().frame.overhead_bits);
        let tx = w.transmit(node, at, &[frame]);
        w.set_timer(node, tx.last_bit + self.spec.ack_timeout, OUTCOME);
    }

    fn next_message(&mut self, w: &mut World, node: NodeId) {
        if self.flight[node].is_some() {
            return;
        }
        if let Some(msg) = w.pop_message(node) {
            self.flight[node] = Some(InFlight { msg, attempts: 0, delivered: false });
            w.set_holding(node, 1);
            // After its own frame a node keeps the interframe gap.
            let at = self.start_time(w.earliest_enable(node));
            self.send(w, node, at);
        }
    }

    /// The outcome of the node's latest frame is known now (ideal feedback).
    fn outcome(&mut self, w: &mut World, node: NodeId) {
        let f = self.flight[node].as_mut().expect("outcome of a message in flight");

        f.attempts += 1;
        if f.delivered {
            self.flight[node] = None;
            w.set_holding(node, 0);
            self.next_message(w, node);
            return;
        }
        let counted = w.in_window(w.now());
        if counted {
            self.collisions += 1;
        }
        if self.spec.max_attempts > 0 && f.attempts >= self.spec.max_attempts {
            self.flight[node] = None;
            w.set_holding(node, 0);
            w.count_given_up();
            if counted {
                self.given_up += 1;
            }
            self.next_message(w, node);
            return;
        }
        let delay = sample_latency(&self.spec.backoff, w.rng(node));
        let at = self.start_time(w.now() + delay);
        debug!(t_ps = w.now().0, node = %w.spec().nodes[node].name, retry_ps = at.0, "collision; backing off");
        w.set_timer(node, at, RETRY);
    }
}

impl AccessScheme for Aloha {
    fn name(&self) -> &'static str {
        "aloha"
    }

    fn resends_corrupted(&self) -> bool {
        true
    }

    fn holds(&self, msg: &crate::traffic::Message) -> bool {
        self.flight[msg.source].is_some_and(|f| f.msg == *msg)
    }

    fn default_destination(&self, source: NodeId) -> NodeId {
        first_other_node(source)
    }

    fn start(&mut self, _w: &mut World) {}

    fn on_message(&mut self, w: &mut World, node: NodeId) {
        if !w.is_down(node) {
            self.next_message(w, node);
        }
    }

    fn on_node_fault(&mut self, w: &mut World, node: NodeId, down: bool) {
        if down {
            return;
        }
        match self.lapsed[node].take() {
            // A timer lapsed while it was down: act on it now.
            Some(OUTCOME) => self.outcome(w, node),
            Some(_) => self.send(w, node, self.start_time(w.now())),
            // Its timers still run, or it was idle.
            None if self.flight[node].is_none() => self.next_message(w, node),
            None => {}
        }
    }

    fn on_timer(&mut self, w: &mut World, node: NodeId, tag: u64) {
        if w.is_down(node) {
            self.lapsed[node] = Some(tag);
            return;
        }
        match tag {
            OUTCOME => self.outcome(w, node),
            RETRY => {
                if w.in_window(w.now()) {
                    self.retries += 1;
                }
                self.send(w, node, w.now());
            }
            _ => unreachable!("aloha sets only its own timers"),
        }
    }

    fn on_receive(&mut self, _w: &mut World, rx: &Reception) {
        if rx.kind != FrameKind::Data || rx.corrupted {
            return;
        }
        if let Some(m) = rx.message {
            if let Some(f) = self.flight[m.source].as_mut() {
                f.delivered = true;
            }
        }
    }

    fn report(&self, _w: &World) -> SchemeReport {
        SchemeReport {
            name: "aloha",
            fields: vec![
                ("slotted", SchemeValue::Flag(self.spec.slotted)),
                (
                    "slot_time_s",
                    SchemeValue::Seconds(if self.spec.slotted { self.spec.slot_time.as_secs_f64() } else { 0.0 }),
                ),
                ("collisions", SchemeValue::Count(self.collisions)),
                ("retransmissions", SchemeValue::Count(self.retries)),
                ("given_up", SchemeValue::Count(self.given_up)),
            ],
        }
    }
}
