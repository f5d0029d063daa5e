//! TDMA: a message waits at most the gap between the starts of two of its
//! node's slots, then goes out among the frames that fit.
//!
//! With exact clocks every node's slots recur with the timekeeper's cycle.
//! A slot takes what is queued at its start. A message arriving x after one
//! of its node's slot starts waits for the next, at most G − x (G the
//! longest gap from one of the node's slot starts to its next), and goes
//! out last among the a ≤ A_i(x) messages that came since, A_i(t) the
//! node's most arrivals in a window of t, provided every slot of the node
//! holds A_i(G) of its longest frames (so no backlog builds):
//!
//! ```text
//! bound = max_{x,a} G − x + s + e_i + a·F_i + (a − 1)·ifg + d(i,dest) + r_dest − ρ_dest
//! ```
//!
//! (s: how much later than the slot's start the node may enable, when its
//! own previous slot ends less than disable + ifg − guard before.)
//!
//! (Method: the slot schedule of the documented timing model, common
//! practice; clock drift is outside this analysis.)

use super::{outcome, unbounded_source, worst, Arrivals, Flow, Outcome};
use crate::line::LineModel;
use crate::spec::{Drift, Spec, TdmaSpec};

const FORMULA: &str =
    "max over x, a ≤ A_i(x) of G − x + e_i + a·F_i + (a − 1)·ifg + d(i,dest) + r_dest, G the longest gap between the node's slot starts";
const SOURCE: &str = "the TDMA slot schedule of the documented timing model (common practice)";

/// Each flow's outcome, or one reason none is bounded.
pub(crate) fn bounds(spec: &Spec, line: &LineModel, t: &TdmaSpec, flows: &[Flow]) -> Result<Vec<Outcome>, String> {
    let drift = t.drift.iter().any(|d| match *d {
        Drift::Fixed(ppm) | Drift::Within(ppm) => ppm != 0.0,
    });
    if drift {
        return Err("clock drift moves the slots from cycle to cycle; this analysis takes exact clocks".into());
    }
    let frame = &spec.frame;
    let ifg = u128::from(frame.interframe_gap.0);
    let tk = t.timekeeper;
    let cycle = u128::from(t.cycle(frame, spec.nodes[tk].transceiver.enable_time).0);
    // Each slot's start offset within the cycle.
    let mut offsets = Vec::with_capacity(t.slots.len());
    let mut o = 0u128;
    for s in &t.slots {
        offsets.push(o);
        o += u128::from(s.length.0);
    }
    let arrivals = Arrivals::new(spec, flows);
    let out = flows
        .iter()
        .map(|f| {
            let i = f.node;
            let mine: Vec<usize> = (0..t.slots.len()).filter(|&k| t.slots[k].owner == i).collect();
            if mine.is_empty() {
                return Outcome::Unbounded { reason: format!("\"{}\" owns no slot", spec.nodes[i].name) };
            }
            // Longest gap between consecutive slot starts of the node, cyclically.
            let starts: Vec<u128> = mine.iter().map(|&k| offsets[k]).collect();
            let gap = (0..starts.len())
                .map(|n| {
                    let next = if n + 1 < starts.len() { starts[n + 1] } else { starts[0] + cycle };
                    next - starts[n]
                })
                .max()
                .unwrap_or(cycle);
            let wi = worst(spec, i);
            // A node's driver may not enable again before its previous output
            // is off plus the gap. Its output ends by the end of its previous
            // slot, so that can come later than a slot's start only when the
            // node's previous slot ends less than disable + gap − guard before.
            // The timekeeper's previous output before its first slot is its
            // own beacon, which ends where the slot offsets begin.
            let free_before = (0..mine.len())
                .map(|n| {
                    if n == 0 && i == tk {
                        return offsets[mine[0]];
                    }
                    let prev = if n == 0 { mine.len() - 1 } else { n - 1 };
                    let prev_end = offsets[mine[prev]] + u128::from(t.slots[mine[prev]].length.0);
                    let start = if n == 0 { offsets[mine[0]] + cycle } else { offsets[mine[n]] };
                    start.saturating_sub(prev_end)
                })
                .min()
                .unwrap_or(0);
            let shift = (wi.disable + ifg).saturating_sub(u128::from(t.guard.0) + free_before);
            let longest = u128::from(frame.data_time(spec.nodes[i].longest_payload_bits()).0);
            // Frames of the node's longest size that fit in its smallest slot.
            let room = mine
                .iter()
                .map(|&k| {
                    let usable = u128::from(t.slots[k].length.0).saturating_sub(u128::from(t.guard.0) + wi.lead + shift);
                    (usable + ifg) / (longest + ifg)
                })
                .min()
                .unwrap_or(0);
            let Some(a) = arrivals.within(i, gap) else {
                return unbounded_source(spec, i);
            };
            if a > room {
                return Outcome::Unbounded {
                    reason: format!(
                        "up to {a} messages can arrive at \"{}\" between its slots, and a slot holds {room} of its longest frames: a backlog can build",
                        spec.nodes[i].name
                    ),
                };
            }
            let dest = f.traffic.to.unwrap_or(if i == tk { crate::scheme::first_other_node(i) } else { tk });
            let wd = worst(spec, dest);
            let deliver = |a: u128| {
                let tail =
                    shift + wi.lead + a * longest + (a - 1) * ifg + u128::from(line.delay_ps(i, dest)) + wd.receiver;
                tail - wd.react.min(tail)
            };
            // The slots are fixed: the node's own use of one does not move the next.
            let bound = super::served_latency(&arrivals, i, gap, a, gap, |_| 0, deliver).expect("bounded: checked above");
            outcome(bound, FORMULA, SOURCE)
        })
        .collect();
    Ok(out)
}
