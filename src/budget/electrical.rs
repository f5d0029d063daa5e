//! The budget's electrical checks and limits: amplitudes and margins at
//! every receiver, the idle line and its bias, loading, reflections, edges,
//! stubs, sections, long lines and common mode. Each warning names its rule;
//! the README's budget section gives the sources.

use super::checks::{warn, BudgetWarning};
use super::Options;
use crate::line::figures::margin_of;
use crate::line::{IdleState, LineModel};
use crate::spec::{Spec, Termination, MAX_UNIT_LOADS};
use crate::units::{format_seconds, format_si};

/// Common practice bounds TIA-485 cable at about length × rate ≤ 10⁸ m·bit/s (from memory).
pub const TIA485_LENGTH_RATE: f64 = 1e8;

/// Highest bit rate the edges and stubs allow: `edge_fraction /
/// transition_time` per node (TIA/EIA-899: a 1 ns edge allows 500 Mbit/s,
/// fraction 0.5; TIA-485: rise time ≤ 0.3 UI, from memory), with the
/// transition time no shorter than the stub's round trip divided by the
/// stub fraction.
pub fn max_bit_rate(spec: &Spec, stub_fraction: f64) -> Option<f64> {
    spec.nodes
        .iter()
        .filter_map(|n| {
            let tr = n.transceiver.transition_time?.as_secs_f64();
            let stub_tr = 2.0 * n.transceiver.stub_m * spec.line.delay_s_per_m / stub_fraction;
            Some(n.transceiver.edge_fraction / tr.max(stub_tr))
        })
        .reduce(f64::min)
}

/// The largest node count on this line that keeps every receiver's margin
/// non-negative and the unit loads within the limit. The nodes are spread
/// evenly (each in the middle of its own equal stretch, so every section has
/// the same load), each with the scenario's heaviest load, its weakest
/// driver and, in turn, each of its receiver classes; the settled line keeps
/// the scenario's terminations, bias network, conductor resistance and cable
/// loss. The margin falls as nodes are added, so the count is found by
/// doubling and then halving the interval.
pub fn max_nodes(spec: &Spec) -> usize {
    let heaviest = spec.nodes.iter().map(|n| n.transceiver.load_f).fold(0.0, f64::max);
    // The weakest driver: the least amplitude into the scenario's loaded impedance.
    let z = crate::line::LoadedLine::new(
        spec.line.impedance_ohm,
        spec.line.delay_s_per_m,
        spec.line.length_m,
        spec.nodes.iter().map(|n| n.transceiver.load_f).sum(),
    )
    .impedance_ohm;
    let weakest = spec
        .nodes
        .iter()
        .min_by(|a, b| a.transceiver.driver.amplitude_v(z / 2.0).total_cmp(&b.transceiver.driver.amplitude_v(z / 2.0)))
        .expect("a bus has nodes");
    let input = spec.nodes.iter().map(|n| n.transceiver.input_ohm).fold(f64::INFINITY, f64::min);
    let mut classes: Vec<&crate::line::ReceiverClass> = Vec::new();
    for n in &spec.nodes {
        if !classes.contains(&&n.transceiver.receiver) {
            classes.push(&n.transceiver.receiver);
        }
    }
    // One synthetic node (no traffic, no name: only its electrical figures count), and the
    // scenario without its nodes, cloned once.
    let mut template = weakest.clone();
    template.name.clear();
    template.traffic.clear();
    template.transceiver.load_f = heaviest;
    template.transceiver.input_ohm = input;
    let bare = crate::spec::Spec { nodes: Vec::new(), expect: Vec::new(), ..spec.clone() };
    let fits = |count: usize| -> bool {
        if count as f64 * crate::spec::UNIT_LOAD_OHM / input > MAX_UNIT_LOADS + 1e-9 {
            return false;
        }
        let mut s = bare.clone();
        s.nodes = (0..count)
            .map(|i| {
                let mut n = template.clone();
                n.position_m = spec.line.length_m * (i as f64 + 0.5) / count as f64;
                n
            })
            .collect();
        classes.iter().all(|class| {
            for n in &mut s.nodes {
                n.transceiver.receiver = (*class).clone();
            }
            crate::line::worst_margin_of_drivers(&s, &[0, count / 2, count - 1]) >= 0.0
        })
    };
    if !fits(1) {
        return 0;
    }
    let top = crate::scenario::validate::MAX_NODES;
    let (mut good, mut bad) = (1, 2);
    while bad <= top && fits(bad) {
        good = bad;
        bad *= 2;
    }
    if bad > top {
        if fits(top) {
            return top;
        }
        bad = top;
    }
    while bad - good > 1 {
        let mid = (good + bad) / 2;
        if fits(mid) {
            good = mid;
        } else {
            bad = mid;
        }
    }
    good
}

/// The electrical warnings, in this order: margins (worst first), the idle
/// line, loading, reflections, edges and stubs, sections, long lines, common mode.
pub fn warnings(spec: &Spec, line: &LineModel, options: Options, out: &mut Vec<BudgetWarning>) {
    margins(spec, line, out);
    idle(spec, line, out);
    if line.unit_loads > MAX_UNIT_LOADS + 1e-9 {
        warn(
            out,
            "unit-loads",
            None,
            format!(
                "{:.1} unit loads exceed the {MAX_UNIT_LOADS} that TIA-485-A allows (a unit load is 24 kΩ across the pair)",
                line.unit_loads
            ),
        );
    }
    reflections(line, out);
    edges(spec, line, options, out);
    long_line(spec, line, options, out);
    common_mode(spec, line, out);
}

fn margins(spec: &Spec, line: &LineModel, out: &mut Vec<BudgetWarning>) {
    let s = &line.settled;
    let mut margins: Vec<(f64, usize)> = (0..spec.nodes.len()).map(|i| (margin_of(spec, line, i), i)).collect();
    margins.sort_by(|a, b| a.0.total_cmp(&b.0));
    for (m, i) in margins {
        if m < 0.0 {
            let n = &spec.nodes[i];
            let rx = &n.transceiver.receiver;
            let bias = if s.idle_v[i] != 0.0 {
                format!(" around the bias's {}", format_si(s.idle_v[i], "V"))
            } else {
                String::new()
            };
            warn(
                out,
                "amplitude-below-threshold",
                Some(&n.name),
                format!(
                    "its weakest signal is {}{bias}: a margin of {} against its {} thresholds ({} / {})",
                    format_si(s.received_v[i], "V"),
                    format_si(m, "V"),
                    rx.name,
                    format_si(rx.low_v, "V"),
                    format_si(rx.high_v, "V")
                ),
            );
        }
    }
    // A cable's loss at the far end: the eye that reaches the farthest receiver.
    if let Some(a) = spec.line.attenuation {
        let f = spec.frame.bit_rate / 2.0;
        let loss = a.db_per_m_at(f) * spec.line.length_m;
        let worst = (0..spec.nodes.len()).map(|i| (margin_of(spec, line, i), i)).min_by(|x, y| x.0.total_cmp(&y.0));
        if let Some((m, i)) = worst {
            if m < 0.0 {
                warn(
                    out,
                    "eye-below-threshold",
                    Some(&spec.nodes[i].name),
                    format!(
                        "the cable loses {loss:.1} dB end to end at {} (half the bit rate, √f from its figure at {}): the eye reaching this receiver is below its threshold",
                        format_si(f, "Hz"),
                        format_si(a.at_hz, "Hz")
                    ),
                );
            }
        }
    }
}

fn idle(spec: &Spec, line: &LineModel, out: &mut Vec<BudgetWarning>) {
    for (i, n) in spec.nodes.iter().enumerate() {
        if line.idle_state(spec, i) != IdleState::Undefined {
            continue;
        }
        let v = line.settled.idle_v[i];
        let rx = &n.transceiver.receiver;
        let message = match spec.line.bias {
            None => format!(
                "reads the undriven line ({}) as undefined: floating-line windows can show phantom bits; add a bias network or a failsafe receiver",
                format_si(v, "V")
            ),
            Some(b) => format!(
                "bias too weak at {}: {} against the {} it needs (the network at {} gives less here{})",
                n.name,
                format_si(v, "V"),
                format_si(if v >= 0.0 { rx.high_v } else { rx.low_v }, "V"),
                format_si(b.position_m, "m"),
                if spec.line.conductor_ohm_per_m > 0.0 { ", after the conductors' resistance" } else { "" }
            ),
        };
        warn(out, "idle-undefined", Some(&n.name), message);
    }
}

fn reflections(line: &LineModel, out: &mut Vec<BudgetWarning>) {
    // Terminations against the loaded impedance of their section: |Γ| above 10 %.
    let (gn, gf) = line.reflections();
    let z_near = line.sections.list.first().expect("a section").line.impedance_ohm;
    let z_far = line.sections.list.last().expect("a section").line.impedance_ohm;
    for (end, g, r, z) in [("near", gn, line.ends.near_ohm, z_near), ("far", gf, line.ends.far_ohm, z_far)] {
        if r.is_finite() && g.abs() > 0.1 {
            warn(
                out,
                "termination-mismatch",
                None,
                format!(
                    "the {end}-end termination ({}) against the loaded impedance there ({}) reflects Γ = {g:+.2}",
                    format_si(r, "Ω"),
                    format_si(z, "Ω")
                ),
            );
        }
    }
}

fn edges(spec: &Spec, line: &LineModel, options: Options, out: &mut Vec<BudgetWarning>) {
    let ui = 1.0 / spec.frame.bit_rate;
    for n in &spec.nodes {
        let Some(tr) = n.transceiver.transition_time else { continue };
        let f = n.transceiver.edge_fraction;
        if ui * f < tr.as_secs_f64() * (1.0 - 1e-12) {
            warn(
                out,
                "bit-rate-above-edges",
                Some(&n.name),
                format!(
                    "its {tr} transition time is more than {f} of the {} unit interval (the edge rule of its family: the fastest rate is {} / transition time)",
                    format_seconds(ui),
                    f
                ),
            );
        }
        let round_trip = 2.0 * n.transceiver.stub_m * spec.line.delay_s_per_m;
        if round_trip > options.stub_fraction * tr.as_secs_f64() {
            warn(
                out,
                "stub-too-long",
                Some(&n.name),
                format!(
                    "its {} stub's round trip ({}) exceeds {} of its {tr} transition time",
                    format_si(n.transceiver.stub_m, "m"),
                    format_seconds(round_trip),
                    options.stub_fraction
                ),
            );
        }
    }
    // Loads far apart against the edge act one by one, not as a loaded line.
    let Some(fastest) = spec.nodes.iter().filter_map(|n| n.transceiver.transition_time).min() else { return };
    let limit = options.stub_fraction * fastest.as_secs_f64();
    let sections = &line.sections.list;
    if sections.len() >= 3 {
        let inner = &sections[1..sections.len() - 1];
        let longest = inner.iter().map(|s| s.delay_s()).fold(0.0, f64::max);
        let worst = inner.iter().find(|s| s.delay_s() >= longest && s.load_f > 0.0);
        if let Some(s) = worst.filter(|s| 2.0 * s.delay_s() > limit) {
            warn(
                out,
                "loading-not-distributed",
                None,
                format!(
                    "neighbouring loads are up to {1} apart in time (first around {0}; round trip {2}), not small against the {fastest} edge (at most {3} of it): the loaded-line figures (Z', tpd') are approximate there",
                    format_si((s.from_m + s.to_m) / 2.0, "m"),
                    format_seconds(s.delay_s()),
                    format_seconds(2.0 * s.delay_s()),
                    options.stub_fraction
                ),
            );
        }
    }
}

fn long_line(spec: &Spec, line: &LineModel, options: Options, out: &mut Vec<BudgetWarning>) {
    // Common practice bounds TIA-485 cable by length × rate (from memory).
    if spec
        .nodes
        .iter()
        .any(|n| n.transceiver.family.as_deref() == Some("tia485") || n.transceiver.receiver.name == "tia485")
    {
        let lr = spec.line.length_m * spec.frame.bit_rate;
        if lr > TIA485_LENGTH_RATE {
            warn(
                out,
                "length-rate",
                None,
                format!(
                    "{} at {} is {lr:.2e} m·bit/s, beyond the common-practice limit for TIA-485 cable of about 10^8 m·bit/s: shorten the cable or lower the rate (at most {} here)",
                    format_si(spec.line.length_m, "m"),
                    format_si(spec.frame.bit_rate, "bit/s"),
                    format_si(TIA485_LENGTH_RATE / spec.line.length_m, "bit/s")
                ),
            );
        }
    }
    // An unterminated line whose round trip is not small against the edge rings.
    if matches!(spec.line.termination, Termination::Unterminated) {
        if let Some(fastest) = spec.nodes.iter().filter_map(|n| n.transceiver.transition_time).min() {
            let round_trip = 2.0 * line.end_to_end.as_secs_f64();
            if round_trip > options.stub_fraction * fastest.as_secs_f64() {
                warn(
                    out,
                    "unterminated-long-line",
                    None,
                    format!(
                        "the line is unterminated, but its round trip ({}) is more than {} of the {fastest} edge: reflections will ring; terminate it",
                        format_seconds(round_trip),
                        options.stub_fraction
                    ),
                );
            }
        }
    }
}

/// Each input pin sits at the driver's offset ± half the differential swing
/// (at its largest), shifted by the two nodes' ground difference; both pins
/// must stay inside the receiver's common-mode range.
fn common_mode(spec: &Spec, line: &LineModel, out: &mut Vec<BudgetWarning>) {
    for (r, rx) in spec.nodes.iter().enumerate() {
        let Some((lo, hi)) = rx.transceiver.common_mode_v else { continue };
        for (d, tx) in spec.nodes.iter().enumerate() {
            if d == r {
                continue;
            }
            let (off_lo, off_hi) = tx.transceiver.offset_v.unwrap_or((0.0, 0.0));
            let half = line.settled.swing_max_v[d] / 2.0;
            let shift = tx.transceiver.ground_offset_v - rx.transceiver.ground_offset_v;
            let (pin_lo, pin_hi) = (off_lo - half + shift, off_hi + half + shift);
            if pin_lo < lo || pin_hi > hi {
                let offset_only = off_lo + shift >= lo && off_hi + shift <= hi;
                warn(
                    out,
                    "common-mode",
                    Some(&rx.name),
                    format!(
                        "sees {}'s pins between {} and {} (offset {} … {} ± half its {} swing{}), outside its {} … {} range{}",
                        tx.name,
                        format_si(pin_lo, "V"),
                        format_si(pin_hi, "V"),
                        format_si(off_lo, "V"),
                        format_si(off_hi, "V"),
                        format_si(2.0 * half, "V"),
                        if shift != 0.0 { format!(", ground {}", format_si(shift, "V")) } else { String::new() },
                        format_si(lo, "V"),
                        format_si(hi, "V"),
                        if offset_only { " (the offset alone would pass: the swing pushes a pin out)" } else { "" }
                    ),
                );
            }
        }
    }
}
