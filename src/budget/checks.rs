//! The budget's checks. Each warning names its rule; sources are in the
//! README's budget section.

use serde::Serialize;

use super::handover::Handover;
use super::Options;
use crate::line::{IdleState, LineModel};
use crate::spec::{Spec, Termination, MAX_UNIT_LOADS};
use crate::units::format_si;

#[derive(Clone, Debug, Serialize)]
pub struct BudgetWarning {
    pub code: &'static str,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub node: Option<String>,
    pub message: String,
}

fn warn(out: &mut Vec<BudgetWarning>, code: &'static str, node: Option<&str>, message: String) {
    out.push(BudgetWarning { code, node: node.map(str::to_owned), message });
}

/// Highest bit rate the edges and stubs allow: unit interval ≥ 2 × the
/// transition time (common practice), and a transition time no shorter
/// than the stub's round trip divided by the stub fraction.
pub fn max_bit_rate(spec: &Spec, stub_fraction: f64) -> Option<f64> {
    spec.nodes
        .iter()
        .filter_map(|n| {
            let tr = n.transceiver.transition_time?.as_secs_f64();
            let stub_tr = 2.0 * n.transceiver.stub_m * spec.line.delay_s_per_m / stub_fraction;
            Some(1.0 / (2.0 * tr.max(stub_tr)))
        })
        .reduce(f64::min)
}

/// The largest node count on this line (the same length, nodes spread
/// evenly over it, each with the scenario's heaviest load, weakest drive and
/// receivers; so the node density grows with the count) that keeps every
/// receiver's margin non-negative and the unit loads within the limit.
pub fn max_nodes(spec: &Spec) -> usize {
    let worst = |f: fn(&crate::spec::NodeSpec) -> f64| spec.nodes.iter().map(f).fold(f64::INFINITY, f64::min);
    let load = spec.nodes.iter().map(|n| n.transceiver.load_f).fold(0.0, f64::max);
    let input = worst(|n| n.transceiver.input_ohm);
    let fits = |count: usize| -> bool {
        let loaded = crate::line::LoadedLine::new(
            spec.line.impedance_ohm,
            spec.line.delay_s_per_m,
            spec.line.length_m,
            load * count as f64,
        );
        let ends = crate::line::amplitude::Ends::resolve(&spec.line.termination, loaded.impedance_ohm);
        let inputs = input / count as f64;
        let bias = spec.line.bias.map_or(f64::INFINITY, |b| b.pull_up_ohm + b.pull_down_ohm);
        let dc = crate::line::loaded::parallel(crate::line::loaded::parallel(ends.dc_load_ohm(), inputs), bias);
        // Every driver position the scenario uses, at this impedance.
        let amp = spec
            .nodes
            .iter()
            .map(|n| {
                let step = ends.step_load_ohm(n.position_m, spec.line.length_m, loaded.impedance_ohm);
                n.transceiver.driver.amplitude_v(step).min(n.transceiver.driver.amplitude_v(dc))
            })
            .fold(f64::INFINITY, f64::min);
        let margin = spec.nodes.iter().map(|n| n.transceiver.receiver.margin_v(amp)).fold(f64::INFINITY, f64::min);
        let unit_loads = count as f64 * crate::spec::UNIT_LOAD_OHM / input;
        margin >= 0.0 && unit_loads <= MAX_UNIT_LOADS + 1e-9
    };
    let mut n = 0;
    while n < crate::scenario::validate::MAX_NODES && fits(n + 1) {
        n += 1;
    }
    n
}

/// Nominal driver offset voltage by family (from memory: LVDS-family
/// drivers about 1.2 V; TIA-485 drivers about half a 5 V supply).
fn driver_offset_v(family: Option<&str>) -> f64 {
    match family {
        Some("mlvds") | Some("lvds") => 1.2,
        Some("tia485") => 2.5,
        _ => 0.0,
    }
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
    // Amplitude against thresholds, as a noise margin, worst first.
    let (weak, amp) = crate::line::figures::weakest(line);
    let mut margins: Vec<(f64, usize)> =
        spec.nodes.iter().enumerate().map(|(i, n)| (n.transceiver.receiver.margin_v(amp), i)).collect();
    margins.sort_by(|a, b| a.0.total_cmp(&b.0));
    for (m, i) in margins {
        if m < 0.0 {
            let n = &spec.nodes[i];
            warn(
                &mut out,
                "amplitude-below-threshold",
                Some(&n.name),
                format!(
                    "receives the weakest driver ({}, {}) with a margin of {} against its {} thresholds ({} / {})",
                    spec.nodes[weak].name,
                    format_si(amp, "V"),
                    format_si(m, "V"),
                    n.transceiver.receiver.name,
                    format_si(n.transceiver.receiver.low_v, "V"),
                    format_si(n.transceiver.receiver.high_v, "V")
                ),
            );
        }
    }
    // The idle line.
    for (i, n) in spec.nodes.iter().enumerate() {
        if line.idle_state(spec, i) == IdleState::Undefined {
            warn(
                &mut out,
                "idle-undefined",
                Some(&n.name),
                format!(
                    "reads the undriven line ({}) as undefined: floating-line windows can show phantom bits; add a bias network or a failsafe receiver",
                    format_si(line.idle_v, "V")
                ),
            );
        }
    }
    // Loading.
    if line.unit_loads > MAX_UNIT_LOADS + 1e-9 {
        warn(
            &mut out,
            "unit-loads",
            None,
            format!("{:.1} unit loads exceed the {MAX_UNIT_LOADS} that TIA-485-A allows", line.unit_loads),
        );
    }
    // Terminations against the loaded impedance: |Γ| above 10 %.
    let (gn, gf) = line.reflections();
    for (end, g, r) in [("near", gn, line.ends.near_ohm), ("far", gf, line.ends.far_ohm)] {
        if r.is_finite() && g.abs() > 0.1 {
            warn(
                &mut out,
                "termination-mismatch",
                None,
                format!(
                    "the {end}-end termination ({}) against the loaded impedance ({}) reflects Γ = {g:+.2}",
                    format_si(r, "Ω"),
                    format_si(line.loaded.impedance_ohm, "Ω")
                ),
            );
        }
    }
    // Edges and stubs.
    for n in &spec.nodes {
        if let Some(tr) = n.transceiver.transition_time {
            let ui = 1.0 / spec.frame.bit_rate;
            if ui < 2.0 * tr.as_secs_f64() {
                warn(
                    &mut out,
                    "bit-rate-above-edges",
                    Some(&n.name),
                    format!(
                        "a {} unit interval is shorter than twice its {tr} transition time (common practice: UI ≥ 2 × transition)",
                        crate::units::format_seconds(ui)
                    ),
                );
            }
            let round_trip = 2.0 * n.transceiver.stub_m * spec.line.delay_s_per_m;
            if round_trip > options.stub_fraction * tr.as_secs_f64() {
                warn(
                    &mut out,
                    "stub-too-long",
                    Some(&n.name),
                    format!(
                        "its {} stub's round trip ({}) exceeds {} of its {tr} transition time",
                        format_si(n.transceiver.stub_m, "m"),
                        crate::units::format_seconds(round_trip),
                        options.stub_fraction
                    ),
                );
            }
        }
    }
    // Common mode: a driver's offset plus the ground difference must stay
    // inside every receiver's common-mode range.
    for rx in &spec.nodes {
        let Some((lo, hi)) = rx.transceiver.common_mode_v else {
            continue;
        };
        for tx in &spec.nodes {
            let cm = driver_offset_v(tx.transceiver.family.as_deref()) + tx.transceiver.ground_offset_v
                - rx.transceiver.ground_offset_v;
            if cm < lo || cm > hi {
                warn(
                    &mut out,
                    "common-mode",
                    Some(&rx.name),
                    format!(
                        "sees {}'s signal at {} common mode, outside its {} … {} range",
                        tx.name,
                        format_si(cm, "V"),
                        format_si(lo, "V"),
                        format_si(hi, "V")
                    ),
                );
            }
        }
    }
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
        if !h.ok {
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
