//! `[access]` for `scheme = "polling"`.

use super::{Access, R};
use crate::spec::{AccessSpec, PollingSpec};

pub const KEYS: &[&str] = &["master", "max_per_poll", "request_bits", "empty_reply_bits", "reply_timeout"];

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
    Ok(AccessSpec::Polling(PollingSpec {
        master,
        order,
        max_per_poll,
        request_bits: c.control_bits(&a.request_bits, "request_bits")?,
        empty_reply_bits: c.control_bits(&a.empty_reply_bits, "empty_reply_bits")?,
        turnaround: c.turnarounds()?,
        response_latency: c.response_latency()?,
        reply_timeout: v.time(timeout_raw, "access.reply_timeout")?,
    }))
}
