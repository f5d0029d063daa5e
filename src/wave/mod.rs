//! Waveforms: the bus seen as logic signals, for VCD export and timing diagrams.
//!
//! The engine's trace gives, per driver occupancy, the enable, release and
//! off instants and the frames inside. [`WaveModel`] turns these into value
//! changes of these signals:
//!
//! - per node: `enable` (the driver enable), `line` (the level the node's
//!   driver puts on the line: `z` while its output is off), and `rx` (its
//!   receiver output: the line at the node's position, delayed by the wire
//!   and by the receiver; `x` where the input is undefined, either floating
//!   or driven by two drivers at once);
//! - bus-wide: `drivers` (how many drivers occupy the line, each at its own
//!   position) and `contention` (1 during every contention overlap the bus
//!   model reports, at its worst position).
//!
//! Frame contents are not part of the bus model, so the symbols inside a frame
//! carry a deterministic pseudo-random pattern (Manchester keeps a transition
//! in every bit cell, UART framing keeps its start, parity and stop bits and
//! the idle gaps between characters). The timing of every edge is exact:
//! symbol k of a frame (or of a UART character) starting at s begins at
//! s + round(k / symbol rate). An auto-direction driver's output is off
//! during its recessive bits: receivers see the idle line there.
//!
//! Changes are produced in time order and handed to a [`WaveSink`] as soon
//! as they are final, so memory is bounded by what the window holds.

mod edges;
pub mod timing;
pub mod vcd;

pub use edges::WaveModel;

/// A logic value on one signal.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Level {
    Low,
    High,
    /// Not driven by this node (its output is high-impedance).
    Off,
    /// Receiver input undefined: no driver, and the idle line reads undefined.
    Floating,
    /// Receiver input undefined: two drivers at once.
    Contended,
}

/// The value of one signal.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Value {
    Bit(Level),
    Count(u32),
}

/// Which signal a value belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Signal {
    Enable(usize),
    Line(usize),
    Rx(usize),
    Drivers,
    Contention,
}

impl Signal {
    /// Dense index: three per node, then the two bus-wide signals.
    pub fn index(self, nodes: usize) -> usize {
        match self {
            Signal::Enable(n) => 3 * n,
            Signal::Line(n) => 3 * n + 1,
            Signal::Rx(n) => 3 * n + 2,
            Signal::Drivers => 3 * nodes,
            Signal::Contention => 3 * nodes + 1,
        }
    }

    pub fn from_index(i: usize, nodes: usize) -> Signal {
        match i {
            i if i == 3 * nodes => Signal::Drivers,
            i if i == 3 * nodes + 1 => Signal::Contention,
            i => [Signal::Enable(i / 3), Signal::Line(i / 3), Signal::Rx(i / 3)][i % 3],
        }
    }

    pub fn count(nodes: usize) -> usize {
        3 * nodes + 2
    }
}

/// One frame inside an occupancy, at its driver.
#[derive(Clone, Debug, PartialEq)]
pub struct FrameSpan {
    pub s: u64,
    pub e: u64,
    pub kind: &'static str,
    pub to: usize,
    pub corrupted: bool,
    /// Seeds its random character gaps (see `engine::chars`).
    pub gap_seed: u64,
}

/// One driver occupancy, at its driver.
#[derive(Clone, Debug, PartialEq)]
pub struct Occupancy {
    pub node: usize,
    /// Enable asserted.
    pub a: u64,
    /// Enable released.
    pub release: u64,
    /// Output off.
    pub b: u64,
    pub dominant: bool,
    /// An auto-direction driver: on for dominant bits only.
    pub auto: bool,
    pub frames: Vec<FrameSpan>,
}

/// A contention overlap as the bus model reports it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ContentionSpan {
    pub t: u64,
    pub overlap: u64,
    pub first: usize,
    pub second: usize,
    pub position_m: f64,
}

/// Receives the waveform in time order.
pub trait WaveSink {
    /// The window opens at `at`; `values` holds every signal's value there (by [`Signal::index`]).
    fn begin(&mut self, at: u64, values: &[Value]) -> Result<(), String>;
    /// A signal changes at `t` (inside the window, in time order).
    fn change(&mut self, t: u64, signal: Signal, value: Value) -> Result<(), String>;
    /// The window closes at `at`.
    fn end(&mut self, at: u64) -> Result<(), String>;
    /// An occupancy that overlaps the window (as soon as it is complete).
    fn occupancy(&mut self, _o: &Occupancy) {}
    /// A contention overlap that starts inside the window.
    fn contention(&mut self, _c: &ContentionSpan) {}
}
