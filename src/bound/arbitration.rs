//! Bitwise arbitration: the response-time analysis of Davis, Burns, Bril &
//! Lukkien (2007), "Controller Area Network (CAN) schedulability analysis:
//! refuted, revisited and revised", Real-Time Systems 35(3), for
//! non-preemptive fixed-priority arbitration, with this bus's own times.
//!
//! C_k, the line time of message k from the start of its round to the
//! earliest start of the next, at its worst:
//!
//! ```text
//! C_k = e + d + r + (1 + id_bits)·tb + F_k + dis + d + r + idle_bits·tb
//! ```
//!
//! (e the longest enable time, d the longest wire delay, r the longest
//! receiver delay, F_k its frame, dis its sender's disable time). With B_i
//! the longest C_k of a lower priority (a round that began just before i
//! could join it), and at least idle_bits·tb (the bus must show that much
//! idle before its first round, so a busy period that opens the run starts
//! that late), T_k and J_k each flow's minimum inter-arrival time and
//! release jitter, and τ = 1 ps (a message must be queued by a round's start
//! to take part in it):
//!
//! ```text
//! t_i     = B_i + Σ_{k ∈ hep(i)} ⌈(t_i + J_k)/T_k⌉·C_k          (busy period)
//! w_i(q)  = B_i + q·C_i + Σ_{k ∈ hp(i)} ⌈(w_i(q) + J_k + τ)/T_k⌉·C_k,   q < ⌈(t_i + J_i)/T_i⌉
//! bound_i = max_q (w_i(q) − q·T_i) + E_i
//! ```
//!
//! E_i is the time from the start of i's round to its delivery at its
//! destination (the round's start edge, the arbitration field, the frame,
//! the wire and receiver delay). The latency is counted from the message's
//! own arrival, so its release jitter enters only others' interference.

use super::{outcome, worst, Flow, Outcome};
use crate::line::LineModel;
use crate::spec::{ArbitrationSpec, Spec};

const FORMULA: &str = "max_q (w_i(q) − q·T_i) + E_i, w_i(q) = B_i + q·C_i + Σ_hp ⌈(w_i(q) + J_k + τ)/T_k⌉·C_k";
const SOURCE: &str = "Davis, Burns, Bril & Lukkien (2007), Real-Time Systems 35(3), response-time analysis of CAN";

/// Each flow's outcome, or one reason none is bounded.
pub(crate) fn bounds(
    spec: &Spec,
    line: &LineModel,
    a: &ArbitrationSpec,
    flows: &[Flow],
) -> Result<Vec<Outcome>, String> {
    let tb = u128::from(spec.frame.bit_time().0);
    let min_bit = crate::scheme::arbitration::min_bit_time(spec, a, line);
    if spec.frame.bit_time() < min_bit {
        return Err(format!(
            "the bit time ({}) is below the safe arbitration bound ({min_bit}): rounds can fail and frames collide",
            spec.frame.bit_time()
        ));
    }
    let n = spec.nodes.len();
    let e_max = (0..n).map(|i| worst(spec, i).enable).max().unwrap_or(0);
    let r_max = (0..n).map(|i| worst(spec, i).receiver).max().unwrap_or(0);
    let d_max = u128::from(line.max_node_delay.0);
    let field = (1 + u128::from(a.id_bits)) * tb;
    let idle = u128::from(a.idle_bits) * tb;
    // Per flow: its line time C, its time to delivery E, its interval T, jitter J and priority.
    let mut params = Vec::with_capacity(flows.len());
    for f in flows {
        let Some((t, j)) = f.interval_and_jitter() else {
            return Err(format!(
                "the flow {} is Poisson without min_interval: with no minimum gap it has no worst case, and it interferes with every other",
                f.name
            ));
        };
        let w = worst(spec, f.node);
        let frame = u128::from(spec.frame.data_time(f.traffic.payload.max_bits()).0);
        let late = w.lead.saturating_sub(w.enable);
        let c = e_max + d_max + r_max + field + late + frame + w.disable + d_max + r_max + idle;
        let dest = f.traffic.to.unwrap_or(crate::scheme::first_other_node(f.node));
        let wd = worst(spec, dest);
        let deliver =
            e_max + d_max + r_max + field + late + frame + u128::from(line.delay_ps(f.node, dest)) + wd.receiver;
        let deliver = deliver - wd.react.min(deliver);
        let prio = f.traffic.id.expect("validated: every arbitration source has an id");
        params.push((c, deliver, t, j, prio));
    }
    let cap = u128::from(crate::scenario::check::MAX_TIME.0);
    let mut out = Vec::with_capacity(flows.len());
    for (i, &(_, e_i, _, _, p_i)) in params.iter().enumerate() {
        let b_i = params.iter().filter(|x| x.4 > p_i).map(|x| x.0).max().unwrap_or(0).max(idle);
        let task = |x: &(u128, u128, u128, u128, u64)| Task { c: x.0, t: x.2, j: x.3 };
        let hp: Vec<Task> =
            params.iter().enumerate().filter(|&(k, x)| k != i && x.4 < p_i).map(|(_, x)| task(x)).collect();
        // Equal priorities (another flow with the same id) count in the busy period.
        let same: Vec<Task> =
            params.iter().enumerate().filter(|&(k, x)| k != i && x.4 == p_i).map(|(_, x)| task(x)).collect();
        out.push(match queueing_window(b_i, task(&params[i]), &hp, &same, 1, cap) {
            None => Outcome::Unbounded {
                reason: "the busy period of this priority level does not end: the bus is loaded past 100 %".into(),
            },
            Some(w) => outcome(w + e_i, FORMULA, SOURCE),
        });
    }
    Ok(out)
}

/// One message stream: its line time C, minimum interval T and release jitter J.
#[derive(Clone, Copy, Debug)]
struct Task {
    c: u128,
    t: u128,
    j: u128,
}

/// The longest time from a message's release to the start of its own round,
/// max_q (w(q) − q·T), over the instances q of the level's busy period (the
/// published method's eqs. for t, Q and w); `None` if the busy period
/// passes `cap` (load past 100 %). The published response time is this
/// plus C.
fn queueing_window(b: u128, me: Task, hp: &[Task], same: &[Task], tau: u128, cap: u128) -> Option<u128> {
    let mut t = b + me.c;
    loop {
        let next =
            b + hp.iter().chain(same).chain(std::iter::once(&me)).map(|x| (t + x.j).div_ceil(x.t) * x.c).sum::<u128>();
        if next == t {
            break;
        }
        if next > cap {
            return None;
        }
        t = next;
    }
    let instances = (t + me.j).div_ceil(me.t);
    let mut worst = 0u128;
    for q in 0..instances {
        let mut w = b + q * me.c;
        loop {
            let next = b + q * me.c + hp.iter().map(|x| (w + x.j + tau).div_ceil(x.t) * x.c).sum::<u128>();
            if next == w || next > cap {
                w = next;
                break;
            }
            w = next;
        }
        worst = worst.max(w.saturating_sub(q * me.t));
    }
    Some(worst)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The three-message example of Davis, Burns, Bril & Lukkien (2007),
    /// section 3 (values from memory): 125 kbit/s (τ_bit = 8 µs), every frame
    /// 1 ms long, periods 2.5, 3.5 and 3.5 ms, priorities A > B > C. The
    /// revised analysis gives response times 2, 3 and 3.5 ms; the original
    /// 1994 analysis, which looks only at the first instance, gave 3 ms for C.
    #[test]
    fn the_published_three_message_example() {
        const MS: u128 = 1_000_000_000;
        let tau = 8_000_000;
        let a = Task { c: MS, t: 2_500_000_000, j: 0 };
        let b = Task { c: MS, t: 3_500_000_000, j: 0 };
        let c = Task { c: MS, t: 3_500_000_000, j: 0 };
        let cap = u128::MAX / 4;
        // B_i: the longest lower-priority frame; none below C.
        let r = |blocking, me: Task, hp: &[Task]| queueing_window(blocking, me, hp, &[], tau, cap).unwrap() + me.c;
        assert_eq!(r(MS, a, &[]), 2 * MS);
        assert_eq!(r(MS, b, &[a]), 3 * MS);
        assert_eq!(r(0, c, &[a, b]), 3 * MS + MS / 2);
        // The first instance alone gives the original analysis' 3 ms: the
        // second instance, released at 3.5 ms, is the worst.
        let first_only = 2 * MS + MS;
        assert!(r(0, c, &[a, b]) > first_only);
    }
}
