//! `halfwire merge`: combine sweep rows (from shards, replications or a
//! resumed sweep) into one row per point.

use std::path::PathBuf;

use clap::Args;
use halfwire::sweep::row;

use super::output::say;
use super::output::{check_writable, print_stdout, AtomicFile};
use super::rows::{self, CsvLayout, RowFormat};
use super::Failure;

#[derive(Debug, Args)]
pub struct MergeArgs {
    /// Row files written by `halfwire sweep` (JSON lines).
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// Write the merged rows to this file instead of stdout.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Also write the merged rows as CSV.
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
    /// Output format on stdout (or in --out): full rows as JSON lines, or CSV.
    #[arg(long, value_enum, default_value_t = RowFormat::Json)]
    pub format: RowFormat,
    #[command(flatten)]
    pub plot: super::sweep::PlotArgs,
}

pub fn merge(args: MergeArgs) -> Result<u8, Failure> {
    let inputs: Vec<&std::path::Path> = args.files.iter().map(PathBuf::as_path).collect();
    for p in args.out.iter().chain(args.csv.iter()).chain(args.plot.plot.iter()) {
        check_writable(p, &inputs)?;
    }
    let mut all = Vec::new();
    let mut first: Option<(String, PathBuf)> = None;
    for path in &args.files {
        let read = rows::read(path)?;
        if read.truncated_at.is_some() {
            eprintln!("warning: {}: the last line is cut short (a crashed run); it is left out", path.display());
        }
        for r in read.rows {
            match &first {
                None => first = Some((r.sweep.clone(), path.clone())),
                Some((id, p)) if *id != r.sweep => {
                    return Err(Failure::input(format!(
                        "{} and {} are from different sweeps (ids {id} and {}): only rows of one sweep merge",
                        p.display(),
                        path.display(),
                        r.sweep
                    )))
                }
                Some(_) => {}
            }
            all.push(r);
        }
    }
    let names: Vec<String> = args.files.iter().map(|p| p.display().to_string()).collect();
    row::check_rows(&all, &names.join(" + ")).map_err(Failure::input)?;
    let merged = row::merge(all).map_err(Failure::input)?;
    if let Some(r) = merged.first() {
        let missing: Vec<u64> = {
            let have: std::collections::BTreeSet<u64> = merged.iter().map(|r| r.point).collect();
            (0..r.points).filter(|p| !have.contains(p)).collect()
        };
        let short = merged.iter().filter(|m| (m.replications.len() as u64) < r.replications_per_point).count();
        if !missing.is_empty() || short > 0 {
            let list: Vec<String> = missing.iter().take(10).map(u64::to_string).collect();
            eprintln!(
                "warning: incomplete sweep: {} of {} points have no rows{}{}",
                missing.len(),
                r.points,
                if list.is_empty() {
                    String::new()
                } else {
                    format!(" (points {}{})", list.join(", "), if missing.len() > 10 { ", …" } else { "" })
                },
                if short > 0 { format!("; {short} points lack some replications") } else { String::new() }
            );
        }
        say!(
            "halfwire merge: {} of sweep {} from {}",
            halfwire::units::count(merged.len() as u64, "point"),
            r.sweep,
            halfwire::units::count(args.files.len() as u64, "file")
        );
    }
    let layout = CsvLayout::new(true, Some(si_columns(&merged)));
    let text = match args.format {
        RowFormat::Json => merged.iter().map(|r| serde_json::to_string(r).expect("a row serializes") + "\n").collect(),
        RowFormat::Csv => layout.clone().text(&merged),
    };
    match &args.out {
        Some(p) => {
            let mut f = AtomicFile::create(p)?;
            f.write(text.as_bytes())?;
            f.commit()?;
        }
        None => print_stdout(&text)?,
    }
    args.plot.draw(&merged)?;
    if let Some(p) = &args.csv {
        super::waves::write_text(p, &layout.text(&merged))?;
    }
    Ok(0)
}

/// The parameters with a unit in any row get an SI column.
fn si_columns(rows: &[row::Row]) -> Vec<Option<String>> {
    let n = rows.first().map_or(0, |r| r.params.len());
    (0..n).map(|i| rows.iter().find_map(|r| r.params.get(i).and_then(|p| p.unit.clone()))).collect()
}
