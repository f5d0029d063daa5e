//! Receiver threshold classes and what they read on an idle line.
//!
//! Threshold values are common practice for the standards named on each
//! constructor, quoted from memory; confirm against the datasheet in use.

/// Receiver input thresholds: the output reads high above `high_v` and low
/// below `low_v`; in between it is undefined.
#[derive(Clone, Debug, PartialEq)]
pub struct ReceiverClass {
    pub name: String,
    pub low_v: f64,
    pub high_v: f64,
}

/// What a receiver's output shows when no driver is on the line (0 V differential).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum IdleState {
    High,
    Low,
    Undefined,
}

impl ReceiverClass {
    /// Multipoint-LVDS type-1 receiver: ±50 mV (TIA/EIA-899; common practice, from memory).
    pub fn type1() -> Self {
        Self {
            name: "type1".into(),
            low_v: -0.050,
            high_v: 0.050,
        }
    }
    /// Multipoint-LVDS type-2 receiver: low below +50 mV, high above +150 mV, so an idle
    /// line reads low (TIA/EIA-899; common practice, from memory).
    pub fn type2() -> Self {
        Self {
            name: "type2".into(),
            low_v: 0.050,
            high_v: 0.150,
        }
    }
    /// LVDS receiver: ±100 mV (TIA/EIA-644; common practice, from memory).
    pub fn lvds() -> Self {
        Self {
            name: "lvds".into(),
            low_v: -0.100,
            high_v: 0.100,
        }
    }
    /// TIA-485-A receiver: ±200 mV (common practice, from memory).
    pub fn tia485() -> Self {
        Self {
            name: "tia485".into(),
            low_v: -0.200,
            high_v: 0.200,
        }
    }

    /// The state read at a differential input voltage `v`.
    pub fn read(&self, v: f64) -> IdleState {
        if v > self.high_v {
            IdleState::High
        } else if v < self.low_v {
            IdleState::Low
        } else {
            IdleState::Undefined
        }
    }

    /// The state read on an undriven, unbiased line (0 V).
    pub fn idle_state(&self) -> IdleState {
        self.read(0.0)
    }

    /// Noise margin for a signal that swings ±`amplitude_v`: the smaller of the
    /// high-state and low-state margins. Negative means the receiver cannot
    /// resolve the signal.
    pub fn margin_v(&self, amplitude_v: f64) -> f64 {
        let high = amplitude_v - self.high_v;
        let low = self.low_v + amplitude_v;
        high.min(low)
    }
}
