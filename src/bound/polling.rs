//! Polling: the longest poll cycle, and what it gives a message that
//! arrives just after its slave's reply was assembled.
//!
//! With every time at its worst, an exchange with slave j that carries k
//! data frames lasts, from the master's enable to its next enable,
//!
//! ```text
//! X_j(k) = e_M + P + d(M,j) + r_j − ρ_j + T_j + λ + e_j + F_j(k) + d(j,M) + r_M − ρ_M + T_M + λ
//! ```
//!
//! (e enable lead, P the poll, d wire delay, r receiver delay, ρ a UART's
//! reaction offset, T turnaround, λ the longest response latency, F_j(k) k
//! longest data frames with their gaps, or an empty reply). A slave sends at
//! most min(max_per_poll, A_j(C)) frames per poll, A_j(t) its most arrivals
//! in a window of t, so the cycle is the least fixed point of
//! C = Σ_j X_j(min(max_per_poll, A_j(C))), iterated from the zero-load
//! cycle. A slave takes what is queued when its receiver shows the poll's
//! end (its reaction). A message of slave s arriving x after a reaction
//! waits for the next, last among the a ≤ A_s(x) messages that came since;
//! the n messages s sent at that reaction came in the cycle before, so
//! n + a ≤ A_s(C + x) ([`super::served_latency`]):
//!
//! ```text
//! bound = max_{x,a} C − X_s(n̂) + X_s(n) − x + T_s + λ + e_s + F_s(a) + d(s,dest) + r_dest − ρ_dest
//! ```
//!
//! (n̂ = min(max_per_poll, A_s(C)), n = min(n̂, A_s(C + x) − a); x = 0 and
//! the steps of A_s are the only candidates.)
//!
//! The analysis needs replies that always begin before `reply_timeout`, no
//! slave polled twice in a row, and A_s(C) ≤ max_per_poll (no backlog
//! carried from cycle to cycle); otherwise the flow is "unbounded" here.
//! (Method: the cyclic-executive argument of common practice, from the
//! documented timing model; README, "Timing model".)

use super::{
    frames_per_turn, latency_max, least_fixed_point, outcome, unbounded_source, worst, Arrivals, Flow, Outcome,
};
use crate::line::LineModel;
use crate::spec::{NodeId, PollingSpec, Spec};

const FORMULA: &str = "max over x, a of C − X_s(n̂) + X_s(n) − x + T_s + λ + e_s + F_s(a) + d(s,dest) + r_dest, a ≤ A_s(x), n = min(n̂, A_s(C + x) − a), C = Σ_j X_j(min(max_per_poll, A_j(C)))";
const SOURCE: &str = "worst-case poll cycle from the documented timing model (common practice)";

/// Each flow's outcome, or one reason none is bounded.
pub(crate) fn bounds(spec: &Spec, line: &LineModel, p: &PollingSpec, flows: &[Flow]) -> Result<Vec<Outcome>, String> {
    if p.retries > 0 || p.dead_after.is_some() || p.backup_master.is_some() {
        return Err("retries, skipped slaves and master failover are outside this analysis".into());
    }
    let lat = latency_max(&p.response_latency)
        .ok_or("the response latency has no upper end (normal or exponential): no exchange time is certain")?;
    let n = p.order.len();
    for k in 0..n {
        if p.order[k] == p.order[(k + 1) % n] {
            return Err(format!(
                "\"{}\" is polled twice in a row: its second poll can find it still busy",
                spec.nodes[p.order[k]].name
            ));
        }
    }
    let m = p.master;
    let wm = worst(spec, m);
    let frame = &spec.frame;
    let ifg = u128::from(frame.interframe_gap.0);
    let poll = u128::from(frame.control_time(p.request_bits).0);
    let empty = u128::from(frame.control_time(p.empty_reply_bits).0);
    let d = |a: NodeId, b: NodeId| u128::from(line.delay_ps(a, b));
    let longest = |j: NodeId| u128::from(frame.data_time(spec.nodes[j].longest_payload_bits()).0);
    let burst = |j: NodeId, k: u128| if k == 0 { empty } else { k * longest(j) + (k - 1) * ifg };
    let limit = if p.max_per_poll == 0 { None } else { Some(u128::from(p.max_per_poll)) };
    let arrivals = Arrivals::new(spec, flows);
    let frames_at = |j: NodeId, c: u128| frames_per_turn(spec, &arrivals, j, c, limit, "max_per_poll = 0");
    // The reply must begin at the master before the timeout, at worst.
    for &j in &p.order {
        let wj = worst(spec, j);
        let start = d(m, j) + wj.receiver + p.turnaround[j].0 as u128 + lat + wj.lead + d(j, m) + wm.receiver;
        if start - wj.react.min(start) > u128::from(p.reply_timeout.0) {
            return Err(format!(
                "a reply of \"{}\" can begin after reply_timeout at the master: the exchange then times out",
                spec.nodes[j].name
            ));
        }
    }
    let exchange = |j: NodeId, k: u128| -> u128 {
        let wj = worst(spec, j);
        let x = wm.lead
            + poll
            + d(m, j)
            + wj.receiver
            + u128::from(p.turnaround[j].0)
            + lat
            + wj.lead
            + burst(j, k)
            + d(j, m)
            + wm.receiver
            + u128::from(p.turnaround[m].0)
            + lat;
        let x = x - (wj.react + wm.react).min(x);
        // The master never enables before its poll is off plus the gap.
        x.max(wm.lead + poll + wm.disable + ifg)
    };
    let zero_load = p.order.iter().map(|&j| exchange(j, 0)).sum();
    let c = least_fixed_point(zero_load, "poll cycle", |c| {
        p.order.iter().map(|&j| Ok(exchange(j, frames_at(j, c)?))).sum()
    })?;
    let mut out = Vec::with_capacity(flows.len());
    for f in flows {
        let s = f.node;
        let Some(a) = arrivals.within(s, c) else {
            out.push(unbounded_source(spec, s));
            continue;
        };
        if limit.is_some_and(|l| a > l) {
            out.push(Outcome::Unbounded {
                reason: format!(
                    "up to {a} messages can arrive at \"{}\" in one worst-case cycle, more than max_per_poll: a backlog can build",
                    spec.nodes[s].name
                ),
            });
            continue;
        }
        let ws = worst(spec, s);
        let dest = f.traffic.to.unwrap_or(m);
        let wd = worst(spec, dest);
        let deliver = |a: u128| {
            let tail = u128::from(p.turnaround[s].0) + lat + ws.lead + burst(s, a) + d(s, dest) + wd.receiver;
            tail - wd.react.min(tail)
        };
        let n_max = frames_at(s, c)?;
        let rest = c - exchange(s, n_max);
        let bound = super::served_latency(&arrivals, s, c, n_max, rest, |n| exchange(s, n), deliver)
            .expect("bounded: checked above");
        out.push(outcome(bound, FORMULA, SOURCE));
    }
    Ok(out)
}
