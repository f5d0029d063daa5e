//! The scheme's cycle at zero load, and the bandwidth it leaves: what the
//! line carries when every node sends as much as the scheme lets it per turn.
//! The same timing model as the run (README, "Timing model"), with each
//! node's run-time transceiver values and the mean of each random latency.

use serde::Serialize;

use crate::line::LineModel;
use crate::spec::{AccessSpec, FrameFormat, Latency, NodeId, Spec};
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

/// Time on the wire of `k` back-to-back data frames of `payload` bits.
fn burst(frame: &FrameFormat, k: u32, payload: u64) -> Picos {
    let one = frame.duration(frame.data_line_bits(payload)).0;
    Picos(one * u64::from(k) + frame.interframe_gap.0 * u64::from(k.saturating_sub(1)))
}

/// `None` for schemes without a fixed turn order (random access, arbitration).
pub fn cycle(spec: &Spec, line: &LineModel) -> Option<Cycle> {
    let f = &spec.frame;
    let t = |n: NodeId| &spec.nodes[n].transceiver;
    let payload = |n: NodeId| spec.nodes[n].longest_payload_bits();
    let (kind, zero, saturated, bits, k) = match &spec.access {
        AccessSpec::Polling(p) => {
            let m = p.master;
            let k = p.max_per_poll.max(1);
            let lat = mean(&p.response_latency);
            let (mut zero, mut sat, mut bits) = (0u64, 0u64, 0u64);
            for &s in &p.order {
                let common = t(m).enable_time.0
                    + f.duration(f.control_line_bits(p.request_bits)).0
                    + line.delay_ps(m, s)
                    + t(s).receiver_delay.0
                    + p.turnaround[s].0
                    + lat.0
                    + t(s).enable_time.0
                    + line.delay_ps(s, m)
                    + t(m).receiver_delay.0
                    + p.turnaround[m].0
                    + lat.0;
                zero += common + f.duration(f.control_line_bits(p.empty_reply_bits)).0;
                if spec.nodes[s].traffic.is_empty() {
                    sat += common + f.duration(f.control_line_bits(p.empty_reply_bits)).0;
                } else {
                    sat += common + burst(f, k, payload(s)).0;
                    bits += u64::from(k) * payload(s);
                }
            }
            ("poll cycle", zero, sat, bits, k)
        }
        AccessSpec::Token(tk) => {
            let k = tk.max_per_token.max(1);
            let lat = mean(&tk.response_latency);
            let (mut zero, mut sat, mut bits) = (0u64, 0u64, 0u64);
            for (i, &n) in tk.order.iter().enumerate() {
                let next = tk.order[(i + 1) % tk.order.len()];
                let hop = tk.turnaround[n].0
                    + lat.0
                    + t(n).enable_time.0
                    + f.duration(f.control_line_bits(tk.token_bits)).0
                    + line.delay_ps(n, next)
                    + t(next).receiver_delay.0;
                zero += hop;
                sat += hop;
                if !spec.nodes[n].traffic.is_empty() {
                    let mut frames = k;
                    if let Some(hold) = tk.token_hold {
                        // The first frame always goes; more while they end within the hold.
                        let one = burst(f, 1, payload(n)).0 + f.interframe_gap.0;
                        let fit = (hold.0 + f.interframe_gap.0).saturating_sub(t(n).enable_time.0) / one.max(1);
                        frames = frames.min(fit.max(1) as u32);
                    }
                    sat += burst(f, frames, payload(n)).0 + f.interframe_gap.0;
                    bits += u64::from(frames) * payload(n);
                }
            }
            ("token rotation", zero, sat, bits, k)
        }
        AccessSpec::Tdma(td) => {
            let cycle = td.cycle(f, t(td.timekeeper).enable_time).0;
            let mut bits = 0u64;
            for s in &td.slots {
                let room = s.length.0.saturating_sub(td.guard.0 + t(s.owner).enable_time.0) + f.interframe_gap.0;
                let one = burst(f, 1, payload(s.owner)).0 + f.interframe_gap.0;
                if payload(s.owner) > 0 {
                    bits += room / one.max(1) * payload(s.owner);
                }
            }
            ("TDMA cycle", cycle, cycle, bits, 0)
        }
        _ => return None,
    };
    let sat_s = Picos(saturated).as_secs_f64();
    let rate = if sat_s > 0.0 { bits as f64 / sat_s } else { 0.0 };
    Some(Cycle {
        kind,
        zero_load_s: Picos(zero).as_secs_f64(),
        saturated_s: sat_s,
        payload_bit_s: rate,
        line_fraction: rate / f.bit_rate,
        frames_per_turn: k,
    })
}
