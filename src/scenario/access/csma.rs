//! `[access]` for `scheme = "csma"` (and CSMA/CD with `collision_detect = true`).

use super::{Access, R};
use crate::scenario::check::latency;
use crate::scenario::raw::RawPersistence;
use crate::spec::{AccessSpec, CsmaSpec, Latency, Persistence, WorstTimes};
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
    "faults",
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
    let detect_delay = a.detect_delay.as_ref().map(|d| v.time(d, "access.detect_delay")).transpose()?;
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
    let slot_time =
        c.slot_time(CsmaSpec::min_slot(WorstTimes::of(c.nodes), c.max_wire(), detect_delay, c.frame.bit_time()))?;
    let ack_timeout = match c.ack_timeout()? {
        Some(_) if collision_detect => {
            let span = a.ack_timeout.as_ref().map(|x| x.span()).unwrap_or(c.span.clone());
            return Err(v.err(span, "access.ack_timeout", "ack_timeout applies only without collision_detect"));
        }
        Some(t) => t,
        None if collision_detect => Picos::ZERO,
        None => *c.required(&None::<Picos>, "ack_timeout", "ack_timeout = \"2 us\"")?,
    };
    let backoff = match &a.backoff {
        Some(b) => latency(v, b, "access.backoff")?,
        // Long against a frame, as the classic analyses assume.
        None => Latency::Exponential { mean: Picos((c.longest_data_frame().0 + slot_time.0) * 10) },
    };
    let jam_bits = match &a.jam_bits {
        Some(j) => c.bit_count(*j.get_ref(), Some(j.span()), "jam_bits", "a jam")?,
        None => DEFAULT_JAM_BITS,
    };
    Ok(AccessSpec::Csma(CsmaSpec {
        node_faults: c.faults(super::NODE_FAULTS)?.nodes,
        persistence,
        collision_detect,
        detect_delay,
        jam_bits,
        slot_time,
        ack_timeout,
        backoff,
        backoff_given: a.backoff.is_some(),
        max_attempts: a.max_attempts.as_ref().map(|m| *m.get_ref()).unwrap_or(if collision_detect { 16 } else { 0 }),
    }))
}
