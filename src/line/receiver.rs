//! Receiver threshold classes and what they read on an idle line.
//!
//! Threshold values are common practice for the standards named on each
//! constructor, quoted from memory; confirm against the datasheet in use.

/// How close to a threshold a voltage meets it (1 nV: far below any
/// receiver's resolution, far above floating-point rounding).
pub const THRESHOLD_TOLERANCE_V: f64 = 1e-9;

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
        Self { name: "type1".into(), low_v: -0.050, high_v: 0.050 }
    }
    /// Multipoint-LVDS type-2 receiver: low below +50 mV, high above +150 mV, so an idle
    /// line reads low (TIA/EIA-899; common practice, from memory).
    pub fn type2() -> Self {
        Self { name: "type2".into(), low_v: 0.050, high_v: 0.150 }
    }
    /// LVDS receiver: ±100 mV (TIA/EIA-644; common practice, from memory).
    pub fn lvds() -> Self {
        Self { name: "lvds".into(), low_v: -0.100, high_v: 0.100 }
    }
    /// TIA-485-A receiver: ±200 mV (common practice, from memory).
    pub fn tia485() -> Self {
        Self { name: "tia485".into(), low_v: -0.200, high_v: 0.200 }
    }

    /// The state read at a differential input voltage `v`. A voltage at a
    /// threshold meets it: the comparison allows [`THRESHOLD_TOLERANCE_V`], so
    /// that a value computed to lie exactly on it (5 V through 720 Ω each
    /// across 60 Ω is 200 mV) is not lost to floating-point rounding.
    pub fn read(&self, v: f64) -> IdleState {
        if v >= self.high_v - THRESHOLD_TOLERANCE_V {
            IdleState::High
        } else if v <= self.low_v + THRESHOLD_TOLERANCE_V {
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
        self.margin_biased_v(amplitude_v, 0.0)
    }

    /// The same around a bias offset `bias_v` (the idle voltage at the
    /// receiver, which the signal adds to): high at bias + amplitude, low at
    /// bias − amplitude.
    pub fn margin_biased_v(&self, amplitude_v: f64, bias_v: f64) -> f64 {
        let high = bias_v + amplitude_v - self.high_v;
        let low = self.low_v - (bias_v - amplitude_v);
        high.min(low)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn idle_line_decisions_follow_the_thresholds() {
        // Threshold classes: common practice, from memory of TIA/EIA-899 (type 1
        // and 2), TIA/EIA-644 and TIA-485-A.
        assert_eq!(ReceiverClass::type1().idle_state(), IdleState::Undefined);
        assert_eq!(ReceiverClass::type2().idle_state(), IdleState::Low);
        assert_eq!(ReceiverClass::lvds().idle_state(), IdleState::Undefined);
        assert_eq!(ReceiverClass::tia485().idle_state(), IdleState::Undefined);
        let t2 = ReceiverClass::type2();
        assert_eq!(t2.read(0.100), IdleState::Undefined);
        // A threshold is met exactly: 5 V through 720 Ω each across 60 Ω is
        // 200 mV (common practice for TIA-485 bias), computed in floating point.
        assert_eq!(ReceiverClass::tia485().read(5.0 * 60.0 / (1440.0 + 60.0)), IdleState::High);
        assert_eq!(t2.read(0.150), IdleState::High);
        assert_eq!(t2.read(0.050), IdleState::Low);
        assert_eq!(t2.read(0.151), IdleState::High);
        assert_eq!(t2.read(0.049), IdleState::Low);
    }

    #[test]
    fn margins_against_a_swing() {
        // 339 mV into a heavily loaded 30 Ω bus (common practice) against each class.
        let a = 0.339;
        assert!((ReceiverClass::type1().margin_v(a) - 0.289).abs() < 1e-12);
        assert!((ReceiverClass::type2().margin_v(a) - 0.189).abs() < 1e-12);
        assert!((ReceiverClass::tia485().margin_v(a) - 0.139).abs() < 1e-12);
        // A 120 mV swing cannot reach a type-2 receiver's +150 mV high threshold.
        assert!(ReceiverClass::type2().margin_v(0.120) < 0.0);
    }
}
