//! The budget as text: the tables `halfwire budget` prints. Rows that say
//! the same of several nodes (twenty identical cards) are one row with a
//! count; columns are as wide as their longest entry.

use std::fmt::Write;

use super::{Budget, Verification};
use crate::report::text::line_transit_row;
use crate::units::{format_seconds, format_si};

/// "card01, card02, … card20 (20)" for several names, or the names themselves.
pub(crate) fn names(list: &[&str]) -> String {
    match list {
        [] => String::new(),
        [one] => (*one).to_owned(),
        [a, b] => format!("{a}, {b}"),
        [a, b, c] => format!("{a}, {b}, {c}"),
        [first, second, .., last] => format!("{first}, {second}, … {last} ({})", list.len()),
    }
}

/// Rows of cells under a header, each column as wide as its longest cell;
/// the first column left-aligned, the rest right-aligned.
fn table(o: &mut String, header: &[&str], rows: &[Vec<String>]) {
    let mut width: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for r in rows {
        for (w, c) in width.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let line = |o: &mut String, cells: &[String]| {
        let _ = write!(o, " ");
        for (i, (c, w)) in cells.iter().zip(&width).enumerate() {
            let pad = w - c.chars().count();
            if i == 0 {
                let _ = write!(o, " {c}{}", " ".repeat(pad));
            } else {
                let _ = write!(o, "  {}{c}", " ".repeat(pad));
            }
        }
        let _ = writeln!(o);
    };
    line(o, &header.iter().map(|h| h.to_string()).collect::<Vec<_>>());
    for r in rows {
        line(o, r);
    }
}

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
        "  most loaded section {}   reflection near {:+.3}  far {:+.3}   DC load {}   unit loads {:.2} of {}",
        format_si(l.loaded_impedance_min_ohm, "Ω"),
        l.reflection_near,
        l.reflection_far,
        l.dc_load_ohm.map_or("open".to_owned(), |r| format_si(r, "Ω")),
        b.limits.unit_loads,
        b.limits.unit_load_limit
    );
    profile(&mut o, b);
    let _ = writeln!(o);
    nodes(&mut o, b);
    let _ = writeln!(o);
    let _ = writeln!(o, "Limits");
    if let Some(r) = b.limits.max_bit_rate_bit_s {
        let _ = writeln!(o, "  max bit rate (edges and stubs) {}", format_si(r, "bit/s"));
    }
    let _ = writeln!(o, "  max nodes at this density {}", b.limits.max_nodes);
    if let Some(c) = &b.cycle {
        let per_turn = if c.frames_per_turn > 0 {
            format!(", {} frame{} per turn", c.frames_per_turn, if c.frames_per_turn == 1 { "" } else { "s" })
        } else {
            String::new()
        };
        let _ = writeln!(
            o,
            "  {} {} at zero load; {} with every node sending its longest messages{per_turn}: {} of payload ({:.1} % of the line rate)",
            c.kind,
            format_seconds(c.zero_load_s),
            format_seconds(c.saturated_s),
            format_si(c.payload_bit_s, "bit/s"),
            100.0 * c.line_fraction
        );
    }
    let _ = writeln!(o);
    handovers(&mut o, b);
    if let Some(v) = ver {
        let _ = writeln!(o);
        let _ = writeln!(
            o,
            "Verify: {} contention events at the minima, {} with {} 1 ps below",
            v.at_minimum_contention, v.below_minimum_contention, v.lowered
        );
    }
    warnings(&mut o, b);
    o
}

/// The idle voltage along the line: every node where it changes, or one line when it does not.
fn profile(o: &mut String, b: &Budget) {
    let p = &b.profile;
    let Some(first) = p.first() else { return };
    let same = p.iter().all(|x| (x.idle_v - first.idle_v).abs() < 1e-6);
    if same {
        let _ = writeln!(o, "  idle line {} at every node", format_si(first.idle_v, "V"));
        return;
    }
    let _ = write!(o, "  idle line along it:");
    // At most eight points: the ends and evenly chosen nodes between.
    let picks: Vec<usize> =
        if p.len() <= 8 { (0..p.len()).collect() } else { (0..8).map(|k| k * (p.len() - 1) / 7).collect() };
    for (n, &k) in picks.iter().enumerate() {
        let x = &p[k];
        let _ = write!(
            o,
            "{} {} at {} ({})",
            if n == 0 { "" } else { "," },
            format_si(x.idle_v, "V"),
            format_si(x.position_m, "m"),
            x.node
        );
    }
    let _ = writeln!(o);
}

/// Node rows, worst margin first; identical rows are one row with a count.
fn nodes(o: &mut String, b: &Budget) {
    let mut list: Vec<(&String, &crate::line::figures::NodeFigures)> = b.nodes.iter().collect();
    list.sort_by(|a, c| a.1.margin_v.total_cmp(&c.1.margin_v).then(a.0.cmp(c.0)));
    let cells = |n: &crate::line::figures::NodeFigures| {
        vec![
            format_si(n.amplitude_step_v, "V"),
            format_si(n.amplitude_typical_v, "V"),
            n.amplitude_dc_v.map_or("open line".to_owned(), |v| format_si(v, "V")),
            format_si(n.drive_load_ohm, "Ω"),
            format_si(n.weakest_received_v, "V"),
            format_si(n.margin_v, "V"),
            format_si(n.idle_v, "V"),
            format!("{:?}", n.idle_state).to_lowercase(),
            n.bit_error_rate.map_or(String::new(), |p| format!("{p:.3e}")),
        ]
    };
    // Nodes whose figures agree to three significant digits share a row (its first node's figures).
    let key = |n: &crate::line::figures::NodeFigures| {
        let r = |x: f64| format!("{x:.2e}");
        [
            r(n.amplitude_step_v),
            r(n.amplitude_typical_v),
            n.amplitude_dc_v.map_or(String::new(), r),
            r(n.drive_load_ohm),
            r(n.weakest_received_v),
            r(n.margin_v),
            r(n.idle_v),
            format!("{:?}", n.idle_state),
            n.bit_error_rate.map_or(String::new(), |p| format!("{p:.3e}")),
        ]
    };
    let mut rows: Vec<(Vec<&str>, [String; 9], Vec<String>)> = Vec::new();
    for (name, n) in list {
        let k = key(n);
        match rows.iter_mut().find(|r| r.1 == k) {
            Some(r) => r.0.push(name),
            None => rows.push((vec![name], k, cells(n))),
        }
    }
    let noisy = b.nodes.values().any(|n| n.bit_error_rate.is_some());
    let rows: Vec<Vec<String>> = rows
        .into_iter()
        .map(|(who, _, mut c)| {
            if !noisy {
                c.pop();
            }
            let mut r = vec![names(&who)];
            r.extend(c);
            r
        })
        .collect();
    let mut head = vec![
        "node",
        "step (min)",
        "step (typ)",
        "settled",
        "drive load",
        "weakest at a receiver",
        "margin",
        "idle",
        "reads",
    ];
    if noisy {
        head.push("bit error rate");
    }
    table(o, &head, &rows);
}

/// Hand-overs, worst first; identical ones (same kind, minimum and setting) share a row.
fn handovers(o: &mut String, b: &Budget) {
    if b.handovers.is_empty() {
        let _ = writeln!(o, "Hand-overs: none the scheme times (random access without a slot)");
        return;
    }
    let turnarounds = b.handovers.iter().any(|h| h.kind == "turnaround");
    let _ = writeln!(
        o,
        "Hand-overs (worst first; {}slack = set − minimum, the room left on the line)",
        if turnarounds { "set = turnaround + shortest response latency; " } else { "" }
    );
    // Hand-overs alike (kind, minimum, setting) from one node, or else to one node, share a row.
    type Key = ([String; 4], Option<String>, Option<String>);
    let key_of = |h: &super::Handover| -> Key {
        (
            [
                h.kind.to_owned(),
                format_seconds(h.min_turnaround_s),
                format_seconds(h.configured_s),
                format!("{}{}", format_seconds(h.slack_s), if h.ok { "" } else { "  too short" }),
            ],
            h.max_turnaround_for_float_s.map(format_seconds),
            h.silence_min_s.map(format_seconds),
        )
    };
    let mut by_from: Vec<(Key, &str, Vec<&str>)> = Vec::new();
    for h in &b.handovers {
        let k = key_of(h);
        match by_from.iter_mut().find(|r| r.0 == k && r.1 == h.from) {
            Some(r) => r.2.push(&h.to),
            None => by_from.push((k, &h.from, vec![&h.to])),
        }
    }
    let mut rows: Vec<(String, Key)> = Vec::new();
    let mut singles: Vec<(Key, &str, Vec<&str>)> = Vec::new();
    for (k, from, tos) in by_from {
        if tos.len() > 1 {
            rows.push((format!("{from} → {}", names(&tos)), k));
        } else {
            match singles.iter_mut().find(|r| r.0 == k && r.1 == tos[0]) {
                Some(r) => r.2.push(from),
                None => singles.push((k, tos[0], vec![from])),
            }
        }
    }
    for (k, to, froms) in singles {
        rows.push((format!("{} → {to}", names(&froms)), k));
    }
    let with_float = rows.iter().any(|r| r.1 .1.is_some());
    let with_silence = rows.iter().any(|r| r.1 .2.is_some());
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|(who, (k, f, si))| {
            let mut r = vec![who.clone(), k[0].clone(), k[1].clone()];
            if with_silence {
                r.push(si.clone().unwrap_or_default());
            }
            r.extend([k[2].clone(), k[3].clone()]);
            if with_float {
                r.push(f.clone().unwrap_or_default());
            }
            r
        })
        .collect();
    let mut header = vec!["hand-over", "kind", "minimum"];
    if with_silence {
        header.push("silence minimum");
    }
    header.extend(["set", "slack"]);
    if with_float {
        header.push("max for float limit");
    }
    table(o, &header, &cells);
}

fn warnings(o: &mut String, b: &Budget) {
    if b.warnings.is_empty() {
        return;
    }
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
