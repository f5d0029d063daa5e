//! The budget's checks. Each warning names its rule; sources are in the
//! README's budget section.

use serde::Serialize;

use super::handover::Handover;
use super::Options;
use crate::line::LineModel;
use crate::spec::{Spec, Termination};

#[derive(Clone, Debug, Serialize)]
pub struct BudgetWarning {
    pub code: &'static str,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub node: Option<String>,
    pub message: String,
}

pub(crate) fn warn(out: &mut Vec<BudgetWarning>, code: &'static str, node: Option<&str>, message: String) {
    out.push(BudgetWarning { code, node: node.map(str::to_owned), message });
}

/// How many nodes drive the line under the scenario's scheme: every polled
/// slave and the master, every ring member, the timekeeper and slot owners,
/// and under random access every node with traffic.
fn drivers(spec: &Spec) -> usize {
    use crate::spec::AccessSpec;
    let mut set = std::collections::BTreeSet::new();
    match &spec.access {
        AccessSpec::Polling(p) => {
            set.insert(p.master);
            set.extend(p.order.iter().copied());
        }
        AccessSpec::Token(t) => set.extend(t.order.iter().copied()),
        AccessSpec::Tdma(t) => {
            set.insert(t.timekeeper);
            set.extend(t.slots.iter().map(|s| s.owner));
        }
        _ => set.extend((0..spec.nodes.len()).filter(|&i| !spec.nodes[i].traffic.is_empty())),
    }
    set.len()
}

pub fn warnings(spec: &Spec, line: &LineModel, handovers: &[Handover], options: Options) -> Vec<BudgetWarning> {
    let mut out = Vec::new();
    super::electrical::warnings(spec, line, options, &mut out);
    super::firmware::warnings(spec, line, &mut out);
    // A multidrop line has one driver, at the unterminated near end.
    if matches!(spec.line.termination, Termination::FarEnd { .. }) {
        let drivers = drivers(spec);
        if drivers > 1 {
            warn(
                &mut out,
                "multidrop-several-drivers",
                None,
                format!("a far-end-terminated (multidrop) line has {drivers} driving nodes; it suits one driver at the near end"),
            );
        }
    }
    // No turnaround can avoid both an overlap and a too-long floating window.
    for h in handovers {
        if let Some(max) = h.max_turnaround_for_float_s {
            if max < h.min_turnaround_s {
                warn(
                    &mut out,
                    "float-limit-unreachable",
                    Some(&h.to),
                    format!(
                        "{} → {}: avoiding overlap needs at least {}, but the floating-window limit allows at most {}",
                        h.from,
                        h.to,
                        crate::units::format_seconds(h.min_turnaround_s),
                        crate::units::format_seconds(max)
                    ),
                );
            } else if h.configured_s > max {
                warn(
                    &mut out,
                    "float-limit-exceeded",
                    Some(&h.to),
                    format!(
                        "{} → {}: a {} turnaround leaves the line floating longer than the limit allows (at most {})",
                        h.from,
                        h.to,
                        crate::units::format_seconds(h.configured_s),
                        crate::units::format_seconds(max)
                    ),
                );
            }
        }
    }
    // Hand-overs the scenario sets too short.
    for h in handovers {
        if let Some(si) = h.silence_min_s.filter(|&si| h.configured_s < si) {
            warn(
                &mut out,
                "silence-too-short",
                Some(&h.to),
                format!(
                    "{} → {}: a wait of {} starts the reply inside the frame.silence of the frame before it (needs at least {}): receivers merge the two frames and lose them",
                    h.from,
                    h.to,
                    crate::units::format_seconds(h.configured_s),
                    crate::units::format_seconds(si)
                ),
            );
        }
        if h.configured_s < h.min_turnaround_s {
            warn(
                &mut out,
                "handover-too-short",
                Some(&h.to),
                format!(
                    "{} → {}: {} {} is below the {} that avoids overlap",
                    h.from,
                    h.to,
                    h.kind,
                    crate::units::format_seconds(h.configured_s),
                    crate::units::format_seconds(h.min_turnaround_s)
                ),
            );
        }
    }
    out
}
