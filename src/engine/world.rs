//! The world a scheme acts on: clock, queues, transmissions, timers, streams.

use super::drivers::Drivers;
use super::frames::{FrameRec, FrameTable};
use super::mailbox::Mailboxes;
use super::outages::Health;

use super::queue::EventQueue;
use super::rng::Stream;
use super::{Event, FrameKind};
use crate::bus::trace::{BusEvent, BusEventKind, Trace};
use crate::bus::Bus;
use crate::line::LineModel;
use crate::spec::{NodeId, Spec};
use crate::stats::Stats;
use crate::traffic::Message;
use crate::units::Picos;

/// Who a frame is addressed to.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Dest {
    Node(NodeId),
    /// Every node except the sender.
    All,
}

/// A frame a scheme asks to send.
#[derive(Clone, Copy, Debug)]
pub struct FrameOut {
    pub kind: FrameKind,
    pub dest: Dest,
    /// Total data bits (before line coding).
    pub data_bits: u64,
    /// The message carried, for data frames.
    pub message: Option<Message>,
}

impl FrameOut {
    /// A data frame carrying `msg` to its destination.
    pub fn data(msg: Message, overhead_bits: u64) -> Self {
        FrameOut {
            kind: FrameKind::Data,
            dest: Dest::Node(msg.dest),
            data_bits: overhead_bits + msg.payload_bits,
            message: Some(msg),
        }
    }

    /// A control frame of `data_bits` total data bits.
    pub fn control(kind: FrameKind, dest: Dest, data_bits: u64) -> Self {
        FrameOut { kind, dest, data_bits, message: None }
    }
}

/// Times of a transmission the engine has scheduled.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TxTimes {
    /// Enable asserted.
    pub enable: Picos,
    /// First bit on the wire (`enable + enable_lead`).
    pub first_bit: Picos,
    /// End of the last bit on the wire: where the frame ends for every receiver.
    pub last_bit: Picos,
    /// Enable released: `last_bit + release_after_stop` (the end of the
    /// last dominant bit for an auto-direction transceiver).
    pub release: Picos,
    /// Output high-impedance: `release + disable_time`.
    pub off: Picos,
    /// Bus id of the occupancy.
    pub occupancy: u64,
}

/// A node's firmware and transceiver timing, resolved once (ps).
#[derive(Clone, Copy, Debug)]
pub(crate) struct Firmware {
    /// Enable asserted → output valid.
    pub enable: u64,
    /// Enable asserted → first bit's edge.
    pub lead: u64,
    /// Enable released after the last bit's end (signed).
    pub release_after: i64,
    /// Its receiver reacts this long before a frame's end.
    pub react: u64,
    pub auto: bool,
}

/// UART framing in a run: character gaps, silence rules, auto-direction.
#[derive(Debug)]
pub(crate) struct UartRun {
    /// Per node: the stream that seeds each frame's character gaps.
    pub gap_rng: Vec<Stream>,
    /// Per frame gap longer than this discards it (`u64::MAX`: no rule).
    pub char_timeout: u64,
    pub silence: Option<u64>,
    /// Per receiver: an auto-direction sender's recessive bits do not settle
    /// to a defined level within a bit there.
    pub unsettled: Vec<bool>,
    /// Length of a character's stop bits.
    pub stop_ps: u64,
}

/// Bit errors in a run: each receiver's bit error rate and its own stream.
#[derive(Debug)]
pub(crate) struct NoiseRun {
    /// Per receiver: ln(1 − BER) (0 where there is no noise).
    ln_keep: Vec<f64>,
    rng: Vec<Stream>,
}

impl NoiseRun {
    /// Does noise corrupt a frame of `bits` line bits at receiver `to`? One
    /// draw from the receiver's stream, intact with probability (1 − BER)^bits.
    pub fn corrupts(&mut self, to: NodeId, bits: u64) -> bool {
        let ln_keep = self.ln_keep[to];
        if ln_keep == 0.0 {
            return false;
        }
        let u: f64 = rand::Rng::random(&mut self.rng[to]);
        u >= (bits as f64 * ln_keep).exp()
    }
}

/// A transmission being assembled.
#[derive(Clone, Copy, Debug)]
struct TxBuild {
    node: NodeId,
    enable: u64,
    cursor: u64,
    frames: u32,
    occupancy: u64,
    /// The enable cuts frames' last bits: remember which frames to check.
    track: bool,
}

/// Everything but the scheme: the state a scheme reads and acts through.
#[derive(Debug)]
pub struct World {
    pub(crate) spec: Spec,
    pub(crate) line: LineModel,
    pub(crate) now: Picos,
    pub(crate) queue: EventQueue<Event>,
    pub(crate) bus: Bus,
    /// Every node's waiting and held messages.
    pub(crate) mail: Mailboxes,
    pub(crate) access_rng: Vec<Stream>,
    pub(crate) frames: FrameTable,
    pub(crate) stats: Stats,
    pub(crate) trace: Trace,
    pub(crate) events: u64,
    /// Per node and traffic source: index into `stats.latency_id`.
    pub(crate) id_index: Vec<Vec<Option<u32>>>,
    tx: Option<TxBuild>,
    /// Each driver's latest release and earliest next enable.
    drivers: Drivers,
    /// Nodes that asked to hear line busy/idle changes (co-simulation);
    /// empty in every other run, so transmissions pay nothing for it.
    pub(crate) line_watchers: Vec<NodeId>,
    /// Nodes driven by an external process in this run (co-simulation with a gateway).
    pub(crate) externally_driven: Vec<bool>,
    pub(crate) fw: Vec<Firmware>,
    pub(crate) uart: Option<Box<UartRun>>,
    /// Which nodes are down, and every down period.
    pub(crate) health: Health,
    /// Bit errors, when the scenario models noise.
    pub(crate) noise: Option<Box<NoiseRun>>,
    /// Half a bit time: a cut this long or longer corrupts a frame.
    half_bit: u64,
    /// Frames of the open transmission, when its release may cut them.
    tx_frames: Vec<u32>,
    /// The last two frame sizes and their times on the wire (data bits, ps):
    /// a bus sends few sizes, and the float conversion is not free.
    frame_times: [(u64, u64); 2],
    /// Closed-form stretches may run (`engine::shortcut`): asked for, and
    /// nothing in the scenario draws or decides outside the fingerprint.
    shortcuts: bool,
    /// Events handled so far that did not come from the scheme (arrivals,
    /// faults, external nodes, line edges).
    pub(crate) outside_events: u64,
    /// Periods done in closed form so far (for the report's `run` block).
    pub(crate) closed_form_periods: u64,
    /// Where the caller stops the current stretch of the run (exclusive).
    pub(crate) until: u64,
}

/// No message's latency is shorter than this (ps): its data frame's bits
/// on the wire (overhead and the smallest payload any source draws, with
/// no gaps between characters), less the largest reaction offset (a
/// receiver reacting before the frame's end). An external node's frames are
/// sized by its client, so with one the bound is 1 ps.
fn shortest_latency(spec: &Spec, fw: &[Firmware]) -> u64 {
    if spec.nodes.iter().any(|n| n.external) {
        return 1;
    }
    let payload = spec.nodes.iter().flat_map(|n| &n.traffic).map(|t| t.payload.min_bits()).min().unwrap_or(0);
    let react = fw.iter().map(|f| f.react).max().unwrap_or(0);
    spec.frame.base_time(spec.frame.overhead_bits + payload).0.saturating_sub(react).max(1)
}

impl World {
    pub(crate) fn new(mut spec: Spec, trace: Trace) -> Self {
        if spec.timing == crate::spec::Timing::Random {
            // Each node's times are drawn once, within their ranges, from its own stream.
            use rand::Rng;
            for node in &mut spec.nodes {
                let mut rng = super::rng::stream(spec.seed, &node.name, "timing");
                let t = &mut node.transceiver;
                let mut draw = |r: crate::spec::TimeRange| Picos(rng.random_range(r.min.0..=r.max.0));
                t.enable_time = draw(t.enable_range);
                t.disable_time = draw(t.disable_range);
                t.receiver_delay = draw(t.receiver_range);
            }
        }
        let line = LineModel::new(&spec);
        let bus = Bus::new(&spec, &line);
        let fw: Vec<Firmware> = spec
            .nodes
            .iter()
            .map(|node| {
                let t = &node.transceiver;
                Firmware {
                    enable: t.enable_time.0,
                    lead: t.lead().0,
                    release_after: t.release_after_stop,
                    react: t.react_offset(&spec.frame).0,
                    auto: t.auto_direction,
                }
            })
            .collect();
        let uart = spec.frame.encoding.uart().map(|_| {
            let bit = spec.frame.bit_time();
            Box::new(UartRun {
                gap_rng: spec.nodes.iter().map(|node| super::rng::stream(spec.seed, &node.name, "chargap")).collect(),
                char_timeout: spec.frame.char_timeout.map_or(u64::MAX, |t| t.0),
                silence: spec.frame.silence.map(|t| t.0),
                unsettled: (0..spec.nodes.len())
                    .map(|i| match (line.idle_state(&spec, i), line.settled.settle[i]) {
                        (crate::line::IdleState::Undefined, _) => true,
                        (_, Some(t)) => t > bit,
                        (_, None) => false,
                    })
                    .collect(),
                stop_ps: spec.frame.stop_time().0,
            })
        });
        let noise = crate::line::noise::modelled(&spec).then(|| {
            Box::new(NoiseRun {
                ln_keep: crate::line::noise::bit_error_rates(&spec, &line).iter().map(|p| (-p).ln_1p()).collect(),
                rng: spec.nodes.iter().map(|node| super::rng::stream(spec.seed, &node.name, "noise")).collect(),
            })
        });
        let half_bit = spec.frame.time_of_halves(1).0;
        let n = spec.nodes.len();
        let access_rng = spec.nodes.iter().map(|node| super::rng::stream(spec.seed, &node.name, "access")).collect();
        let shortest = shortest_latency(&spec, &fw);
        let shapes = crate::stats::LatencyShape::for_run(shortest, spec.duration.0, n);
        let mut stats = Stats::new(n, shapes);
        let id_index = spec
            .nodes
            .iter()
            .map(|node| {
                node.traffic
                    .iter()
                    .map(|t| {
                        t.id.map(|id| {
                            stats.latency_id.push((id, crate::stats::LatencyStats::with_shape(shapes.1)));
                            (stats.latency_id.len() - 1) as u32
                        })
                    })
                    .collect()
            })
            .collect();
        // Character gaps drawn per frame, bit errors and node faults are not
        // in a closed-form period's fingerprint: no stretches with them.
        let random_gaps = uart.is_some() && matches!(spec.frame.char_gap, crate::spec::CharGap::Random { .. });
        let shortcuts = spec.shortcuts && !random_gaps && noise.is_none() && spec.access.node_faults().is_empty();
        World {
            id_index,
            line,
            bus,
            now: Picos::ZERO,
            queue: EventQueue::with_capacity(256),
            mail: Mailboxes::new(&spec),
            access_rng,
            frames: FrameTable::with_capacity(64),
            stats,
            trace,
            events: 0,
            tx: None,
            drivers: Drivers::new(n, spec.frame.interframe_gap.0),
            line_watchers: Vec::new(),
            externally_driven: vec![false; n],
            fw,
            uart,
            noise,
            health: Health::new(n),
            half_bit,
            tx_frames: Vec::with_capacity(16),
            frame_times: [(u64::MAX, 0); 2],
            shortcuts,
            outside_events: 0,
            closed_form_periods: 0,
            until: 0,
            spec,
        }
    }

    pub fn now(&self) -> Picos {
        self.now
    }

    pub fn spec(&self) -> &Spec {
        &self.spec
    }

    pub fn line(&self) -> &LineModel {
        &self.line
    }

    /// May a closed-form stretch run now (see `engine::shortcut`)?
    pub(crate) fn shortcuts_allowed(&self) -> bool {
        self.shortcuts && self.line_watchers.is_empty() && !self.externally_driven.iter().any(|&x| x)
    }

    /// The run's state outside the scheme, for a closed-form stretch.
    pub(crate) fn visit_state(&mut self, v: &mut dyn crate::periodic::Visit) {
        if self.tx.is_some() || !self.tx_frames.is_empty() || self.frames.live() > 0 || self.mail.total() > 0 {
            // Frames or messages in the state: not fingerprinted, so no stretch.
            v.refuse();
            return;
        }
        self.drivers.visit(v);
        self.health.visit(v);
        self.bus.visit(v);
        self.stats.visit(v);
    }

    /// How many periods of `period` ps, starting now (`now`, the previous
    /// period having started at `prev`), a stretch may skip: the whole
    /// previous period and one more after the skipped ones lie in the
    /// measured window, the skipped ones end before anything else happens,
    /// and none comes near the trace window. `None` when not one.
    pub(crate) fn periods_that_fit(&self, now: u64, period: u64, prev: u64) -> Option<u64> {
        let (warmup, duration) = (self.spec.warmup.0, self.spec.duration.0);
        if prev < warmup.checked_add(period)? {
            return None;
        }
        // The skipped periods end strictly before the horizon, and two
        // periods (the processing that lags the clock) before the end.
        let horizon = self.queue.peek_time().map_or(self.until, |t| t.0.min(self.until));
        let mut limit = horizon.min(duration.checked_sub(2 * period)?.saturating_add(1));
        if let Some((a, b)) = self.trace.window() {
            if b.saturating_add(period) >= now {
                if a <= now.saturating_add(period) {
                    return None;
                }
                limit = limit.min(a - period);
            }
        }
        let k = limit.checked_sub(now + 1)? / period;
        (k > 0).then_some(k)
    }

    /// Is `t` inside the measured window?
    pub fn in_window(&self, t: Picos) -> bool {
        t >= self.spec.warmup && t < self.spec.duration
    }

    pub fn queue_len(&self, node: NodeId) -> usize {
        self.mail.len(node)
    }

    /// Take the oldest message queued at `node`.
    pub fn pop_message(&mut self, node: NodeId) -> Option<Message> {
        self.mail.pop(node)
    }

    /// Tell the engine how many messages the scheme holds for `node` outside
    /// its queue; they count against the node's `queue_limit`.
    pub fn set_holding(&mut self, node: NodeId, messages: usize) {
        self.mail.set_holding(node, messages);
    }

    /// Take the queued message of `node` with the smallest `key` (the oldest
    /// among equals), e.g. the highest-priority identifier.
    pub fn pop_message_min_by_key<K: Ord>(&mut self, node: NodeId, key: impl Fn(&Message) -> K) -> Option<Message> {
        self.mail.pop_min_by_key(node, key)
    }

    /// The smallest `key` among `node`'s queued messages.
    pub fn queue_min_key<K: Ord>(&self, node: NodeId, key: impl Fn(&Message) -> K) -> Option<K> {
        self.mail.min_key(node, key)
    }

    /// Put a message back at the head of its queue (for retransmission).
    pub fn push_front(&mut self, node: NodeId, msg: Message) {
        self.mail.push_front(node, msg);
    }

    /// Is `node` down (a fault) now?
    pub fn is_down(&self, node: NodeId) -> bool {
        self.health.is_down(node)
    }

    /// A node goes down or comes back up now.
    pub(crate) fn set_down(&mut self, node: NodeId, down: bool) {
        self.health.set_down(node, down, self.now);
    }

    /// Has `node` come back up from a down period and not answered since?
    pub fn is_node_back(&self, node: NodeId) -> bool {
        self.health.is_back(node)
    }

    /// The scheme treats `node` as silent from now on (it noticed a failure).
    pub fn node_found_silent(&mut self, node: NodeId) {
        self.health.found_silent(node, self.now);
    }

    /// `node` answered the scheme now (the first answer after coming back counts).
    pub fn node_answered(&mut self, node: NodeId) {
        self.health.answered(node, self.now);
    }

    /// Count a message the scheme gives up on (its last allowed attempt failed).
    pub fn count_given_up(&mut self) {
        if self.in_window(self.now) {
            self.stats.frames.given_up += 1;
        }
    }

    /// Count one channel access attempt (for `throughput.offered`).
    pub fn count_access_attempt(&mut self) {
        if self.in_window(self.now) {
            self.stats.frames.access_attempts += 1;
        }
    }

    /// The node's access-scheme random stream.
    pub fn rng(&mut self, node: NodeId) -> &mut Stream {
        &mut self.access_rng[node]
    }

    /// When the receiver output of `to` shows what driver `from` put on the line at `t`.
    pub fn seen_at(&self, from: NodeId, to: NodeId, t: Picos) -> Picos {
        t + self.line.delay(from, to) + self.spec.nodes[to].transceiver.receiver_delay
    }

    /// From `node`'s enable to its first bit's edge.
    pub fn enable_lead(&self, node: NodeId) -> Picos {
        Picos(self.fw[node].lead)
    }

    /// When `to` reacts to a frame from `from` whose last bit leaves the
    /// driver at `last_bit`: its receiver shows the end, less its reaction
    /// offset (a UART reacting at the stop bit's sample point).
    pub fn reacts_at(&self, from: NodeId, to: NodeId, last_bit: Picos) -> Picos {
        Picos(self.seen_at(from, to, last_bit).0 - self.fw[to].react)
    }

    /// If the receiver of `node` shows another driver now, until when the
    /// activity it shows lasts (a later signal may extend it: sense again then).
    pub fn carrier_until(&self, node: NodeId) -> Option<Picos> {
        self.bus.sensed_until(&self.line, node, self.now.0).map(Picos)
    }

    /// The transmissions the bus still holds: recent, running and scheduled.
    pub fn occupancies(&self) -> impl Iterator<Item = &crate::bus::Occupancy> {
        self.bus.occupancies()
    }

    /// Stop `node`'s running transmission `occupancy` now: every frame of it
    /// not yet finished is cut (its destination sees it corrupted when its
    /// delivery comes due), `jam_bits` line bits of jam follow, then the
    /// enable is released.
    pub fn abort_tx(&mut self, node: NodeId, occupancy: u64, jam_bits: u64) -> TxTimes {
        let now = self.now.0;
        let lead = self.fw[node].lead;
        let jam = self.spec.frame.duration(jam_bits).0;
        let release = now.max(self.bus.occupancies().find(|o| o.id == occupancy).map_or(now, |o| o.a + lead)) + jam;
        let off = release + self.spec.nodes[node].transceiver.disable_time.0;
        for rec in self.frames.slots_mut() {
            if rec.occupancy != occupancy || rec.remaining == 0 || rec.e <= now {
                continue;
            }
            // Cut: the frame's bits end now; it is delivered (as corrupted) when its
            // delivery event comes due.
            rec.e = rec.s.max(now);
            rec.aborted = true;
        }
        self.bus.util.add(crate::stats::utilization::Piece::Wasted, release - jam, release);
        self.bus.cut_short(occupancy, release, off);
        self.released(node, release, off);
        TxTimes {
            enable: Picos(self.bus.occupancies().find(|o| o.id == occupancy).map_or(now, |o| o.a)),
            first_bit: Picos(self.bus.occupancies().find(|o| o.id == occupancy).map_or(now, |o| o.a + lead)),
            last_bit: Picos(release),
            release: Picos(release),
            off: Picos(off),
            occupancy,
        }
    }

    /// Fire `on_timer(node, tag)` at `at` (not in the past).
    pub fn set_timer(&mut self, node: NodeId, at: Picos, tag: u64) {
        debug_assert!(at >= self.now, "timer in the past");
        self.queue.push(at.max(self.now), Event::Timer { node: node as u32, tag });
    }

    /// Start assembling a transmission whose enable is asserted at `at`, or
    /// as soon after it as the driver may be enabled again: never in the
    /// past, and never before its previous occupancy is off plus the
    /// interframe gap ([`World::earliest_enable`]).
    pub fn begin_tx(&mut self, node: NodeId, at: Picos) {
        let at = at.max(self.earliest_enable(node));
        self.open_tx(node, at);
    }

    /// Start the frame that continues a node's own arbitration field (one
    /// frame with it, so no interframe gap): not before its last release.
    pub fn begin_tx_continuing(&mut self, node: NodeId, at: Picos) {
        assert!(at.0 >= self.drivers.last_release(node), "scheme error: a frame before the driver's previous release");
        self.open_tx(node, at);
    }

    /// The earliest instant `node`'s driver may be enabled for a new
    /// transmission: its previous occupancy's output-off plus the interframe
    /// gap, and not before now.
    pub fn earliest_enable(&self, node: NodeId) -> Picos {
        Picos(self.drivers.next_enable(node)).max(self.now)
    }

    /// Record that `node`'s latest occupancy releases at `release` and is off at `off`.
    fn released(&mut self, node: NodeId, release: u64, off: u64) {
        self.drivers.released(node, release, off);
    }

    fn open_tx(&mut self, node: NodeId, at: Picos) {
        assert!(self.tx.is_none(), "begin_tx while another transmission is open");
        let at = at.max(self.now).0;
        let fw = self.fw[node];
        let track = fw.release_after < 0 || self.externally_driven[node];
        if track {
            self.tx_frames.clear();
        }
        self.tx = Some(TxBuild {
            node,
            enable: at,
            cursor: at + fw.lead,
            frames: 0,
            occupancy: self.bus.reserve_id(),
            track,
        });
    }

    /// Append a frame to the open transmission, after the interframe gap if
    /// it is not the first. Returns the time its first bit leaves the driver.
    pub fn add_frame(&mut self, f: FrameOut) -> Picos {
        let mut tx = self.tx.expect("add_frame without begin_tx");
        if tx.frames > 0 {
            tx.cursor += self.spec.frame.interframe_gap.0;
        }
        let fmt = &self.spec.frame;
        let s = tx.cursor;
        let mut e = s + match self.frame_times {
            [(b, t), _] if b == f.data_bits => t,
            [_, (b, t)] if b == f.data_bits => t,
            _ => {
                let t = fmt.base_time(f.data_bits).0;
                self.frame_times = [(f.data_bits, t), self.frame_times[0]];
                t
            }
        };
        let mut flags = 0;
        let mut gap_seed = 0;
        if let Some(u) = &mut self.uart {
            if matches!(fmt.char_gap, crate::spec::CharGap::Random { .. }) {
                gap_seed = rand::RngCore::next_u64(&mut u.gap_rng[tx.node]);
            }
            let (gaps, longest) = super::chars::sum_and_max(&fmt.char_gap, gap_seed, fmt.chars(f.data_bits));
            e += gaps;
            if longest > u.char_timeout {
                flags |= FrameRec::GAP_TIMEOUT;
            }
            if self.fw[tx.node].auto {
                flags |= FrameRec::AUTO;
            }
        }
        if tx.frames == 0 && tx.enable + self.fw[tx.node].enable >= s + self.half_bit {
            // The output turns valid half a bit or more into the first bit.
            flags |= FrameRec::CUT;
        }
        tx.cursor = e;
        tx.frames += 1;
        let remaining = match f.dest {
            Dest::Node(_) => 1,
            Dest::All => self.spec.nodes.len() as u32 - 1,
        };
        let rec = FrameRec {
            occupancy: tx.occupancy,
            src: tx.node,
            kind: f.kind,
            s,
            e,
            data_bits: f.data_bits,
            message: f.message,
            remaining,
            corrupted_any: false,
            aborted: false,
            flags,
        };
        let idx = self.frames.insert(rec);
        if tx.track {
            self.tx_frames.push(idx);
        }
        let deliver = |to: NodeId, q: &mut EventQueue<Event>| {
            let t = e + self.line.delay_ps(tx.node, to) + self.spec.nodes[to].transceiver.receiver_delay.0
                - self.fw[to].react;
            q.push(Picos(t), Event::Deliver { frame: idx, to: to as u32 });
        };
        match f.dest {
            Dest::Node(to) => deliver(to, &mut self.queue),
            Dest::All => {
                for to in 0..self.spec.nodes.len() {
                    if to != tx.node {
                        deliver(to, &mut self.queue);
                    }
                }
            }
        }
        if self.trace.enabled() {
            let to = match f.dest {
                Dest::Node(n) => n,
                Dest::All => tx.node,
            };
            self.trace.push(BusEvent {
                t: s,
                node: tx.node,
                kind: BusEventKind::FrameStart { frame: f.kind.name(), to, gap_seed },
            });
        }
        self.tx = Some(tx);
        Picos(s)
    }

    /// Start or stop telling `node` about line busy/idle changes.
    pub(crate) fn watch_line(&mut self, node: NodeId, on: bool) {
        self.line_watchers.retain(|&r| r != node);
        if on {
            self.line_watchers.push(node);
            self.line_watchers.sort_unstable();
        }
    }

    /// Is `node` driven by an external process in this run? (Without a
    /// co-simulation gateway, external nodes follow the built-in rules.)
    pub fn is_externally_driven(&self, node: NodeId) -> bool {
        self.externally_driven[node]
    }

    /// Bus id of the transmission being assembled.
    pub fn tx_occupancy(&self) -> u64 {
        self.tx.expect("a transmission is open").occupancy
    }

    /// Close the open transmission: the enable is released
    /// `release_after_stop` after the end of the last bit (an auto-direction
    /// driver at the end of the last dominant bit, before the stop bits), and
    /// the output turns off `disable_time` later.
    pub fn finish_tx(&mut self) -> TxTimes {
        self.finish_tx_releasing(None)
    }

    /// [`World::finish_tx`], with the release after the last bit given
    /// for this transmission (co-simulated firmware), not the node's.
    pub fn finish_tx_releasing(&mut self, release_after: Option<i64>) -> TxTimes {
        let tx = self.tx.take().expect("finish_tx without begin_tx");
        let mut fw = self.fw[tx.node];
        if let Some(r) = release_after {
            fw.release_after = r;
        }
        let disable = self.spec.nodes[tx.node].transceiver.disable_time.0;
        let first_bit = tx.enable + fw.lead;
        let last_bit = tx.cursor;
        let release = match &self.uart {
            Some(u) if fw.auto => last_bit.saturating_sub(u.stop_ps).max(tx.enable),
            _ => last_bit.saturating_add_signed(fw.release_after).max(tx.enable),
        };
        if tx.track {
            // The enable released half a bit or more before a frame's end cuts it.
            for &i in &self.tx_frames {
                let f = self.frames.get_mut(i);
                if f.e >= release + self.half_bit {
                    f.flags |= FrameRec::CUT;
                }
            }
        }
        let off = release + disable;
        self.bus.insert(crate::bus::Occupancy {
            id: tx.occupancy,
            node: tx.node,
            a: tx.enable,
            last_bit,
            release,
            b: off,
            pending: tx.frames,
            dominant: false,
        });
        self.released(tx.node, release, off);
        if !self.line_watchers.is_empty() {
            // The line turns busy at each watching receiver when this driver's
            // signal reaches it, and idle when its output-off does.
            for &r in &self.line_watchers {
                let shift = self.line.delay_ps(tx.node, r) + self.spec.nodes[r].transceiver.receiver_delay.0;
                self.queue.push(Picos(tx.enable + shift), Event::LineEdge { node: r as u32, busy: true });
                self.queue.push(Picos(off + shift), Event::LineEdge { node: r as u32, busy: false });
            }
        }
        TxTimes {
            enable: Picos(tx.enable),
            first_bit: Picos(first_bit),
            last_bit: Picos(last_bit),
            release: Picos(release),
            off: Picos(off),
            occupancy: tx.occupancy,
        }
    }

    /// When `node`'s latest transmission releases its enable (its driver is free after that).
    pub fn driver_free_at(&self, node: NodeId) -> Picos {
        Picos(self.drivers.last_release(node))
    }

    /// Drive the dominant state (bitwise arbitration): enable at `enable`
    /// (not in the past), release at `release`. Returns the occupancy id.
    pub fn drive_dominant(&mut self, node: NodeId, enable: Picos, release: Picos) -> u64 {
        let a = enable.max(self.now).0;
        assert!(a >= self.drivers.last_release(node), "scheme error: dominant drive before the previous release");
        let release = release.0.max(a);
        let off = release + self.spec.nodes[node].transceiver.disable_time.0;
        let id = self.bus.reserve_id();
        self.bus.insert(crate::bus::Occupancy {
            id,
            node,
            a,
            last_bit: release,
            release,
            b: off,
            pending: 0,
            dominant: true,
        });
        self.released(node, release, off);
        id
    }

    /// Keep a dominant drive on until `release` (later than planned).
    pub fn extend_dominant(&mut self, node: NodeId, occupancy: u64, release: Picos) {
        let off = release.0 + self.spec.nodes[node].transceiver.disable_time.0;
        self.bus.cut_short(occupancy, release.0, off);
        self.released(node, release.0, off);
    }

    /// The driver stays on from a dominant drive straight into a frame: the
    /// drive ends at its release with no disable tail.
    pub fn continue_from_dominant(&mut self, node: NodeId, occupancy: u64) {
        let release = self.drivers.last_release(node);
        self.bus.cut_short(occupancy, release, release);
        self.released(node, release, release);
    }

    /// Is a dominant (or any) drive of another node visible at `node`'s
    /// receiver output now? The dominant level appears `enable_time` after
    /// the enable and lasts through the disable time.
    pub fn dominant_seen(&self, node: NodeId) -> bool {
        let now = self.now.0;
        let rx = self.spec.nodes[node].transceiver.receiver_delay.0;
        self.bus.occupancies().any(|o| {
            let lag = self.line.delay_ps(o.node, node) + rx;
            let valid = o.a + self.spec.nodes[o.node].transceiver.enable_time.0;
            valid + lag <= now && now < o.b + lag
        })
    }

    /// Convenience: one transmission of the given frames (see [`World::begin_tx`]).
    pub fn transmit(&mut self, node: NodeId, at: Picos, frames: &[FrameOut]) -> TxTimes {
        self.begin_tx(node, at);
        for f in frames {
            self.add_frame(*f);
        }
        self.finish_tx()
    }

    /// One transmission continuing the node's arbitration field (see [`World::begin_tx_continuing`]).
    pub fn transmit_continuing(&mut self, node: NodeId, at: Picos, frames: &[FrameOut]) -> TxTimes {
        self.begin_tx_continuing(node, at);
        for f in frames {
            self.add_frame(*f);
        }
        self.finish_tx()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(edit: impl Fn(&str) -> String) -> Spec {
        let text =
            std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/fruit-grader.toml")).unwrap();
        crate::scenario::parse_str(&edit(&text), "fruit-grader.toml").unwrap()
    }

    #[test]
    fn the_shortest_latency_counts_the_smallest_payload_and_falls_to_1_ps_for_an_empty_frame() {
        // fruit-grader: 48 overhead bits and 64-byte payloads.
        let s = spec(|t| t.to_string());
        let fw = |s: &Spec| -> Vec<Firmware> { World::new(s.clone(), Trace::new(None)).fw };
        assert_eq!(shortest_latency(&s, &fw(&s)), s.frame.base_time(48 + 512).0);
        // No overhead and an empty payload: a frame of no bits, latency down to the wire delays.
        let empty = spec(|t| t.replace("overhead_bits = 48", "overhead_bits = 0").replace("\"64 B\"", "\"0 B\""));
        assert_eq!(shortest_latency(&empty, &fw(&empty)), 1);
        let shape = crate::stats::LatencyShape::new(1, empty.duration.0, 3);
        assert_eq!(shape.lowest_ps, 1);
    }
}
