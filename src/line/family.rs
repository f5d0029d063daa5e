//! Transceiver families: nominal values from the standards, as presets.
//!
//! These are the figures the standards fix (levels, loads, thresholds,
//! edges), quoted from memory of the documents named; confirm them against
//! the standard and the datasheet. Timing (enable, disable, receiver delay)
//! is a property of the part, not of the standard, so no preset supplies it.

use super::ReceiverClass;
use crate::spec::{Driver, UNIT_LOAD_OHM};
use crate::units::Picos;

/// Values a family preset supplies.
#[derive(Clone, Debug, PartialEq)]
pub struct Family {
    pub name: &'static str,
    pub driver: Driver,
    pub receiver: ReceiverClass,
    pub input_ohm: f64,
    pub transition_time: Option<Picos>,
    pub common_mode_v: Option<(f64, f64)>,
}

pub const NAMES: &[&str] = &["mlvds", "lvds", "tia485"];

pub fn lookup(name: &str) -> Option<Family> {
    match name {
        // TIA/EIA-899 (multipoint LVDS), from memory: 480–650 mV into a 50 Ω
        // test load, so a nominal 11.3 mA current-mode driver (565 mV into
        // 50 Ω, common practice); type-1 receiver (±50 mV) unless type 2 is
        // chosen; minimum transition time 1 ns; receiver common mode −1.4 V to +3.8 V.
        "mlvds" => Some(Family {
            name: "mlvds",
            driver: Driver::Current { amps: 11.3e-3 },
            receiver: ReceiverClass::type1(),
            input_ohm: f64::INFINITY,
            transition_time: Some(Picos::from_ns(1)),
            common_mode_v: Some((-1.4, 3.8)),
        }),
        // TIA/EIA-644 (LVDS), from memory: 3.5 mA nominal, 350 mV into
        // 100 Ω; ±100 mV receiver; transition time at least 260 ps;
        // receiver common mode 0 to 2.4 V.
        "lvds" => Some(Family {
            name: "lvds",
            driver: Driver::Current { amps: 3.5e-3 },
            receiver: ReceiverClass::lvds(),
            input_ohm: f64::INFINITY,
            transition_time: Some(Picos::from_ps(260)),
            common_mode_v: Some((0.0, 2.4)),
        }),
        // TIA-485-A, from memory: at least 1.5 V into 54 Ω (modelled as a
        // stiff 1.5 V source unless output_resistance is given); ±200 mV
        // receiver; one unit load (12 kΩ); common mode −7 V to +12 V.
        "tia485" => Some(Family {
            name: "tia485",
            driver: Driver::Voltage { open_circuit_v: 1.5, output_ohm: 0.0 },
            receiver: ReceiverClass::tia485(),
            input_ohm: UNIT_LOAD_OHM,
            transition_time: None,
            common_mode_v: Some((-7.0, 12.0)),
        }),
        _ => None,
    }
}
