//! The discrete-event core.
//!
//! Time is a `u64` count of picoseconds. Events pop in time order, and events
//! at equal times in the order they were scheduled (see [`queue`]). One event
//! flows like this: pop → set `now` → dispatch (a traffic arrival, a scheme
//! timer or a frame delivery, which may call the scheme) → let the bus process
//! whatever occupancies have become final. Nothing here does I/O; the caller
//! drives the run with [`Simulation::run_until`] and reads the [`Report`].

pub mod access;
pub mod chars;
pub mod delays;
mod drivers;
pub mod external;
mod frames;
pub mod mailbox;
pub mod outages;
pub mod queue;
pub mod rng;
pub mod shortcut;
mod world;

pub use access::{AccessScheme, SchemeReport, SchemeValue};
pub use world::{Dest, FrameOut, TxTimes, World};

use crate::bus::trace::{BusEvent, BusEventKind, Trace};
use crate::spec::{NodeId, Spec};
use crate::stats::utilization::Piece;
use crate::stats::Cause;
use crate::traffic::{self, Message, Source};
use crate::units::Picos;
use frames::FrameRec;

/// What a frame is for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FrameKind {
    Data,
    Poll,
    EmptyReply,
    Token,
    Beacon,
}

impl FrameKind {
    pub fn name(self) -> &'static str {
        match self {
            FrameKind::Data => "data",
            FrameKind::Poll => "poll",
            FrameKind::EmptyReply => "empty-reply",
            FrameKind::Token => "token",
            FrameKind::Beacon => "beacon",
        }
    }
}

/// A frame shown at a node's receiver output.
#[derive(Clone, Copy, Debug)]
pub struct Reception {
    pub kind: FrameKind,
    pub from: NodeId,
    /// The node whose receiver shows it.
    pub at: NodeId,
    pub corrupted: bool,
    pub message: Option<Message>,
    /// When the frame's last bit left the driver.
    pub sent_end: Picos,
    /// Bus id of the transmission that carried it.
    pub occupancy: u64,
}

/// Events in the queue. Kept small and `Copy`: the queue never allocates per event.
#[derive(Clone, Copy, Debug)]
pub(crate) enum Event {
    Arrival {
        source: u32,
    },
    Timer {
        node: u32,
        tag: u64,
    },
    Deliver {
        frame: u32,
        to: u32,
    },
    /// A timer armed by an external node.
    External {
        node: u32,
        tag: u64,
    },
    /// The line at a watching node's receiver turns busy or idle.
    LineEdge {
        node: u32,
        busy: bool,
    },
    /// A node goes down or comes back (`access.faults`).
    NodeFault {
        node: u32,
        down: bool,
    },
}

/// One simulation run.
#[derive(Debug)]
pub struct Simulation {
    world: World,
    scheme: Box<dyn AccessScheme>,
    sources: Vec<Source>,
    started: bool,
    /// Set when simulated time stopped advancing (see [`STALL_EVENTS`]).
    stalled: Option<Picos>,
    /// Co-simulation: external nodes and their gateway.
    cosim: Option<Box<external::Cosim>>,
    /// Set by [`Simulation::end_early`]: the run ends here instead of at its duration.
    cut: Option<Picos>,
}

/// Events at one instant after which a run counts as stalled: a scenario
/// whose cycle takes no simulated time would otherwise never end.
pub const STALL_EVENTS: u64 = 1_000_000;

/// Exchanges with external nodes at one instant after which a co-simulation
/// counts as stalled (each is a network round trip, so the limit is lower).
pub const STALL_EXCHANGES: u64 = 10_000;

/// A run that has ended, handed over whole: everything it accumulated, for
/// the report to be built from (`Report::from_run`). The engine builds no
/// report itself.
#[derive(Debug)]
pub struct Finished {
    /// The run's state and tallies at its end.
    pub world: World,
    /// The scheme's own figures.
    pub scheme: SchemeReport,
    /// The instant simulated time stopped advancing, if it did.
    pub stalled: Option<Picos>,
    /// Co-simulation: when the run was aborted, the exchanges with external
    /// nodes, and the faults of their clients.
    pub cosim: Option<CosimOutcome>,
    /// Bus events recorded while closing the run (frames followed past the end).
    pub events: Vec<BusEvent>,
}

/// What a co-simulation adds to a finished run.
#[derive(Debug)]
pub struct CosimOutcome {
    pub aborted: Option<Picos>,
    pub exchanges: u64,
    pub faults: Vec<external::Fault>,
}

impl Simulation {
    /// A run of `spec` under `scheme` (built by the caller, usually with
    /// `crate::scheme::build`).
    pub fn new(spec: &Spec, scheme: Box<dyn AccessScheme>) -> Self {
        Self::with_trace(spec, scheme, None)
    }

    /// A run that records bus events whose time lies in `window` (ps, inclusive).
    pub fn with_trace(spec: &Spec, scheme: Box<dyn AccessScheme>, window: Option<(Picos, Picos)>) -> Self {
        assert_eq!(scheme.name(), spec.access.name(), "the scheme handed in is not the one the spec asks for");
        let trace = Trace::new(window.map(|(a, b)| (a.0, b.0)));
        let world = World::new(spec.clone(), trace);
        let sources = traffic::sources(spec);
        Simulation { world, scheme, sources, started: false, stalled: None, cosim: None, cut: None }
    }

    pub fn now(&self) -> Picos {
        self.world.now
    }

    pub fn spec(&self) -> &Spec {
        &self.world.spec
    }

    /// The instant at which simulated time stopped advancing, if it did.
    pub fn stalled(&self) -> Option<Picos> {
        self.stalled
    }

    /// Events processed so far.
    pub fn events(&self) -> u64 {
        self.world.events
    }

    /// Take the bus events recorded so far.
    pub fn drain_trace(&mut self) -> Vec<BusEvent> {
        std::mem::take(&mut self.world.trace.events)
    }

    fn start(&mut self) {
        self.started = true;
        let duration = self.world.spec.duration;
        for (i, src) in self.sources.iter_mut().enumerate() {
            let t = src.next_arrival(Picos::ZERO);
            if t < duration {
                self.world.queue.push(t, Event::Arrival { source: i as u32 });
            }
        }
        for f in self.world.spec.access.node_faults().to_vec() {
            if f.at < duration {
                self.world.queue.push(f.at, Event::NodeFault { node: f.node as u32, down: f.down });
            }
        }
        self.scheme.start(&mut self.world);
        if let Some(c) = &mut self.cosim {
            c.start(&self.world.spec);
        }
    }

    /// Process every event before `until` (capped at the scenario duration).
    pub fn run_until(&mut self, until: Picos) {
        if !self.started {
            self.start();
        }
        let until = until.min(self.world.spec.duration);
        self.world.until = until.0;
        let mut same_instant = 0u64;
        let mut exchanges_here = 0u64;
        loop {
            if self.stalled.is_some() || self.aborted().is_some() || self.cut.is_some() {
                break;
            }
            // Lockstep: before time moves on, every external node hears what
            // happened to it at this instant and answers.
            if self.cosim.as_ref().is_some_and(|c| c.has_pending())
                && self.world.queue.peek_time() != Some(self.world.now)
            {
                exchanges_here += 1;
                if exchanges_here > STALL_EXCHANGES {
                    self.stalled = Some(self.world.now);
                    break;
                }
                self.exchange();
                continue;
            }
            let Some(t) = self.world.queue.peek_time() else { break };
            if t >= until {
                break;
            }
            if t == self.world.now {
                same_instant += 1;
                if same_instant > STALL_EVENTS {
                    self.stalled = Some(t);
                    break;
                }
            } else {
                same_instant = 0;
                exchanges_here = 0;
            }
            let (t, ev) = self.world.queue.pop().expect("peeked");
            self.world.now = t;
            self.world.events += 1;
            match ev {
                Event::Timer { node, tag } => self.scheme.on_timer(&mut self.world, node as usize, tag),
                Event::Deliver { frame, to } => self.on_deliver(frame, to as usize),
                // Events from outside the scheme (closed-form stretches count them).
                Event::Arrival { source } => {
                    self.world.outside_events += 1;
                    self.on_arrival(source as usize);
                }
                Event::External { node, tag } => {
                    self.world.outside_events += 1;
                    self.notify(node as usize, external::Notice::Timer { tag });
                }
                Event::LineEdge { node, busy } => {
                    self.world.outside_events += 1;
                    self.on_line_edge(node as usize, busy);
                }
                Event::NodeFault { node, down } => {
                    self.world.outside_events += 1;
                    self.world.set_down(node as usize, down);
                    self.scheme.on_node_fault(&mut self.world, node as usize, down);
                }
            }
            // `now` is past `t` when the scheme did periods in closed form.
            let w = &mut self.world;
            w.bus.process(&w.line, w.now.0, false, &mut w.trace);
        }
        if until > self.world.now {
            self.world.now = until;
        }
    }

    /// Run to the end and hand the run over.
    pub fn run(mut self) -> Finished {
        self.run_until(self.world.spec.duration);
        self.finish()
    }

    /// End the run at the scenario duration and hand it over, with the bus
    /// events recorded while closing it.
    ///
    /// Frames still in flight at the end are followed to their delivery (no
    /// new traffic, timers or scheme decisions happen after the end), so the
    /// utilization of the last instants is classified by their real fate.
    pub fn finish(mut self) -> Finished {
        let mut end = self.world.spec.duration;
        if self.world.now < end && self.stalled.is_none() {
            self.run_until(end);
        }
        if let Some(t) = self.aborted().or(self.cut) {
            // A run ended early covers the time up to its end.
            end = t.max(self.world.spec.warmup).min(end);
            self.world.spec.duration = end;
            self.world.bus.end_window_at(end.0);
        }
        let w = &mut self.world;
        while let Some((t, ev)) = w.queue.pop() {
            if let Event::Deliver { frame, to } = ev {
                let f = w.frames.get(frame);
                if let (FrameKind::Data, Some(m), false) = (f.kind, f.message, f.aborted) {
                    if !self.scheme.holds(&m) {
                        // Neither delivered nor given up in the run, and not
                        // held by the scheme (which counts its own).
                        w.stats.frames.in_flight_at_end += 1;
                    }
                }
                w.now = w.now.max(t);
                resolve_delivery(w, frame, to as usize);
            }
        }
        let close = w.now.max(end);
        w.bus.finish(&w.line, close.0, end.0, &mut w.trace);
        let scheme = self.scheme.report(&self.world);
        let events = std::mem::take(&mut self.world.trace.events);
        let cosim = self.cosim.map(|c| CosimOutcome { aborted: c.aborted, exchanges: c.exchanges, faults: c.faults });
        Finished { world: self.world, scheme, stalled: self.stalled, cosim, events }
    }

    /// End the run at the current instant: the report then covers the time up
    /// to here, as if the scenario's duration ended now (nothing later runs).
    pub fn end_early(&mut self) {
        self.cut.get_or_insert(self.world.now);
    }

    /// Bus events before this instant are final: none will be recorded
    /// earlier than it from now on (for streaming a sorted event log).
    pub fn settled_before(&self) -> Picos {
        Picos(self.world.bus.frontier(self.world.now.0))
    }

    fn on_arrival(&mut self, source: usize) {
        let now = self.world.now;
        let src = &mut self.sources[source];
        let node = src.node;
        let payload_bits = src.draw_payload();
        let dest = src.dest(self.scheme.default_destination(node));
        let msg = Message { arrival: now.0, payload_bits, source: node, dest, flow: src.flow };
        let next = src.next_arrival(now);
        if next < self.world.spec.duration {
            self.world.queue.push(next, Event::Arrival { source: source as u32 });
        }
        let w = &mut self.world;
        let counted = w.in_window(now);
        if counted {
            w.stats.frames.arrived += 1;
        }
        if !w.mail.offer(msg) {
            if counted {
                w.stats.frames.dropped += 1;
            }
            return;
        }
        if self.is_external(node) {
            let to = msg.dest;
            self.notify(node, external::Notice::Message { payload_bits: msg.payload_bits, to });
            return;
        }
        self.scheme.on_message(&mut self.world, node);
    }

    fn on_deliver(&mut self, idx: u32, to: NodeId) {
        let w = &mut self.world;
        let (f, cause) = resolve_delivery(w, idx, to);
        let corrupted = cause.corrupted();
        let now = w.now;
        // Nobody listens at a down node: its frames are lost there (unheard).
        let down = w.health.is_down(to);
        if w.in_window(now) {
            if f.kind == FrameKind::Data {
                // The frame's time on the wire inside the measured window.
                let inside = f.e.min(w.spec.duration.0).saturating_sub(f.s.max(w.spec.warmup.0));
                let st = &mut w.stats;
                st.frames.attempts += 1;
                st.data_frames_sent += 1;
                st.data_wire_ps += u128::from(f.e - f.s);
                if down || corrupted {
                    if down {
                        st.frames.unheard += 1;
                    } else {
                        st.frames.corrupted += 1;
                        st.frames.corrupted_by.count(cause);
                    }
                    if f.message.is_some() && !f.aborted && !self.scheme.resends_corrupted() {
                        // Sent once: the message is lost, and counted so.
                        st.frames.given_up += 1;
                    }
                } else if let Some(m) = f.message {
                    st.frames.delivered += 1;
                    st.payload_bits += u128::from(m.payload_bits);
                    st.carried_ps += u128::from(inside);
                    let lat = now.0 - m.arrival;
                    st.latency_all.record(lat);
                    st.latency_node[m.source].record(lat);
                    if let Some(i) = w.id_index[m.source][usize::from(m.flow)] {
                        w.stats.latency_id[i as usize].1.record(lat);
                    }
                }
            } else {
                w.stats.frames.control_frames += 1;
                if corrupted && !down {
                    w.stats.frames.control_corrupted += 1;
                }
            }
        }
        let rx = Reception {
            kind: f.kind,
            from: f.src,
            at: to,
            corrupted,
            message: f.message,
            sent_end: Picos(f.e),
            occupancy: f.occupancy,
        };
        if down {
            self.scheme.on_unheard(&mut self.world, &rx);
            return;
        }
        if self.is_external(to) {
            let done = self.world.frames.get(idx).remaining == 0;
            let notice = external::Notice::Frame {
                from: f.src,
                kind: f.kind,
                data_bits: f.data_bits,
                payload_bits: f.message.map(|m| m.payload_bits),
                corrupted,
                start: Picos(f.s),
                end: Picos(f.e),
                occupancy: f.occupancy,
            };
            self.notify(to, notice);
            if done {
                self.forget_payload(f.occupancy, f.s);
            }
            return;
        }
        self.scheme.on_receive(&mut self.world, &rx);
    }
}

/// The physics of one delivery, shared by the run and by closing it: is the
/// frame corrupted at `to`; trace it; and once its last delivery is done,
/// classify its line time, release its occupancy and free its record.
fn resolve_delivery(w: &mut World, idx: u32, to: NodeId) -> (FrameRec, Cause) {
    let f = *w.frames.get(idx);
    // A receiver reacting at the stop bit's sample point has taken the frame
    // by then: what the line does after it no longer matters to it.
    let heard_until = f.e.saturating_sub(w.fw[to].react).max(f.s);
    let mut cause = if f.aborted || w.bus.is_corrupted(&w.line, f.src, to, f.s, heard_until) {
        Cause::Contention
    } else {
        Cause::Intact
    };
    if w.uart.is_some() || f.flags != 0 {
        let framing = framing_faults(w, &f, to);
        if cause == Cause::Intact {
            cause = framing;
        }
    }
    if cause == Cause::Intact {
        if let Some(noise) = &mut w.noise {
            if noise.corrupts(to, w.spec.frame.encoding.line_halves(f.data_bits).div_ceil(2)) {
                cause = Cause::Noise;
            }
        }
    }
    let corrupted = cause.corrupted();
    w.trace.push(BusEvent {
        t: f.e,
        node: f.src,
        kind: BusEventKind::FrameEnd { frame: f.kind.name(), to, corrupted },
    });
    let rec = w.frames.get_mut(idx);
    rec.remaining -= 1;
    rec.corrupted_any |= corrupted;
    if rec.remaining == 0 {
        let any = rec.corrupted_any;
        if f.flags & FrameRec::CUT != 0 && w.in_window(w.now) {
            w.stats.uart.cut_frames += 1;
        }
        add_frame_pieces(w, &f, any);
        w.bus.frame_resolved(f.occupancy);
        w.frames.release(idx);
    }
    (f, cause)
}

/// The framing rules a frame can break at receiver `to`, besides another
/// driver's signal: an enable that cut its first or last bit, a gap between
/// characters past `char_timeout`, a start too soon after the previous frame
/// (`silence`), recessive bits that the bias does not settle within a bit
/// (the floating line). Each broken rule is counted (per delivery; cut
/// frames once per frame); the cause returned is the floating line if it
/// applies, else framing.
fn framing_faults(w: &mut World, f: &FrameRec, to: NodeId) -> Cause {
    use FrameRec as F;
    let counted = w.in_window(w.now);
    let mut bad = f.flags & F::CUT != 0;
    let u = &mut w.stats.uart;
    if f.flags & F::GAP_TIMEOUT != 0 {
        bad = true;
        u.char_timeouts += u64::from(counted);
    }
    let mut floating = false;
    if let Some(run) = &w.uart {
        if f.flags & F::AUTO != 0 && run.unsettled[to] {
            floating = true;
            u.unsettled_frames += u64::from(counted);
        }
        if let Some(silence) = run.silence {
            let start = f.s + w.line.delay_ps(f.src, to);
            if let Some(prev) = w.bus.last_frame_end_at(&w.line, to, start, f.occupancy) {
                if start - prev < silence {
                    bad = true;
                    u.silence_violations += u64::from(counted);
                }
            }
        }
    }
    if floating {
        Cause::Floating
    } else if bad {
        Cause::Framing
    } else {
        Cause::Intact
    }
}

/// Utilization pieces of a resolved frame.
fn add_frame_pieces(w: &mut World, f: &FrameRec, corrupted: bool) {
    if corrupted {
        w.bus.util.add(Piece::Wasted, f.s, f.e);
        return;
    }
    match (f.kind, f.message) {
        (FrameKind::Data, Some(m)) if f.data_bits > 0 => {
            // Overhead and payload share the frame in proportion to their data bits.
            let wire = f.e - f.s;
            let overhead = ((wire as u128 * u128::from(f.data_bits - m.payload_bits)) / u128::from(f.data_bits)) as u64;
            w.bus.util.add(Piece::Overhead, f.s, f.s + overhead);
            w.bus.util.add(Piece::Payload, f.s + overhead, f.e);
        }
        _ => w.bus.util.add(Piece::Overhead, f.s, f.e),
    }
}
