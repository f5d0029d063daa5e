//! The budget as text: the tables `halfwire budget` prints.

use std::fmt::Write;

use super::{Budget, Verification};
use crate::report::text::line_transit_row;
use crate::units::{format_seconds, format_si};

/// The budget's text form, with the `--verify` result when there is one.
pub fn render(b: &Budget, ver: Option<&Verification>) -> String {
    let mut o = String::new();
    let l = &b.line;
    let _ = writeln!(o, "halfwire budget: {}  ({} scheme)", b.scenario, b.scheme);
    let _ = writeln!(o);
    let _ = writeln!(o, "Line");
    line_transit_row(&mut o, l);
    let _ = writeln!(
        o,
        "  reflection near {:+.3}  far {:+.3}   DC load {}   idle line {}   unit loads {:.2} of {}",
        l.reflection_near,
        l.reflection_far,
        l.dc_load_ohm.map_or("open".to_owned(), |r| format_si(r, "Ω")),
        format_si(l.idle_v, "V"),
        b.limits.unit_loads,
        b.limits.unit_load_limit
    );
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "  {:<14} {:>12} {:>12} {:>12} {:>12} {:>10}",
        "node", "step", "settled", "drive load", "margin", "idle"
    );
    let mut nodes: Vec<_> = b.nodes.iter().collect();
    nodes.sort_by(|a, c| a.1.margin_v.total_cmp(&c.1.margin_v));
    for (name, n) in nodes {
        let _ = writeln!(
            o,
            "  {:<14} {:>12} {:>12} {:>12} {:>12} {:>10}",
            name,
            format_si(n.amplitude_step_v, "V"),
            n.amplitude_dc_v.map_or("open line".to_owned(), |v| format_si(v, "V")),
            format_si(n.drive_load_ohm, "Ω"),
            format_si(n.margin_v, "V"),
            format!("{:?}", n.idle_state).to_lowercase()
        );
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "Limits");
    if let Some(r) = b.limits.max_bit_rate_bit_s {
        let _ = writeln!(o, "  max bit rate (edges and stubs) {}", format_si(r, "bit/s"));
    }
    let _ = writeln!(o, "  max nodes at this density {}", b.limits.max_nodes);
    let _ = writeln!(o);
    let _ = writeln!(o, "Hand-overs (worst first)");
    let _ = writeln!(o, "  {:<14} {:<14} {:<11} {:>12} {:>12}", "from", "to", "kind", "minimum", "set");
    for h in &b.handovers {
        let _ = writeln!(
            o,
            "  {:<14} {:<14} {:<11} {:>12} {:>12}{}",
            h.from,
            h.to,
            h.kind,
            format_seconds(h.min_turnaround_s),
            format_seconds(h.configured_s),
            if h.ok { "" } else { "  too short" }
        );
        if let Some(max) = h.max_turnaround_for_float_s {
            let _ = writeln!(o, "  {:<14} {:<14} {:<11} {:>12}", "", "", "  float max", format_seconds(max));
        }
    }
    if let Some(v) = ver {
        let _ = writeln!(o);
        let _ = writeln!(
            o,
            "Verify: {} contention events at the minima, {} with {} 1 ps below",
            v.at_minimum_contention, v.below_minimum_contention, v.lowered
        );
    }
    if !b.warnings.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(o, "Warnings");
        // Warnings that say the same of several nodes share one line.
        let mut i = 0;
        while i < b.warnings.len() {
            let w = &b.warnings[i];
            let mut names: Vec<&str> = w.node.as_deref().into_iter().collect();
            let mut j = i + 1;
            while j < b.warnings.len() && b.warnings[j].code == w.code && b.warnings[j].message == w.message {
                names.extend(b.warnings[j].node.as_deref());
                j += 1;
            }
            let who = match names.len() {
                0 => String::new(),
                1..=4 => format!(" [{}]", names.join(", ")),
                n => format!(" [{}, … {} nodes]", names[..3].join(", "), n),
            };
            let _ = writeln!(o, "  {}{}: {}", w.code, who, w.message);
            i = j;
        }
    }
    o
}
