//! The scheme's cycle at zero load, and the bandwidth it leaves: what the
//! line carries when every node sends as much as the scheme lets it per turn.
//! The same timing model as the run (README, "Timing model"), with each
//! node's run-time transceiver values and the mean of each random latency.

use serde::Serialize;

use crate::line::LineModel;
use crate::spec::{AccessSpec, CharGap, FrameFormat, Latency, NodeId, Spec};
use crate::units::Picos;

#[derive(Clone, Debug, Serialize)]
pub struct Cycle {
    /// "poll cycle" | "token rotation" | "TDMA cycle".
    pub kind: &'static str,
    /// With nothing to send.
    pub zero_load_s: f64,
    /// With every node sending its longest data frames, as many per turn as allowed.
    pub saturated_s: f64,
    /// Payload those saturated turns deliver per second (bit/s), and its share of the line.
    pub payload_bit_s: f64,
    pub line_fraction: f64,
    /// The count of frames per turn that figure assumes (when the scheme sets none, one).
    pub frames_per_turn: u32,
}

fn mean(l: &Latency) -> Picos {
    match *l {
        Latency::Fixed(t) => t,
        Latency::Uniform { min, max } => Picos(min.0 + (max.0 - min.0) / 2),
        Latency::Normal { mean, .. } | Latency::Exponential { mean } => mean,
    }
}

/// A frame of `data_bits` on the wire, with the mean gap between its characters (ps).
fn frame_time(frame: &FrameFormat, data_bits: u64) -> u128 {
    let gap = match &frame.char_gap {
        CharGap::None => 0,
        CharGap::Fixed(t) => t.0,
        CharGap::Random { latency, .. } => mean(latency).0,
    };
    w(frame.base_time(data_bits)) + u128::from(frame.chars(data_bits).saturating_sub(1)) * u128::from(gap)
}

/// Time on the wire of `k` back-to-back data frames of `payload` bits (ps;
/// every sum here is 128-bit: a cycle adds many bounded terms).
fn burst(frame: &FrameFormat, k: u32, payload: u64) -> u128 {
    let one = frame_time(frame, frame.overhead_bits + payload);
    one * u128::from(k) + u128::from(frame.interframe_gap.0) * u128::from(k.saturating_sub(1))
}

fn w(t: Picos) -> u128 {
    u128::from(t.0)
}

/// `None` for schemes without a fixed turn order (random access, arbitration).
pub fn cycle(spec: &Spec, line: &LineModel) -> Option<Cycle> {
    let f = &spec.frame;
    let t = |n: NodeId| &spec.nodes[n].transceiver;
    // Enable to first bit, and how much earlier than the frame's end a node reacts.
    let lead = |n: NodeId| t(n).lead();
    let react = |n: NodeId| w(t(n).react_offset(f));
    let payload = |n: NodeId| spec.nodes[n].longest_payload_bits();
    let (kind, zero, saturated, bits, k) = match &spec.access {
        AccessSpec::Polling(p) => {
            let m = p.master;
            let k = p.max_per_poll.max(1);
            let lat = mean(&p.response_latency);
            let (mut zero, mut sat, mut bits) = (0u128, 0u128, 0u128);
            for &s in &p.order {
                let common = w(lead(m))
                    + frame_time(f, p.request_bits)
                    + u128::from(line.delay_ps(m, s))
                    + w(t(s).receiver_delay)
                    + w(p.turnaround[s])
                    + w(lat)
                    + w(lead(s))
                    + u128::from(line.delay_ps(s, m))
                    + w(t(m).receiver_delay)
                    + w(p.turnaround[m])
                    + w(lat)
                    - react(s)
                    - react(m);
                let empty = frame_time(f, p.empty_reply_bits);
                zero += common + empty;
                if spec.nodes[s].traffic.is_empty() {
                    sat += common + empty;
                } else {
                    sat += common + burst(f, k, payload(s));
                    bits += u128::from(k) * u128::from(payload(s));
                }
            }
            ("poll cycle", zero, sat, bits, k)
        }
        AccessSpec::Token(tk) => {
            let k = tk.max_per_token.max(1);
            let lat = mean(&tk.response_latency);
            let (mut zero, mut sat, mut bits) = (0u128, 0u128, 0u128);
            for (i, &n) in tk.order.iter().enumerate() {
                let next = tk.order[(i + 1) % tk.order.len()];
                let hop = w(tk.turnaround[n])
                    + w(lat)
                    + w(lead(n))
                    + frame_time(f, tk.token_bits)
                    + u128::from(line.delay_ps(n, next))
                    + w(t(next).receiver_delay)
                    - react(next);
                zero += hop;
                sat += hop;
                if !spec.nodes[n].traffic.is_empty() {
                    let mut frames = k;
                    if let Some(hold) = tk.token_hold {
                        // The first frame always goes; more while they end within the hold.
                        let one = burst(f, 1, payload(n)) + w(f.interframe_gap);
                        let fit = (w(hold) + w(f.interframe_gap)).saturating_sub(w(lead(n))) / one.max(1);
                        frames = frames.min(fit.clamp(1, u128::from(u32::MAX)) as u32);
                    }
                    sat += burst(f, frames, payload(n)) + w(f.interframe_gap);
                    bits += u128::from(frames) * u128::from(payload(n));
                }
            }
            ("token rotation", zero, sat, bits, k)
        }
        AccessSpec::Tdma(td) => {
            let cycle = w(td.cycle(f, t(td.timekeeper).enable_time));
            let mut bits = 0u128;
            for s in &td.slots {
                let room = w(s.length).saturating_sub(w(td.guard) + w(t(s.owner).enable_time)) + w(f.interframe_gap);
                let one = burst(f, 1, payload(s.owner)) + w(f.interframe_gap);
                if payload(s.owner) > 0 {
                    bits += room / one.max(1) * u128::from(payload(s.owner));
                }
            }
            ("TDMA cycle", cycle, cycle, bits, 0)
        }
        _ => return None,
    };
    let sat_s = saturated as f64 / 1e12;
    let rate = if sat_s > 0.0 { bits as f64 / sat_s } else { 0.0 };
    Some(Cycle {
        kind,
        zero_load_s: zero as f64 / 1e12,
        saturated_s: sat_s,
        payload_bit_s: rate,
        line_fraction: rate / f.bit_rate,
        frames_per_turn: k,
    })
}
