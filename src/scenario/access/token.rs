//! `[access]` for `scheme = "token"`.

use super::{Access, R};
use crate::spec::{AccessSpec, Latency, TokenSpec, WorstTimes};
use crate::units::Picos;

pub const KEYS: &[&str] = &[
    "token_bits",
    "max_per_token",
    "token_hold",
    "token_timeout",
    "recovery_node",
    "faults",
    "successor_timeout",
    "solicit_every",
];

const FAULTS: &[&str] = &["lose-token", "node-down", "node-up"];

/// Most rotations between solicitations.
pub const MAX_SOLICIT_EVERY: u32 = 1_000_000;

/// An upper bound of a response latency: a uniform draw's maximum, a
/// normal's mean + 10 sd, an exponential's 50 × mean (a draw beyond it has
/// probability below 10^-21).
fn latency_bound(l: &Latency) -> u128 {
    match *l {
        Latency::Fixed(t) => u128::from(t.0),
        Latency::Uniform { max, .. } => u128::from(max.0),
        Latency::Normal { mean, sd } => u128::from(mean.0) + 10 * u128::from(sd.0),
        Latency::Exponential { mean } => 50 * u128::from(mean.0),
    }
}

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
    let faults = c.faults(FAULTS)?;
    let lose_token_at = faults.lose_token_at;
    if let (Some(list), false, None) = (&a.faults, lose_token_at.is_empty(), token_timeout) {
        return Err(v
            .err(list.span(), "access.faults", "a lost token is never recovered without access.token_timeout")
            .with_hint("set token_timeout, e.g. token_timeout = \"20 us\""));
    }
    let turnaround = c.turnarounds()?;
    let response_latency = c.response_latency()?;
    let worst = WorstTimes::of(c.nodes);
    let lag = u128::from(worst.lag(c.max_wire()).0);
    let max_turn = turnaround.iter().map(|t| u128::from(t.0)).max().unwrap_or(0);
    let successor_timeout = match &a.successor_timeout {
        None => None,
        Some(t) => {
            let x = v.time(t, "access.successor_timeout")?;
            // The successor's enable reaches the holder at most this long after the token's end.
            let need = 2 * lag + max_turn + latency_bound(&response_latency);
            if u128::from(x.0) < need {
                return Err(v
                    .err(
                        t.span(),
                        "access.successor_timeout",
                        format!(
                            "successor_timeout ({x}) is shorter than a live successor can take to answer ({}): it would drop live nodes",
                            Picos(need.min(u128::from(u64::MAX)) as u64)
                        ),
                    )
                    .with_hint("that bound is twice the longest wire and receiver delay, the longest turnaround and the response latency's bound"));
            }
            Some(x)
        }
    };
    if let (Some(list), false, None, None) = (&a.faults, faults.nodes.is_empty(), token_timeout, successor_timeout) {
        return Err(v
            .err(
                list.span(),
                "access.faults",
                "a node that goes down takes the token with it: nothing repairs the ring",
            )
            .with_hint("set successor_timeout (the holder passes around a silent successor) or token_timeout"));
    }
    let solicit_every = match (&a.solicit_every, successor_timeout) {
        (Some(s), None) => {
            return Err(v
                .err(
                    s.span(),
                    "access.solicit_every",
                    "solicit_every re-admits dropped nodes, and without successor_timeout no node is dropped",
                )
                .with_hint("set successor_timeout, e.g. successor_timeout = \"50 us\""))
        }
        (s, _) => c.count(s, "solicit_every", 1, MAX_SOLICIT_EVERY)?.unwrap_or(8),
    };
    let token_bits = c.control_bits(&a.token_bits, "token_bits")?;
    // Zero-load rotation, bounded with every node's worst enable time.
    let rotation: u128 = order
        .iter()
        .map(|&i| {
            u128::from(turnaround[i].0)
                + u128::from(c.nodes[i].transceiver.enable_range.max.0)
                + u128::from(c.frame.control_time(token_bits).0)
                + lag
        })
        .sum();
    let second_recovery = match token_timeout {
        Some(timeout) if order.len() > 1 => {
            let at = order.iter().position(|&n| n == recovery_node).unwrap_or(0);
            let next = order[(at + 1) % order.len()];
            let extra = u128::from(timeout.0) + rotation;
            if extra > u128::from(crate::scenario::check::MAX_TIME.0) {
                return Err(v.err(
                    c.span.clone(),
                    "access.token_timeout",
                    "token_timeout plus one rotation is longer than 10^6 s",
                ));
            }
            (next != recovery_node).then_some((next, Picos(extra as u64)))
        }
        _ => None,
    };
    Ok(AccessSpec::Token(TokenSpec {
        order,
        token_bits,
        max_per_token,
        token_hold,
        turnaround,
        response_latency,
        token_timeout,
        recovery_node,
        lose_token_at,
        successor_timeout,
        solicit_every,
        second_recovery,
        node_faults: faults.nodes,
    }))
}
