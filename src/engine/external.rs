//! External nodes: the engine's side of co-simulation.
//!
//! An external node's protocol logic runs outside the engine. The engine
//! collects what happens to the node at one instant (frames shown at its
//! receiver, messages queued, its timers, line changes it watches) into a
//! [`Batch`], hands the batch to a [`Gateway`] and applies the answer, a
//! list of [`Intent`]s, before simulated time moves on. This is conservative
//! lockstep synchronisation: a node can act only at or after the instant of
//! the batch it answers, so no answer can change what has already been
//! simulated, and the result does not depend on how fast the node answers.
//!
//! The gateway does the talking (the CLI's goes over TCP); the engine stays
//! free of I/O. Every rule of the bus (delays, occupancy, contention,
//! corruption, latency accounting) applies to external nodes as to any other.

use std::collections::HashMap;

use super::{Dest, FrameKind, FrameOut, Simulation};
use crate::spec::{NodeId, Spec};
use crate::units::Picos;

/// Something that happened to an external node.
#[derive(Clone, Debug, PartialEq)]
pub enum Notice {
    /// The run starts (time zero).
    Start,
    /// A frame's last bit has reached the node's receiver output.
    Frame {
        from: NodeId,
        kind: FrameKind,
        data_bits: u64,
        /// Payload bits of a data frame.
        payload_bits: Option<u64>,
        corrupted: bool,
        /// First and last bit at the sending driver.
        start: Picos,
        end: Picos,
        occupancy: u64,
    },
    /// A timer the node armed has fired.
    Timer { tag: u64 },
    /// A message was queued at the node (by the scenario's traffic).
    Message { payload_bits: u64, to: NodeId },
    /// The line at the node's receiver turned busy or idle (when watched).
    Line { busy: bool },
}

/// What one node hears at one instant.
#[derive(Clone, Debug, PartialEq)]
pub struct Batch<'a> {
    pub node: NodeId,
    pub t: Picos,
    /// Messages in the node's queue.
    pub queued: usize,
    /// Until when the node's latest transmission keeps its enable asserted.
    pub busy_until: Picos,
    pub notices: &'a [Notice],
    /// Payloads supplied by external senders, by (occupancy, first bit).
    pub payloads: &'a HashMap<(u64, u64), String>,
}

/// One frame of a transmission an external node asks for.
#[derive(Clone, Debug, PartialEq)]
pub enum FrameIntent {
    /// Carries the next message of the node's queue.
    Data { payload_hex: Option<String> },
    /// A control frame of `bits` data bits to `to`.
    Control { kind: FrameKind, bits: u64, to: NodeId, payload_hex: Option<String> },
}

/// What an external node asks the engine to do.
#[derive(Clone, Debug, PartialEq)]
pub enum Intent {
    /// Assert the enable at `at` and send these frames back to back.
    Transmit {
        at: Picos,
        frames: Vec<FrameIntent>,
        /// Overrides the node's `release_after_stop` (signed ps).
        release_after: Option<i64>,
    },
    /// Arm a timer that fires at `at` with `tag`.
    Timer { at: Picos, tag: u64 },
    /// Start or stop hearing line busy/idle changes.
    WatchLine(bool),
}

/// The other side of the exchange.
pub trait Gateway: std::fmt::Debug {
    /// Hand `batch` to its node and wait for its intents.
    fn exchange(&mut self, batch: &Batch) -> Result<Vec<Intent>, String>;
    /// The node broke the protocol or failed: tell it, and disconnect it.
    fn fault(&mut self, node: NodeId, at: Picos, message: &str);
    /// An outside stop request (Ctrl-C): the run ends at the current instant.
    fn interrupted(&self) -> bool {
        false
    }
    /// The run is over: say goodbye to every node still connected.
    fn close(&mut self, _at: Picos, _reason: &str) {}
}

/// A client fault, as the report lists it.
#[derive(Clone, Debug, PartialEq)]
pub struct Fault {
    pub node: NodeId,
    pub at: Picos,
    pub message: String,
}

/// Co-simulation state kept by a [`Simulation`].
#[derive(Debug)]
pub struct Cosim {
    gateway: Box<dyn Gateway>,
    silent: Vec<bool>,
    pending: Vec<(NodeId, Notice)>,
    busy_until: Vec<Picos>,
    line_count: Vec<u32>,
    payloads: HashMap<(u64, u64), String>,
    /// Payloads to drop after the next exchange (their frames are fully delivered).
    done_payloads: Vec<(u64, u64)>,
    abort_on_fault: bool,
    pub(crate) aborted: Option<Picos>,
    pub(crate) faults: Vec<Fault>,
    pub(crate) exchanges: u64,
}

impl Cosim {
    pub(crate) fn start(&mut self, spec: &Spec) {
        for (n, node) in spec.nodes.iter().enumerate() {
            if node.external {
                self.pending.push((n, Notice::Start));
            }
        }
    }

    pub(crate) fn has_pending(&self) -> bool {
        !self.pending.is_empty()
    }
}

impl Simulation {
    /// A run in which the scenario's external nodes are driven through `gateway`.
    /// With `abort_on_fault`, a client fault ends the run; otherwise the
    /// faulty node goes quiet and the run continues.
    pub fn with_gateway(
        spec: &Spec,
        scheme: Box<dyn super::AccessScheme>,
        gateway: Box<dyn Gateway>,
        abort_on_fault: bool,
    ) -> Self {
        let mut sim = Simulation::new(spec, scheme);
        let n = spec.nodes.len();
        sim.world.externally_driven = spec.nodes.iter().map(|n| n.external).collect();
        sim.cosim = Some(Box::new(Cosim {
            gateway,
            silent: vec![false; n],
            pending: Vec::new(),
            busy_until: vec![Picos::ZERO; n],
            line_count: vec![0; n],
            payloads: HashMap::new(),
            done_payloads: Vec::new(),
            abort_on_fault,
            aborted: None,
            faults: Vec::new(),
            exchanges: 0,
        }));
        sim
    }

    /// Tell the gateway the run is over (`reason`: why).
    pub fn close_external(&mut self, reason: &str) {
        let now = self.world.now;
        if let Some(c) = &mut self.cosim {
            c.gateway.close(now, reason);
        }
    }

    /// When a client fault ended the run.
    pub fn aborted(&self) -> Option<Picos> {
        self.cosim.as_ref().and_then(|c| c.aborted)
    }

    /// Client faults so far.
    pub fn faults(&self) -> &[Fault] {
        self.cosim.as_ref().map_or(&[], |c| &c.faults)
    }

    /// Batches exchanged with external nodes so far.
    pub fn exchanges(&self) -> u64 {
        self.cosim.as_ref().map_or(0, |c| c.exchanges)
    }

    /// End the run now (an outside stop request, e.g. Ctrl-C): the report then covers up to here.
    pub fn interrupt(&mut self) {
        if let Some(c) = &mut self.cosim {
            c.aborted.get_or_insert(self.world.now);
        }
    }

    pub(crate) fn is_external(&self, node: NodeId) -> bool {
        self.world.is_externally_driven(node)
    }

    pub(crate) fn notify(&mut self, node: NodeId, notice: Notice) {
        if let Some(c) = &mut self.cosim {
            if !c.silent[node] {
                c.pending.push((node, notice));
            }
        }
    }

    /// A frame's last delivery is done: its payload is no longer needed once
    /// the pending batch that shows it has been sent.
    pub(crate) fn forget_payload(&mut self, occupancy: u64, start: u64) {
        if let Some(c) = &mut self.cosim {
            c.done_payloads.push((occupancy, start));
        }
    }

    pub(crate) fn on_line_edge(&mut self, node: NodeId, busy: bool) {
        let Some(c) = &mut self.cosim else { return };
        let before = c.line_count[node];
        c.line_count[node] = if busy { before + 1 } else { before.saturating_sub(1) };
        if (before == 0) != (c.line_count[node] == 0) && self.world.line_watchers.contains(&node) {
            self.notify(node, Notice::Line { busy });
        }
    }

    /// Hand every node its batch for this instant and apply the answers.
    pub(crate) fn exchange(&mut self) {
        let Some(mut c) = self.cosim.take() else { return };
        let mut pending = std::mem::take(&mut c.pending);
        // Node order, and within a node the order things happened.
        pending.sort_by_key(|(n, _)| *n);
        let now = self.world.now;
        let mut i = 0;
        while i < pending.len() && c.aborted.is_none() {
            if c.gateway.interrupted() {
                c.aborted = Some(now);
                break;
            }
            let node = pending[i].0;
            let j = pending[i..].iter().position(|(n, _)| *n != node).map_or(pending.len(), |k| i + k);
            if !c.silent[node] {
                let notices: Vec<Notice> = pending[i..j].iter().map(|(_, x)| x.clone()).collect();
                let batch = Batch {
                    node,
                    t: now,
                    queued: self.world.queue_len(node),
                    busy_until: c.busy_until[node],
                    notices: &notices,
                    payloads: &c.payloads,
                };
                c.exchanges += 1;
                let result = c
                    .gateway
                    .exchange(&batch)
                    .and_then(|intents| intents.into_iter().try_for_each(|intent| self.apply(&mut c, node, intent)));
                if let Err(message) = result {
                    if c.gateway.interrupted() {
                        c.aborted = Some(now);
                        break;
                    }
                    c.gateway.fault(node, now, &message);
                    c.faults.push(Fault { node, at: now, message });
                    c.silent[node] = true;
                    self.world.watch_line(node, false);
                    if c.abort_on_fault {
                        c.aborted = Some(now);
                    }
                }
            }
            i = j;
        }
        for key in c.done_payloads.drain(..) {
            c.payloads.remove(&key);
        }
        self.cosim = Some(c);
    }

    fn apply(&mut self, c: &mut Cosim, node: NodeId, intent: Intent) -> Result<(), String> {
        let now = self.world.now;
        let past = |what: &str, at: Picos| {
            format!("{what} at {} ps is in the past: virtual time is already {} ps", at.0, now.0)
        };
        match intent {
            Intent::Timer { at, tag } => {
                if at < now {
                    return Err(past("timer", at));
                }
                self.world.queue.push(at, super::Event::External { node: node as u32, tag });
            }
            Intent::WatchLine(on) => self.world.watch_line(node, on),
            Intent::Transmit { at, frames, release_after } => {
                if at < now {
                    return Err(past("transmit", at));
                }
                if at > self.world.spec.duration {
                    return Err(format!(
                        "transmit at {} ps lies beyond the end of the run ({} ps)",
                        at.0, self.world.spec.duration.0
                    ));
                }
                let free = c.busy_until[node].max(self.world.driver_free_at(node));
                if at < free {
                    return Err(format!(
                        "transmit at {} ps: the driver's previous transmission keeps its enable until {} ps",
                        at.0, free.0
                    ));
                }
                let earliest = self.world.earliest_enable(node);
                if at < earliest {
                    return Err(format!(
                        "transmit at {} ps: the driver may enable again only at {} ps, when its previous \
                         transmission's output is off and the interframe gap has passed",
                        at.0, earliest.0
                    ));
                }
                if frames.is_empty() {
                    return Err("transmit needs at least one frame".into());
                }
                let data = frames.iter().filter(|f| matches!(f, FrameIntent::Data { .. })).count();
                if data > self.world.queue_len(node) {
                    return Err(format!(
                        "transmit asks for {data} data frames, but {} messages are queued",
                        self.world.queue_len(node)
                    ));
                }
                let overhead = self.world.spec.frame.overhead_bits;
                let mut kinds = Vec::with_capacity(frames.len());
                self.world.begin_tx(node, at);
                for f in frames {
                    let (out, hex) = match f {
                        FrameIntent::Data { payload_hex } => {
                            let msg = self.world.pop_message(node).expect("queue length checked");
                            self.world.count_access_attempt();
                            (FrameOut::data(msg, overhead), payload_hex)
                        }
                        FrameIntent::Control { kind, bits, to, payload_hex } => {
                            (FrameOut::control(kind, Dest::Node(to), bits), payload_hex)
                        }
                    };
                    kinds.push(out.kind);
                    let s = self.world.add_frame(out);
                    if let Some(h) = hex {
                        c.payloads.insert((self.world.tx_occupancy(), s.0), h);
                    }
                }
                let tx = self.world.finish_tx_releasing(release_after);
                c.busy_until[node] = tx.release;
                self.scheme.on_external_tx(&mut self.world, node, &tx, &kinds);
            }
        }
        Ok(())
    }
}
