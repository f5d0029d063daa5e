//! `halfwire sweep`: one scenario over a grid of key values, on all cores,
//! with rows appended as runs finish, resumable, and shardable over a
//! batch engine's job array.

use std::collections::HashSet;
use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::Instant;

use clap::Args;
use halfwire::sweep::row::Row;
use halfwire::sweep::runner::{self, Control, Observer};
use halfwire::sweep::shard::{self, Shard};
use halfwire::sweep::{axis, Mode, Plan, PlanError, RunId};
use halfwire::units;

use super::output::check_writable;
use super::output::say;
use super::overrides::ScenarioOverrides;
use super::rows::{self, Csv, CsvLayout, RowFormat, Sink};
use super::Failure;

#[derive(Debug, Args)]
pub struct SweepArgs {
    /// Scenario file (TOML).
    pub file: PathBuf,
    /// A scenario key and its values: KEY=a,b,c or KEY=A..B step S or KEY=A..B log N
    /// (e.g. access.turnaround=10ns..60ns step 5ns). Several make a grid.
    #[arg(long = "vary", value_name = "KEY=SPEC", required = true)]
    pub vary: Vec<String>,
    /// Pair the --vary values one to one instead of forming every combination.
    #[arg(long)]
    pub zip: bool,
    /// Replications per point, with independent seeds.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub replications: u64,
    /// Runs at once; 0 or absent: one per core.
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Append rows (JSON lines) to this file instead of printing them.
    #[arg(long, value_name = "FILE", conflicts_with = "resume")]
    pub out: Option<PathBuf>,
    /// Output format on stdout: full rows as JSON lines, or CSV (the rows of --out and --resume are always JSON).
    #[arg(long, value_enum, default_value_t = RowFormat::Json)]
    pub format: RowFormat,
    /// Continue a sweep whose rows are in FILE: skip the runs already there and append the rest.
    #[arg(long, value_name = "FILE")]
    pub resume: Option<PathBuf>,
    /// Also append one CSV line per row to this file.
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
    /// Run only share I of N (0 ≤ I < N). Without it, a Slurm job array's or a
    /// Kubernetes Indexed Job's index is used when present.
    #[arg(long, value_name = "I/N")]
    pub shard: Option<String>,
    /// The shard count for a Kubernetes Indexed Job (its completions), or to override Slurm's.
    #[arg(long, value_name = "N")]
    pub shard_count: Option<u64>,
    /// Applied at every point.
    #[command(flatten)]
    pub overrides: ScenarioOverrides,
    #[command(flatten)]
    pub plot: PlotArgs,
}

/// `--plot FILE --y METRIC [--series KEY]`, shared by `sweep` and `merge`.
#[derive(Debug, Args)]
pub struct PlotArgs {
    /// Draw a line chart of --y against the first varied key as an SVG file.
    #[arg(long, value_name = "FILE.svg", requires = "y")]
    pub plot: Option<PathBuf>,
    /// The metric to plot, e.g. latency_s.all.p99 or throughput.carried.
    #[arg(long, value_name = "METRIC", requires = "plot")]
    pub y: Option<String>,
    /// The varied key whose values make the series (default: the second --vary).
    #[arg(long, value_name = "KEY", requires = "plot")]
    pub series: Option<String>,
}

impl PlotArgs {
    /// Draw the chart of merged rows.
    pub fn draw(&self, rows: &[Row]) -> Result<(), Failure> {
        let (Some(path), Some(metric)) = (&self.plot, &self.y) else { return Ok(()) };
        let chart = halfwire::plot::sweep::chart(rows, metric, self.series.as_deref()).map_err(Failure::input)?;
        super::waves::write_text(path, &chart.render())?;
        say!("halfwire: plot of {metric} written to {}", path.display());
        Ok(())
    }
}

pub(super) fn plan_failure(e: PlanError) -> Failure {
    Failure::input(e.to_string())
}

/// The shard to run, and a line saying where it came from.
fn choose_shard(args: &SweepArgs) -> Result<(Shard, Option<String>), Failure> {
    if let Some(s) = &args.shard {
        let shard = Shard::parse(s).map_err(Failure::input)?;
        return Ok((shard, Some(format!("shard {}/{} (from --shard)", shard.index, shard.count))));
    }
    match shard::from_env(|k| std::env::var(k).ok(), args.shard_count).map_err(Failure::input)? {
        Some(f) => Ok((f.shard, Some(format!("shard {}/{} (from the {})", f.shard.index, f.shard.count, f.source)))),
        None if args.shard_count.is_some() => Err(Failure::input(
            "--shard-count is given, but no shard index: give --shard I/N, or run as an indexed job",
        )),
        None => Ok((Shard::WHOLE, None)),
    }
}

pub fn sweep(args: SweepArgs) -> Result<u8, Failure> {
    let file = halfwire::scenario::source_name(&args.file);
    let text = halfwire::scenario::read_text(&args.file)?;
    let axes = args.vary.iter().map(|v| axis::parse_vary(v)).collect::<Result<Vec<_>, _>>().map_err(Failure::input)?;
    let jobs = super::output::jobs(args.jobs);
    let (shard, shard_note) = choose_shard(&args)?;
    let mode = if args.zip { Mode::Zip } else { Mode::Grid };
    let overrides = args.overrides.get();
    let plan = Plan::new(&file, &text, axes, mode, args.replications, overrides).map_err(plan_failure)?;
    if let Some(metric) = &args.plot.y {
        let names = halfwire::report::tallies::Tallies::metric_names(&plan.spec(0).map_err(plan_failure)?);
        halfwire::plot::sweep::check_metric(metric, names.iter().map(String::as_str)).map_err(Failure::input)?;
        let keys: Vec<&str> = plan.axes().iter().map(|a| a.key.as_str()).collect();
        if let Some(s) = &args.plot.series {
            if !keys[1..].contains(&s.as_str()) {
                return Err(Failure::input(format!(
                    "--series {s}: give one of the varied keys after the first (the x axis is {}; varied: {})",
                    keys[0],
                    keys.join(", ")
                )));
            }
        }
    }

    let out_path = args.resume.as_ref().or(args.out.as_ref());
    if args.format == RowFormat::Csv && out_path.is_some() {
        return Err(Failure::input(
            "--format csv is for stdout; the rows of --out and --resume are JSON lines (add --csv FILE for a CSV beside them)",
        ));
    }
    for p in out_path.into_iter().chain(args.csv.as_ref()).chain(args.plot.plot.as_ref()) {
        check_writable(p, &[args.file.as_path()])?;
    }
    if let Some(p) = &args.out {
        if std::fs::metadata(p).is_ok_and(|m| m.len() > 0) {
            return Err(Failure::input(format!(
                "--out {}: the file already holds rows; continue that sweep with --resume {}, or choose another file",
                p.display(),
                p.display()
            )));
        }
    }
    let mut done: HashSet<RunId> = HashSet::new();
    if let Some(path) = &args.resume {
        if path.exists() {
            let read = rows::read(path)?;
            halfwire::sweep::row::check_rows(&read.rows, &path.display().to_string()).map_err(Failure::input)?;
            for (i, r) in read.rows.iter().enumerate() {
                if r.sweep == plan.id()
                    && (r.points != plan.points()
                        || r.replications_per_point != plan.replications()
                        || r.params
                            .iter()
                            .map(|p| (p.key.as_str(), &p.value))
                            .ne(plan.values(r.point).into_iter().map(|(k, v)| (k, &v.value))))
                {
                    return Err(Failure::input(format!(
                        "{}: row {}: its point {} and parameters do not match this sweep's plan",
                        path.display(),
                        i + 1,
                        r.point
                    )));
                }
                if r.sweep != plan.id() {
                    return Err(Failure::input(format!(
                        "{}: holds rows of another sweep (id {}; this sweep is {}): the scenario, the --vary values, \
                         --zip, --replications, --seed or --duration differ",
                        path.display(),
                        r.sweep,
                        plan.id()
                    )));
                }
                done.extend(r.runs());
            }
            if let Some(at) = read.truncated_at {
                eprintln!(
                    "{}: dropping a partial last line (a run cut short by a crash); it will run again",
                    path.display()
                );
                Sink::truncate_partial(path, at)?;
            }
        }
    }
    // The runs of this share, produced lazily: memory does not grow with the sweep.
    let plan = Arc::new(plan);
    let share = {
        let plan = plan.clone();
        move || {
            let plan = plan.clone();
            (0..plan.runs()).filter(move |&n| shard.takes(n)).map(move |n| plan.run_id(n))
        }
    };
    let todo = share().filter(|r| !done.contains(r)).count();
    if let Some(note) = &shard_note {
        say!("halfwire sweep: {note}");
    }
    let skipped = done.len();
    say!(
        "halfwire sweep {}: {} × {}; {} in this share{}; {jobs} at a time",
        plan.id(),
        halfwire::units::count(plan.points(), "point"),
        halfwire::units::count(plan.replications(), "replication"),
        halfwire::units::count(todo as u64, "run"),
        if skipped > 0 { format!(" ({skipped} already done)") } else { String::new() }
    );
    let si = plan.axes().iter().map(|a| a.values.iter().find_map(|v| v.unit.clone())).collect();
    let layout = CsvLayout::new(false, Some(si));
    let (sink, mut csv) = match (out_path, args.format) {
        (Some(p), _) => (Some(Sink::append(p)?), Vec::new()),
        (None, RowFormat::Json) => (Some(Sink::Stdout), Vec::new()),
        (None, RowFormat::Csv) => (None, vec![Csv::stdout(layout.clone())]),
    };
    if let Some(p) = &args.csv {
        csv.push(Csv::append(p, layout)?);
    }
    let total = todo as u64;
    // A plot of a sweep printed to stdout needs the rows kept; with a file they are read back.
    let keep = args.plot.plot.is_some() && out_path.is_none();
    let mut observer = Writer { sink, csv, bar: progress_bar(total), plan: plan.clone(), kept: keep.then(Vec::new) };
    let pool = Pool::new(jobs)?;
    let started = Instant::now();
    let runs = share().filter(|r| !done.contains(r));
    let outcome = pool.run(plan.clone(), runs, &mut observer);
    if let Some(b) = &observer.bar {
        b.finish_and_clear();
    }
    let outcome = outcome?;
    let wall = started.elapsed().as_secs_f64();
    if pool.control.stopped() {
        eprintln!(
            "halfwire sweep: stopped after {} ({} abandoned, {} not started); continue with --resume",
            halfwire::units::count(outcome.finished, "run"),
            outcome.abandoned,
            outcome.not_started
        );
        return Ok(super::status::INTERRUPTED);
    }
    say!("halfwire sweep: {} in {}", halfwire::units::count(outcome.finished, "run"), units::format_seconds(wall));
    if args.plot.plot.is_some() {
        let rows = match (out_path, observer.kept.take()) {
            (Some(p), _) => rows::read(p)?.rows,
            (None, kept) => kept.unwrap_or_default(),
        };
        let merged = halfwire::sweep::row::merge(rows).map_err(Failure::input)?;
        args.plot.draw(&merged)?;
    }
    Ok(0)
}

/// The sweep's worker pool, shared with `size`: at most `jobs` runs at a
/// time; the first Ctrl-C launches no new runs and waits for the running
/// ones, a second abandons them.
pub(super) struct Pool {
    runtime: tokio::runtime::Runtime,
    jobs: usize,
    pub control: Arc<Control>,
}

impl Pool {
    pub fn new(jobs: usize) -> Result<Pool, Failure> {
        let runtime = tokio::runtime::Builder::new_current_thread()
            .enable_all()
            .max_blocking_threads(jobs.max(1))
            .build()
            .map_err(|e| Failure::internal(format!("cannot start the worker pool: {e}")))?;
        let control = Arc::new(Control::default());
        let c = control.clone();
        runtime.spawn(async move {
            if tokio::signal::ctrl_c().await.is_ok() {
                eprintln!("\ninterrupted: no new runs; waiting for the running ones (Ctrl-C again abandons them)");
                c.stop();
                if tokio::signal::ctrl_c().await.is_ok() {
                    eprintln!("abandoning the running runs; the results so far are complete");
                    c.abandon();
                }
            }
        });
        // Let the handler start listening before any run does.
        runtime.block_on(tokio::task::yield_now());
        Ok(Pool { runtime, jobs: jobs.max(1), control })
    }

    /// Run `runs` of `plan`, handing each finished row to `observer`.
    pub fn run(
        &self,
        plan: Arc<Plan>,
        runs: impl IntoIterator<Item = RunId>,
        observer: &mut dyn Observer,
    ) -> Result<runner::Outcome, Failure> {
        let outcome = self.runtime.block_on(runner::execute(plan, runs, self.jobs, self.control.clone(), observer));
        // A worker that failed is a bug; a point that stalls or a row that cannot be written is the input's.
        outcome.map_err(|e| if e.starts_with(runner::WORKER_FAILED) { Failure::internal(e) } else { Failure::input(e) })
    }
}

pub(super) fn progress_bar(total: u64) -> Option<indicatif::ProgressBar> {
    if !std::io::stderr().is_terminal() {
        return None;
    }
    let b = indicatif::ProgressBar::new(total);
    b.set_style(
        indicatif::ProgressStyle::with_template("{spinner} runs {pos}/{len} [{bar:30}] eta {eta} · {wide_msg}")
            .expect("valid template")
            .progress_chars("=> "),
    );
    Some(b)
}

struct Writer {
    sink: Option<Sink>,
    csv: Vec<Csv>,
    bar: Option<indicatif::ProgressBar>,
    plan: Arc<Plan>,
    kept: Option<Vec<Row>>,
}

impl Observer for Writer {
    fn started(&mut self, run: RunId) {
        if let Some(b) = &self.bar {
            b.set_message(format!("point {} ({}) #{}", run.point, self.plan.describe(run.point), run.replication));
        }
    }

    fn finished(&mut self, row: Row) -> Result<(), String> {
        if let Some(s) = &mut self.sink {
            s.write(&row)?;
        }
        for c in &mut self.csv {
            c.write(&row)?;
        }
        if let Some(b) = &self.bar {
            b.inc(1);
        }
        if let Some(k) = &mut self.kept {
            k.push(row);
        }
        Ok(())
    }
}
