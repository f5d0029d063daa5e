//! Token passing: the longest rotation, and what it gives a message that
//! arrives just after its node took the token.
//!
//! With every time at its worst, holder j's turn, from its receiver showing
//! the token's end to its successor's receiver showing the next token's end,
//! with k data frames, is
//!
//! ```text
//! H_j(k) = T_j + λ + e_j + k·(F_j + ifg) + P + d(j, next) + r_next − ρ_next
//! ```
//!
//! (P the token frame; k ≤ max_per_token and within token_hold). The
//! rotation is the least fixed point of R = Σ_j H_j(min(limit_j, A_j(R))).
//! The holder sends what was queued when it took the token. A message
//! arriving x after its node took the token waits for the next take, last
//! among the a ≤ A_s(x) messages that came since, provided A_s(R) ≤ limit_s
//! (no backlog builds); the n the node sent at that take came in the
//! rotation before, so n + a ≤ A_s(R + x) ([`super::served_latency`]):
//!
//! ```text
//! bound = max_{x,a} R − H_s(n̂) + H_s(n) − x + T_s + λ + e_s + a·F_s + (a − 1)·ifg + d(s,dest) + r_dest − ρ_dest
//! ```
//!
//! (n̂ = min(limit_s, A_s(R)), n = min(n̂, A_s(R + x) − a).)
//!
//! (Method: the worst-case token rotation of the documented timing model,
//! common practice.)

use super::{
    frames_per_turn, latency_max, least_fixed_point, outcome, unbounded_source, worst, Arrivals, Flow, Outcome,
};
use crate::line::LineModel;
use crate::spec::{NodeId, Spec, TokenSpec};

const FORMULA: &str = "max over x, a of R − H_s(n̂) + H_s(n) − x + T_s + λ + e_s + a·F_s + (a − 1)·ifg + d(s,dest) + r_dest, a ≤ A_s(x), n = min(n̂, A_s(R + x) − a), R = Σ_j H_j(min(limit_j, A_j(R)))";
const SOURCE: &str = "worst-case token rotation from the documented timing model (common practice)";

/// Each flow's outcome, or one reason none is bounded.
pub(crate) fn bounds(spec: &Spec, line: &LineModel, t: &TokenSpec, flows: &[Flow]) -> Result<Vec<Outcome>, String> {
    if !t.lose_token_at.is_empty() {
        return Err("lost tokens (lose-token faults) are outside this analysis".into());
    }
    let mut seen = vec![false; spec.nodes.len()];
    for &n in &t.order {
        if std::mem::replace(&mut seen[n], true) {
            return Err(format!("\"{}\" appears twice in the ring", spec.nodes[n].name));
        }
    }
    let lat = latency_max(&t.response_latency)
        .ok_or("the response latency has no upper end (normal or exponential): no turn's length is certain")?;
    let frame = &spec.frame;
    let ifg = u128::from(frame.interframe_gap.0);
    let token = u128::from(frame.control_time(t.token_bits).0);
    let d = |a: NodeId, b: NodeId| u128::from(line.delay_ps(a, b));
    let n = t.order.len();
    let next = |k: usize| t.order[(k + 1) % n];
    let longest = |j: NodeId| u128::from(frame.data_time(spec.nodes[j].longest_payload_bits()).0);
    // Frames a holder may send per turn: max_per_token, and within token_hold.
    let limit = |j: NodeId| -> Option<u128> {
        let by_count = (t.max_per_token > 0).then_some(u128::from(t.max_per_token));
        let by_hold = t.token_hold.map(|h| {
            let (lead, f, h) = (worst(spec, j).lead, longest(j), u128::from(h.0));
            // The k-th frame goes out while lead + k·F + (k − 1)·ifg ≤ hold (the first always).
            ((h + ifg).saturating_sub(lead) / (f + ifg)).max(1)
        });
        match (by_count, by_hold) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        }
    };
    let arrivals = Arrivals::new(spec, flows);
    let frames_at = |j: NodeId, r: u128| frames_per_turn(spec, &arrivals, j, r, limit(j), "no limit per token");
    let turn = |k: usize, frames: u128| -> u128 {
        let j = t.order[k];
        let (wj, wn) = (worst(spec, j), worst(spec, next(k)));
        let h = u128::from(t.turnaround[j].0)
            + lat
            + wj.lead
            + frames * (longest(j) + ifg)
            + token
            + d(j, next(k))
            + wn.receiver;
        h - wn.react.min(h)
    };
    // The recovery watchdog must not fire between normal turns.
    if let Some(timeout) = t.token_timeout {
        let r_max = (0..spec.nodes.len()).map(|i| worst(spec, i).receiver).max().unwrap_or(0);
        let gap = t.order.iter().map(|&j| u128::from(t.turnaround[j].0)).max().unwrap_or(0)
            + lat
            + 2 * u128::from(line.max_node_delay.0)
            + r_max;
        if u128::from(timeout.0) <= gap {
            return Err(
                "token_timeout can expire between normal turns: spurious regenerations make duplicate tokens".into()
            );
        }
    }
    let zero_load = (0..n).map(|k| turn(k, 0)).sum();
    let r = least_fixed_point(zero_load, "rotation", |r| (0..n).map(|k| Ok(turn(k, frames_at(t.order[k], r)?))).sum())?;
    let mut out = Vec::with_capacity(flows.len());
    for f in flows {
        let s = f.node;
        let Some(a) = arrivals.within(s, r) else {
            out.push(unbounded_source(spec, s));
            continue;
        };
        if limit(s).is_some_and(|l| a > l) {
            out.push(Outcome::Unbounded {
                reason: format!(
                    "up to {a} messages can arrive at \"{}\" in one worst-case rotation, more than a turn sends: a backlog can build",
                    spec.nodes[s].name
                ),
            });
            continue;
        }
        let (ws, dest) = (worst(spec, s), f.traffic.to.unwrap_or(crate::scheme::first_other_node(s)));
        let wd = worst(spec, dest);
        let deliver = |a: u128| {
            let tail = u128::from(t.turnaround[s].0)
                + lat
                + ws.lead
                + a * longest(s)
                + (a - 1) * ifg
                + d(s, dest)
                + wd.receiver;
            tail - wd.react.min(tail)
        };
        let Some(k) = t.order.iter().position(|&j| j == s) else {
            out.push(Outcome::Unbounded { reason: format!("\"{}\" is not in the ring", spec.nodes[s].name) });
            continue;
        };
        let n_max = frames_at(s, r)?;
        let rest = r - turn(k, n_max);
        let bound = super::served_latency(&arrivals, s, r, n_max, rest, |n| turn(k, n), deliver)
            .expect("bounded: checked above");
        out.push(outcome(bound, FORMULA, SOURCE));
    }
    Ok(out)
}
