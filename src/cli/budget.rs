//! `halfwire budget`: the electrical and timing budget of a scenario.

use std::fmt::Write;
use std::path::PathBuf;

use clap::Args;
use halfwire::budget::{self, Budget, Options};
use halfwire::report::text::line_transit_row;
use halfwire::units::{format_seconds, format_si};

use super::output::print_stdout;
use super::run::Format;
use super::Failure;

#[derive(Debug, Args)]
pub struct BudgetArgs {
    /// Scenario file (TOML).
    pub file: PathBuf,
    /// Output format on stdout.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Run the scenario with every hand-over at its minimum and 1 ps below it.
    #[arg(long)]
    pub verify: bool,
    /// Fraction of the transition time a stub's round trip may take.
    #[arg(long, default_value_t = 0.5, value_name = "FRACTION")]
    pub stub_fraction: f64,
    /// Longest floating-line window to tolerate at receivers without failsafe
    /// (e.g. "20 ns"): adds each turnaround's upper bound.
    #[arg(long, value_name = "TIME")]
    pub float_limit: Option<String>,
    /// Print only the largest node count (at this node density) that meets every amplitude and loading check.
    #[arg(long, conflicts_with_all = ["max_rate", "verify"])]
    pub max_nodes: bool,
    /// Print only the highest bit rate the edges and stubs allow.
    #[arg(long, conflicts_with = "verify")]
    pub max_rate: bool,
}

pub fn budget(args: BudgetArgs) -> Result<u8, Failure> {
    if !(args.stub_fraction > 0.0 && args.stub_fraction <= 1.0) {
        return Err(Failure::input("--stub-fraction must lie in (0, 1]"));
    }
    let float_limit = args
        .float_limit
        .as_deref()
        .map(|t| halfwire::units::parse_time(t).map_err(|e| Failure::input(format!("--float-limit: {e}"))))
        .transpose()?;
    let spec = halfwire::scenario::load(&args.file)?;
    let b = Budget::compute(&spec, Options { stub_fraction: args.stub_fraction, float_limit });
    if args.max_nodes {
        print_stdout(&format!("{}\n", b.limits.max_nodes))?;
        return Ok(0);
    }
    if args.max_rate {
        return match b.limits.max_bit_rate_bit_s {
            Some(r) => {
                print_stdout(&format!("{r:.0} bit/s ({})\n", format_si(r, "bit/s")))?;
                Ok(0)
            }
            None => Err(Failure::input(format!(
                "{}: no transceiver gives a transition_time, so no rate limit follows from the edges",
                args.file.display()
            ))),
        };
    }
    let verification = if args.verify {
        let v = budget::verify(&spec, &b.handovers);
        if v.is_none() {
            return Err(Failure::input(format!(
                "--verify varies per-node turnarounds or the TDMA guard; scheme \"{}\" has neither",
                spec.access.name()
            )));
        }
        v
    } else {
        None
    };
    let out = match args.format {
        Format::Json => {
            let mut v = serde_json::to_value(&b).expect("serializable");
            if let Some(ver) = &verification {
                v["verify"] = serde_json::to_value(ver).expect("serializable");
            }
            let mut s = serde_json::to_string_pretty(&v).expect("serializable");
            s.push('\n');
            s
        }
        Format::Text => render(&b, verification.as_ref()),
    };
    print_stdout(&out)?;
    Ok(0)
}

fn render(b: &Budget, ver: Option<&budget::Verification>) -> String {
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
        format_si(l.dc_load_ohm, "Ω"),
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
            format_si(n.amplitude_dc_v, "V"),
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
