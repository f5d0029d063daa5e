//! The terminal summary.

use std::fmt::Write;

use console::Style;

use super::{LineFigures, Report};
use crate::stats::LatencySummary;
use crate::units::{format_seconds, format_si};

fn pct(x: f64) -> String {
    format!("{:.2} %", x * 100.0)
}

struct Styles {
    head: Style,
    good: Style,
    bad: Style,
    dim: Style,
}

impl Styles {
    fn new(color: bool) -> Self {
        let s = |st: Style| st.force_styling(color);
        Styles {
            head: s(Style::new().bold()),
            good: s(Style::new().green()),
            bad: s(Style::new().red().bold()),
            dim: s(Style::new().dim()),
        }
    }
}

fn latency_row(out: &mut String, width: usize, label: &str, l: &LatencySummary) {
    let _ = writeln!(
        out,
        "  {:<width$} {:>8} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11}",
        label,
        l.count,
        format_seconds(l.mean),
        format_seconds(l.p50),
        format_seconds(l.p90),
        format_seconds(l.p99),
        format_seconds(l.p999),
        format_seconds(l.max)
    );
}

/// Render the report for a terminal. `color` turns ANSI styling on.
/// The line's transit figures as one row; the run and the budget reports share it.
pub fn line_transit_row(out: &mut String, l: &LineFigures) {
    let _ = writeln!(
        out,
        "  loaded impedance {}   loaded delay {}/m   end to end {}   load ratio {:.3}",
        format_si(l.loaded_impedance_ohm, "Ω"),
        format_seconds(l.loaded_delay_s_per_m),
        format_seconds(l.end_to_end_delay_s),
        l.load_ratio
    );
}

pub fn render(r: &Report, color: bool) -> String {
    render_titled(r, "halfwire run", color)
}

/// The report under another command's title (`halfwire cosim`).
pub fn render_titled(r: &Report, title: &str, color: bool) -> String {
    let st = Styles::new(color);
    let mut o = String::new();
    let _ = writeln!(
        o,
        "{} {}  (seed {}, {} measured, {} scheme)",
        st.head.apply_to(format!("{title}:")),
        r.scenario.name,
        r.scenario.seed,
        format_seconds(r.simulated_s),
        r.scheme.name
    );
    let _ = writeln!(o);
    let _ = writeln!(o, "{}", st.head.apply_to("Line"));
    let l = &r.line;
    line_transit_row(&mut o, l);
    let margin = if l.worst_margin_v >= 0.0 {
        st.good.apply_to(format_si(l.worst_margin_v, "V"))
    } else {
        st.bad.apply_to(format_si(l.worst_margin_v, "V"))
    };
    let _ = writeln!(
        o,
        "  worst amplitude {} ({})   worst receiver margin {} ({})   bit time {}",
        format_si(l.worst_amplitude_v, "V"),
        l.worst_amplitude_node,
        margin,
        l.worst_margin_node,
        format_seconds(l.bit_time_s)
    );
    if l.idle_v != 0.0 {
        let hazard = r.floating.hazard_receivers.len() as u64;
        let _ = writeln!(
            o,
            "  failsafe bias: idle line at {} (its weakest point); {}",
            format_si(l.idle_v, "V"),
            if hazard == 0 {
                "every receiver reads the idle line as a defined level".to_owned()
            } else {
                format!(
                    "{} the idle level only once the line has settled after a release (floating line, below)",
                    if hazard == 1 { "1 receiver reaches".to_owned() } else { format!("{hazard} receivers reach") }
                )
            }
        );
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "{}", st.head.apply_to("Throughput"));
    let t = &r.throughput;
    let _ = writeln!(
        o,
        "  payload {}   carried {}   offered {}",
        format_si(t.payload_bit_s, "bit/s"),
        pct(t.carried),
        pct(t.offered)
    );
    let f = &r.frames;
    let _ = writeln!(
        o,
        "  data frames: {} sent, {} delivered, {} corrupted; messages: {} dropped at full queues, {} given up, {} queued at end",
        f.attempts, f.delivered, f.corrupted, f.dropped, f.given_up, f.queued_at_end
    );
    if f.unheard > 0 {
        let _ = writeln!(o, "  {} data frames lost at receivers that were down", f.unheard);
    }
    for g in &r.outages {
        let after = |x: Option<f64>, what: &str| match x {
            Some(t) => format!("{what} after {}", format_si(t, "s")),
            None => format!("never {what}"),
        };
        let _ = writeln!(
            o,
            "  outage {}: down at {}, {}; {}",
            g.node,
            format_si(g.down_at_s, "s"),
            after(g.found_silent_after_s, "found silent"),
            match g.up_at_s {
                Some(u) => format!("up at {}, {}", format_si(u, "s"), after(g.answered_after_s, "answered")),
                None => "still down at the end".into(),
            }
        );
    }
    if f.corrupted > 0 {
        let b = &f.corrupted_by;
        let _ = writeln!(
            o,
            "  corrupted by: contention {}, floating line {}, framing rules {}, noise {}",
            b.contention, b.floating, b.framing, b.noise
        );
    }
    let u = &r.utilization;
    let _ = writeln!(
        o,
        "  line time: payload {}  overhead {}  gaps {}  idle {}  wasted {}",
        pct(u.payload),
        pct(u.overhead),
        pct(u.gaps),
        pct(u.idle),
        pct(u.wasted)
    );
    let _ = writeln!(o);
    let _ = writeln!(o, "{}", st.head.apply_to("Latency (arrival to delivery)"));
    let shown = if r.latency_s.nodes.len() <= 40 { r.latency_s.nodes.len() } else { 0 };
    let width = r.latency_s.nodes.keys().take(shown).map(|n| n.chars().count()).chain([6]).max().unwrap_or(6);
    let _ = writeln!(
        o,
        "{}",
        st.dim.apply_to(format!(
            "  {:<width$} {:>8} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11}",
            "source",
            "count",
            "mean",
            "p50",
            "p90",
            "p99",
            "p99.9",
            "max",
            width = width
        ))
    );
    latency_row(&mut o, width, "all", &r.latency_s.all);
    if r.latency_s.nodes.len() <= 40 {
        for (name, l) in &r.latency_s.nodes {
            latency_row(&mut o, width, name, l);
        }
    } else {
        let _ = writeln!(o, "  ({} sources; per-node figures in --format json)", r.latency_s.nodes.len());
    }
    if r.latency_s.per_source_digits != 3 {
        let _ = writeln!(
            o,
            "  (per-node percentiles to {} significant digits on a bus of more than {} nodes; \"all\" to 3; means and maxima exact)",
            r.latency_s.per_source_digits,
            crate::stats::latency::PER_NODE_FULL_PRECISION_MAX
        );
    }
    let bounded: Vec<_> = r.bounds.iter().filter(|b| b.bound_s.is_some()).collect();
    if !bounded.is_empty() {
        let closest =
            bounded.iter().filter(|b| b.ratio.is_some()).max_by(|a, b| a.ratio.partial_cmp(&b.ratio).unwrap());
        let mut line = format!(
            "  worst-case bounds: {} of {} bounded",
            bounded.len(),
            crate::units::count(r.bounds.len() as u64, "flow")
        );
        if let Some(c) = closest {
            line += &format!(
                "; closest: {} at {} of its bound {} ({:.1} %)",
                c.flow,
                format_seconds(c.simulated_max_s.unwrap_or(0.0)),
                format_seconds(c.bound_s.unwrap_or(0.0)),
                100.0 * c.ratio.unwrap_or(0.0)
            );
        }
        let _ = writeln!(o, "{line}  (halfwire bound lists them)");
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "{}", st.head.apply_to("Hand-overs"));
    let c = &r.contention;
    let cline = format!(
        "  contention: {} events, total overlap {}, worst {}",
        c.events,
        format_seconds(c.overlap_total_s),
        format_seconds(c.overlap_max_s)
    );
    let _ = writeln!(o, "{}", if c.events > 0 { st.bad.apply_to(cline) } else { st.good.apply_to(cline) });
    for e in &c.first {
        let _ = writeln!(
            o,
            "    at {}: {} and {} overlap {} at {}",
            format_seconds(e.at_s),
            e.nodes[0],
            e.nodes[1],
            format_seconds(e.overlap_s),
            format_si(e.position_m, "m")
        );
    }
    let h = &r.handover;
    match (h.slack_min_s, h.slack_p01_s) {
        (Some(min), Some(p01)) => {
            let line = format!(
                "  slack: {} hand-overs, smallest {}, 1st percentile {}{}",
                h.count,
                format_seconds(min),
                format_seconds(p01),
                if h.contended > 0 { format!(", {} contended", h.contended) } else { String::new() }
            );
            let _ = writeln!(o, "{}", if min < 0.0 { st.bad.apply_to(line) } else { st.good.apply_to(line) });
            for p in h.pairs.iter().take(3).filter(|_| h.pairs.len() > 1) {
                let _ = writeln!(
                    o,
                    "    {} → {}: {} hand-overs, smallest {}, median {}",
                    p.from,
                    p.to,
                    p.count,
                    format_seconds(p.slack_min_s),
                    format_seconds(p.slack_p50_s)
                );
            }
            if h.pairs.len() > 3 {
                let _ = writeln!(o, "    … {} pairs in all (--format json lists them)", h.pairs.len());
            }
        }
        _ => {
            let _ = writeln!(o, "  slack: no hand-over from one driver to another");
        }
    }
    if let Some(u) = &r.uart {
        let head = match (&u.character, u.char_s) {
            (Some(c), Some(t)) => format!("  UART {c}, {} per character:", format_seconds(t)),
            _ => "  enable timing:".to_owned(),
        };
        let line = format!(
            "{head} {} cut frames, {} character timeouts, {} silence violations, {} unsettled",
            u.cut_frames, u.char_timeouts, u.silence_violations, u.unsettled_frames
        );
        let bad = u.cut_frames + u.char_timeouts + u.silence_violations + u.unsettled_frames > 0;
        let _ = writeln!(o, "{}", if bad { st.bad.apply_to(line) } else { st.good.apply_to(line) });
    }
    let fl = &r.floating;
    if fl.hazard_receivers.is_empty() {
        let _ = writeln!(o, "  floating line: no receiver reads an idle line as undefined");
    } else {
        let _ = writeln!(
            o,
            "  floating line: {} at {} that can read an undriven line as undefined; \
             {} summed over those receivers, longest {}",
            crate::units::count(fl.windows, "window"),
            crate::units::count(fl.hazard_receivers.len() as u64, "receiver"),
            format_seconds(fl.total_s),
            format_seconds(fl.longest_s)
        );
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "{}", st.head.apply_to(format!("Scheme: {}", r.scheme.name)));
    let rows = scheme_rows(r);
    let width = rows.iter().map(|(k, _)| k.chars().count()).max().unwrap_or(0);
    for (k, v) in rows {
        let _ = writeln!(o, "  {k:<width$}  {v}");
    }
    if !r.warnings.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(o, "{}", st.bad.apply_to("Warnings"));
        for w in &r.warnings {
            let who = w.node.as_deref().map(|n| format!(" [{n}]")).unwrap_or_default();
            let _ = writeln!(o, "  {}{}: {}", w.code, who, w.message);
        }
    }
    let _ = writeln!(o);
    // A rate over a wall time too short to time says nothing: leave it out.
    let rate = match r.run.events_per_s {
        _ if r.run.wall_s < 1e-3 || r.run.events == 0 => String::new(),
        x if x >= 1e6 => format!(" ({:.1} million events/s)", x / 1e6),
        x if x >= 1e3 => format!(" ({:.0} thousand events/s)", x / 1e3),
        x => format!(" ({x:.0} events/s)"),
    };
    let _ = writeln!(
        o,
        "{}",
        st.dim.apply_to(format!(
            "{} in {} wall{rate}{}",
            crate::units::count(r.run.events, "event"),
            format_seconds(r.run.wall_s),
            match r.run.closed_form_periods {
                0 => String::new(),
                n => format!(
                    "; {} in closed form",
                    crate::units::count(n, if r.scheme.name == "token" { "rotation" } else { "cycle" })
                ),
            }
        ))
    );
    o
}

/// The scheme's figures in words with units, without those that do not apply.
fn scheme_rows(r: &Report) -> Vec<(String, String)> {
    use crate::engine::SchemeValue as V;
    let field = |name: &str| r.scheme.fields.iter().find(|(k, _)| *k == name).map(|(_, v)| *v);
    let slotted = field("slotted") != Some(V::Flag(false));
    let mut out = Vec::new();
    for &(k, v) in &r.scheme.fields {
        if k == "slot_time_s" && !slotted {
            continue; // pure ALOHA has no slots
        }
        let shown = match (k, v) {
            ("persistence", V::Fraction(p)) if p >= 1.0 => "1-persistent".to_owned(),
            ("persistence", V::Fraction(p)) if p <= 0.0 => "non-persistent".to_owned(),
            ("persistence", V::Fraction(p)) => format!("p-persistent, p = {p}"),
            (_, V::Seconds(x)) => format_seconds(x),
            (_, V::Count(n)) => n.to_string(),
            (_, V::Fraction(x)) => pct(x),
            (_, V::Flag(b)) => if b { "yes" } else { "no" }.to_owned(),
        };
        out.push((scheme_label(k), shown));
    }
    out
}

/// A scheme figure's name in words (its JSON key is in the report reference).
fn scheme_label(key: &str) -> String {
    let words = match key {
        "cycle_mean_s" => "mean cycle",
        "cycle_max_s" => "longest cycle",
        "cycle_s" => "cycle",
        "data_replies" => "replies with data",
        "empty_replies" => "empty replies",
        "timeouts" => "reply timeouts",
        "polls_ignored" => "polls ignored (slave busy)",
        "skipped_polls" => "polls skipped (silent slave)",
        "takeovers" => "takeovers by the backup master",
        "unpolled_max_s" => "longest without a poll",
        "collision_detect" => "collision detection",
        "slot_time_s" => "slot time",
        "collisions_detected" => "collisions detected",
        "given_up" => "messages given up",
        "guard_s" => "guard",
        "usable_fraction" => "usable share of the cycle",
        "beacons_missed" => "beacons missed",
        "slots_used" => "slots used",
        "slot_overruns" => "slot overruns",
        "free_running_cycles" => "node-cycles on a node's own clock",
        "holdovers_expired" => "holdovers run out",
        "rotation_mean_s" => "mean rotation",
        "rotation_max_s" => "longest rotation",
        "token_passes" => "token passes",
        "tokens_lost" => "tokens lost",
        "recovery_mean_s" => "mean recovery",
        "recovery_max_s" => "longest recovery",
        "spurious_regenerations" => "spurious regenerations",
        "ring_repairs" => "ring repairs (successor dropped)",
        "readmissions" => "readmissions to the ring",
        "bit_time_s" => "bit time",
        "min_bit_time_s" => "shortest safe bit time",
        "rounds" => "arbitration rounds",
        "lost" => "rounds lost (sender backed off)",
        "arbitration_failures" => "arbitration failures",
        "priority_inversions" => "priority inversions",
        "retransmissions" => "retransmissions",
        other => return other.trim_end_matches("_s").replace('_', " "),
    };
    words.to_owned()
}
