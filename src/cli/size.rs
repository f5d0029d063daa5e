//! `halfwire size`: the largest (or smallest) value of one scenario key at
//! which every `[[expect]]` of the scenario holds, by bracketing and bisection.

use std::fmt::Write as _;
use std::path::PathBuf;

use clap::{Args, ValueEnum};
use halfwire::check::{self, Outcome};
use halfwire::scenario::edit::Literal;
use halfwire::spec::Spec;
use halfwire::sweep::axis::{Axis, AxisValue};
use halfwire::sweep::row::Row;
use halfwire::sweep::runner::Observer;
use halfwire::sweep::{Mode, Plan, RunId};
use std::sync::Arc;

use super::output::print_stdout;
use super::output::say;
use super::overrides::ScenarioOverrides;
use super::run::Format;
use super::Failure;

#[derive(Debug, Args)]
pub struct SizeArgs {
    /// Scenario file (TOML) with the requirements as [[expect]] entries.
    pub file: PathBuf,
    /// The scenario key to size, e.g. nodes.count or frame.bit_rate.
    #[arg(long, value_name = "KEY")]
    pub key: String,
    /// The values to search: A..B, integers (2..64) or quantities in one unit
    /// ("9600 bit/s..1 Mbit/s" is refused; write "9.6 kbit/s..1000 kbit/s").
    #[arg(long, value_name = "A..B")]
    pub range: String,
    /// Find the largest value that meets every requirement, or the smallest.
    #[arg(long, value_enum, default_value_t = Find::Max)]
    pub find: Find,
    /// Stop when the passing and failing values are this close (a number in
    /// the range's unit; default: a thousandth of the range). Integer keys
    /// stop at adjacent values.
    #[arg(long, value_name = "STEP")]
    pub resolution: Option<f64>,
    /// Run each point N times with independent seeds and judge it as
    /// `check --replications N` does (means; `confidence = true` at the unfavourable limit).
    #[arg(long, value_name = "N")]
    pub replications: Option<u64>,
    /// Runs at once; 0 or absent: one per core.
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Output format on stdout.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Draw the binding requirement's metric against the key (SVG), with the
    /// requirement as a line and the failing values marked.
    #[arg(long, value_name = "FILE.svg")]
    pub plot: Option<PathBuf>,
    #[command(flatten)]
    pub overrides: ScenarioOverrides,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Find {
    Max,
    Min,
}

/// The searched values: integers, or numbers in one unit.
#[derive(Debug, Clone)]
struct Range {
    lo: f64,
    hi: f64,
    unit: Option<String>,
    integer: bool,
    /// Decimals kept for a continuous value (from the resolution), so every
    /// value tried is a short decimal that `check --set` reproduces exactly.
    decimals: usize,
}

impl Range {
    fn parse(s: &str) -> Result<Range, String> {
        let (a, b) = s.split_once("..").ok_or_else(|| format!("--range {s:?}: write A..B, e.g. 2..64"))?;
        let (a, b) = (a.trim(), b.trim());
        if let (Ok(x), Ok(y)) = (a.parse::<i64>(), b.parse::<i64>()) {
            return Ok(Range { lo: x as f64, hi: y as f64, unit: None, integer: true, decimals: 0 });
        }
        let split = |t: &str| -> Result<(f64, String), String> {
            let at = t.find(|c: char| c.is_alphabetic()).unwrap_or(t.len());
            let x: f64 = t[..at].trim().parse().map_err(|_| format!("--range: {t:?} is not a number with a unit"))?;
            Ok((x, t[at..].trim().to_owned()))
        };
        let ((x, u), (y, v)) = (split(a)?, split(b)?);
        if u != v {
            return Err(format!("--range: give both ends in one unit ({u:?} and {v:?})"));
        }
        Ok(Range { lo: x, hi: y, unit: (!u.is_empty()).then_some(u), integer: false, decimals: 6 })
    }

    fn literal(&self, x: f64) -> Literal {
        match (&self.unit, self.integer) {
            (_, true) => Literal::Int(x as i64),
            (Some(u), false) => Literal::Text(format!("{} {u}", self.round(x))),
            (None, false) => Literal::Float(self.round(x)),
        }
    }

    /// `x` rounded to the decimals kept.
    fn round(&self, x: f64) -> f64 {
        format!("{x:.*}", self.decimals).parse().expect("a formatted number")
    }

    fn show(&self, x: f64) -> String {
        let n = if self.integer { format!("{x}") } else { format!("{}", self.round(x)) };
        match &self.unit {
            Some(u) => format!("{n} {u}"),
            None => n,
        }
    }
}

/// Keeps the rows of one value's replications.
struct Collect {
    rows: Vec<Row>,
    bar: Option<indicatif::ProgressBar>,
    what: String,
}

impl Observer for Collect {
    fn started(&mut self, run: RunId) {
        if let Some(b) = &self.bar {
            b.set_message(format!("{} #{}", self.what, run.replication));
        }
    }

    fn finished(&mut self, row: Row) -> Result<(), String> {
        if let Some(b) = &self.bar {
            b.inc(1);
        }
        self.rows.push(row);
        Ok(())
    }
}

#[derive(Debug, serde::Serialize)]
struct Point {
    value: String,
    #[serde(skip)]
    x: f64,
    pass: bool,
    outcomes: Vec<Outcome>,
}

pub fn size(args: SizeArgs) -> Result<u8, Failure> {
    let mut range = Range::parse(&args.range).map_err(Failure::input)?;
    if !(range.lo.is_finite() && range.hi.is_finite()) || range.lo >= range.hi {
        return Err(Failure::input(format!(
            "--range {}: the range must run from a smaller to a larger value, with more than one point",
            args.range
        )));
    }
    if let Some(p) = &args.plot {
        super::output::check_writable(p, &[args.file.as_path()])?;
    }
    if args.replications == Some(0) {
        return Err(Failure::input("--replications must be at least 1"));
    }
    let step = if range.integer {
        1.0
    } else {
        let s = args.resolution.unwrap_or((range.hi - range.lo) / 1000.0);
        if !(s > 0.0 && s.is_finite()) {
            return Err(Failure::input("--resolution must be a positive number"));
        }
        // One decimal finer than the resolution.
        range.decimals = (1.0 - s.log10().floor()).clamp(0.0, 15.0) as usize;
        s
    };
    let text = halfwire::scenario::read_text(&args.file)?;
    let file = halfwire::scenario::source_name(&args.file);
    let jobs = super::output::jobs(args.jobs);
    let reps = args.replications.unwrap_or(1);
    // The sweep's worker pool: the same --jobs, progress bar and Ctrl-C.
    let pool = super::sweep::Pool::new(jobs)?;
    // Bisection needs at most ⌈log2(span/step)⌉ points after the two bracket ends.
    let most = 2 + ((range.hi - range.lo) / step).log2().ceil().max(0.0) as u64;
    let bar = super::sweep::progress_bar(most * reps);
    let mut resolved: Option<Vec<check::Resolved>> = None;
    let mut points: Vec<Point> = Vec::new();
    let mut eval = |x: f64| -> Result<bool, Failure> {
        if bar.is_none() {
            say!("halfwire size: trying {} = {}", args.key, range.show(x));
        }
        let axis =
            Axis { key: args.key.clone(), values: vec![AxisValue { value: range.literal(x), si: None, unit: None }] };
        let plan = Plan::new(&file, &text, vec![axis], Mode::Grid, reps, args.overrides.get()).map_err(|e| {
            let mut f = super::sweep::plan_failure(e);
            f.message = f.message.replacen("--vary ", "--key ", 1);
            f
        })?;
        let spec: Spec = plan.spec(0).map_err(super::sweep::plan_failure)?;
        if spec.expect.is_empty() {
            return Err(Failure::input(format!("{file}: no [[expect]] entries: size needs requirements to meet")));
        }
        if resolved.is_none() {
            resolved = Some(check::prepare(&file, &spec, reps)?);
        }
        let rs = resolved.as_ref().expect("resolved above");
        let mut collect =
            Collect { rows: Vec::new(), bar: bar.clone(), what: format!("{} = {}", args.key, range.show(x)) };
        pool.run(Arc::new(plan), (0..reps).map(|r| RunId { point: 0, replication: r }), &mut collect)?;
        if pool.control.stopped() {
            return Err(Failure {
                code: super::status::INTERRUPTED,
                message: format!(
                    "size: interrupted at {} = {}, after {} values; no answer",
                    args.key,
                    range.show(x),
                    points.len()
                ),
            });
        }
        collect.rows.sort_by_key(|r| r.replications[0]);
        let flat: Vec<_> = collect.rows.iter().map(|r| check::flatten(&r.report)).collect();
        let outcomes: Vec<Outcome> = check::judge(rs, &flat);
        let pass = outcomes.iter().all(|o| o.pass);
        points.push(Point { value: range.show(x), x, pass, outcomes });
        Ok(pass)
    };
    // The good end is where the requirements are expected to hold.
    let (good, bad) = match args.find {
        Find::Max => (range.lo, range.hi),
        Find::Min => (range.hi, range.lo),
    };
    let good_ok = eval(good)?;
    let bad_ok = eval(bad)?;
    let answer = match (good_ok, bad_ok) {
        (_, true) => Some(bad), // the whole range meets them (at least at its far end)
        (false, false) => None,
        (true, false) => {
            let (mut g, mut b) = (good, bad);
            while (b - g).abs() > step * (1.0 + 1e-9) {
                let mut mid = (g + b) / 2.0;
                if range.integer {
                    mid = if b > g { mid.floor() } else { mid.ceil() };
                } else {
                    mid = range.round(mid);
                }
                if eval(mid)? {
                    g = mid;
                } else {
                    b = mid;
                }
            }
            Some(g)
        }
    };
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    // Monotone over the points tried? A passing value beyond a failing one says no.
    let beyond = |a: f64, b: f64| if args.find == Find::Max { a > b } else { a < b };
    let monotone = !points.iter().any(|p| p.pass && points.iter().any(|q| !q.pass && beyond(p.x, q.x)));
    let out = match args.format {
        Format::Json => {
            let v = serde_json::json!({
                "key": args.key,
                "find": args.find,
                "answer": answer.map(|x| range.show(x)),
                "monotone_over_points": monotone,
                "points": points,
            });
            format!("{}\n", serde_json::to_string_pretty(&v).expect("plain data"))
        }
        _ => {
            let mut o = String::new();
            let _ = writeln!(
                o,
                "halfwire size: {} ({} of {} over {})",
                file,
                match args.find {
                    Find::Max => "largest",
                    Find::Min => "smallest",
                },
                args.key,
                args.range
            );
            let _ = writeln!(o);
            for p in &points {
                let failed: Vec<&str> = p.outcomes.iter().filter(|x| !x.pass).map(|x| x.metric.as_str()).collect();
                let _ = writeln!(
                    o,
                    "  {} = {:<14} {}",
                    args.key,
                    p.value,
                    if p.pass { "meets every requirement".to_owned() } else { format!("fails: {}", failed.join(", ")) }
                );
            }
            let _ = writeln!(o);
            match answer {
                Some(x) if x == bad => {
                    let _ = writeln!(
                        o,
                        "  every requirement holds at both ends: {} = {} (the end of the range)",
                        args.key,
                        range.show(x)
                    );
                }
                Some(x) => {
                    let _ = writeln!(
                        o,
                        "  answer: {} = {}  ({} run)",
                        args.key,
                        range.show(x),
                        halfwire::units::count(points.len() as u64, "point")
                    );
                }
                None => {
                    let _ = writeln!(o, "  no value in the range meets every requirement (both ends fail)");
                }
            }
            if !monotone {
                let _ = writeln!(o, "  warning: the outcome is not monotone over the points tried; the answer is one boundary, not necessarily the only one");
            }
            o
        }
    };
    if let Some(path) = &args.plot {
        // The binding requirement: the first that fails at a failing value
        // (the nearest to the answer), else the first.
        let binding = points
            .iter()
            .filter(|p| !p.pass)
            .min_by(|a, b| (a.x - answer.unwrap_or(a.x)).abs().total_cmp(&(b.x - answer.unwrap_or(b.x)).abs()))
            .and_then(|p| p.outcomes.iter().position(|o| !o.pass))
            .unwrap_or(0);
        let first = &points[0].outcomes[binding];
        let tried: Vec<halfwire::plot::size::Tried> = points
            .iter()
            .map(|p| halfwire::plot::size::Tried { x: p.x, y: p.outcomes[binding].measured, pass: p.pass })
            .collect();
        let chart =
            halfwire::plot::size::chart(&args.key, range.unit.clone(), &first.metric, first.op, first.required, &tried);
        let mut f = super::output::AtomicFile::create(path)?;
        f.write(chart.render().as_bytes())?;
        f.commit()?;
    }
    print_stdout(&out)?;
    Ok(if answer.is_some() { 0 } else { super::status::FAILED })
}
