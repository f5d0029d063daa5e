//! Transceiver families: the standards' levels, as presets.
//!
//! These are the figures the standards fix (driver levels into their test
//! loads, thresholds, loads, edges, common-mode ranges), quoted from memory of
//! the documents named; confirm them against the standard and the datasheet.
//! A family's drive is a range from the standard's minimum to its maximum,
//! and every amplitude, margin and limit uses the minimum: a budget signed
//! on it holds for every compliant part. Timing (enable, disable, receiver
//! delay) is a property of the part, not of the standard, so no preset
//! supplies it.

use super::ReceiverClass;
use crate::spec::{Driver, UNIT_LOAD_OHM};
use crate::units::Picos;

/// Values a family preset supplies.
#[derive(Clone, Debug, PartialEq)]
pub struct Family {
    pub name: &'static str,
    /// The standard's weakest compliant driver.
    pub driver_min: Driver,
    /// A typical driver (common practice), shown beside the minimum.
    pub driver_typical: Driver,
    /// The standard's strongest compliant driver (for the common-mode check).
    pub driver_max: Driver,
    pub receiver: ReceiverClass,
    pub input_ohm: f64,
    pub transition_time: Option<Picos>,
    /// The fastest bit rate is `edge_fraction / transition_time`.
    pub edge_fraction: f64,
    pub common_mode_v: Option<(f64, f64)>,
    /// The driver's common-mode (offset) output range.
    pub offset_v: Option<(f64, f64)>,
}

pub const NAMES: &[&str] = &["mlvds", "lvds", "tia485"];

/// The edge rule when no family gives one: unit interval ≥ 2 × transition
/// time (common practice).
pub const DEFAULT_EDGE_FRACTION: f64 = 0.5;

/// TIA-485-A's guaranteed output: at least 1.5 V into 54 Ω, and at most 6 V
/// open circuit (from memory of TIA-485-A).
const TIA485_MIN_V: f64 = 1.5;
const TIA485_TEST_OHM: f64 = 54.0;
const TIA485_MAX_OPEN_V: f64 = 6.0;

/// The weakest output TIA-485-A allows, as a function of the load. Every
/// compliant driver is (close to) a Thevenin source that gives at least 1.5 V
/// into 54 Ω with at most 6 V open circuit. Below 54 Ω the weakest such source
/// is the softest one, 6 V behind 54·(6 − 1.5)/1.5 = 162 Ω; above 54 Ω it is a
/// stiff 1.5 V. So the envelope is min(1.5 V, 6 V·R/(R + 162 Ω)): it falls
/// below 1.5 V exactly when the load is below 54 Ω.
pub fn tia485_min() -> Driver {
    let r_out = TIA485_TEST_OHM * (TIA485_MAX_OPEN_V - TIA485_MIN_V) / TIA485_MIN_V;
    Driver::Voltage { open_circuit_v: TIA485_MAX_OPEN_V, output_ohm: r_out, limit_v: TIA485_MIN_V }
}

pub fn lookup(name: &str) -> Option<Family> {
    match name {
        // TIA/EIA-899 (multipoint LVDS), from memory: |V_AB| 480–650 mV into
        // a 50 Ω test load, so a current-mode driver of 9.6–13 mA; 11.3 mA
        // (565 mV into 50 Ω) is common practice's typical value. Type-1
        // receiver (±50 mV) unless type 2 is chosen; minimum transition time
        // 1 ns, which limits the standard to 500 Mbit/s (edge fraction 0.5);
        // receiver common mode −1.4 V to +3.8 V; driver offset 0.3–2.1 V.
        "mlvds" => Some(Family {
            name: "mlvds",
            driver_min: Driver::Current { amps: 0.480 / 50.0 },
            driver_typical: Driver::Current { amps: 11.3e-3 },
            driver_max: Driver::Current { amps: 0.650 / 50.0 },
            receiver: ReceiverClass::type1(),
            input_ohm: f64::INFINITY,
            transition_time: Some(Picos::from_ns(1)),
            edge_fraction: 0.5,
            common_mode_v: Some((-1.4, 3.8)),
            offset_v: Some((0.3, 2.1)),
        }),
        // TIA/EIA-644 (LVDS), from memory: |V_OD| 247–454 mV into 100 Ω, so
        // 2.47–4.54 mA; 3.5 mA (350 mV) typical; ±100 mV receiver;
        // transition time at least 260 ps; receiver input 0 to 2.4 V; driver
        // offset 1.125–1.375 V. Edge rule: UI ≥ 2 × transition (common practice).
        "lvds" => Some(Family {
            name: "lvds",
            driver_min: Driver::Current { amps: 0.247 / 100.0 },
            driver_typical: Driver::Current { amps: 3.5e-3 },
            driver_max: Driver::Current { amps: 0.454 / 100.0 },
            receiver: ReceiverClass::lvds(),
            input_ohm: f64::INFINITY,
            transition_time: Some(Picos::from_ps(260)),
            edge_fraction: 0.5,
            common_mode_v: Some((0.0, 2.4)),
            offset_v: Some((1.125, 1.375)),
        }),
        // TIA-485-A, from memory: at least 1.5 V into 54 Ω and at most 6 V
        // open circuit (the weakest driver is `tia485_min`); a typical 5 V
        // part gives about 2.5 V into 54 Ω (5 V behind 54 Ω, common
        // practice); ±200 mV receiver; one unit load (24 kΩ across the pair);
        // receiver common mode −7 V to +12 V; driver offset −1 V to +3 V; rise
        // time at most 0.3 of the unit interval (edge fraction 0.3).
        "tia485" => Some(Family {
            name: "tia485",
            driver_min: tia485_min(),
            driver_typical: Driver::thevenin(5.0, 54.0),
            driver_max: Driver::thevenin(TIA485_MAX_OPEN_V, 0.0),
            receiver: ReceiverClass::tia485(),
            input_ohm: UNIT_LOAD_OHM,
            transition_time: None,
            edge_fraction: 0.3,
            common_mode_v: Some((-7.0, 12.0)),
            offset_v: Some((-1.0, 3.0)),
        }),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn worst_case_levels_from_the_standards() {
        // TIA/EIA-899 (from memory): 480 mV into 50 Ω is 9.6 mA, 650 mV is 13 mA.
        let m = lookup("mlvds").unwrap();
        assert!((m.driver_min.amplitude_v(50.0) - 0.480).abs() < 1e-12);
        assert!((m.driver_max.amplitude_v(50.0) - 0.650).abs() < 1e-12);
        // TIA/EIA-644 (from memory): 247–454 mV into 100 Ω.
        let l = lookup("lvds").unwrap();
        assert!((l.driver_min.amplitude_v(100.0) - 0.247).abs() < 1e-12);
        assert!((l.driver_max.amplitude_v(100.0) - 0.454).abs() < 1e-12);
        // TIA-485-A (from memory): exactly 1.5 V into 54 Ω, less below it, never more than 1.5 V above it.
        let t = tia485_min();
        assert!((t.amplitude_v(54.0) - 1.5).abs() < 1e-12);
        assert!(t.amplitude_v(30.0) < 1.5);
        assert!((t.amplitude_v(30.0) - 6.0 * 30.0 / 192.0).abs() < 1e-12);
        assert_eq!(t.amplitude_v(120.0), 1.5);
        // 32 unit loads across the pair are 750 Ω.
        assert!((UNIT_LOAD_OHM / 32.0 - 750.0).abs() < 1e-12);
    }
}
