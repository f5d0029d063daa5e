//! The report's hand-over slack and UART framing figures.

use serde::Serialize;

use crate::engine::World;
use crate::stats::slack::SlackStats;

/// Every hand-over of the line from one driver to the next (see
/// `stats::slack`): how much room each left at its tightest point.
#[derive(Clone, Debug, Serialize)]
pub struct HandoverFigures {
    pub count: u64,
    /// Exact; absent when there was no hand-over.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub slack_min_s: Option<f64>,
    /// The 1 % quantile (HDR histogram, 2 significant digits, rounded towards less room).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub slack_p01_s: Option<f64>,
    /// Hand-overs whose two occupancies overlap somewhere on the line.
    pub contended: u64,
    /// Per (from, to), tightest first.
    pub pairs: Vec<HandoverPair>,
    /// Hand-overs between pairs beyond the tracked 4096 (in the totals only).
    #[serde(skip_serializing_if = "is_zero")]
    pub pairs_untracked: u64,
}

fn is_zero(x: &u64) -> bool {
    *x == 0
}

#[derive(Clone, Debug, Serialize)]
pub struct HandoverPair {
    pub from: String,
    pub to: String,
    pub count: u64,
    pub slack_min_s: f64,
    pub slack_p50_s: f64,
    pub contended: u64,
}

fn s(ps: i64) -> f64 {
    ps as f64 / 1e12
}

impl HandoverFigures {
    pub(crate) fn of(w: &World) -> Self {
        let h = &w.bus.handover;
        let mut pairs: Vec<HandoverPair> = h
            .pairs
            .iter()
            .filter_map(|&((from, to), ref st): &((u32, u32), SlackStats)| {
                Some(HandoverPair {
                    from: w.spec.nodes[from as usize].name.clone(),
                    to: w.spec.nodes[to as usize].name.clone(),
                    count: st.count,
                    slack_min_s: s(st.min?),
                    slack_p50_s: s(st.quantile(0.5)?),
                    contended: st.contended,
                })
            })
            .collect();
        pairs.sort_by(|a, b| {
            a.slack_min_s.total_cmp(&b.slack_min_s).then_with(|| (&a.from, &a.to).cmp(&(&b.from, &b.to)))
        });
        let all = h.all();
        HandoverFigures {
            count: all.count,
            slack_min_s: all.min.map(s),
            slack_p01_s: all.quantile(0.01).map(s),
            contended: all.contended,
            pairs,
            pairs_untracked: h.rest.count,
        }
    }
}

/// Does a report of `spec` have a `uart` object?
pub fn present(spec: &crate::spec::Spec) -> bool {
    spec.frame.encoding.uart().is_some() || spec.nodes.iter().any(|n| n.transceiver.firmware_timed())
}

/// UART framing and enable timing: present when the frame is UART-coded or
/// any node sets its enable timing or reaction point.
#[derive(Clone, Debug, Serialize)]
pub struct UartFigures {
    /// The character format (`uart-8e1`); absent for other encodings.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub character: Option<String>,
    /// One character on the wire.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub char_s: Option<f64>,
    /// Frames whose first or last bit the enable cut by half a bit or more.
    pub cut_frames: u64,
    /// Deliveries discarded for a gap between characters past `frame.char_timeout`.
    pub char_timeouts: u64,
    /// Deliveries lost for starting less than `frame.silence` after the previous frame.
    pub silence_violations: u64,
    /// Deliveries from auto-direction drivers whose recessive bits did not settle within a bit.
    pub unsettled_frames: u64,
}

impl UartFigures {
    pub(crate) fn of(w: &World) -> Option<Self> {
        let spec = &w.spec;
        let uart = spec.frame.encoding.uart();
        if !present(spec) {
            return None;
        }
        let c = w.stats.uart;
        Some(UartFigures {
            character: uart.map(|u| u.name()),
            char_s: uart.map(|u| spec.frame.time_of_halves(u.char_halves()).as_secs_f64()),
            cut_frames: c.cut_frames,
            char_timeouts: c.char_timeouts,
            silence_violations: c.silence_violations,
            unsettled_frames: c.unsettled_frames,
        })
    }
}
