//! The smallest turnaround (guard, slot or bit time) each hand-over of the
//! scheme needs so that no two drivers ever overlap anywhere on the line.
//!
//! A responder R enabling after a releasing driver P overlaps it worst at
//! R's own position, where P's disable tail arrives last (see the bus's
//! contention geometry). R's receiver shows P's last bit d(P,R) + r_R after
//! it leaves P, R reacts that instant (or `o_R` earlier, at the stop bit's
//! sample point) and enables T_R later, while P's output turns off
//! h_P + disable_P after its last bit (h_P: the firmware's hold,
//! `release_after_stop`) and that reaches R d(P,R) later. The wire delay
//! cancels, and
//!
//! ```text
//! T_R ≥ h_P + disable_P + o_R − r_R
//! ```
//!
//! is necessary and sufficient (an auto-direction driver lets go at the end
//! of its last dominant bit, before the stop bits: h_P = −stop bits). The
//! slack is T_R minus the right-hand side unclipped: the gap the hand-over
//! leaves on the line at its tightest point, which a run measures too.
//!
//! With `frame.silence`, R's first bit (`enable_lead` after its enable) must
//! reach every receiver at least the silence after P's last bit did; the
//! tightest receiver is P itself, so
//!
//! ```text
//! T_R ≥ silence + o_R − r_R − lead_R.
//! ```

use serde::Serialize;

use crate::line::LineModel;
use crate::spec::{AccessSpec, AlohaSpec, CsmaSpec, Drift, Latency, NodeId, Spec, WorstTimes};
use crate::units::Picos;

/// One hand-over and its minimum.
#[derive(Clone, Debug, Serialize)]
pub struct Handover {
    pub from: String,
    pub to: String,
    /// "turnaround" | "guard" | "slot" | "bit".
    pub kind: &'static str,
    pub min_turnaround_s: f64,
    /// What the scenario sets, and whether it is enough.
    pub configured_s: f64,
    pub ok: bool,
    /// How much room the setting leaves on the line: set − minimum, with
    /// the minimum before clipping at zero (negative when too short).
    pub slack_s: f64,
    /// With `frame.silence`: the smallest turnaround that keeps the silence
    /// between P's last bit and R's first at every receiver.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub silence_min_s: Option<f64>,
    /// With a floating-window limit: the longest turnaround that keeps every
    /// window at an undefined-idle receiver within it (`None`: no such
    /// receiver, or no limit asked for).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub max_turnaround_for_float_s: Option<f64>,
    #[serde(skip)]
    pub min: Picos,
    /// The minimum before clipping at zero (ps).
    #[serde(skip)]
    pub raw_min: i128,
    /// What the scenario sets (ps).
    #[serde(skip)]
    pub set: Picos,
    #[serde(skip)]
    pub responder: Option<NodeId>,
}

/// The shortest wait a responder's firmware can leave: its turnaround plus
/// the shortest response latency the scenario allows.
pub fn wait(turnaround: Picos, latency: &Latency) -> Picos {
    turnaround
        + match *latency {
            Latency::Fixed(t) => t,
            Latency::Uniform { min, .. } => min,
            // Normal draws are truncated at zero; exponential ones reach it.
            Latency::Normal { .. } | Latency::Exponential { .. } => Picos::ZERO,
        }
}

fn turnaround(spec: &Spec, p: NodeId, r: NodeId, configured: Picos) -> Handover {
    // Worst case: the releasing driver turns off as slowly, and the
    // responder's receiver reacts as fast, as their ranges allow.
    let (tp, tr) = (&spec.nodes[p].transceiver, &spec.nodes[r].transceiver);
    let tail = i128::from(tp.disable_range.max.0)
        + if tp.auto_direction { -i128::from(spec.frame.stop_time().0) } else { i128::from(tp.release_after_stop) };
    let react = i128::from(tr.react_offset(&spec.frame).0);
    let rx_min = i128::from(tr.receiver_range.min.0);
    let raw = tail + react - rx_min;
    let min = Picos(raw.max(0) as u64);
    let silence = spec.frame.silence.map(|si| {
        let lead = tr.enable_lead.unwrap_or(tr.enable_range.min);
        Picos((i128::from(si.0) + react - rx_min - i128::from(lead.0)).max(0) as u64)
    });
    Handover {
        from: spec.nodes[p].name.clone(),
        to: spec.nodes[r].name.clone(),
        kind: "turnaround",
        min_turnaround_s: min.as_secs_f64(),
        configured_s: configured.as_secs_f64(),
        ok: configured >= min && silence.is_none_or(|s| configured >= s),
        slack_s: 0.0,
        silence_min_s: silence.map(Picos::as_secs_f64),
        max_turnaround_for_float_s: None,
        min,
        raw_min: raw,
        set: configured,
        responder: Some(r),
    }
}

/// The longest turnaround of hand-over P → R that keeps the undriven gap at
/// every hazard receiver j within `limit`. The gap at j lasts
/// T_R + r_R − disable_P + d(P,R) + d(R,j) − d(P,j), so
/// T_R ≤ limit − r_R + disable_P − max_j [d(P,R) + d(R,j) − d(P,j)]
/// (best case over the time ranges: the shortest disable, the longest
/// receiver delay, since this is an upper bound).
pub fn float_max(spec: &Spec, line: &LineModel, p: NodeId, r: NodeId, limit: Picos) -> Option<f64> {
    let worst = (0..spec.nodes.len())
        .filter(|&j| line.idle_state(spec, j) == crate::line::IdleState::Undefined)
        .map(|j| (line.delay(p, r) + line.delay(r, j)).as_secs_f64() - line.delay(p, j).as_secs_f64())
        .reduce(f64::max)?;
    let dis = spec.nodes[p].transceiver.disable_range.min.as_secs_f64();
    let rx = spec.nodes[r].transceiver.receiver_range.max.as_secs_f64();
    Some(limit.as_secs_f64() - rx + dis - worst)
}

/// Every hand-over the scheme makes, worst (largest minimum) first; with
/// `float_limit`, turnaround hand-overs also get their floating-window bound.
pub fn handovers(spec: &Spec, line: &LineModel, float_limit: Option<Picos>) -> Vec<Handover> {
    let mut out = Vec::new();
    match &spec.access {
        AccessSpec::Polling(p) => {
            let mut seen = std::collections::BTreeSet::new();
            for &s in &p.order {
                if seen.insert(s) {
                    out.push(turnaround(spec, p.master, s, wait(p.turnaround[s], &p.response_latency)));
                    out.push(turnaround(spec, s, p.master, wait(p.turnaround[p.master], &p.response_latency)));
                }
            }
        }
        AccessSpec::Token(t) => {
            for (i, &n) in t.order.iter().enumerate() {
                let next = t.order[(i + 1) % t.order.len()];
                out.push(turnaround(spec, n, next, wait(t.turnaround[next], &t.response_latency)));
            }
        }
        AccessSpec::Tdma(t) => out.extend(tdma(spec, line, t)),
        AccessSpec::Csma(c) => {
            if c.collision_detect {
                let min = CsmaSpec::min_slot(
                    WorstTimes::of(&spec.nodes),
                    line.max_node_delay,
                    c.detect_delay,
                    spec.frame.bit_time(),
                );
                out.push(whole_bus("slot", min, c.slot_time));
            }
        }
        AccessSpec::Aloha(a) => {
            if a.slotted {
                let min = AlohaSpec::min_slot(WorstTimes::of(&spec.nodes), line.max_node_delay, longest_frame(spec));
                out.push(whole_bus("slot", min, a.slot_time));
            }
        }
        AccessSpec::Arbitration(a) => {
            let min = crate::scheme::arbitration::min_bit_time(spec, a, line);
            out.push(whole_bus("bit", min, spec.frame.bit_time()));
        }
    }
    if let Some(limit) = float_limit {
        for h in &mut out {
            if h.kind == "turnaround" {
                let p = spec.node_id(&h.from).expect("hand-over names a node");
                let r = h.responder.expect("turnarounds have a responder");
                h.max_turnaround_for_float_s = float_max(spec, line, p, r, limit);
            }
        }
    }
    for h in &mut out {
        // Exact in picoseconds, then in seconds.
        h.slack_s = (i128::from(h.set.0) - h.raw_min) as f64 / 1e12;
    }
    out.sort_by_key(|h| std::cmp::Reverse(h.min));
    out
}

fn whole_bus(kind: &'static str, min: Picos, configured: Picos) -> Handover {
    Handover {
        from: "any".into(),
        to: "any".into(),
        kind,
        min_turnaround_s: min.as_secs_f64(),
        configured_s: configured.as_secs_f64(),
        ok: configured >= min,
        slack_s: 0.0,
        silence_min_s: None,
        max_turnaround_for_float_s: None,
        min,
        raw_min: i128::from(min.0),
        set: configured,
        responder: None,
    }
}

fn longest_frame(spec: &Spec) -> Picos {
    let bits = spec.nodes.iter().map(crate::spec::NodeSpec::longest_payload_bits).max().unwrap_or(0);
    spec.frame.data_time(bits)
}

/// TDMA: guard for every slot boundary, with the worst clock errors (the
/// releasing owner slow, the next one fast) and, without compensation, the
/// difference of the two owners' beacon lags. See `scheme/tdma.rs`.
fn tdma(spec: &Spec, line: &LineModel, t: &crate::spec::TdmaSpec) -> Vec<Handover> {
    let ppm = |n: NodeId| match t.drift[n] {
        Drift::Fixed(p) => p.abs() * 1e-6,
        Drift::Within(p) => p * 1e-6,
    };
    let tk = t.timekeeper;
    // Uncompensated beacon lag: the releasing owner at its longest receiver
    // delay (its slot ends latest), the next owner at its shortest (it starts earliest).
    let lag = |n: NodeId, longest: bool| {
        if t.compensate || n == tk {
            0.0
        } else {
            let r = &spec.nodes[n].transceiver.receiver_range;
            (line.delay(tk, n) + if longest { r.max } else { r.min }).as_secs_f64()
        }
    };
    // Owners in cycle order, with each slot's offset after the beacon's end;
    // the timekeeper's next beacon closes the cycle.
    let mut chain: Vec<(NodeId, f64)> = vec![(tk, 0.0)];
    let mut o = 0.0;
    for s in &t.slots {
        chain.push((s.owner, o));
        o += s.length.as_secs_f64();
    }
    chain.push((tk, o));
    let mut out = Vec::new();
    for pair in chain.windows(2) {
        let (p, _) = pair[0];
        let (r, o_r) = pair[1];
        if p == r {
            continue;
        }
        let (ep, er) = (ppm(p), ppm(r));
        let dis = spec.nodes[p].transceiver.disable_range.max.as_secs_f64();
        let d = line.delay(p, r).as_secs_f64();
        let clock = o_r * (1.0 / (1.0 - ep) - 1.0 / (1.0 + er));
        let need = ((1.0 + er) * (dis + d + clock - (lag(r, false) - lag(p, true)))).max(0.0);
        let min = Picos((need * 1e12).ceil() as u64);
        out.push(Handover {
            from: spec.nodes[p].name.clone(),
            to: spec.nodes[r].name.clone(),
            kind: "guard",
            min_turnaround_s: min.as_secs_f64(),
            configured_s: t.guard.as_secs_f64(),
            ok: t.guard >= min,
            slack_s: 0.0,
            silence_min_s: None,
            max_turnaround_for_float_s: None,
            min,
            raw_min: i128::from(min.0),
            set: t.guard,
            responder: Some(r),
        });
    }
    out
}
