//! `[access]` for `scheme = "token"`.

use super::{Access, R};
use crate::spec::{AccessSpec, TokenSpec};
use crate::units::Picos;

pub const KEYS: &[&str] = &["token_bits", "max_per_token", "token_hold", "token_timeout", "recovery_node", "faults"];

const FAULTS: &[&str] = &["lose-token"];

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    let order = c.order(None, "token ring")?;
    if order.len() < 2 {
        return Err(v.err(
            a.order.as_ref().map(|o| o.span()).unwrap_or(c.span.clone()),
            "access.order",
            "a token ring needs at least two nodes",
        ));
    }
    c.all_senders_in(&order, "token ring")?;
    let token_hold = a.token_hold.as_ref().map(|t| v.time(t, "access.token_hold")).transpose()?;
    if token_hold == Some(Picos::ZERO) {
        return Err(v.err(
            a.token_hold.as_ref().unwrap().span(),
            "access.token_hold",
            "token_hold must be greater than zero",
        ));
    }
    let max_per_token = a.max_per_token.as_ref().map(|m| *m.get_ref()).unwrap_or(1);
    c.check_burst(max_per_token, token_hold, "max_per_token")?;
    let token_timeout = a.token_timeout.as_ref().map(|t| v.time(t, "access.token_timeout")).transpose()?;
    let recovery_node = match &a.recovery_node {
        Some(n) => c.find(n, "access.recovery_node")?,
        None => order[0],
    };
    let lose_token_at = c.faults(FAULTS)?.lose_token_at;
    if let (Some(list), false, None) = (&a.faults, lose_token_at.is_empty(), token_timeout) {
        return Err(v
            .err(list.span(), "access.faults", "a lost token is never recovered without access.token_timeout")
            .with_hint("set token_timeout, e.g. token_timeout = \"20 us\""));
    }
    Ok(AccessSpec::Token(TokenSpec {
        order,
        token_bits: c.control_bits(&a.token_bits, "token_bits")?,
        max_per_token,
        token_hold,
        turnaround: c.turnarounds()?,
        response_latency: c.response_latency()?,
        token_timeout,
        recovery_node,
        lose_token_at,
    }))
}
