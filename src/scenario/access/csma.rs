//! `[access]` for `scheme = "csma"` (and CSMA/CD with `collision_detect = true`).

use super::{Access, R};
use crate::scenario::check::latency;
use crate::scenario::raw::RawPersistence;
use crate::spec::{AccessSpec, CsmaSpec, Latency, Persistence};
use crate::units::Picos;

pub const KEYS: &[&str] = &[
    "persistence",
    "collision_detect",
    "detect_delay",
    "jam_bits",
    "slot_time",
    "ack_timeout",
    "backoff",
    "max_attempts",
];

/// Jam length when none is given: 32 bits (common practice for CSMA/CD, from memory).
const DEFAULT_JAM_BITS: u64 = 32;

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    let persistence = match &a.persistence {
        None => Persistence::Non,
        Some(p) => match p.get_ref() {
            RawPersistence::Word(w) if w == "non" => Persistence::Non,
            RawPersistence::Word(w) if w == "1" => Persistence::P(1.0),
            RawPersistence::Number(x) if *x > 0.0 && *x <= 1.0 => Persistence::P(*x),
            _ => {
                return Err(v.err(
                    p.span(),
                    "access.persistence",
                    "persistence is \"non\", 1, or a probability p with 0 < p ≤ 1",
                ))
            }
        },
    };
    let collision_detect = a.collision_detect.as_ref().is_some_and(|x| *x.get_ref());
    let detect_delay = a
        .detect_delay
        .as_ref()
        .map(|d| v.time(d, "access.detect_delay"))
        .transpose()?;
    if !collision_detect {
        for (field, key) in [
            (a.detect_delay.as_ref().map(|x| x.span()), "detect_delay"),
            (a.jam_bits.as_ref().map(|x| x.span()), "jam_bits"),
        ] {
            if let Some(span) = field {
                return Err(v.err(
                    span,
                    &format!("access.{key}"),
                    format!("{key} applies only with collision_detect = true"),
                ));
            }
        }
    }
    let lag = c.max_lag();
    let max =
        |f: fn(&crate::spec::NodeSpec) -> Picos| c.nodes.iter().map(f).max().unwrap_or(Picos::ZERO);
    // Default slot: a round trip plus the transceiver times, rounded up to
    // whole bit times, so that a collision is certain to be seen within it.
    let slot_time = match &a.slot_time {
        Some(s) => {
            let t = v.time(s, "access.slot_time")?;
            if t == Picos::ZERO {
                return Err(v.err(
                    s.span(),
                    "access.slot_time",
                    "slot_time must be greater than zero",
                ));
            }
            t
        }
        None => {
            let detect = detect_delay.unwrap_or(max(|n| n.transceiver.receiver_delay));
            let raw = lag
                + lag
                + max(|n| n.transceiver.enable_time)
                + max(|n| n.transceiver.disable_time)
                + detect;
            let tb = c.frame.bit_time().0.max(1);
            Picos(raw.0.div_ceil(tb).max(1) * tb)
        }
    };
    let ack_timeout = match &a.ack_timeout {
        Some(t) => {
            let x = v.time(t, "access.ack_timeout")?;
            if x < lag {
                return Err(v.err(
                    t.span(),
                    "access.ack_timeout",
                    format!("ack_timeout ({x}) is shorter than the longest wire plus receiver delay ({lag}): no answer can arrive that soon"),
                ));
            }
            x
        }
        None if collision_detect => Picos::ZERO,
        None => {
            c.required(&a.ack_timeout, "ack_timeout", "ack_timeout = \"2 us\"")?;
            unreachable!()
        }
    };
    let backoff = match &a.backoff {
        Some(b) => latency(v, b, "access.backoff")?,
        // Long against a frame, as the classic analyses assume.
        None => Latency::Exponential {
            mean: Picos((c.longest_data_frame().0 + slot_time.0) * 10),
        },
    };
    let jam_bits = a
        .jam_bits
        .as_ref()
        .map(|j| *j.get_ref())
        .unwrap_or(DEFAULT_JAM_BITS);
    Ok(AccessSpec::Csma(CsmaSpec {
        persistence,
        collision_detect,
        detect_delay,
        jam_bits,
        slot_time,
        ack_timeout,
        backoff,
        backoff_given: a.backoff.is_some(),
        max_attempts: a
            .max_attempts
            .as_ref()
            .map(|m| *m.get_ref())
            .unwrap_or(if collision_detect { 16 } else { 0 }),
    }))
}
