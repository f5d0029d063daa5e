//! `[access]` for `scheme = "aloha"`.

use super::{Access, R};
use crate::scenario::check::latency;
use crate::spec::{AccessSpec, AlohaSpec, Latency};
use crate::units::Picos;

pub const KEYS: &[&str] = &[
    "slotted",
    "slot_time",
    "ack_timeout",
    "backoff",
    "max_attempts",
];

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    let slotted = a.slotted.as_ref().is_some_and(|s| *s.get_ref());
    let lag = c.max_lag();
    let ack_raw = c.required(&a.ack_timeout, "ack_timeout", "ack_timeout = \"2 us\"")?;
    let ack_timeout = v.time(ack_raw, "access.ack_timeout")?;
    if ack_timeout < lag {
        return Err(v.err(
            ack_raw.span(),
            "access.ack_timeout",
            format!("ack_timeout ({ack_timeout}) is shorter than the longest wire plus receiver delay ({lag}): no answer can arrive that soon"),
        ));
    }
    // Default slot: the longest data frame plus the worst spread in arrival,
    // so that frames sent in different slots never meet.
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
            let en = c
                .nodes
                .iter()
                .map(|n| n.transceiver.enable_time)
                .max()
                .unwrap_or(Picos::ZERO);
            let dis = c
                .nodes
                .iter()
                .map(|n| n.transceiver.disable_time)
                .max()
                .unwrap_or(Picos::ZERO);
            en + c.longest_data_frame() + dis + lag
        }
    };
    if !slotted {
        if let Some(s) = &a.slot_time {
            return Err(v.err(
                s.span(),
                "access.slot_time",
                "slot_time applies only with slotted = true",
            ));
        }
    }
    let backoff = match &a.backoff {
        Some(b) => latency(v, b, "access.backoff")?,
        None => Latency::Exponential {
            mean: Picos(slot_time.0.max(1) * 10),
        },
    };
    Ok(AccessSpec::Aloha(AlohaSpec {
        slotted,
        slot_time,
        ack_timeout,
        backoff,
        max_attempts: a.max_attempts.as_ref().map(|m| *m.get_ref()).unwrap_or(0),
    }))
}
