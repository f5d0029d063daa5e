//! An optional, windowed record of bus events for `--events` and waveform output.
//!
//! The engine never writes anything: events inside the window are appended to
//! a buffer that the caller drains between steps. Events are appended when
//! they become final, which is not strictly in time order; consumers sort.

use crate::spec::NodeId;

#[derive(Clone, Copy, Debug, PartialEq)]
pub enum BusEventKind {
    /// Driver enable asserted. `dominant`: a dominant-state drive of
    /// wired-AND signalling (bitwise arbitration), which drives the line low.
    DriverEnable {
        dominant: bool,
    },
    /// Driver enable released (end of the last bit).
    DriverRelease,
    /// Driver output high-impedance (`disable_time` after release).
    DriverOff,
    FrameStart {
        frame: &'static str,
        to: NodeId,
        /// Seeds the frame's random character gaps (0 when they are not random).
        gap_seed: u64,
    },
    FrameEnd {
        frame: &'static str,
        to: NodeId,
        corrupted: bool,
    },
    Contention {
        other: NodeId,
        position_m: f64,
        overlap_ps: u64,
    },
}

#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BusEvent {
    /// Time in picoseconds; for frame events, at the transmitting driver.
    pub t: u64,
    pub node: NodeId,
    pub kind: BusEventKind,
}

/// The trace buffer; disabled unless a window is set.
#[derive(Debug, Default)]
pub struct Trace {
    window: Option<(u64, u64)>,
    pub events: Vec<BusEvent>,
}

impl Trace {
    pub fn new(window: Option<(u64, u64)>) -> Self {
        Trace { window, events: Vec::new() }
    }

    /// The window recorded (ps, inclusive), if any.
    pub fn window(&self) -> Option<(u64, u64)> {
        self.window
    }

    pub fn enabled(&self) -> bool {
        self.window.is_some()
    }

    #[inline]
    pub fn push(&mut self, ev: BusEvent) {
        if let Some((a, b)) = self.window {
            if ev.t >= a && ev.t <= b {
                self.events.push(ev);
            }
        }
    }
}
