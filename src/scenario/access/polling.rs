//! `[access]` for `scheme = "polling"`.

use super::{Access, R};
use crate::spec::{AccessSpec, PollingSpec};
use crate::units::Picos;

pub const KEYS: &[&str] = &[
    "master",
    "max_per_poll",
    "request_bits",
    "empty_reply_bits",
    "reply_timeout",
    "retries",
    "dead_after",
    "probe_every",
    "faults",
    "backup_master",
    "takeover_after",
];

/// Most retries of one exchange, skipped-slave thresholds and probe periods.
pub const MAX_RETRIES: u32 = 1000;
pub const MAX_CYCLES: u32 = 1_000_000;

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    let master_raw = c.required(&a.master, "master", "master = \"<node name>\"")?;
    let master = c.find(master_raw, "access.master")?;
    if !c.nodes[master].traffic.is_empty() {
        return Err(v.err(
            master_raw.span(),
            "access.master",
            format!("the master \"{}\" has traffic, but under polling only slaves send data", c.names[master]),
        ));
    }
    let order = c.order(Some(master), "poll order")?;
    c.all_senders_in(&order, "poll order")?;
    let timeout_raw = c.required(&a.reply_timeout, "reply_timeout", "reply_timeout = \"2 us\"")?;
    let max_per_poll = a.max_per_poll.as_ref().map(|m| *m.get_ref()).unwrap_or(1);
    c.check_burst(max_per_poll, None, "max_per_poll")?;
    let faults = c.faults(super::NODE_FAULTS)?;
    let backup_master = match &a.backup_master {
        None => None,
        Some(b) => {
            let id = c.find(b, "access.backup_master")?;
            if id == master || !order.contains(&id) {
                return Err(v
                    .err(
                        b.span(),
                        "access.backup_master",
                        format!("the backup master \"{}\" must be a slave in the poll order", c.names[id]),
                    )
                    .with_hint("it listens as a slave until it takes over"));
            }
            if !c.nodes[id].traffic.is_empty() {
                return Err(v.err(
                    b.span(),
                    "access.backup_master",
                    format!("the backup master \"{}\" has traffic, but a master sends none", c.names[id]),
                ));
            }
            Some(id)
        }
    };
    let reply_timeout = v.time(timeout_raw, "access.reply_timeout")?;
    let takeover_after = match (&a.takeover_after, backup_master) {
        (Some(t), Some(_)) => {
            let x = v.time(t, "access.takeover_after")?;
            if x <= reply_timeout {
                return Err(v
                    .err(t.span(), "access.takeover_after", format!("takeover_after ({x}) must be longer than reply_timeout ({reply_timeout}): a master waiting on a reply is silent that long"))
                    .with_hint("allow the longest reply and a timeout, e.g. several times reply_timeout"));
            }
            x
        }
        (None, Some(_)) => {
            return Err(v
                .err(
                    a.backup_master.as_ref().expect("given").span(),
                    "access.takeover_after",
                    "a backup master needs takeover_after, the silence after which it takes over",
                )
                .with_hint("e.g. takeover_after = \"5 ms\""))
        }
        (Some(t), None) => {
            return Err(v.err(
                t.span(),
                "access.takeover_after",
                "takeover_after applies to a backup master: set backup_master",
            ))
        }
        (None, None) => Picos::ZERO,
    };
    if backup_master.is_none() {
        if let Some(f) = faults.nodes.iter().find(|f| f.node == master) {
            return Err(v
                .err(
                    a.faults.as_ref().expect("faults were listed").span(),
                    "access.faults",
                    format!(
                        "a fault at {} takes down the master \"{}\", and no backup_master takes over",
                        f.at, c.names[master]
                    ),
                )
                .with_hint("set backup_master and takeover_after, or fail slaves only"));
        }
    }
    let dead_after = c.count(&a.dead_after, "dead_after", 1, MAX_CYCLES)?;
    let probe_every = c.count(&a.probe_every, "probe_every", 1, MAX_CYCLES)?;
    if let (None, Some(p)) = (dead_after, &a.probe_every) {
        return Err(v
            .err(
                p.span(),
                "access.probe_every",
                "probe_every applies to skipped slaves, and without dead_after no slave is skipped",
            )
            .with_hint("set dead_after, e.g. dead_after = 3"));
    }
    Ok(AccessSpec::Polling(PollingSpec {
        retries: c.count(&a.retries, "retries", 0, MAX_RETRIES)?.unwrap_or(0),
        dead_after,
        probe_every: probe_every.unwrap_or(1),
        node_faults: faults.nodes,
        master,
        order,
        max_per_poll,
        request_bits: c.control_bits(&a.request_bits, "request_bits")?,
        empty_reply_bits: c.control_bits(&a.empty_reply_bits, "empty_reply_bits")?,
        turnaround: c.turnarounds()?,
        response_latency: c.response_latency()?,
        reply_timeout,
        backup_master,
        takeover_after,
    }))
}
