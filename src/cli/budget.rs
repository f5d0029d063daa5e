//! `halfwire budget`: the electrical and timing budget of a scenario.

use std::path::PathBuf;

use clap::Args;
use halfwire::budget::{self, Budget, Options};
use halfwire::units::format_si;

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
    #[command(flatten)]
    pub overrides: super::overrides::ScenarioOverrides,
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
    let spec = args.overrides.load(&args.file)?;
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
        Format::Text => budget::text::render(&b, verification.as_ref()),
    };
    print_stdout(&out)?;
    Ok(0)
}
