//! The typed run specification.
//!
//! A [`Spec`] is what a scenario file becomes after validation: every quantity
//! is resolved to SI base units (metres, ohms, farads, amperes, volts) or to
//! integer picoseconds, every node reference is an index, and every default
//! has been applied. Nothing downstream of validation re-checks user input;
//! the engine may assume that a `Spec` is internally consistent.

use crate::line::ReceiverClass;
use crate::units::Picos;

/// Queue capacity of a node that sets no `queue_limit`: large enough never to
/// matter on a bus that keeps up, and a bound on memory on one that does not.
pub const DEFAULT_QUEUE_LIMIT: usize = 10_000;

/// Index of a node in [`Spec::nodes`].
pub type NodeId = usize;

/// A fully validated scenario.
#[derive(Clone, Debug, PartialEq)]
pub struct Spec {
    pub name: String,
    pub seed: u64,
    /// Simulated time at which the run stops.
    pub duration: Picos,
    /// Simulated time excluded from the statistics (measured window is `warmup..duration`).
    pub warmup: Picos,
    /// Which value of each transceiver time range the run uses.
    pub timing: Timing,
    pub line: LineSpec,
    pub frame: FrameFormat,
    pub nodes: Vec<NodeSpec>,
    pub access: AccessSpec,
    /// Requirements on the report (`[[expect]]`), checked by `halfwire check`.
    pub expect: Vec<Expectation>,
    /// Periods of cyclic schemes that are known to repeat may be done in
    /// closed form (`engine::shortcut`; same results). Not a scenario key:
    /// `--no-shortcuts` turns it off.
    pub shortcuts: bool,
}

/// A comparison of an expectation.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Op {
    Lt,
    Le,
    Eq,
    Ge,
    Gt,
}

impl Op {
    pub fn symbol(self) -> &'static str {
        match self {
            Op::Lt => "<",
            Op::Le => "<=",
            Op::Eq => "==",
            Op::Ge => ">=",
            Op::Gt => ">",
        }
    }
    pub fn holds(self, measured: f64, required: f64) -> bool {
        match self {
            Op::Lt => measured < required,
            Op::Le => measured <= required,
            Op::Eq => measured == required,
            Op::Ge => measured >= required,
            Op::Gt => measured > required,
        }
    }
}

/// An expectation as written; its metric path and value unit are checked
/// against the report by `halfwire check`, with the positions kept here.
#[derive(Clone, Debug, PartialEq)]
pub struct Expectation {
    pub metric: String,
    pub op: Op,
    /// The value as written: a string with a unit, or a number.
    pub value: ExpectValue,
    pub message: Option<String>,
    /// Require the bound at the 95 % confidence limit (with replications).
    pub confidence: bool,
    /// 1-based line and column of the metric and of the value, for errors.
    pub metric_at: (usize, usize),
    pub value_at: (usize, usize),
}

#[derive(Clone, Debug, PartialEq)]
pub enum ExpectValue {
    Text(String),
    Number(f64),
}

impl Spec {
    /// Length of the measured window.
    pub fn measured(&self) -> Picos {
        self.duration - self.warmup
    }

    /// Look a node up by name.
    pub fn node_id(&self, name: &str) -> Option<NodeId> {
        self.nodes.iter().position(|n| n.name == name)
    }
}

/// Which value of a transceiver time range a run uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Timing {
    /// The middle of each range.
    Typical,
    /// The hand-over worst case: longest enable and disable, shortest receiver delay.
    Worst,
    /// Drawn uniformly within each range, per node, from its own stream.
    Random,
}

/// A time that may be a range.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TimeRange {
    pub min: Picos,
    pub max: Picos,
}

impl TimeRange {
    pub fn fixed(t: Picos) -> Self {
        TimeRange { min: t, max: t }
    }
    pub fn typical(&self) -> Picos {
        Picos(self.min.0 + (self.max.0 - self.min.0) / 2)
    }
}

/// The unloaded line.
#[derive(Clone, Debug, PartialEq)]
pub struct LineSpec {
    pub length_m: f64,
    /// Unloaded differential characteristic impedance Z0.
    pub impedance_ohm: f64,
    /// Unloaded propagation delay per metre, tpd0.
    pub delay_s_per_m: f64,
    pub termination: Termination,
    pub bias: Option<Bias>,
    /// DC resistance per metre of one conductor (the loop is twice this).
    pub conductor_ohm_per_m: f64,
    /// Cable loss at a stated frequency, scaled with √f (skin effect).
    pub attenuation: Option<Attenuation>,
    /// A bit error probability given directly, the same at every receiver
    /// (instead of one derived from noise, see [`NodeSpec::noise_v`]).
    pub bit_error_rate: Option<f64>,
    /// `line.noise` (V rms), the default of every node's [`NodeSpec::noise_v`].
    pub noise_v: Option<f64>,
}

/// Cable attenuation: `db_per_m` at `at_hz`, scaling with the square root of frequency.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Attenuation {
    pub db_per_m: f64,
    pub at_hz: f64,
}

impl Attenuation {
    /// Loss in dB per metre at `f_hz` (skin effect: ∝ √f).
    pub fn db_per_m_at(&self, f_hz: f64) -> f64 {
        self.db_per_m * (f_hz / self.at_hz).sqrt()
    }
}

/// How the ends of the line are terminated. `None` resistances mean "matched
/// to the loaded impedance".
#[derive(Clone, Debug, PartialEq)]
pub enum Termination {
    /// A resistor at each end (multipoint).
    BothEnds { near_ohm: Option<f64>, far_ohm: Option<f64> },
    /// A resistor at the far end only (multidrop, one driver at the near end).
    FarEnd { far_ohm: Option<f64> },
    /// No termination at all.
    Unterminated,
}

/// Per-node transceiver parameters, after defaults and overrides are merged.
#[derive(Clone, Debug, PartialEq)]
pub struct Transceiver {
    /// The weakest drive the part may have (the standard's minimum for a
    /// family preset): every amplitude, margin and limit uses it.
    pub driver: Driver,
    /// The typical drive (shown beside the minimum).
    pub driver_typical: Driver,
    /// The strongest drive: the largest swing, for the common-mode check.
    pub driver_max: Driver,
    /// The driver's common-mode offset voltage range (V), when known.
    pub offset_v: Option<(f64, f64)>,
    /// The fastest bit rate is `edge_fraction / transition_time`.
    pub edge_fraction: f64,
    /// From the enable's assertion to the first bit's edge (firmware's DE
    /// lead; `None`: the enable time, so the first bit starts as the output
    /// turns valid; shorter cuts into the first bit).
    pub enable_lead: Option<Picos>,
    /// From the end of the last bit to the enable's release (ps, signed):
    /// positive is firmware hold time, negative cuts into the last bit.
    pub release_after_stop: i64,
    /// When this node's receiver counts a frame as received.
    pub react_at: ReactAt,
    /// An auto-direction transceiver: the driver is on for dominant (0) bits
    /// only, and the bias network makes the recessive ones.
    pub auto_direction: bool,
    /// From driver enable asserted to output valid (the value this run uses).
    pub enable_time: Picos,
    /// From enable released to output high-impedance (the value this run uses).
    pub disable_time: Picos,
    /// From the line at this node's position to the receiver output (the value this run uses).
    pub receiver_delay: Picos,
    /// The ranges the three times were given as (equal ends for a single value).
    pub enable_range: TimeRange,
    pub disable_range: TimeRange,
    pub receiver_range: TimeRange,
    /// Capacitance this node adds to the line (device, connector, stub).
    pub load_f: f64,
    pub receiver: ReceiverClass,
    /// Receiver input resistance across the pair (infinite when not given).
    pub input_ohm: f64,
    /// Driver output transition time (10–90 %), when known.
    pub transition_time: Option<Picos>,
    /// Length of the stub from the line to the transceiver.
    pub stub_m: f64,
    /// This node's ground offset from the reference node (V).
    pub ground_offset_v: f64,
    /// Receiver common-mode range (V), when known.
    pub common_mode_v: Option<(f64, f64)>,
    /// The standard family the values came from, if a preset was used.
    pub family: Option<String>,
}

impl Transceiver {
    /// Enable asserted → first bit's edge, with the run's enable time.
    pub fn lead(&self) -> Picos {
        self.enable_lead.unwrap_or(self.enable_time)
    }

    /// How long before a frame's end this node reacts to it.
    pub fn react_offset(&self, frame: &FrameFormat) -> Picos {
        match self.react_at {
            ReactAt::FrameEnd => Picos::ZERO,
            ReactAt::StopSample => frame.stop_sample_offset(),
        }
    }

    /// Does firmware time this node's enable or reaction (a `uart` report object)?
    pub fn firmware_timed(&self) -> bool {
        self.enable_lead.is_some() || self.release_after_stop != 0 || self.react_at != ReactAt::FrameEnd
    }
}

/// When a receiving node reacts to a frame.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ReactAt {
    /// At the end of its last bit, as its receiver shows it.
    FrameEnd,
    /// At the middle of its (first) stop bit, as a UART's receive-complete
    /// interrupt fires ([`FrameFormat::stop_sample_offset`] earlier).
    StopSample,
}

/// A differential driver.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Driver {
    /// Current mode: V_AB = I · R_eff.
    Current { amps: f64 },
    /// Voltage mode (Thevenin): V_AB = min(limit, V_oc · R_eff / (R_eff + R_out)).
    /// `limit_v` is infinite for a plain Thevenin source; a worst-case
    /// envelope that the standard guarantees only up to a level sets it.
    Voltage { open_circuit_v: f64, output_ohm: f64, limit_v: f64 },
}

impl Driver {
    /// A plain Thevenin source.
    pub fn thevenin(open_circuit_v: f64, output_ohm: f64) -> Driver {
        Driver::Voltage { open_circuit_v, output_ohm, limit_v: f64::INFINITY }
    }

    /// Differential amplitude into `load_ohm`.
    pub fn amplitude_v(&self, load_ohm: f64) -> f64 {
        match *self {
            Driver::Current { amps } => amps * load_ohm,
            Driver::Voltage { open_circuit_v, output_ohm, limit_v } => {
                let v = if load_ohm.is_infinite() {
                    open_circuit_v
                } else {
                    open_circuit_v * load_ohm / (load_ohm + output_ohm)
                };
                v.min(limit_v)
            }
        }
    }
}

/// TIA-485-A unit load, across the pair: 12 kΩ from each input to the
/// common-mode node, so 24 kΩ differential, and 32 unit loads are 750 Ω
/// (from memory of TIA-485-A).
pub const UNIT_LOAD_OHM: f64 = 24_000.0;

/// Most unit loads TIA-485-A allows on one bus (from memory of TIA-485-A).
pub const MAX_UNIT_LOADS: f64 = 32.0;

/// A failsafe bias network: pull-up from A and pull-down from B to a supply, at one point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Bias {
    pub supply_v: f64,
    pub pull_up_ohm: f64,
    pub pull_down_ohm: f64,
    /// Where on the line the network sits.
    pub position_m: f64,
}

#[derive(Clone, Debug, PartialEq)]
pub struct NodeSpec {
    pub name: String,
    pub position_m: f64,
    pub transceiver: Transceiver,
    pub traffic: Vec<TrafficSpec>,
    /// The node's own turnaround, overriding the access scheme's default.
    pub turnaround: Option<Picos>,
    /// Maximum number of queued messages; arrivals beyond it are dropped and
    /// counted. `None` means [`DEFAULT_QUEUE_LIMIT`].
    pub queue_limit: Option<usize>,
    /// Its protocol logic runs in an external process (`halfwire cosim`);
    /// the access scheme's built-in behaviour does not run for it.
    pub external: bool,
    /// RMS differential noise at its receiver (V): the node's own, else the
    /// line's. With the receiver's worst-case margin m it gives the bit
    /// error probability Q(m / σ) (`line::noise`).
    pub noise_v: Option<f64>,
}

/// One traffic source at a node.
#[derive(Clone, Debug, PartialEq)]
pub struct TrafficSpec {
    pub pattern: Pattern,
    pub payload: Payload,
    /// Destination; `None` means the scheme's default (the master, for polling).
    pub to: Option<NodeId>,
    /// Identifier (bitwise arbitration: lower wins); also keys per-identifier latency.
    pub id: Option<u64>,
}

#[derive(Clone, Debug, PartialEq)]
pub enum Pattern {
    /// Poisson arrivals at `rate_per_s` messages per second; with a
    /// `min_interval`, gaps shorter than it are stretched to it (a sporadic
    /// source: its arrivals are bounded, so a worst case exists).
    Poisson { rate_per_s: f64, min_interval: Picos },
    /// Releases at `phase + k·period`, each delayed by a uniform draw in `0..=jitter`.
    Periodic { period: Picos, phase: Picos, jitter: Picos },
}

#[derive(Clone, Debug, PartialEq)]
pub enum Payload {
    Fixed {
        bits: u64,
    },
    /// Uniform over whole bits in `min_bits..=max_bits`.
    Uniform {
        min_bits: u64,
        max_bits: u64,
    },
}

impl Payload {
    /// The smallest payload this source can draw.
    pub fn min_bits(&self) -> u64 {
        match *self {
            Payload::Fixed { bits } => bits,
            Payload::Uniform { min_bits, .. } => min_bits,
        }
    }

    /// The largest payload this source can draw.
    pub fn max_bits(&self) -> u64 {
        match *self {
            Payload::Fixed { bits } => bits,
            Payload::Uniform { max_bits, .. } => max_bits,
        }
    }
}

impl NodeSpec {
    /// The largest payload any of this node's sources can draw (0 without traffic).
    pub fn longest_payload_bits(&self) -> u64 {
        self.traffic.iter().map(|t| t.payload.max_bits()).max().unwrap_or(0)
    }
}

/// UART character parity.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Parity {
    None,
    Even,
    Odd,
    /// Always 1.
    Mark,
    /// Always 0.
    Space,
}

/// A UART character: a start bit, `data` data bits (5–9, least significant
/// first), a parity bit unless none, and 1, 1.5 or 2 stop bits.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Uart {
    pub data: u8,
    pub parity: Parity,
    /// Stop bits in half bits: 2, 3 or 4.
    pub stop_halves: u8,
}

impl Uart {
    /// 8N1, the classic character.
    pub const N81: Uart = Uart { data: 8, parity: Parity::None, stop_halves: 2 };

    /// Line time of one character, in half bits: start + data + parity + stop.
    pub fn char_halves(&self) -> u64 {
        2 * (1 + u64::from(self.data) + u64::from(self.parity != Parity::None)) + u64::from(self.stop_halves)
    }

    /// Characters needed for `data_bits` (whole characters).
    pub fn chars(&self, data_bits: u64) -> u64 {
        data_bits.div_ceil(u64::from(self.data))
    }

    /// The name as written: `uart-8e1`, `uart-8n1.5`.
    pub fn name(&self) -> String {
        let p = match self.parity {
            Parity::None => 'n',
            Parity::Even => 'e',
            Parity::Odd => 'o',
            Parity::Mark => 'm',
            Parity::Space => 's',
        };
        let stop = match self.stop_halves {
            2 => "1",
            3 => "1.5",
            _ => "2",
        };
        format!("uart-{}{p}{stop}", self.data)
    }
}

/// Line coding: how many line symbols carry a given number of data bits.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Encoding {
    /// One line symbol per bit.
    Nrz,
    /// Ten line symbols per eight data bits (rounded up to whole code groups).
    B8b10b,
    /// UART characters (whole characters).
    Uart(Uart),
    /// Two line symbols per bit.
    Manchester,
}

impl Encoding {
    pub fn name(self) -> String {
        match self {
            Encoding::Nrz => "nrz".into(),
            Encoding::B8b10b => "8b10b".into(),
            Encoding::Uart(u) => u.name(),
            Encoding::Manchester => "manchester".into(),
        }
    }

    /// Line time of `data_bits`, in half bits (a UART's 1.5 stop bits are three).
    pub fn line_halves(self, data_bits: u64) -> u64 {
        match self {
            Encoding::Nrz => 2 * data_bits,
            Encoding::B8b10b => 2 * data_bits.div_ceil(8) * 10,
            Encoding::Uart(u) => u.chars(data_bits) * u.char_halves(),
            Encoding::Manchester => 4 * data_bits,
        }
    }

    /// The UART character format, if this is one.
    pub fn uart(self) -> Option<Uart> {
        match self {
            Encoding::Uart(u) => Some(u),
            _ => None,
        }
    }
}

/// Idle time between the characters of one UART frame.
#[derive(Clone, Debug, PartialEq)]
pub enum CharGap {
    None,
    Fixed(Picos),
    /// Drawn per character from the sender's own stream, each draw capped at `cap`.
    Random {
        latency: Latency,
        cap: Picos,
    },
}

impl CharGap {
    /// The longest one gap can be.
    pub fn max(&self) -> Picos {
        match self {
            CharGap::None => Picos::ZERO,
            CharGap::Fixed(t) => *t,
            CharGap::Random { cap, .. } => *cap,
        }
    }
}

/// Framing shared by every frame on the bus.
#[derive(Clone, Debug, PartialEq)]
pub struct FrameFormat {
    /// Line signalling rate in symbols (line bits) per second.
    pub bit_rate: f64,
    /// Data bits every data frame carries besides its payload.
    pub overhead_bits: u64,
    pub encoding: Encoding,
    /// Idle time between back-to-back frames from one driver.
    pub interframe_gap: Picos,
    /// UART only: idle time between the characters of a frame.
    pub char_gap: CharGap,
    /// UART only: a gap inside a frame longer than this makes a receiver discard the frame.
    pub char_timeout: Option<Picos>,
    /// UART only: a frame must start at least this long after the previous one ended (at each receiver).
    pub silence: Option<Picos>,
}

impl FrameFormat {
    /// Time on the wire of `halves` half bits, rounded to the nearest picosecond.
    pub fn time_of_halves(&self, halves: u64) -> Picos {
        Picos((halves as f64 * 1e12 / (2.0 * self.bit_rate)).round() as u64)
    }

    /// Time on the wire of `line_bits` whole symbols, rounded to the nearest picosecond.
    pub fn duration(&self, line_bits: u64) -> Picos {
        self.time_of_halves(2 * line_bits)
    }

    /// One line-bit time (unit interval), rounded to the nearest picosecond.
    pub fn bit_time(&self) -> Picos {
        self.duration(1)
    }

    /// A frame of `data_bits`, its characters back to back (no gaps between them).
    pub fn base_time(&self, data_bits: u64) -> Picos {
        self.time_of_halves(self.encoding.line_halves(data_bits))
    }

    /// The characters of a UART frame of `data_bits` (0 for other encodings).
    pub fn chars(&self, data_bits: u64) -> u64 {
        self.encoding.uart().map_or(0, |u| u.chars(data_bits))
    }

    /// The longest a frame of `data_bits` can last: its characters and the
    /// longest gap between each two (exact when the gap is fixed).
    pub fn wire_max(&self, data_bits: u64) -> Picos {
        let gaps = self.chars(data_bits).saturating_sub(1);
        self.base_time(data_bits) + Picos(gaps * self.char_gap.max().0)
    }

    /// The longest data frame carrying `payload_bits`.
    pub fn data_time(&self, payload_bits: u64) -> Picos {
        self.wire_max(self.overhead_bits + payload_bits)
    }

    /// The longest control frame of `data_bits` total data bits.
    pub fn control_time(&self, data_bits: u64) -> Picos {
        self.wire_max(data_bits)
    }

    /// The same in seconds without rounding, for bounds: `None` past any range.
    pub fn wire_max_s(&self, data_bits: u64) -> f64 {
        let halves = self.encoding.line_halves(data_bits) as f64;
        let gaps = self.chars(data_bits).saturating_sub(1) as f64;
        halves / (2.0 * self.bit_rate) + gaps * self.char_gap.max().as_secs_f64()
    }

    /// A UART character's stop bits on the wire (zero for other encodings).
    pub fn stop_time(&self) -> Picos {
        self.encoding.uart().map_or(Picos::ZERO, |u| self.time_of_halves(u64::from(u.stop_halves)))
    }

    /// Where a UART's receive-complete fires: the middle of the (first) stop
    /// bit, this long before the frame's end (half a bit before the end of one
    /// stop bit); half a bit before the end for other encodings.
    pub fn stop_sample_offset(&self) -> Picos {
        match self.encoding.uart() {
            Some(u) => self.time_of_halves(u64::from(u.stop_halves) - 1),
            None => self.time_of_halves(1),
        }
    }
}

/// A random delay: a firmware latency on top of a turnaround, or a backoff.
#[derive(Clone, Debug, PartialEq)]
pub enum Latency {
    Fixed(Picos),
    Uniform {
        min: Picos,
        max: Picos,
    },
    /// Normal, truncated at zero (negative draws become zero).
    Normal {
        mean: Picos,
        sd: Picos,
    },
    /// Exponential (memoryless) with the given mean.
    Exponential {
        mean: Picos,
    },
}

/// The access scheme and its parameters.
#[derive(Clone, Debug, PartialEq)]
pub enum AccessSpec {
    Polling(PollingSpec),
    Token(TokenSpec),
    Aloha(AlohaSpec),
    Csma(CsmaSpec),
    Tdma(TdmaSpec),
    Arbitration(ArbitrationSpec),
}

impl AccessSpec {
    pub fn name(&self) -> &'static str {
        match self {
            AccessSpec::Polling(_) => "polling",
            AccessSpec::Token(_) => "token",
            AccessSpec::Aloha(_) => "aloha",
            AccessSpec::Csma(_) => "csma",
            AccessSpec::Tdma(_) => "tdma",
            AccessSpec::Arbitration(_) => "arbitration",
        }
    }

    /// Node faults injected in the run, in time order.
    pub fn node_faults(&self) -> &[NodeFault] {
        match self {
            AccessSpec::Polling(p) => &p.node_faults,
            AccessSpec::Token(t) => &t.node_faults,
            AccessSpec::Tdma(t) => &t.node_faults,
            AccessSpec::Aloha(a) => &a.node_faults,
            AccessSpec::Csma(c) => &c.node_faults,
            AccessSpec::Arbitration(a) => &a.node_faults,
        }
    }
}

/// A node fails (`down`) or comes back at an instant. A down node neither
/// drives the line nor answers; messages keep arriving at its queue.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct NodeFault {
    pub at: Picos,
    pub node: NodeId,
    pub down: bool,
}

/// Token passing on a logical ring.
#[derive(Clone, Debug, PartialEq)]
pub struct TokenSpec {
    /// The ring, in token order.
    pub order: Vec<NodeId>,
    /// Total data bits of a token frame.
    pub token_bits: u64,
    /// Data frames a holder may send per token; 0 means no count limit.
    pub max_per_token: u32,
    /// Longest a holder may drive data, from its enable to the end of its last
    /// data frame (its first frame is always allowed).
    pub token_hold: Option<Picos>,
    /// Turnaround of every node, indexed by [`NodeId`].
    pub turnaround: Vec<Picos>,
    pub response_latency: Latency,
    /// Silence after which `recovery_node` regenerates the token.
    pub token_timeout: Option<Picos>,
    pub recovery_node: NodeId,
    /// Instants from which the next token frame sent is lost.
    pub lose_token_at: Vec<Picos>,
    /// A holder whose successor shows nothing this long after the pass
    /// drops it from the ring and passes to the next (`None`: no repair).
    pub successor_timeout: Option<Picos>,
    /// Every this many rotations the ring's head passes the token to a
    /// dropped node; one that uses it rejoins.
    pub solicit_every: u32,
    /// When the recovery node is down, this node regenerates instead, after
    /// `token_timeout` plus one zero-load rotation.
    pub second_recovery: Option<(NodeId, Picos)>,
    pub node_faults: Vec<NodeFault>,
}

/// Master/slave polling.
#[derive(Clone, Debug, PartialEq)]
pub struct PollingSpec {
    pub master: NodeId,
    /// Slaves in poll order.
    pub order: Vec<NodeId>,
    /// Messages a slave may send per poll; 0 means everything queued at the poll.
    pub max_per_poll: u32,
    /// Total data bits of a poll frame.
    pub request_bits: u64,
    /// Total data bits of a "nothing to send" reply.
    pub empty_reply_bits: u64,
    /// Turnaround of every node, indexed by [`NodeId`] (node overrides applied).
    pub turnaround: Vec<Picos>,
    pub response_latency: Latency,
    /// How long after the end of its request the master waits for a reply to begin.
    pub reply_timeout: Picos,
    /// Polls of the same slave again after a corrupted or missing reply.
    pub retries: u32,
    /// A slave whose exchanges fail this many times in a row is skipped
    /// (`None`: never skipped).
    pub dead_after: Option<u32>,
    /// A skipped slave is polled again every this many cycles.
    pub probe_every: u32,
    pub node_faults: Vec<NodeFault>,
    /// The slave that takes over polling after `takeover_after` without a poll from the master.
    pub backup_master: Option<NodeId>,
    pub takeover_after: Picos,
}

/// ALOHA, pure or slotted, with ideal feedback.
#[derive(Clone, Debug, PartialEq)]
pub struct AlohaSpec {
    pub slotted: bool,
    /// Slot length (slotted only): transmissions start at multiples of it.
    pub slot_time: Picos,
    /// After the end of its frame a sender learns the outcome this much later.
    pub ack_timeout: Picos,
    /// Delay before a retransmission (rounded up to a slot boundary when slotted).
    pub backoff: Latency,
    /// Attempts after which a message is dropped; 0 = never.
    pub max_attempts: u32,
    pub node_faults: Vec<NodeFault>,
}

/// What a CSMA node does when it senses the line busy.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Persistence {
    /// Reschedule the attempt after a random delay.
    Non,
    /// Wait until the line is idle, then send with probability p; otherwise
    /// wait one slot and try again (p = 1 is 1-persistent).
    P(f64),
}

/// The largest enable, disable and receiver times over every node's range:
/// the worst case for sizing a slot.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct WorstTimes {
    pub enable: Picos,
    pub disable: Picos,
    pub receiver: Picos,
}

impl WorstTimes {
    pub fn of(nodes: &[NodeSpec]) -> Self {
        let max = |f: fn(&Transceiver) -> Picos| nodes.iter().map(|n| f(&n.transceiver)).max().unwrap_or(Picos::ZERO);
        WorstTimes {
            enable: max(|t| t.enable_range.max),
            disable: max(|t| t.disable_range.max),
            receiver: max(|t| t.receiver_range.max),
        }
    }

    /// How long until every node can see a signal: the largest wire delay
    /// between two nodes plus the largest receiver delay.
    pub fn lag(&self, max_wire: Picos) -> Picos {
        max_wire + self.receiver
    }
}

impl AlohaSpec {
    /// The smallest slot in which frames sent in different slots never meet:
    /// the longest frame plus the enable and disable times and the worst lag.
    pub fn min_slot(worst: WorstTimes, max_wire: Picos, longest_frame: Picos) -> Picos {
        worst.enable + longest_frame + worst.disable + worst.lag(max_wire)
    }
}

/// Carrier-sense multiple access, optionally with collision detection.
#[derive(Clone, Debug, PartialEq)]
pub struct CsmaSpec {
    pub persistence: Persistence,
    pub collision_detect: bool,
    /// From another driver's signal reaching a transmitter to its detection;
    /// `None` means each node's receiver delay.
    pub detect_delay: Option<Picos>,
    /// Jam sent after a detected collision, in line bits.
    pub jam_bits: u64,
    /// Backoff unit (collision detection) and p-persistent deferral.
    pub slot_time: Picos,
    /// Without collision detection: when the sender learns a frame's fate
    /// after its end (ideal feedback).
    pub ack_timeout: Picos,
    /// Random delay before a rescheduled attempt (non-persistent) or a
    /// retransmission without collision detection.
    pub backoff: Latency,
    /// With collision detection: use `backoff` after a collision instead of
    /// binary exponential backoff (set when `backoff` is given).
    pub backoff_given: bool,
    /// Attempts after which a message is dropped; 0 = never.
    pub max_attempts: u32,
    pub node_faults: Vec<NodeFault>,
}

/// A node's clock error.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Drift {
    /// Runs fast by this many parts per million (negative: slow).
    Fixed(f64),
    /// Drawn once, uniformly within ±ppm, from the node's own stream.
    Within(f64),
}

/// One data slot of a TDMA cycle.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Slot {
    pub owner: NodeId,
    pub length: Picos,
}

/// Time-division multiple access with a beacon.
#[derive(Clone, Debug, PartialEq)]
pub struct TdmaSpec {
    pub timekeeper: NodeId,
    /// Total data bits of the beacon frame.
    pub beacon_bits: u64,
    /// Data slots after the beacon, in cycle order.
    pub slots: Vec<Slot>,
    /// Idle time at the start of every slot (and of the beacon slot).
    pub guard: Picos,
    /// Clock error of every node, indexed by [`NodeId`].
    pub drift: Vec<Drift>,
    /// Nodes correct the beacon's arrival for their known wire and receiver delay.
    pub compensate: bool,
    /// Beacon periods a node keeps its slots on its own clock without a beacon.
    pub holdover: u32,
    pub node_faults: Vec<NodeFault>,
}

impl TdmaSpec {
    /// The beacon slot: guard, enable lead-in and beacon bits, in the timekeeper's time.
    pub fn beacon_slot(&self, frame: &FrameFormat, timekeeper_enable: Picos) -> Picos {
        self.guard + timekeeper_enable + frame.control_time(self.beacon_bits)
    }

    /// The whole cycle in the timekeeper's time.
    pub fn cycle(&self, frame: &FrameFormat, timekeeper_enable: Picos) -> Picos {
        self.slots.iter().fold(self.beacon_slot(frame, timekeeper_enable), |acc, s| acc + s.length)
    }
}

impl CsmaSpec {
    /// The smallest CSMA/CD slot: a collision is seen everywhere within a
    /// round trip plus the enable, disable and detection times, rounded up
    /// to whole bit times. `detect` defaults to the worst receiver delay.
    pub fn min_slot(worst: WorstTimes, max_wire: Picos, detect: Option<Picos>, bit_time: Picos) -> Picos {
        let lag = worst.lag(max_wire);
        let raw = lag + lag + worst.enable + worst.disable + detect.unwrap_or(worst.receiver);
        let tb = bit_time.0.max(1);
        Picos(raw.0.div_ceil(tb).max(1) * tb)
    }
}

/// Non-destructive bitwise arbitration on a line with a dominant state.
#[derive(Clone, Debug, PartialEq)]
pub struct ArbitrationSpec {
    /// Identifier length in bits, sent most significant bit first.
    pub id_bits: u32,
    /// Bit times the line must be idle before a start bit.
    pub idle_bits: u32,
    /// Where in the bit a node samples, as a fraction of the bit time.
    pub sample_point: f64,
    pub node_faults: Vec<NodeFault>,
}
