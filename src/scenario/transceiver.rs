//! Resolving a node's transceiver: its own table, then `[transceiver]`,
//! then the family preset, key by key.

use std::ops::Range;

use toml::Spanned;

use super::check::{R, V};
use super::raw::{RawTime, RawTransceiver, S};
use crate::line::family::{self, Family};
use crate::line::ReceiverClass;
use crate::spec::{Driver, ReactAt, TimeRange, Timing, Transceiver, UNIT_LOAD_OHM};
use crate::units::{Dimension, Picos};

/// The longest enable, disable or receiver time (1 s): transceivers take
/// nanoseconds to microseconds, and the bound keeps every occupancy and
/// overlap far inside the picosecond range.
pub const MAX_TRANSCEIVER_TIME: Picos = Picos(1_000_000_000_000);

const RECEIVERS: &[&str] = &["type1", "type2", "lvds", "tia485"];
const DRIVERS: &[&str] = &["current", "voltage", "auto-direction"];

/// Where a key's value came from.
struct Levels<'a> {
    v: &'a V<'a>,
    over: Option<&'a RawTransceiver>,
    defaults: &'a RawTransceiver,
    key: &'a str,
    node: &'a str,
    at: Range<usize>,
    family: Option<Family>,
}

impl<'a> Levels<'a> {
    /// The node's value, else the default, with the key path it came from.
    fn get<T: Clone>(&self, f: fn(&RawTransceiver) -> &Option<T>, name: &str) -> Option<(T, String)> {
        if let Some(o) = self.over.and_then(|o| f(o).as_ref()) {
            return Some((o.clone(), format!("{}.transceiver.{name}", self.key)));
        }
        f(self.defaults).as_ref().map(|d| (d.clone(), format!("transceiver.{name}")))
    }

    fn missing(&self, name: &str, what: &str) -> super::error::ScenarioError {
        let msg = match &self.family {
            Some(f) => format!(
                "node \"{}\" has no transceiver.{name}: the {} family leaves {what} to the part, so set it in [transceiver] or the node's table",
                self.node, f.name
            ),
            None => format!(
                "node \"{}\" has no transceiver.{name}: set it in [transceiver] or in the node's own transceiver table",
                self.node
            ),
        };
        self.v.err(self.at.clone(), &format!("transceiver.{name}"), msg)
    }

    fn time(&self, f: fn(&RawTransceiver) -> &Option<Spanned<RawTime>>, name: &str) -> R<TimeRange> {
        let Some((raw, k)) = self.get(f, name) else {
            return Err(self.missing(name, "timing"));
        };
        let one = |s: &S| -> R<Picos> {
            let t = self.v.time(s, &k)?;
            if t > MAX_TRANSCEIVER_TIME {
                return Err(self.v.err(
                    s.span(),
                    &k,
                    format!(
                        "\"{}\" is longer than the longest transceiver time supported, {MAX_TRANSCEIVER_TIME} (firmware delays belong in turnaround or response_latency)",
                        s.get_ref().trim()
                    ),
                ));
            }
            Ok(t)
        };
        match raw.get_ref() {
            RawTime::One(s) => Ok(TimeRange::fixed(one(&Spanned::new(raw.span(), s.clone()))?)),
            RawTime::Range(list) => {
                if list.len() != 2 {
                    return Err(self.v.err(raw.span(), &k, "a time range takes two times: [min, max]"));
                }
                let (min, max) = (one(&list[0])?, one(&list[1])?);
                if min > max {
                    return Err(self.v.err(raw.span(), &k, format!("the range's min ({min}) exceeds its max ({max})")));
                }
                Ok(TimeRange { min, max })
            }
        }
    }
}

pub(crate) fn resolve(
    timing: Timing,
    v: &V,
    defaults: &RawTransceiver,
    over: Option<&RawTransceiver>,
    key: &str,
    node: &str,
    at: Range<usize>,
) -> R<Transceiver> {
    let mut l = Levels { v, over, defaults, key, node, at, family: None };
    if let Some((name, k)) = l.get(|t| &t.family, "family") {
        let chosen = v.choice(&name, &k, family::NAMES)?;
        l.family = family::lookup(chosen);
    }
    let (driver, driver_typical, driver_max) = driver(&l)?;
    let enable_range = l.time(|t| &t.enable_time, "enable_time")?;
    let disable_range = l.time(|t| &t.disable_time, "disable_time")?;
    let receiver_range = l.time(|t| &t.receiver_delay, "receiver_delay")?;
    // Random draws happen in the engine, from each node's own stream; the
    // spec carries the typical values meanwhile.
    let (enable_time, disable_time, receiver_delay) = match timing {
        Timing::Worst => (enable_range.max, disable_range.max, receiver_range.min),
        Timing::Typical | Timing::Random => (enable_range.typical(), disable_range.typical(), receiver_range.typical()),
    };
    let load_f = match l.get(|t| &t.load, "load") {
        Some((s, k)) => {
            let x = v.non_negative(&s, Dimension::Capacitance, &k)?;
            if x > 1e-6 {
                return Err(v.err(s.span(), &k, "a node load above 1 µF is outside the supported range"));
            }
            x
        }
        None => return Err(l.missing("load", "the node's capacitance")),
    };
    let receiver = receiver(&l)?;
    let input_ohm = match (l.get(|t| &t.input_resistance, "input_resistance"), l.get(|t| &t.unit_loads, "unit_loads")) {
        (Some((s, k)), None) => v.within(&s, Dimension::Resistance, &k, 1.0, 1e9, "Ω")?,
        (None, Some((u, k))) => {
            let x = *u.get_ref();
            if !(x > 0.0 && x <= 1000.0) {
                return Err(v.err(u.span(), &k, "unit_loads must lie in (0, 1000]"));
            }
            UNIT_LOAD_OHM / x
        }
        (Some((s, k)), Some(_)) => {
            return Err(v.err(s.span(), &k, "give input_resistance or unit_loads, not both"));
        }
        (None, None) => l.family.as_ref().map_or(f64::INFINITY, |f| f.input_ohm),
    };
    let transition_time = match l.get(|t| &t.transition_time, "transition_time") {
        Some((s, k)) => Some(v.time(&s, &k)?),
        None => l.family.as_ref().and_then(|f| f.transition_time),
    };
    let stub_m = match l.get(|t| &t.stub_length, "stub_length") {
        Some((s, k)) => v.non_negative(&s, Dimension::Length, &k)?,
        None => 0.0,
    };
    let ground_offset_v = match l.get(|t| &t.ground_offset, "ground_offset") {
        Some((s, k)) => v.qty(&s, Dimension::Voltage, &k)?,
        None => 0.0,
    };
    let common_mode_v = match l.get(|t| &t.common_mode, "common_mode") {
        Some((list, k)) => Some(pair(v, &list, &k, "common_mode takes two voltages: [low, high]")?),
        None => l.family.as_ref().and_then(|f| f.common_mode_v),
    };
    let offset_v = match l.get(|t| &t.offset, "offset") {
        Some((raw, k)) => Some(match raw.get_ref() {
            RawTime::One(s) => {
                let x = v.qty(&Spanned::new(raw.span(), s.clone()), Dimension::Voltage, &k)?;
                (x, x)
            }
            RawTime::Range(list) => {
                pair(v, &Spanned::new(raw.span(), list.clone()), &k, "offset takes a voltage or two: [low, high]")?
            }
        }),
        None => l.family.as_ref().and_then(|f| f.offset_v),
    };
    if let Some((lo, hi)) = offset_v {
        if lo.abs() > 100.0 || hi.abs() > 100.0 {
            return Err(v.err(
                l.at.clone(),
                "transceiver.offset",
                "a driver offset beyond ±100 V is outside the supported range",
            ));
        }
    }
    let edge_fraction = match l.get(|t| &t.edge_fraction, "edge_fraction") {
        Some((f, k)) => {
            let x = *f.get_ref();
            if !(x > 0.0 && x <= 1.0) {
                return Err(v.err(
                    f.span(),
                    &k,
                    format!(
                        "edge_fraction {x} must lie in (0, 1]: the fastest bit rate is edge_fraction / transition_time"
                    ),
                ));
            }
            x
        }
        None => l.family.as_ref().map_or(family::DEFAULT_EDGE_FRACTION, |f| f.edge_fraction),
    };
    let auto_direction = l.get(|t| &t.driver, "driver").is_some_and(|(s, _)| s.get_ref().trim() == "auto-direction");
    let enable_lead = match l.get(|t| &t.enable_lead, "enable_lead") {
        Some((s, k)) => Some(bounded(v, &s, &k, v.time(&s, &k)?)?),
        None => None,
    };
    let release_after_stop = match l.get(|t| &t.release_after_stop, "release_after_stop") {
        Some((s, k)) => {
            let t = v.signed_time(&s, &k)?;
            bounded(v, &s, &k, Picos(t.unsigned_abs()))?;
            t
        }
        None => 0,
    };
    if auto_direction {
        let firmware =
            l.get(|t| &t.enable_lead, "enable_lead").or_else(|| l.get(|t| &t.release_after_stop, "release_after_stop"));
        if let Some((s, k)) = firmware {
            return Err(v.err(
                s.span(),
                &k,
                format!("node \"{node}\" has an auto-direction transceiver: its driver follows the data, so there is no enable for firmware to time"),
            ));
        }
    }
    let react_at = match l.get(|t| &t.react_at, "react_at") {
        Some((s, k)) => match v.choice(&s, &k, &["frame-end", "stop-sample"])? {
            "stop-sample" => ReactAt::StopSample,
            _ => ReactAt::FrameEnd,
        },
        None => ReactAt::FrameEnd,
    };
    Ok(Transceiver {
        enable_lead,
        release_after_stop,
        react_at,
        auto_direction,
        driver,
        driver_typical,
        driver_max,
        offset_v,
        edge_fraction,
        enable_time,
        disable_time,
        receiver_delay,
        enable_range,
        disable_range,
        receiver_range,
        load_f,
        receiver,
        input_ohm,
        transition_time,
        stub_m,
        ground_offset_v,
        common_mode_v,
        family: l.family.as_ref().map(|f| f.name.to_owned()),
    })
}

/// A firmware time within the transceiver-time bound (1 s).
fn bounded(v: &V, s: &S, key: &str, t: Picos) -> R<Picos> {
    if t > MAX_TRANSCEIVER_TIME {
        return Err(v.err(
            s.span(),
            key,
            format!(
                "\"{}\" is longer than the longest transceiver time supported, {MAX_TRANSCEIVER_TIME}",
                s.get_ref().trim()
            ),
        ));
    }
    Ok(t)
}

fn pair(v: &V, list: &Spanned<Vec<S>>, key: &str, msg: &str) -> R<(f64, f64)> {
    if list.get_ref().len() != 2 {
        return Err(v.err(list.span(), key, msg));
    }
    let a = v.qty(&list.get_ref()[0], Dimension::Voltage, key)?;
    let b = v.qty(&list.get_ref()[1], Dimension::Voltage, key)?;
    if a > b {
        return Err(v.err(list.span(), key, "the low value must not exceed the high value"));
    }
    Ok((a, b))
}

/// The node's weakest, typical and strongest drive.
fn driver(l: &Levels) -> R<(Driver, Driver, Driver)> {
    let v = l.v;
    let current = l.get(|t| &t.drive_current, "drive_current");
    let voc = l.get(|t| &t.output_voltage, "output_voltage");
    let min = l.get(|t| &t.min_output, "min_output");
    let rout = match l.get(|t| &t.output_resistance, "output_resistance") {
        Some((s, k)) => {
            let r = v.non_negative(&s, Dimension::Resistance, &k)?;
            if r > 1e6 {
                return Err(v.err(s.span(), &k, "an output resistance above 1 MΩ is outside the supported range"));
            }
            Some(r)
        }
        None => None,
    };
    let one = |d: Driver| (d, d, d);
    // An auto-direction part drives dominant bits like any other: its
    // levels come from the other keys (or the family).
    let named = match l.get(|t| &t.driver, "driver") {
        Some((s, k)) => Some(v.choice(&s, &k, DRIVERS)?),
        None => None,
    };
    let kind = match named {
        Some(k) if k != "auto-direction" => k,
        _ if current.is_some() => "current",
        _ if voc.is_some() || min.is_some() => "voltage",
        _ => match l.family.as_ref().map(|f| f.driver_min) {
            Some(Driver::Current { .. }) => "current",
            Some(Driver::Voltage { .. }) => "voltage",
            None => {
                return Err(l.v.err(
                    l.at.clone(),
                    "transceiver.drive_current",
                    format!(
                        "node \"{}\" has no driver: set drive_current (current mode), output_voltage or min_output (voltage mode), or a family",
                        l.node
                    ),
                ))
            }
        },
    };
    if kind == "current" {
        return match current {
            // A range: amplitudes use its weakest value, the common-mode check its strongest.
            Some((raw, k)) => match raw.get_ref() {
                RawTime::One(s) => {
                    let amps =
                        v.within(&Spanned::new(raw.span(), s.clone()), Dimension::Current, &k, 1e-9, 1.0, "A")?;
                    Ok(one(Driver::Current { amps }))
                }
                RawTime::Range(list) => {
                    if list.len() != 2 {
                        return Err(v.err(raw.span(), &k, "a current range takes two values: [min, max]"));
                    }
                    let lo = v.within(&list[0], Dimension::Current, &k, 1e-9, 1.0, "A")?;
                    let hi = v.within(&list[1], Dimension::Current, &k, 1e-9, 1.0, "A")?;
                    if lo > hi {
                        return Err(v.err(raw.span(), &k, "the range's min exceeds its max"));
                    }
                    Ok((
                        Driver::Current { amps: lo },
                        Driver::Current { amps: (lo + hi) / 2.0 },
                        Driver::Current { amps: hi },
                    ))
                }
            },
            None => match l.family.as_ref() {
                Some(f) if matches!(f.driver_min, Driver::Current { .. }) => {
                    Ok((f.driver_min, f.driver_typical, f.driver_max))
                }
                _ => Err(l.missing("drive_current", "the drive current")),
            },
        };
    }
    match (voc, min) {
        (Some((s, k)), None) => {
            let oc = v.within(&s, Dimension::Voltage, &k, 1e-3, 100.0, "V")?;
            Ok(one(Driver::thevenin(oc, rout.unwrap_or(0.0))))
        }
        (None, Some((list, k))) => {
            // "At least V into R_test": with output resistance R_out the
            // open-circuit voltage is V·(R_test + R_out)/R_test; without it, a stiff source.
            let items = list.get_ref();
            if items.len() != 2 {
                return Err(v.err(
                    list.span(),
                    &k,
                    "min_output takes a voltage and its test load: [\"1.5 V\", \"54 ohm\"]",
                ));
            }
            let volts = v.qty(&items[0], Dimension::Voltage, &k)?;
            let test = v.qty(&items[1], Dimension::Resistance, &k)?;
            if !(volts > 0.0 && volts <= 100.0 && test > 0.0 && test <= 1e6) {
                return Err(v.err(
                    list.span(),
                    &k,
                    "min_output needs a voltage (up to 100 V) and a positive test load",
                ));
            }
            let r = rout.unwrap_or(0.0);
            Ok(one(Driver::thevenin(volts * (test + r) / test, r)))
        }
        (Some((s, k)), Some(_)) => Err(v.err(s.span(), &k, "give output_voltage or min_output, not both")),
        (None, None) => match l.family.as_ref() {
            Some(f) if matches!(f.driver_min, Driver::Voltage { .. }) => Ok(match rout {
                // A given output resistance: the part meets the standard's
                // minimum (1.5 V into 54 Ω) through it.
                Some(r) => {
                    let d = Driver::thevenin(1.5 * (54.0 + r) / 54.0, r);
                    (d, d, f.driver_max)
                }
                None => (f.driver_min, f.driver_typical, f.driver_max),
            }),
            _ => Err(l.missing("output_voltage", "the driver's output")),
        },
    }
}

fn receiver(l: &Levels) -> R<ReceiverClass> {
    let v = l.v;
    // The class comes from one level: the node's table if it names one, else the defaults.
    let (t, key) = match l.over {
        Some(o) if o.receiver.is_some() || o.thresholds.is_some() => (o, format!("{}.transceiver", l.key)),
        _ => (l.defaults, "transceiver".to_owned()),
    };
    match (&t.receiver, &t.thresholds) {
        (Some(r), None) => Ok(match v.choice(r, &format!("{key}.receiver"), RECEIVERS)? {
            "type1" => ReceiverClass::type1(),
            "type2" => ReceiverClass::type2(),
            "lvds" => ReceiverClass::lvds(),
            _ => ReceiverClass::tia485(),
        }),
        (None, Some(th)) => {
            let k = format!("{key}.thresholds");
            let (low, high) = pair(v, th, &k, "thresholds takes two voltages: [low, high], e.g. [\"-200 mV\", \"200 mV\"]")?;
            Ok(ReceiverClass { name: "custom".into(), low_v: low, high_v: high })
        }
        (Some(r), Some(_)) => Err(v.err(r.span(), &format!("{key}.receiver"), "give receiver or thresholds, not both")),
        (None, None) => match &l.family {
            Some(f) => Ok(f.receiver.clone()),
            None => Err(v.err(
                l.at.clone(),
                "transceiver.receiver",
                format!(
                    "node \"{}\" has no receiver class: set receiver = \"type1\", \"type2\", \"lvds\", \"tia485\", thresholds = [low, high], or a family",
                    l.node
                ),
            )),
        },
    }
}
