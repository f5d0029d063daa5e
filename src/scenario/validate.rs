//! Validation: raw scenario structs → typed [`Spec`].
//!
//! Every check names the key and points at the value. The first error stops
//! validation; the message says what was expected.

use std::collections::HashMap;
use std::ops::Range;

use super::check::{unknown_node, MAX_TIME, R, V};
use super::raw::*;
use crate::spec::*;
use crate::units::{self, Dimension, Picos};
use toml::Spanned;

/// Most nodes on one bus (the engine keeps an N × N delay matrix).
pub const MAX_NODES: usize = 4096;

/// Most messages one node may hold (its `queue_limit`): a queue's memory is
/// about 40 bytes a message.
pub const MAX_QUEUE_LIMIT: u64 = 1_000_000;

/// Most traffic sources at one node.
pub const MAX_SOURCES_PER_NODE: usize = 256;

/// Most data bits in one frame (2⁴⁰); larger frames would overflow picosecond time.
pub const MAX_FRAME_BITS: u64 = 1 << 40;

/// The slowest line supported (1 µs/m, a velocity factor of 0.0033): far
/// slower than any cable, and it keeps the longest wire delay (10^5 m of
/// line) at 0.1 s.
pub const MAX_DELAY_S_PER_M: f64 = 1e-6;

/// Speed of light in vacuum (m/s), exact by the SI definition.
const C_M_PER_S: f64 = 299_792_458.0;

const ENCODINGS: &[&str] = &["nrz", "8b10b", "manchester", "uart-8n1"];
const PATTERNS: &[&str] = &["poisson", "periodic"];
const TERMINATIONS: &[&str] = &["both-ends", "far-end", "none"];

/// Validate a parsed scenario. `file` names it in errors; `src` is its text.
pub fn validate(raw: &RawScenario, file: &str, src: &str) -> R<Spec> {
    let v = V { file, src, clock: std::cell::Cell::new(None) };
    let name = raw.name.as_ref().map(|n| n.get_ref().clone()).unwrap_or_else(|| {
        std::path::Path::new(file)
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "scenario".into())
    });
    let seed = raw.seed.as_ref().map(|s| *s.get_ref()).unwrap_or(1);
    // The frame first: it sets the clock for times written in bits or characters.
    let frame = validate_frame(&v, raw.frame.get_ref())?;
    let duration = v.time(&raw.duration, "duration")?;
    if duration == Picos::ZERO {
        return Err(v.err(raw.duration.span(), "duration", "duration must be greater than zero"));
    }
    let warmup = v.opt_time(&raw.warmup, "warmup", Picos::ZERO)?;
    if warmup >= duration {
        let span = raw.warmup.as_ref().map(|w| w.span()).unwrap_or(0..0);
        return Err(v.err(span, "warmup", format!("warmup ({warmup}) must be shorter than duration ({duration})")));
    }
    let timing = match &raw.timing {
        None => Timing::Typical,
        Some(t) => match v.choice(t, "timing", &["typical", "worst", "random"])? {
            "worst" => Timing::Worst,
            "random" => Timing::Random,
            _ => Timing::Typical,
        },
    };
    let line = validate_line(&v, raw.line.get_ref(), raw.line.span())?;
    let nodes = validate_nodes(&v, raw, &line, timing)?;
    check_frame_times(&v, raw, &frame, &nodes)?;
    check_unique_ids(&v, raw, &nodes)?;
    check_arrival_count(&v, raw, &nodes, duration)?;
    let access = super::access::validate(&v, raw.access.get_ref(), raw.access.span(), &nodes, &line, &frame)?;
    let expect = validate_expectations(&v, raw)?;
    let spec = Spec { expect, name, seed, duration, warmup, timing, line, frame, nodes, access, shortcuts: true };
    check_recessive(&v, raw, &spec)?;
    check_external(&v, raw, &spec)?;
    check_firmware_timing(&v, raw, &spec)?;
    Ok(spec)
}

/// Every transceiver table of the file with the key path it sits at.
fn transceiver_tables(raw: &RawScenario) -> Vec<(&RawTransceiver, String)> {
    let mut out: Vec<(&RawTransceiver, String)> = Vec::new();
    if let Some(t) = &raw.transceiver {
        out.push((t, "transceiver".into()));
    }
    if let Some(t) = raw.nodes.as_ref().and_then(|r| r.get_ref().transceiver.as_ref()) {
        out.push((t, "nodes.transceiver".into()));
    }
    for (i, n) in raw.node.iter().flatten().enumerate() {
        if let Some(t) = &n.get_ref().transceiver {
            out.push((t, format!("node[{i}].transceiver")));
        }
    }
    out
}

/// Firmware enable timing and auto-direction parts: what the schemes and
/// encodings that model them can take, and frame gaps the silence rule allows.
fn check_firmware_timing(v: &V, raw: &RawScenario, spec: &Spec) -> R<()> {
    let f = raw.frame.get_ref();
    if let (Some(si), Some(raw_si)) = (spec.frame.silence, &f.silence) {
        if spec.frame.interframe_gap < si {
            return Err(v
                .err(
                    f.interframe_gap.as_ref().map_or(raw_si.span(), |g| g.span()),
                    if f.interframe_gap.is_some() { "frame.interframe_gap" } else { "frame.silence" },
                    format!(
                        "frame.interframe_gap ({}) is shorter than frame.silence ({si}): back-to-back frames of one driver would merge at every receiver",
                        spec.frame.interframe_gap
                    ),
                )
                .with_hint("set frame.interframe_gap to at least the silence, e.g. interframe_gap = \"3.5 char\""));
        }
    }
    let scheme_ok = matches!(spec.access, AccessSpec::Polling(_) | AccessSpec::Token(_));
    for (t, path) in transceiver_tables(raw) {
        let keys = [
            ("enable_lead", t.enable_lead.as_ref().map(|x| x.span())),
            ("release_after_stop", t.release_after_stop.as_ref().map(|x| x.span())),
            ("react_at", t.react_at.as_ref().map(|x| x.span())),
            ("driver", t.driver.as_ref().filter(|d| d.get_ref().trim() == "auto-direction").map(|x| x.span())),
        ];
        for (key, span) in keys {
            let Some(span) = span else { continue };
            let what = if key == "driver" { "an auto-direction driver".to_owned() } else { key.to_owned() };
            if !scheme_ok {
                return Err(v
                    .err(
                        span,
                        &format!("{path}.{key}"),
                        format!(
                            "{what} is modelled under polling and token passing (where firmware times each hand-over), not {}",
                            spec.access.name()
                        ),
                    )
                    .with_hint("remove the key, or model the bus with scheme = \"polling\" or \"token\""));
            }
            if key == "driver" && spec.frame.encoding.uart().is_none() {
                return Err(v
                    .err(span, &format!("{path}.{key}"), "an auto-direction driver follows UART characters (start bit dominant, idle recessive): it needs a UART encoding")
                    .with_hint("set frame.encoding = \"uart-8n1\" (or 8e1, 8n2, …)"));
            }
        }
    }
    Ok(())
}

/// External nodes stand in for polling slaves: the master, and the nodes of
/// the other schemes, keep their built-in behaviour.
fn check_external(v: &V, raw: &RawScenario, spec: &Spec) -> R<()> {
    for (i, n) in raw.node.iter().flatten().enumerate() {
        let Some(e) = n.get_ref().external.as_ref().filter(|e| *e.get_ref()) else { continue };
        let key = format!("node[{i}].external");
        match &spec.access {
            AccessSpec::Polling(p) if p.master == i => {
                return Err(v.err(e.span(), &key, "the polling master cannot be external: only slaves can"));
            }
            AccessSpec::Polling(_) => {}
            other => {
                return Err(v
                    .err(e.span(), &key, format!("external nodes are supported under polling, not {}", other.name()))
                    .with_hint("an external node takes a polling slave's place; the master stays built in"));
            }
        }
    }
    Ok(())
}

/// Bitwise arbitration reads a released driver as recessive: the undriven
/// line (with its bias network, if any) must be a defined state at every receiver.
fn check_recessive(v: &V, raw: &RawScenario, spec: &Spec) -> R<()> {
    if !matches!(spec.access, AccessSpec::Arbitration(_)) {
        return Ok(());
    }
    let line = crate::line::LineModel::new(spec);
    for (i, n) in spec.nodes.iter().enumerate() {
        if line.idle_state(spec, i) == crate::line::IdleState::Undefined {
            return Err(v
                .err(
                    raw.access.get_ref().scheme.span(),
                    "access.scheme",
                    format!(
                        "bitwise arbitration needs a line that reads recessive when undriven, but the {} receiver of \"{}\" reads the idle line ({}) as undefined",
                        n.transceiver.receiver.name,
                        n.name,
                        units::format_si(line.idle_v, "V")
                    ),
                )
                .with_hint("use receivers with a failsafe threshold (receiver = \"type2\") or a [line.bias] network"));
        }
    }
    Ok(())
}

fn validate_line(v: &V, l: &RawLine, at: Range<usize>) -> R<LineSpec> {
    let length_m = v.within(&l.length, Dimension::Length, "line.length", 1e-6, 1e5, "m")?;
    let impedance_ohm = v.within(&l.impedance, Dimension::Resistance, "line.impedance", 0.1, 1e5, "Ω")?;
    let delay_s_per_m = match (&l.delay, &l.velocity_factor) {
        (Some(d), None) => {
            let x = v.positive(d, Dimension::DelayPerLength, "line.delay")?;
            // Nothing propagates faster than light: 1/c = 3.336 ns/m.
            if x < 1.0 / C_M_PER_S * (1.0 - 1e-9) {
                return Err(v.err(
                    d.span(),
                    "line.delay",
                    format!("\"{}\" is faster than light (at least 3.336 ns/m)", d.get_ref()),
                ));
            }
            v.within(d, Dimension::DelayPerLength, "line.delay", 1e-9, MAX_DELAY_S_PER_M, "s/m")?
        }
        (None, Some(vf)) => {
            // The same bounds as `delay`: tpd0 = 1/(vf·c) from 1/c (vf = 1) to 1 µs/m.
            let f = *vf.get_ref();
            let slowest = 1.0 / (MAX_DELAY_S_PER_M * C_M_PER_S);
            if !(f.is_finite() && (slowest..=1.0).contains(&f)) {
                return Err(v.err(
                    vf.span(),
                    "line.velocity_factor",
                    format!(
                        "velocity factor {f} is outside the supported {slowest:.6} to 1 (a delay of 3.336 ns/m to {})",
                        units::format_si(MAX_DELAY_S_PER_M, "s/m")
                    ),
                ));
            }
            1.0 / (f * C_M_PER_S)
        }
        (Some(d), Some(_)) => {
            return Err(v.err(d.span(), "line.delay", "give line.delay or line.velocity_factor, not both"))
        }
        (None, None) => {
            return Err(v.err(at, "line", "the line needs a delay (e.g. delay = \"5 ns/m\") or a velocity_factor"))
        }
    };
    let termination = match &l.termination {
        None => Termination::BothEnds { near_ohm: None, far_ohm: None },
        Some(t) => match t.get_ref() {
            RawTermination::Word(word) => {
                let word = word.trim();
                let spanned = Spanned::new(t.span(), word.to_owned());
                match word {
                    "both-ends" => Termination::BothEnds { near_ohm: None, far_ohm: None },
                    "far-end" => Termination::FarEnd { far_ohm: None },
                    "none" => Termination::Unterminated,
                    _ if word.starts_with(|c: char| c.is_ascii_digit() || c == '-' || c == '.') => {
                        let r = v.positive(&spanned, Dimension::Resistance, "line.termination")?;
                        Termination::BothEnds { near_ohm: Some(r), far_ohm: Some(r) }
                    }
                    _ => {
                        v.choice(&spanned, "line.termination", TERMINATIONS)?;
                        unreachable!()
                    }
                }
            }
            RawTermination::Ends(ends) => {
                let end = |e: &Option<S>, key: &str| -> R<Option<Option<f64>>> {
                    match e {
                        None => Ok(None),
                        Some(s) if s.get_ref().trim() == "matched" => Ok(Some(None)),
                        Some(s) => Ok(Some(Some(v.positive(s, Dimension::Resistance, key)?))),
                    }
                };
                match (end(&ends.near, "line.termination.near")?, end(&ends.far, "line.termination.far")?) {
                    (Some(near_ohm), Some(far_ohm)) => Termination::BothEnds { near_ohm, far_ohm },
                    (None, Some(far_ohm)) => Termination::FarEnd { far_ohm },
                    (None, None) => Termination::Unterminated,
                    (Some(_), None) => {
                        return Err(v.err(
                            t.span(),
                            "line.termination",
                            "terminate the far end (multidrop) or both ends; a near end alone is not supported",
                        ))
                    }
                }
            }
        },
    };
    let bias = match &l.bias {
        None => None,
        Some(b) => {
            if termination == Termination::Unterminated {
                return Err(v.err(
                    b.span(),
                    "line.bias",
                    "a bias network needs terminations to bias against: this line has termination = \"none\"",
                ));
            }
            let r = b.get_ref();
            let position_m = match &r.position {
                None => 0.0,
                Some(p) => {
                    let x = v.qty(p, Dimension::Length, "line.bias.position")?;
                    if !(0.0..=length_m * (1.0 + 1e-12)).contains(&x) {
                        return Err(v.err(
                            p.span(),
                            "line.bias.position",
                            format!(
                                "position {} lies outside the line (0 m to {})",
                                units::format_si(x, "m"),
                                units::format_si(length_m, "m")
                            ),
                        ));
                    }
                    x.min(length_m)
                }
            };
            Some(Bias {
                supply_v: v.within(&r.supply, Dimension::Voltage, "line.bias.supply", 0.1, 100.0, "V")?,
                pull_up_ohm: v.within(&r.pull_up, Dimension::Resistance, "line.bias.pull_up", 1.0, 1e9, "Ω")?,
                pull_down_ohm: v.within(&r.pull_down, Dimension::Resistance, "line.bias.pull_down", 1.0, 1e9, "Ω")?,
                position_m,
            })
        }
    };
    let conductor_ohm_per_m = match &l.conductor_resistance {
        None => 0.0,
        Some(r) => {
            let x = v.non_negative(r, Dimension::ResistancePerLength, "line.conductor_resistance")?;
            if x > 1000.0 {
                return Err(v.err(
                    r.span(),
                    "line.conductor_resistance",
                    format!("\"{}\" is outside the supported range 0 to 1 kΩ/m", r.get_ref()),
                ));
            }
            x
        }
    };
    let attenuation = match &l.attenuation {
        None => None,
        Some(a) => Some(attenuation(v, a)?),
    };
    if let (Some(n), Some(b)) = (&l.noise, &l.bit_error_rate) {
        return Err(v
            .err(b.span(), "line.bit_error_rate", "give line.noise or line.bit_error_rate, not both")
            .with_hint(format!(
                "line.noise = \"{}\" derives each receiver's bit error rate from its margin; bit_error_rate sets one for all",
                n.get_ref()
            )));
    }
    let bit_error_rate = match &l.bit_error_rate {
        None => None,
        Some(b) => {
            let p = *b.get_ref();
            if !(p.is_finite() && (0.0..=0.5).contains(&p)) {
                return Err(v
                    .err(b.span(), "line.bit_error_rate", format!("a bit error rate of {p} is outside 0 to 0.5"))
                    .with_hint("it is the probability that one line bit is received wrong, e.g. 1e-6"));
            }
            Some(p)
        }
    };
    Ok(LineSpec {
        bias,
        length_m,
        impedance_ohm,
        delay_s_per_m,
        termination,
        conductor_ohm_per_m,
        attenuation,
        bit_error_rate,
        noise_v: l.noise.as_ref().map(|n| noise(v, n, "line.noise")).transpose()?,
    })
}

/// A node's own noise, which a line-wide bit error rate leaves no room for.
fn node_noise(v: &V, n: &S, key: &str, line: &LineSpec) -> R<f64> {
    if line.bit_error_rate.is_some() {
        return Err(v
            .err(
                n.span(),
                key,
                "line.bit_error_rate sets every receiver's bit error rate: a node's noise has no effect",
            )
            .with_hint("remove line.bit_error_rate to derive bit errors from noise and margins"));
    }
    noise(v, n, key)
}

/// An rms noise voltage: more than 0 V, at most 10 V.
fn noise(v: &V, n: &S, key: &str) -> R<f64> {
    v.within(n, Dimension::Voltage, key, 1e-9, 10.0, "V")
}

/// `line.attenuation`: every part required, each in range.
fn attenuation(v: &V, a: &Spanned<RawAttenuation>) -> R<Attenuation> {
    let r = a.get_ref();
    let need = |key: &str, example: &str| {
        v.err(
            a.span(),
            &format!("line.attenuation.{key}"),
            format!(
                "an attenuation needs `{key}`: write it as {{ db = 2.2, per = \"100 m\", at = \"1 MHz\" }} ({example})"
            ),
        )
    };
    let db = r.db.as_ref().ok_or_else(|| need("db", "the loss in dB"))?;
    let per = r.per.as_ref().ok_or_else(|| need("per", "the length the loss is given for"))?;
    let at = r.at.as_ref().ok_or_else(|| need("at", "the frequency the loss is given at"))?;
    let loss = *db.get_ref();
    if !(loss.is_finite() && (0.0..=1000.0).contains(&loss)) {
        return Err(v.err(db.span(), "line.attenuation.db", format!("a loss of {loss} dB is outside 0 to 1000 dB")));
    }
    let per_m = v.within(per, Dimension::Length, "line.attenuation.per", 1e-3, 1e6, "m")?;
    let at_hz = v.within(at, Dimension::Rate, "line.attenuation.at", 1.0, 1e12, "Hz")?;
    Ok(Attenuation { db_per_m: loss / per_m, at_hz })
}

fn validate_expectations(v: &V, raw: &RawScenario) -> R<Vec<Expectation>> {
    let mut out = Vec::new();
    for (i, e) in raw.expect.iter().flatten().enumerate() {
        let key = format!("expect[{i}]");
        let e = e.get_ref();
        let op = match v.choice(&e.op, &format!("{key}.op"), &["<", "<=", "==", ">=", ">"])? {
            "<" => Op::Lt,
            "<=" => Op::Le,
            "==" => Op::Eq,
            ">=" => Op::Ge,
            _ => Op::Gt,
        };
        let value = match e.value.get_ref() {
            toml::Value::String(s) => ExpectValue::Text(s.clone()),
            toml::Value::Integer(n) => ExpectValue::Number(*n as f64),
            toml::Value::Float(x) => ExpectValue::Number(*x),
            _ => {
                return Err(v.err(
                    e.value.span(),
                    &format!("{key}.value"),
                    "an expectation's value is a number or a quantity with a unit, e.g. \"150 us\"",
                ))
            }
        };
        let at = |span: Range<usize>| super::error::line_col(v.src, span.start);
        out.push(Expectation {
            metric: e.metric.get_ref().clone(),
            op,
            value,
            message: e.message.as_ref().map(|m| m.get_ref().clone()),
            confidence: e.confidence.as_ref().is_some_and(|c| *c.get_ref()),
            metric_at: at(e.metric.span()),
            value_at: at(e.value.span()),
        });
    }
    Ok(out)
}

/// Traffic identifiers must be unique across the bus.
fn check_unique_ids(v: &V, raw: &RawScenario, nodes: &[NodeSpec]) -> R<()> {
    let mut seen = std::collections::BTreeMap::new();
    for n in nodes {
        for t in &n.traffic {
            if let Some(id) = t.id {
                if let Some(other) = seen.insert(id, n.name.clone()) {
                    return Err(v.err(
                        raw.access.span(),
                        "traffic.id",
                        format!(
                            "identifier {id} is used by \"{other}\" and \"{}\": identifiers must be unique",
                            n.name
                        ),
                    ));
                }
            }
        }
    }
    Ok(())
}

/// Most arrivals a run may generate (a guard against a mistyped rate).
pub const MAX_ARRIVALS: f64 = 1e10;

fn check_arrival_count(v: &V, raw: &RawScenario, nodes: &[NodeSpec], duration: Picos) -> R<()> {
    let per_s: f64 = nodes
        .iter()
        .flat_map(|n| &n.traffic)
        .map(|t| match t.pattern {
            Pattern::Poisson { rate_per_s, .. } => rate_per_s,
            Pattern::Periodic { period, .. } => 1.0 / period.as_secs_f64(),
        })
        .sum();
    let total = per_s * duration.as_secs_f64();
    if total > MAX_ARRIVALS {
        return Err(v.err(
            raw.duration.span(),
            "duration",
            format!("the traffic would bring {total:.3e} messages in this duration, more than the supported {MAX_ARRIVALS:.0e}"),
        ));
    }
    Ok(())
}

/// Does a frame of `data_bits` last at most the longest supported time (with its longest character gaps)?
pub(crate) fn fits_time(frame: &FrameFormat, data_bits: u64) -> bool {
    frame.wire_max_s(data_bits) <= MAX_TIME.as_secs_f64()
}

/// The longest data frame must fit the supported time range.
fn check_frame_times(v: &V, raw: &RawScenario, frame: &FrameFormat, nodes: &[NodeSpec]) -> R<()> {
    let longest = nodes.iter().map(NodeSpec::longest_payload_bits).max().unwrap_or(0);
    let bits = frame.overhead_bits + longest;
    if !fits_time(frame, bits) {
        return Err(v.err(
            raw.frame.get_ref().bit_rate.span(),
            "frame.bit_rate",
            format!("at this bit rate the longest data frame ({bits} data bits) would last longer than 10^6 s"),
        ));
    }
    Ok(())
}

fn validate_frame(v: &V, f: &RawFrame) -> R<FrameFormat> {
    // A bit time below 1 ps cannot be represented; 1 bit/s is the slow end.
    let bit_rate = v.within(&f.bit_rate, Dimension::BitRate, "frame.bit_rate", 1.0, 1e12, "bit/s")?;
    if let Some(o) = &f.overhead_bits {
        if *o.get_ref() > MAX_FRAME_BITS {
            return Err(v.err(o.span(), "frame.overhead_bits", format!("at most {MAX_FRAME_BITS} bits are supported")));
        }
    }
    let encoding = match &f.encoding {
        None => Encoding::Nrz,
        Some(e) => encoding(v, e)?,
    };
    v.clock.set(Some(super::check::Clock { bit_rate, char_halves: encoding.uart().map(|u| u.char_halves()) }));
    let uart_only = |field: Option<std::ops::Range<usize>>, key: &str| -> R<()> {
        match field {
            Some(span) if encoding.uart().is_none() => Err(v
                .err(span, &format!("frame.{key}"), format!("{key} applies to UART framing only"))
                .with_hint("set frame.encoding = \"uart-8n1\" (or 8e1, 8n2, …)")),
            _ => Ok(()),
        }
    };
    uart_only(f.char_gap.as_ref().map(|x| x.span()), "char_gap")?;
    uart_only(f.char_timeout.as_ref().map(|x| x.span()), "char_timeout")?;
    uart_only(f.silence.as_ref().map(|x| x.span()), "silence")?;
    let char_gap = match &f.char_gap {
        None => CharGap::None,
        Some(g) => match super::check::latency(v, g, "frame.char_gap")? {
            Latency::Fixed(t) if t == Picos::ZERO => CharGap::None,
            Latency::Fixed(t) => CharGap::Fixed(t),
            // Each draw is capped (a gap that long would end the run anyway).
            l => {
                let cap = match l {
                    Latency::Uniform { max, .. } => max,
                    Latency::Normal { mean, sd } => mean.saturating_add(Picos(sd.0.saturating_mul(10))),
                    Latency::Exponential { mean } => Picos(mean.0.saturating_mul(50)),
                    Latency::Fixed(t) => t,
                };
                CharGap::Random { latency: l, cap: cap.min(MAX_TIME) }
            }
        },
    };
    let char_timeout = f.char_timeout.as_ref().map(|t| v.time(t, "frame.char_timeout")).transpose()?;
    let silence = f.silence.as_ref().map(|t| v.time(t, "frame.silence")).transpose()?;
    if let (Some(ct), Some(si), Some(raw)) = (char_timeout, silence, &f.char_timeout) {
        if ct > si {
            return Err(v.err(
                raw.span(),
                "frame.char_timeout",
                format!("char_timeout ({ct}) is longer than silence ({si}): a gap that ends a frame must be longer than one inside it"),
            ));
        }
    }
    Ok(FrameFormat {
        bit_rate,
        overhead_bits: f.overhead_bits.as_ref().map(|o| *o.get_ref()).unwrap_or(0),
        encoding,
        interframe_gap: v.opt_time(&f.interframe_gap, "frame.interframe_gap", Picos::ZERO)?,
        char_gap,
        char_timeout,
        silence,
    })
}

/// `frame.encoding`: a word, or `uart-<data><parity><stop>` (`uart-8e1`, `uart-7o2`, `uart-8n1.5`).
fn encoding(v: &V, e: &S) -> R<Encoding> {
    let text = e.get_ref().trim();
    let Some(spec) = text.strip_prefix("uart-") else {
        return Ok(match v.choice(e, "frame.encoding", ENCODINGS)? {
            "nrz" => Encoding::Nrz,
            "8b10b" => Encoding::B8b10b,
            _ => Encoding::Manchester,
        });
    };
    let bad = |msg: String| {
        v.err(e.span(), "frame.encoding", msg)
            .with_hint("write uart-<data bits 5–9><parity n, e, o, m or s><stop bits 1, 1.5 or 2>, e.g. uart-8e1")
    };
    let digits: String = spec.chars().take_while(char::is_ascii_digit).collect();
    let data: u8 = digits.parse().map_err(|_| bad(format!("\"{text}\": no data bit count")))?;
    if !(5..=9).contains(&data) {
        return Err(bad(format!("\"{text}\": a UART character has 5 to 9 data bits, not {data}")));
    }
    let rest = &spec[digits.len()..];
    let parity = match rest.chars().next() {
        Some('n') => Parity::None,
        Some('e') => Parity::Even,
        Some('o') => Parity::Odd,
        Some('m') => Parity::Mark,
        Some('s') => Parity::Space,
        _ => return Err(bad(format!("\"{text}\": the parity is n (none), e, o, m or s"))),
    };
    let stop_halves = match &rest[1..] {
        "1" => 2,
        "1.5" => 3,
        "2" => 4,
        other => return Err(bad(format!("\"{text}\": {other:?} stop bits; a UART has 1, 1.5 or 2"))),
    };
    Ok(Encoding::Uart(Uart { data, parity, stop_halves }))
}

/// A node before its traffic destinations are resolved.
struct Pending<'r> {
    name: String,
    name_span: Range<usize>,
    key: String,
    position_m: f64,
    transceiver: Transceiver,
    traffic: Option<&'r Spanned<OneOrMany<RawTraffic>>>,
    turnaround: Option<Picos>,
    external: bool,
    noise_v: Option<f64>,
}

fn validate_nodes(v: &V, raw: &RawScenario, line: &LineSpec, timing: Timing) -> R<Vec<NodeSpec>> {
    let defaults = raw.transceiver.as_ref();
    let empty = RawTransceiver::default();
    let defaults = defaults.unwrap_or(&empty);
    let mut pending: Vec<Pending> = Vec::new();
    let check_pos = |x: f64, span: Range<usize>, key: &str| -> R<()> {
        if x < 0.0 || x > line.length_m * (1.0 + 1e-12) {
            return Err(v.err(
                span,
                key,
                format!(
                    "position {} lies outside the line (0 m to {})",
                    units::format_si(x, "m"),
                    units::format_si(line.length_m, "m")
                ),
            ));
        }
        Ok(())
    };
    for (i, n) in raw.node.iter().flatten().enumerate() {
        let n = n.get_ref();
        let key = format!("node[{i}]");
        let position_m = v.qty(&n.position, Dimension::Length, &format!("{key}.position"))?;
        check_pos(position_m, n.position.span(), &format!("{key}.position"))?;
        let name = n.name.get_ref().clone();
        if name.trim().is_empty() {
            return Err(v.err(n.name.span(), &format!("{key}.name"), "a node name must not be empty"));
        }
        let transceiver =
            super::transceiver::resolve(timing, v, defaults, n.transceiver.as_ref(), &key, &name, n.name.span())?;
        let turnaround = n.turnaround.as_ref().map(|t| v.time(t, &format!("{key}.turnaround"))).transpose()?;
        let noise_v = n.noise.as_ref().map(|x| node_noise(v, x, &format!("{key}.noise"), line)).transpose()?;
        pending.push(Pending {
            name,
            name_span: n.name.span(),
            key,
            position_m,
            transceiver,
            traffic: n.traffic.as_ref(),
            turnaround,
            external: n.external.as_ref().is_some_and(|e| *e.get_ref()),
            noise_v,
        });
    }
    if let Some(row) = &raw.nodes {
        let r = row.get_ref();
        let count = *r.count.get_ref();
        if count == 0 {
            return Err(v.err(r.count.span(), "nodes.count", "nodes.count must be at least 1"));
        }
        if count > MAX_NODES as u64 {
            return Err(v.err(r.count.span(), "nodes.count", format!("at most {MAX_NODES} nodes are supported")));
        }
        let first = v.qty(&r.first, Dimension::Length, "nodes.first")?;
        let spacing = v.non_negative(&r.spacing, Dimension::Length, "nodes.spacing")?;
        let width = count.to_string().len().max(2);
        let turnaround = r.turnaround.as_ref().map(|t| v.time(t, "nodes.turnaround")).transpose()?;
        let noise_v = r.noise.as_ref().map(|x| node_noise(v, x, "nodes.noise", line)).transpose()?;
        for k in 0..count {
            if r.prefix.get_ref().chars().any(char::is_control) {
                return Err(v.err(r.prefix.span(), "nodes.prefix", "a node name must not contain control characters"));
            }
            let name = format!("{}{:0width$}", r.prefix.get_ref(), k + 1);
            let position_m = first + spacing * k as f64;
            if position_m < 0.0 || position_m > line.length_m * (1.0 + 1e-12) {
                let span = if k == 0 { r.first.span() } else { r.spacing.span() };
                return Err(v.err(
                    span,
                    "nodes",
                    format!(
                        "generated node {name} at {} lies outside the line (0 m to {})",
                        units::format_si(position_m, "m"),
                        units::format_si(line.length_m, "m")
                    ),
                ));
            }
            let transceiver = super::transceiver::resolve(
                timing,
                v,
                defaults,
                r.transceiver.as_ref(),
                "nodes",
                &name,
                r.prefix.span(),
            )?;
            pending.push(Pending {
                name,
                name_span: r.prefix.span(),
                key: "nodes".into(),
                position_m,
                transceiver,
                traffic: r.traffic.as_ref(),
                turnaround,
                external: false,
                noise_v,
            });
        }
    }
    if pending.len() > MAX_NODES {
        return Err(v.err(
            0..0,
            "node",
            format!("at most {MAX_NODES} nodes are supported, this scenario has {}", pending.len()),
        ));
    }
    if pending.len() < 2 {
        return Err(v.err(0..0, "node", "a bus needs at least two nodes ([[node]] entries and/or a [nodes] row)"));
    }
    let mut seen: HashMap<&str, usize> = HashMap::new();
    for (i, p) in pending.iter().enumerate() {
        if let Some(first) = seen.insert(p.name.as_str(), i) {
            let (l, _) = super::error::line_col(v.src, pending[first].name_span.start);
            return Err(v
                .err(
                    p.name_span.clone(),
                    &if p.key == "nodes" { "nodes.prefix".to_owned() } else { format!("{}.name", p.key) },
                    format!("duplicate node name \"{}\"", p.name),
                )
                .with_hint(format!("the name is first used on line {l}")));
        }
    }
    let names: Vec<String> = pending.iter().map(|p| p.name.clone()).collect();
    let mut out = Vec::with_capacity(pending.len());
    for p in &pending {
        let mut traffic = Vec::new();
        let mut queue_limit: Option<usize> = None;
        if let Some(t) = p.traffic {
            if t.get_ref().0.len() > MAX_SOURCES_PER_NODE {
                return Err(v.err(
                    t.span(),
                    &format!("{}.traffic", p.key),
                    format!("at most {MAX_SOURCES_PER_NODE} traffic sources per node are supported"),
                ));
            }
            for (j, src) in t.get_ref().0.iter().enumerate() {
                let key = if t.get_ref().0.len() == 1 {
                    format!("{}.traffic", p.key)
                } else {
                    format!("{}.traffic[{j}]", p.key)
                };
                let span = if src.span().is_empty() { t.span() } else { src.span() };
                let (spec, limit) = validate_traffic(v, src.get_ref(), span, &key, &names, &p.name)?;
                traffic.push(spec);
                if let Some(l) = limit {
                    queue_limit = Some(queue_limit.map_or(l, |q| q.min(l)));
                }
            }
        }
        out.push(NodeSpec {
            name: p.name.clone(),
            position_m: p.position_m,
            transceiver: p.transceiver.clone(),
            traffic,
            turnaround: p.turnaround,
            queue_limit,
            external: p.external,
            noise_v: p.noise_v.or(line.noise_v),
        });
    }
    Ok(out)
}

fn validate_traffic(
    v: &V,
    r: &RawTraffic,
    span: Range<usize>,
    key: &str,
    names: &[String],
    own: &str,
) -> R<(TrafficSpec, Option<usize>)> {
    let pattern_name = v.choice(&r.pattern, &format!("{key}.pattern"), PATTERNS)?;
    let stray = |field: &Option<S>, name: &str| -> R<()> {
        if let Some(f) = field {
            return Err(v.err(
                f.span(),
                &format!("{key}.{name}"),
                format!("{name} does not apply to a {pattern_name} source"),
            ));
        }
        Ok(())
    };
    let pattern = if pattern_name == "poisson" {
        stray(&r.period, "period")?;
        stray(&r.phase, "phase")?;
        stray(&r.jitter, "jitter")?;
        let rate = r
            .rate
            .as_ref()
            .ok_or_else(|| v.err(span.clone(), key, "a poisson source needs a rate, e.g. rate = \"2000/s\""))?;
        let rate_per_s = v.positive(rate, Dimension::Rate, &format!("{key}.rate"))?;
        let min_interval = match &r.min_interval {
            None => Picos::ZERO,
            Some(m) => {
                let t = v.time(m, &format!("{key}.min_interval"))?;
                if t.as_secs_f64() * rate_per_s >= 1.0 {
                    return Err(v
                        .err(
                            m.span(),
                            &format!("{key}.min_interval"),
                            format!("min_interval ({t}) is not shorter than the mean gap of the rate (1/rate)"),
                        )
                        .with_hint("a sporadic source's minimum gap lies below its mean gap"));
                }
                t
            }
        };
        Pattern::Poisson { rate_per_s, min_interval }
    } else {
        stray(&r.rate, "rate")?;
        stray(&r.min_interval, "min_interval")?;
        let period_raw = r
            .period
            .as_ref()
            .ok_or_else(|| v.err(span.clone(), key, "a periodic source needs a period, e.g. period = \"1 ms\""))?;
        let period = v.time(period_raw, &format!("{key}.period"))?;
        if period == Picos::ZERO {
            return Err(v.err(period_raw.span(), &format!("{key}.period"), "period must be greater than zero"));
        }
        let phase = v.opt_time(&r.phase, &format!("{key}.phase"), Picos::ZERO)?;
        let jitter = v.opt_time(&r.jitter, &format!("{key}.jitter"), Picos::ZERO)?;
        if jitter >= period {
            let span = r.jitter.as_ref().map(|j| j.span()).unwrap_or(0..0);
            return Err(v.err(
                span,
                &format!("{key}.jitter"),
                format!("jitter ({jitter}) must be shorter than the period ({period})"),
            ));
        }
        Pattern::Periodic { period, phase, jitter }
    };
    let pk = format!("{key}.payload");
    let size = |s: &S| -> R<u64> {
        let bits = units::parse_bits(s.get_ref()).map_err(|e| v.err(s.span(), &pk, e.message))?;
        if bits > MAX_FRAME_BITS {
            return Err(v.err(s.span(), &pk, format!("a payload of more than {MAX_FRAME_BITS} bits is not supported")));
        }
        Ok(bits)
    };
    let payload = match r.payload.get_ref() {
        RawPayload::Fixed(s) => {
            let spanned = Spanned::new(r.payload.span(), s.clone());
            Payload::Fixed { bits: size(&spanned)? }
        }
        RawPayload::Range(list) => {
            if list.len() != 2 {
                return Err(v.err(r.payload.span(), &pk, "a payload range takes two sizes: [min, max]"));
            }
            let (a, b) = (size(&list[0])?, size(&list[1])?);
            if a > b {
                return Err(v.err(r.payload.span(), &pk, "the payload range's min exceeds its max"));
            }
            Payload::Uniform { min_bits: a, max_bits: b }
        }
    };
    let to = match &r.to {
        None => None,
        Some(name) => {
            let s = name.get_ref();
            match names.iter().position(|n| n == s) {
                Some(_) if s == own => {
                    return Err(v.err(name.span(), &format!("{key}.to"), "a node cannot send to itself"))
                }
                Some(i) => Some(i),
                None => return Err(unknown_node(v, name, &format!("{key}.to"), names)),
            }
        }
    };
    let limit = r.queue_limit.as_ref().map(|q| *q.get_ref());
    if let Some(q) = &r.queue_limit {
        if !(1..=MAX_QUEUE_LIMIT).contains(q.get_ref()) {
            return Err(v.err(
                q.span(),
                &format!("{key}.queue_limit"),
                format!("queue_limit must lie between 1 and {MAX_QUEUE_LIMIT} (memory grows with it)"),
            ));
        }
    }
    let limit = limit.map(|l| l as usize);
    let id = r.id.as_ref().map(|i| *i.get_ref());
    Ok((TrafficSpec { pattern, payload, to, id }, limit))
}
