//! `[access]` for `scheme = "aloha"`.

use super::{Access, R};
use crate::scenario::check::latency;
use crate::spec::{AccessSpec, AlohaSpec, Latency, WorstTimes};
use crate::units::Picos;

pub const KEYS: &[&str] = &["slotted", "slot_time", "ack_timeout", "backoff", "max_attempts", "faults"];

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    let slotted = a.slotted.as_ref().is_some_and(|s| *s.get_ref());
    let ack_timeout = match c.ack_timeout()? {
        Some(t) => t,
        None => *c.required(&None::<Picos>, "ack_timeout", "ack_timeout = \"2 us\"")?,
    };
    // Default slot: the longest data frame plus the worst spread in arrival,
    // so that frames sent in different slots never meet.
    let slot_time = c.slot_time(AlohaSpec::min_slot(WorstTimes::of(c.nodes), c.max_wire(), c.longest_data_frame()))?;
    if !slotted {
        if let Some(s) = &a.slot_time {
            return Err(v.err(s.span(), "access.slot_time", "slot_time applies only with slotted = true"));
        }
    }
    let backoff = match &a.backoff {
        Some(b) => latency(v, b, "access.backoff")?,
        None => Latency::Exponential { mean: Picos(slot_time.0.max(1) * 10) },
    };
    Ok(AccessSpec::Aloha(AlohaSpec {
        node_faults: c.faults(super::NODE_FAULTS)?.nodes,
        slotted,
        slot_time,
        ack_timeout,
        backoff,
        max_attempts: a.max_attempts.as_ref().map(|m| *m.get_ref()).unwrap_or(0),
    }))
}
