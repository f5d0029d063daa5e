//! `halfwire bound`: worst-case latency bounds of every bounded flow.

use std::fmt::Write as _;
use std::path::PathBuf;

use clap::Args;
use halfwire::bound::{FlowBound, Outcome};
use halfwire::units::format_si;

use super::output::print_stdout;
use super::run::Format;
use super::Failure;

#[derive(Debug, Args)]
pub struct BoundArgs {
    /// Scenario file (TOML).
    pub file: PathBuf,
    /// Output format on stdout.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    #[command(flatten)]
    pub overrides: super::overrides::ScenarioOverrides,
}

pub fn bound(args: BoundArgs) -> Result<u8, Failure> {
    let spec = args.overrides.load(&args.file)?;
    let line = halfwire::line::LineModel::new(&spec);
    let bounds = halfwire::bound::bounds(&spec, &line);
    let out = match args.format {
        Format::Json => {
            let v = serde_json::json!({
                "scenario": spec.name,
                "scheme": spec.access.name(),
                "flows": bounds.iter().map(|b| json(&spec, b)).collect::<Vec<_>>(),
            });
            format!("{}\n", serde_json::to_string_pretty(&v).expect("plain data"))
        }
        _ => text(&spec, &bounds),
    };
    print_stdout(&out)?;
    Ok(0)
}

fn json(spec: &halfwire::spec::Spec, b: &FlowBound) -> serde_json::Value {
    match &b.outcome {
        Outcome::Bounded { bound, formula, source } => serde_json::json!({
            "flow": b.name, "node": spec.nodes[b.node].name, "bound_s": bound.as_secs_f64(),
            "formula": formula, "source": source,
        }),
        Outcome::Unbounded { reason } => serde_json::json!({
            "flow": b.name, "node": spec.nodes[b.node].name, "bound_s": null, "unbounded": reason,
        }),
    }
}

fn text(spec: &halfwire::spec::Spec, bounds: &[FlowBound]) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "halfwire bound: {}  ({} scheme)", spec.name, spec.access.name());
    let _ = writeln!(o);
    if bounds.is_empty() {
        let _ = writeln!(o, "  no traffic: no flow to bound");
        return o;
    }
    let width = bounds.iter().map(|b| b.name.chars().count()).max().unwrap_or(4).max(4);
    let mut sources = Vec::new();
    for b in bounds {
        match &b.outcome {
            Outcome::Bounded { bound, formula, source } => {
                let _ = writeln!(o, "  {:width$}  at most {}", b.name, format_si(bound.as_secs_f64(), "s"));
                if !sources.contains(&(formula, source)) {
                    sources.push((formula, source));
                }
            }
            Outcome::Unbounded { reason } => {
                let _ = writeln!(o, "  {:width$}  unbounded: {reason}", b.name);
            }
        }
    }
    for (formula, source) in sources {
        let _ = writeln!(o);
        let _ = writeln!(o, "  bound = {formula}");
        let _ = writeln!(o, "  method: {source}");
    }
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "  Bounds assume every time at its worst in the scenario's timing model; confirm them on hardware."
    );
    o
}
