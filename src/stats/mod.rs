//! Counters and accumulators filled by the engine during the measured window.

pub mod latency;
pub mod replication;
pub mod slack;
pub mod utilization;

pub use latency::{LatencyStats, LatencySummary};

/// Frame and message counters over the measured window.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct FrameCounters {
    /// Data frames resolved (delivered or corrupted).
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
    pub fn new(nodes: usize) -> Self {
        Stats {
            frames: FrameCounters::default(),
            uart: UartCounters::default(),
            payload_bits: 0,
            carried_ps: 0,
            data_wire_ps: 0,
            data_frames_sent: 0,
            latency_all: LatencyStats::new(),
            latency_node: (0..nodes).map(|_| LatencyStats::new()).collect(),
            latency_id: Vec::new(),
        }
    }
}
