//! `halfwire diff`: compare two JSON reports with tolerances.

use std::fmt::Write;
use std::path::PathBuf;

use clap::Args;
use halfwire::check::{self, diff};
use serde_json::Value;

use super::output::print_stdout;
use super::run::Format;
use super::Failure;

#[derive(Debug, Args)]
pub struct DiffArgs {
    /// The reference report (JSON from `halfwire run --format json`).
    pub base: PathBuf,
    /// The report to judge.
    pub new: PathBuf,
    /// Relative change allowed before a worse value is a regression: "2%"
    /// for every metric, or "METRIC=5%" for one (repeatable).
    #[arg(long, value_name = "[METRIC=]PERCENT")]
    pub tolerance: Vec<String>,
    /// Compare reports of different scenarios, and accept metrics of the base
    /// that the new report lacks (or holds as null or not as a number).
    #[arg(long)]
    pub force: bool,
    /// Output format on stdout.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

fn percent(s: &str, what: &str) -> Result<f64, Failure> {
    let t = s.trim();
    let num = t
        .strip_suffix('%')
        .ok_or_else(|| Failure::input(format!("--tolerance {what}: write a percentage, e.g. \"2%\"")))?;
    let x: f64 =
        num.trim().parse().map_err(|_| Failure::input(format!("--tolerance {what}: \"{s}\" is not a percentage")))?;
    if !(x >= 0.0 && x.is_finite()) {
        return Err(Failure::input(format!("--tolerance {what}: a tolerance is zero or more")));
    }
    Ok(x / 100.0)
}

fn load(path: &PathBuf) -> Result<Value, Failure> {
    let name = halfwire::scenario::source_name(path);
    let text = if halfwire::scenario::is_stdin(path) {
        std::io::read_to_string(std::io::stdin().lock())
    } else {
        std::fs::read_to_string(path)
    }
    .map_err(|e| Failure::input(format!("{name}: cannot read: {e}")))?;
    let v: Value = serde_json::from_str(&text)
        .map_err(|e| Failure::input(format!("{}:{}:{}: not a JSON report: {e}", name, e.line(), e.column())))?;
    match v.get("schema").and_then(Value::as_str) {
        Some(s) if s == halfwire::report::SCHEMA => Ok(v),
        Some(s) => Err(Failure::input(format!(
            "{}: a report of schema \"{s}\"; this halfwire reads \"{}\"",
            name,
            halfwire::report::SCHEMA
        ))),
        None => Err(Failure::input(format!("{}: not a halfwire report (no \"schema\")", name))),
    }
}

pub fn diff(args: DiffArgs) -> Result<u8, Failure> {
    if halfwire::scenario::is_stdin(&args.base) && halfwire::scenario::is_stdin(&args.new) {
        return Err(Failure::input("only one of the two reports can come from standard input (-)"));
    }
    let base = load(&args.base)?;
    let new = load(&args.new)?;
    let name = |v: &Value| v["scenario"]["name"].as_str().unwrap_or_default().to_owned();
    if name(&base) != name(&new) && !args.force {
        return Err(Failure::input(format!(
            "the reports are of different scenarios (\"{}\" and \"{}\"); give --force to compare them anyway",
            name(&base),
            name(&new)
        )));
    }
    let (b, n) = (check::flatten(&base), check::flatten(&new));
    let mut global = 0.0;
    let mut per = std::collections::BTreeMap::new();
    for t in &args.tolerance {
        match t.split_once('=') {
            Some((metric, p)) => {
                if !b.contains_key(metric) {
                    let mut msg = format!("--tolerance: the reports have no metric \"{metric}\"");
                    if let Some(m) = halfwire::scenario::error::did_you_mean(metric, b.keys().map(String::as_str)) {
                        msg += &format!(" (did you mean \"{m}\"?)");
                    }
                    return Err(Failure::input(msg));
                }
                per.insert(metric.to_owned(), percent(p, metric)?);
            }
            None => global = percent(t, "(global)")?,
        }
    }
    let changes = diff::compare(&b, &n, |m| per.get(m).copied().unwrap_or(global));
    let missing = changes.iter().filter(|c| c.verdict == "missing").count();
    let regressions =
        changes.iter().filter(|c| c.verdict == "regression").count() + if args.force { 0 } else { missing };
    let out = match args.format {
        Format::Json => {
            let mut s = serde_json::to_string_pretty(
                &serde_json::json!({ "changes": changes, "regressions": regressions, "missing": missing }),
            )
            .expect("serializable");
            s.push('\n');
            s
        }
        Format::Text => {
            let mut o = String::new();
            if changes.is_empty() {
                let _ = writeln!(o, "no metric changed");
            } else {
                let _ = writeln!(o, "  {:<40} {:>14} {:>14} {:>9}  verdict", "metric", "base", "new", "change");
                for c in &changes {
                    let rel = match (c.base, c.new) {
                        (Some(_), Some(_)) if c.relative.is_finite() => format!("{:+.1} %", 100.0 * c.relative),
                        (Some(_), Some(_)) => "from 0".into(),
                        _ => "—".into(),
                    };
                    let show = |x: Option<f64>| x.map_or("—".to_owned(), |x| check::show(&c.metric, x));
                    let verdict = match c.verdict {
                        "missing" if args.force => "missing (accepted with --force)",
                        "missing" => "missing: a regression (the new report has no number here)",
                        v => v,
                    };
                    let _ = writeln!(
                        o,
                        "  {:<40} {:>14} {:>14} {:>9}  {}",
                        c.metric,
                        show(c.base),
                        show(c.new),
                        rel,
                        verdict
                    );
                }
            }
            let _ = writeln!(
                o,
                "{} changed, {} {}{}",
                changes.len(),
                regressions,
                if regressions == 1 { "regression" } else { "regressions" },
                if missing > 0 { format!(" ({missing} missing)") } else { String::new() }
            );
            o
        }
    };
    print_stdout(&out)?;
    Ok(if regressions > 0 { super::status::FAILED } else { 0 })
}
