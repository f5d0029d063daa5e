//! Counters and accumulators filled by the engine during the measured window.

pub mod latency;
pub mod replication;
pub mod slack;
pub mod utilization;

pub use latency::{LatencyShape, LatencyStats, LatencySummary};

/// Frame and message counters over the measured window.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct FrameCounters {
    /// Data frames resolved (delivered, corrupted or unheard at a down receiver).
    pub attempts: u64,
    pub delivered: u64,
    pub corrupted: u64,
    /// Messages dropped at a full queue.
    pub dropped: u64,
    /// Messages the scheme gave up on after its last allowed attempt.
    pub given_up: u64,
    /// Messages that arrived at a queue.
    pub arrived: u64,
    /// Channel access attempts, as the scheme counts them.
    pub access_attempts: u64,
    /// Control frames (polls, empty replies, tokens, ...) delivered intact or not.
    pub control_frames: u64,
    pub control_corrupted: u64,
    /// Messages on the wire when the run ended, sent by a scheme that does not hold them.
    pub in_flight_at_end: u64,
    /// Data frames whose receiver was down (lost there; their messages are given up).
    pub unheard: u64,
    /// Why data frames were corrupted (one cause per corrupted delivery).
    pub corrupted_by: CorruptedBy,
}

/// Corrupted data-frame deliveries by cause. When several causes meet in
/// one delivery, the first in this order is counted: another driver's signal
/// (or a transmission cut short by collision detection), the floating line,
/// a broken framing rule, noise.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct CorruptedBy {
    pub contention: u64,
    /// Recessive bits of an auto-direction driver that the line's bias does
    /// not settle to a defined level at the receiver.
    pub floating: u64,
    /// UART framing rules: an enable cutting a bit, a character gap past
    /// `char_timeout`, a start inside the `silence` after the previous frame.
    pub framing: u64,
    /// Bit errors drawn from the receiver's bit error rate.
    pub noise: u64,
}

impl CorruptedBy {
    pub fn total(&self) -> u64 {
        self.contention + self.floating + self.framing + self.noise
    }

    pub fn count(&mut self, cause: Cause) {
        match cause {
            Cause::Intact => {}
            Cause::Contention => self.contention += 1,
            Cause::Floating => self.floating += 1,
            Cause::Framing => self.framing += 1,
            Cause::Noise => self.noise += 1,
        }
    }

    pub fn add(&mut self, o: &CorruptedBy) {
        self.contention += o.contention;
        self.floating += o.floating;
        self.framing += o.framing;
        self.noise += o.noise;
    }
}

/// What became of one delivery of a frame at one receiver.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Cause {
    Intact,
    Contention,
    Floating,
    Framing,
    Noise,
}

impl Cause {
    pub fn corrupted(self) -> bool {
        self != Cause::Intact
    }
}

/// UART framing faults over the measured window.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct UartCounters {
    /// Frames whose first or last bit the enable cut by half a bit or more.
    pub cut_frames: u64,
    /// Deliveries discarded for a gap between characters past `char_timeout`.
    pub char_timeouts: u64,
    /// Deliveries lost for starting less than `silence` after the previous frame.
    pub silence_violations: u64,
    /// Deliveries from an auto-direction driver whose recessive bits did not
    /// settle within a bit at the receiver.
    pub unsettled_frames: u64,
}

/// Everything the engine accumulates.
#[derive(Debug)]
pub struct Stats {
    pub frames: FrameCounters,
    pub uart: UartCounters,
    /// Payload bits of delivered data frames.
    pub payload_bits: u128,
    /// On-wire time of delivered data frames (ps).
    pub carried_ps: u128,
    /// On-wire time of every data frame transmitted (ps) and their count.
    pub data_wire_ps: u128,
    pub data_frames_sent: u64,
    pub latency_all: LatencyStats,
    /// Per source node.
    pub latency_node: Vec<LatencyStats>,
    /// Per traffic source that carries an identifier: (identifier, stats).
    pub latency_id: Vec<(u64, LatencyStats)>,
}

impl Stats {
    /// The tallies, for a closed-form stretch; latencies may not change
    /// over a period that is skipped (no message is delivered in it).
    pub fn visit(&mut self, v: &mut dyn crate::periodic::Visit) {
        let f = &mut self.frames;
        let c = &mut f.corrupted_by;
        for x in [
            &mut f.attempts,
            &mut f.delivered,
            &mut f.corrupted,
            &mut f.dropped,
            &mut f.given_up,
            &mut f.arrived,
            &mut f.access_attempts,
            &mut f.control_frames,
            &mut f.control_corrupted,
            &mut f.in_flight_at_end,
            &mut f.unheard,
            &mut c.contention,
            &mut c.floating,
            &mut c.framing,
            &mut c.noise,
        ] {
            v.tally(x);
        }
        let u = &mut self.uart;
        for x in [&mut u.cut_frames, &mut u.char_timeouts, &mut u.silence_violations, &mut u.unsettled_frames] {
            v.tally(x);
        }
        v.tally_wide(&mut self.payload_bits);
        v.tally_wide(&mut self.carried_ps);
        v.tally_wide(&mut self.data_wire_ps);
        v.tally(&mut self.data_frames_sent);
        v.same(self.latency_all.count());
    }

    /// Empty accumulators; `latency` gives the shapes of the all-nodes and
    /// the per-node histograms (see [`latency::LatencyShape::for_run`]).
    pub fn new(nodes: usize, latency: (LatencyShape, LatencyShape)) -> Self {
        Stats {
            frames: FrameCounters::default(),
            uart: UartCounters::default(),
            payload_bits: 0,
            carried_ps: 0,
            data_wire_ps: 0,
            data_frames_sent: 0,
            latency_all: LatencyStats::with_shape(latency.0),
            latency_node: (0..nodes).map(|_| LatencyStats::with_shape(latency.1)).collect(),
            latency_id: Vec::new(),
        }
    }
}
