//! Non-destructive bitwise arbitration on a line with a dominant state.
//!
//! A node drives the dominant state by enabling its driver and sends
//! recessive by releasing it; the undriven line reads recessive (validation
//! insists on failsafe receivers). Once a node's receiver has shown an idle
//! line for `idle_bits` bit times, a node with a message sends a start bit.
//! A waiting node that sees a start edge first joins at once, taking that
//! edge as the start of its bit 0; the node that started takes its own
//! output as bit 0. Each then sends its identifier MSB first (0 dominant)
//! and samples the line `sample_point` into every bit. A node that sends
//! recessive but samples dominant drops out and tries again at the next
//! idle. A node offers its lowest-identifier queued message. The node still
//! in after the last identifier bit sends the rest of
//! its frame as an ordinary transmission. Only the arbitration field is
//! simulated bit by bit.
//!
//! **Bit time bound.** Let node j sync on node i's start edge. j's dominant
//! bit n appears at i's receiver 2·d(i,j) + r_i + r_j after i's bit n starts,
//! and j's dominant tail (its disable time) lasts that much into i's next
//! bit; a driver enabled at a sample point cannot lead its bit by more than
//! (1 − sp)·T. So arbitration is safe when, for every pair,
//!
//! ```text
//! sp·T ≥ 2·d(i,j) + r_i + r_j + disable_j   and   T ≥ 2·d(i,j) + r_i + r_j + enable_j
//! ```
//!
//! Below it two nodes can both believe they won: their frames collide.
//!
//! A node that is down (`node-down` faults) neither starts nor joins a round
//! (one it is already in, and a frame it has won, it finishes); back up, it
//! offers its message at the next idle line.

use tracing::debug;

use super::{first_other_node, AccessScheme, SchemeReport, SchemeValue};
use crate::engine::{FrameKind, FrameOut, Reception, World};
use crate::spec::{ArbitrationSpec, NodeId, Spec};
use crate::traffic::Message;
use crate::units::Picos;

const WAKE: u64 = 1;
const JOIN: u64 = 2;
const SAMPLE: u64 = 3;

#[derive(Clone, Copy, Debug, PartialEq)]
enum Phase {
    Idle,
    /// Has a message; waits for an idle line (or a start edge to join).
    Waiting,
    /// In the arbitration field: bit 0 started (output valid) at `origin`.
    Arbitrating {
        origin: Picos,
        bit: u32,
        drive: Option<u64>,
    },
    /// Sending the rest of its frame.
    Sending,
}

#[derive(Clone, Copy, Debug)]
struct NodeState {
    msg: Option<Message>,
    id: u64,
    phase: Phase,
    generation: u64,
    join_at: Picos,
}

#[derive(Debug)]
pub struct Arbitration {
    spec: ArbitrationSpec,
    bit: Picos,
    nodes: Vec<NodeState>,
    /// Per node: when the last activity its receiver has begun to show ends.
    quiet_from: Vec<Picos>,
    /// Per node: activity scheduled to reach its receiver later (start, end);
    /// folded into `quiet_from` once it has begun to show.
    ahead: Vec<Vec<(Picos, Picos)>>,
    /// Identifiers in the current round and how many nodes believed they won.
    round: Vec<u64>,
    winners: u32,
    rounds: u64,
    lost: u64,
    failures: u64,
    inversions: u64,
    min_bit: Picos,
    /// Identifier of each traffic source, by node and source index.
    flow_ids: Vec<Vec<u64>>,
}

/// The smallest safe bit time for a scenario (see the module docs).
pub fn min_bit_time(spec: &Spec, arb: &ArbitrationSpec, line: &crate::line::LineModel) -> Picos {
    let mut need = 0f64;
    for (i, ni) in spec.nodes.iter().enumerate() {
        for (j, nj) in spec.nodes.iter().enumerate() {
            let lp = 2 * line.delay_ps(i, j) + ni.transceiver.receiver_delay.0 + nj.transceiver.receiver_delay.0;
            let a = (lp + nj.transceiver.disable_time.0) as f64 / arb.sample_point;
            let b = (lp + nj.transceiver.enable_time.0) as f64;
            need = need.max(a).max(b);
        }
    }
    Picos(need.ceil() as u64)
}

impl Arbitration {
    pub fn new(spec: ArbitrationSpec, nodes: usize) -> Self {
        Arbitration {
            spec,
            bit: Picos::ZERO,
            nodes: vec![NodeState { msg: None, id: 0, phase: Phase::Idle, generation: 0, join_at: Picos::MAX }; nodes],
            quiet_from: vec![Picos::ZERO; nodes],
            ahead: vec![Vec::with_capacity(16); nodes],
            round: Vec::with_capacity(nodes),
            winners: 0,
            rounds: 0,
            lost: 0,
            failures: 0,
            inversions: 0,
            min_bit: Picos::ZERO,
            flow_ids: Vec::new(),
        }
    }

    fn timer(&mut self, w: &mut World, node: NodeId, at: Picos, kind: u64) {
        let g = self.nodes[node].generation;
        w.set_timer(node, at.max(w.now()), (g << 8) | kind);
    }

    /// Activity by `src` from `on` to `off` at the driver: every node's
    /// receiver will show it, delayed; a node learns of it only then.
    fn note(&mut self, w: &World, src: NodeId, on: Picos, off: Picos) {
        for j in 0..self.quiet_from.len() {
            // Fold what has already begun to show, so that the list holds
            // only activity still on its way, however long a node stays idle.
            self.fold(j, w.now());
            let (from, to) = (w.seen_at(src, j, on), w.seen_at(src, j, off));
            self.ahead[j].push((from, to));
        }
    }

    /// Fold what node `j`'s receiver has begun to show by now into its idle clock.
    fn fold(&mut self, j: NodeId, now: Picos) {
        let quiet = &mut self.quiet_from[j];
        self.ahead[j].retain(|&(from, to)| {
            if from <= now {
                *quiet = (*quiet).max(to);
                false
            } else {
                true
            }
        });
    }

    /// When node `j` may send a start bit, as far as it can tell now.
    fn ready_at(&mut self, j: NodeId, now: Picos) -> Picos {
        self.fold(j, now);
        self.quiet_from[j] + Picos(self.bit.0 * u64::from(self.spec.idle_bits))
    }

    fn take_next(&mut self, w: &mut World, node: NodeId) {
        if self.nodes[node].msg.is_some() || w.is_down(node) {
            return;
        }
        // A node offers its highest-priority (lowest-identifier) queued message.
        let spec_ids = &self.flow_ids[node];
        if let Some(msg) = w.pop_message_min_by_key(node, |m| spec_ids[usize::from(m.flow)]) {
            let id = self.flow_ids[node][usize::from(msg.flow)];
            let st = &mut self.nodes[node];
            st.msg = Some(msg);
            st.id = id;
            w.set_holding(node, 1);
            self.wait(w, node);
        }
    }

    fn wait(&mut self, w: &mut World, node: NodeId) {
        self.reselect(w, node);
        self.nodes[node].phase = Phase::Waiting;
        self.nodes[node].generation += 1;
        self.nodes[node].join_at = Picos::MAX;
        let ready = self.ready_at(node, w.now());
        self.timer(w, node, ready, WAKE);
    }

    /// Until it sends a start bit, a node offers its best message: one that
    /// arrived meanwhile may outrank the one it holds.
    fn reselect(&mut self, w: &mut World, node: NodeId) {
        if let Some(held) = self.nodes[node].msg {
            let held_id = self.nodes[node].id;
            let ids = &self.flow_ids[node];
            let best = w.queue_min_key(node, |m| ids[usize::from(m.flow)]).is_some_and(|k| k < held_id);
            if best {
                w.push_front(node, held);
                let msg = w.pop_message_min_by_key(node, |m| ids[usize::from(m.flow)]).expect("queue not empty");
                self.nodes[node].id = ids[usize::from(msg.flow)];
                self.nodes[node].msg = Some(msg);
            }
        }
    }

    /// The identifier bit n (1-based after the start bit) is dominant?
    fn dominant(&self, id: u64, n: u32) -> bool {
        n == 0 || (id >> (self.spec.id_bits - n)) & 1 == 0
    }

    /// Send the start bit: `origin` is when bit 0 starts for this node.
    fn start(&mut self, w: &mut World, node: NodeId, origin: Picos) {
        let now = w.now();
        if !self.nodes.iter().any(|s| matches!(s.phase, Phase::Arbitrating { .. })) {
            self.round.clear();
            self.winners = 0;
            if w.in_window(now) {
                self.rounds += 1;
            }
        }
        self.round.push(self.nodes[node].id);
        let en = w.spec().nodes[node].transceiver.enable_time;
        let drive = w.drive_dominant(node, now, origin + self.bit);
        self.note(w, node, now + en, origin + self.bit + w.spec().nodes[node].transceiver.disable_time);
        self.nodes[node].generation += 1;
        self.nodes[node].phase = Phase::Arbitrating { origin, bit: 0, drive: Some(drive) };
        let sample = origin + Picos((self.bit.0 as f64 * self.spec.sample_point).round() as u64);
        self.timer(w, node, sample, SAMPLE);
        // Waiting nodes join on the first start edge they see.
        let valid = now + en;
        for j in 0..self.nodes.len() {
            if j == node || self.nodes[j].phase != Phase::Waiting || w.is_down(j) {
                continue;
            }
            let edge = w.seen_at(node, j, valid);
            if edge < self.nodes[j].join_at {
                self.nodes[j].join_at = edge;
                self.nodes[j].generation += 1;
                self.timer(w, j, edge, JOIN);
            }
        }
    }

    fn sample(&mut self, w: &mut World, node: NodeId) {
        let Phase::Arbitrating { origin, bit, drive } = self.nodes[node].phase else {
            return;
        };
        let id = self.nodes[node].id;
        let sent_dominant = self.dominant(id, bit);
        if !sent_dominant && w.dominant_seen(node) {
            if w.in_window(w.now()) {
                self.lost += 1;
            }
            debug!(t_ps = w.now().0, node = %w.spec().nodes[node].name, bit, "lost arbitration");
            self.wait(w, node);
            self.round_over(w);
            return;
        }
        let tb = self.bit;
        if bit == self.spec.id_bits {
            self.win(w, node, origin, drive.filter(|_| sent_dominant));
            return;
        }
        let next = bit + 1;
        let mut drive_next = None;
        if self.dominant(id, next) {
            let end = origin + Picos(tb.0 * u64::from(next + 1));
            let dis = w.spec().nodes[node].transceiver.disable_time;
            let en = w.spec().nodes[node].transceiver.enable_time;
            let valid = match drive.filter(|_| sent_dominant) {
                Some(occ) => {
                    w.extend_dominant(node, occ, end);
                    drive_next = Some(occ);
                    w.now()
                }
                None => {
                    let enable = (origin + Picos(tb.0 * u64::from(next))).saturating_sub(en).max(w.now());
                    drive_next = Some(w.drive_dominant(node, enable, end));
                    enable + en
                }
            };
            self.note(w, node, valid, end + dis);
        }
        self.nodes[node].phase = Phase::Arbitrating { origin, bit: next, drive: drive_next };
        let at = origin + Picos(tb.0 * u64::from(next)) + Picos((tb.0 as f64 * self.spec.sample_point).round() as u64);
        self.timer(w, node, at, SAMPLE);
    }

    fn win(&mut self, w: &mut World, node: NodeId, origin: Picos, drive: Option<u64>) {
        let now = w.now();
        let counted = w.in_window(now);
        let id = self.nodes[node].id;
        if self.winners == 0 && counted && self.round.iter().any(|&other| other < id) {
            self.inversions += 1;
        }
        self.winners += 1;
        let tb = self.bit;
        let en = w.spec().nodes[node].transceiver.enable_time;
        let boundary = origin + Picos(tb.0 * u64::from(self.spec.id_bits + 1));
        if let Some(occ) = drive {
            // Still driving the last identifier bit: stay enabled into the frame.
            w.continue_from_dominant(node, occ);
        }
        let enable = boundary.saturating_sub(en).max(w.driver_free_at(node)).max(now);
        let msg = self.nodes[node].msg.expect("a contender holds a message");
        w.count_access_attempt();
        let tx = w.transmit_continuing(node, enable, &[FrameOut::data(msg, w.spec().frame.overhead_bits)]);
        self.note(w, node, tx.enable, tx.off);
        self.nodes[node].phase = Phase::Sending;
        debug!(t_ps = now.0, node = %w.spec().nodes[node].name, id, "won arbitration");
        self.round_over(w);
    }

    /// Once no node is left in the arbitration field, the round must have
    /// had exactly one winner; none (every contender dropped out) or several
    /// (each believed it won) is an arbitration failure.
    fn round_over(&mut self, w: &World) {
        if self.nodes.iter().any(|s| matches!(s.phase, Phase::Arbitrating { .. })) {
            return;
        }
        if self.winners != 1 && w.in_window(w.now()) {
            self.failures += 1;
        }
    }
}

impl AccessScheme for Arbitration {
    fn name(&self) -> &'static str {
        "arbitration"
    }

    fn resends_corrupted(&self) -> bool {
        true // ideal feedback: a damaged frame is sent again
    }

    fn holds(&self, msg: &crate::traffic::Message) -> bool {
        self.nodes[msg.source].msg.is_some_and(|m| m == *msg)
    }

    fn default_destination(&self, source: NodeId) -> NodeId {
        first_other_node(source)
    }

    fn start(&mut self, w: &mut World) {
        self.bit = w.spec().frame.bit_time();
        self.flow_ids = w
            .spec()
            .nodes
            .iter()
            .map(|n| n.traffic.iter().map(|t| t.id.expect("validated: every source has an id")).collect())
            .collect();
        self.min_bit = min_bit_time(w.spec(), &self.spec, w.line());
    }

    fn on_node_fault(&mut self, w: &mut World, node: NodeId, down: bool) {
        if down {
            return;
        }
        match self.nodes[node].phase {
            Phase::Waiting => self.wait(w, node),
            Phase::Idle => self.take_next(w, node),
            _ => {}
        }
    }

    fn on_unheard(&mut self, w: &mut World, rx: &Reception) {
        // No receiver took it: the sender learns of that as of damage.
        self.on_receive(w, &Reception { corrupted: true, ..*rx });
    }

    fn on_message(&mut self, w: &mut World, node: NodeId) {
        if w.is_down(node) {
            return;
        }
        if self.nodes[node].phase == Phase::Waiting {
            self.reselect(w, node);
        }
        self.take_next(w, node);
    }

    fn on_timer(&mut self, w: &mut World, node: NodeId, tag: u64) {
        if tag >> 8 != self.nodes[node].generation {
            return;
        }
        match tag & 0xff {
            WAKE | JOIN if w.is_down(node) => {} // it takes part again once back
            WAKE => {
                if self.nodes[node].phase != Phase::Waiting {
                    return;
                }
                let ready = self.ready_at(node, w.now());
                if w.now() < ready {
                    self.timer(w, node, ready, WAKE);
                    return;
                }
                let en = w.spec().nodes[node].transceiver.enable_time;
                self.start(w, node, w.now() + en);
            }
            JOIN => {
                if self.nodes[node].phase == Phase::Waiting {
                    self.start(w, node, w.now());
                }
            }
            SAMPLE => self.sample(w, node),
            _ => unreachable!("arbitration sets only its own timers"),
        }
    }

    fn on_receive(&mut self, w: &mut World, rx: &Reception) {
        if rx.kind != FrameKind::Data {
            return;
        }
        let Some(m) = rx.message else { return };
        let node = m.source;
        if self.nodes[node].phase != Phase::Sending {
            return;
        }
        if rx.corrupted {
            // Ideal feedback: the sender learns of the damage and tries again.
            self.wait(w, node);
        } else {
            let st = &mut self.nodes[node];
            st.msg = None;
            st.phase = Phase::Idle;
            w.set_holding(node, 0);
            self.take_next(w, node);
        }
    }

    fn report(&self, _w: &World) -> SchemeReport {
        SchemeReport {
            name: "arbitration",
            fields: vec![
                ("bit_time_s", SchemeValue::Seconds(self.bit.as_secs_f64())),
                ("min_bit_time_s", SchemeValue::Seconds(self.min_bit.as_secs_f64())),
                ("rounds", SchemeValue::Count(self.rounds)),
                ("lost", SchemeValue::Count(self.lost)),
                ("arbitration_failures", SchemeValue::Count(self.failures)),
                ("priority_inversions", SchemeValue::Count(self.inversions)),
            ],
        }
    }
}
