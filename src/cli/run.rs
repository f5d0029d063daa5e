//! `halfwire run`: simulate one scenario.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use clap::{Args, ValueEnum};
use halfwire::bus::trace::{BusEvent, BusEventKind};
use halfwire::engine::Simulation;
use halfwire::report::{json, text};
use halfwire::spec::Spec;
use halfwire::units::{self, Picos};

use super::output::say;
use super::output::{check_writable, print_stdout, AtomicFile};
use super::overrides::ScenarioOverrides;
use super::waves::Waves;
use super::Failure;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Text,
    Json,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum IdleLanes {
    Auto,
    Show,
    Hide,
}

#[derive(Debug, Args)]
pub struct RunArgs {
    /// Scenario file (TOML).
    pub file: PathBuf,
    /// Output format on stdout.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    #[command(flatten)]
    pub overrides: ScenarioOverrides,
    /// Write a JSON-lines log of bus events to this file.
    #[arg(long, value_name = "FILE")]
    pub events: Option<PathBuf>,
    /// Write the waveform as an IEEE 1364 VCD file (timescale 1 ps), limited to --window.
    #[arg(long, value_name = "FILE")]
    pub vcd: Option<PathBuf>,
    /// Draw a timing diagram of --window as an SVG file.
    #[arg(long, value_name = "FILE.svg", alias = "svg")]
    pub plot_timing: Option<PathBuf>,
    /// Draw how often a message is slower than each latency, per node or flow, as an SVG file.
    #[arg(long, value_name = "FILE.svg")]
    pub plot_latency: Option<PathBuf>,
    /// Lanes of nodes that never drive in the window: auto hides them above 12 lanes.
    #[arg(long, value_enum, value_name = "WHEN", default_value_t = IdleLanes::Auto, requires = "plot_timing")]
    pub idle_lanes: IdleLanes,
    /// Simulated-time window for --events, --vcd and --plot-timing, e.g. "0us..50us" (default: the whole run).
    #[arg(long, value_name = "A..B")]
    pub window: Option<String>,
    /// Run N replications with independent seeds derived from the scenario's,
    /// and add the mean, standard error and 95 % confidence interval of every
    /// metric (N ≥ 2; 1 is a plain run).
    #[arg(long, value_name = "N", conflicts_with_all = ["events", "vcd", "plot_timing", "plot_latency"])]
    pub replications: Option<u64>,
    /// Replications run at once; 0 or absent: one per core.
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
}

/// Parse "A..B" with units on both ends.
pub fn parse_window(s: &str, duration: Picos) -> Result<(Picos, Picos), Failure> {
    let (a, b) = s
        .split_once("..")
        .ok_or_else(|| Failure::input(format!("--window {s:?}: write it as A..B, e.g. \"0us..50us\"")))?;
    let a = units::parse_time(a).map_err(|e| Failure::input(format!("--window start: {e}")))?;
    let b = units::parse_time(b).map_err(|e| Failure::input(format!("--window end: {e}")))?;
    if a > b {
        return Err(Failure::input(format!("--window {s:?}: the start ({a}) is after the end ({b})")));
    }
    if a >= duration {
        return Err(Failure::input(format!(
            "--window {s:?}: the start ({a}) lies outside the simulated time (0 s to {duration})"
        )));
    }
    Ok((a, b.min(duration)))
}

pub fn run(args: RunArgs) -> Result<u8, Failure> {
    let spec = args.overrides.load(&args.file)?;
    let external: Vec<&str> = spec.nodes.iter().filter(|n| n.external).map(|n| n.name.as_str()).collect();
    if !external.is_empty() {
        say!(
            "note: run simulates the external {} {} with the built-in rules; `halfwire cosim` lets a process drive them",
            if external.len() == 1 { "node" } else { "nodes" },
            external.join(", ")
        );
    }
    if let Some(n) = args.replications.filter(|&n| n != 1) {
        return replicated(&spec, n, args.format, super::output::jobs(args.jobs));
    }
    let wants_waves = args.vcd.is_some() || args.plot_timing.is_some();
    if args.window.is_some() && args.events.is_none() && !wants_waves {
        return Err(Failure::input(
            "--window needs an output that uses it: give --events, --vcd or --plot-timing FILE",
        ));
    }
    for path in [&args.events, &args.vcd, &args.plot_timing, &args.plot_latency].into_iter().flatten() {
        check_writable(path, &[args.file.as_path()])?;
    }
    let window = match &args.window {
        Some(w) => parse_window(w, spec.duration)?,
        None => (Picos::ZERO, spec.duration),
    };
    // Refuse outputs that cannot be drawn or would be huge before simulating anything.
    if args.plot_timing.is_some() && args.window.is_none() {
        return Err(Failure::input(
            "--plot-timing draws a timing diagram of a few hand-overs: give the part of the run to draw with --window A..B \
             (e.g. --window 100us..120us)",
        ));
    }
    if let Some(path) = &args.vcd {
        use halfwire::wave::vcd::{estimate_bytes, MAX_VCD_BYTES};
        let span = (window.1 - window.0).as_secs_f64();
        let estimate = estimate_bytes(spec.nodes.len(), spec.frame.bit_rate, span);
        if estimate > MAX_VCD_BYTES {
            let fits = span * (MAX_VCD_BYTES / estimate);
            return Err(Failure::input(format!(
                "--vcd {}: the waveform of {} of this bus could take up to {} (estimate: {} nodes at {}), more than \
                 the {} limit; narrow it with --window A..B to at most about {}",
                path.display(),
                units::format_seconds(span),
                human_bytes(estimate),
                spec.nodes.len(),
                units::format_si(spec.frame.bit_rate, "bit/s"),
                human_bytes(MAX_VCD_BYTES),
                units::format_seconds(fits)
            )));
        }
    }
    let events_window = args.events.as_ref().map(|_| window);
    let mut log = match &args.events {
        Some(path) => Some(EventLog::new(AtomicFile::create(path)?, window)),
        None => None,
    };
    let mut waves = if wants_waves {
        let hide_idle = match args.idle_lanes {
            IdleLanes::Auto => None,
            IdleLanes::Show => Some(false),
            IdleLanes::Hide => Some(true),
        };
        Some(Waves::new(&spec, (window.0 .0, window.1 .0), args.vcd.as_ref(), args.plot_timing.as_ref(), hide_idle)?)
    } else {
        None
    };
    let started = Instant::now();
    let mut sim = super::waves::simulation(&spec, events_window, wants_waves);
    let mut write_error = None;
    // Waveforms keep a slice's events in memory: keep slices short.
    let step = if wants_waves { Some(Picos::from_ms(1)) } else { None };
    drive(&mut sim, &spec, step, |sim| {
        let settled = sim.settled_before();
        let events = sim.drain_trace();
        if let Some(w) = &mut waves {
            if let Err(e) = w.take(&events, settled.0) {
                write_error.get_or_insert(e);
            }
        }
        if let Some(log) = &mut log {
            if let Err(e) = log.take(&spec, events, Some(settled)) {
                write_error.get_or_insert(e);
            }
        }
    });
    if let Some(e) = write_error {
        return Err(e);
    }
    let stalled = sim.stalled();
    let (mut report, tail) = halfwire::report::Report::from_run(sim.finish());
    report.set_wall_time(started.elapsed().as_secs_f64());
    if let Some(w) = waves {
        w.finish(&spec, &tail)?;
    }
    if let Some(mut log) = log {
        log.take(&spec, tail, None)?;
        log.file.commit()?;
    }
    if let Some(path) = &args.plot_latency {
        super::waves::plot_latency(&report, &spec, path)?;
    }
    let out = match args.format {
        Format::Json => json::render(&report),
        Format::Text => text::render(&report, console::colors_enabled()),
    };
    print_stdout(&out)?;
    if let Some(t) = stalled {
        // The report above is partial (it says `stalled_at_s`); exit 2 as for bad input.
        return Err(Failure::input(format!("{}: {}", args.file.display(), stall_message("the run", t.to_string()))));
    }
    Ok(0)
}

/// A byte count in MiB or GiB.
fn human_bytes(b: f64) -> String {
    if b >= 1024.0 * 1024.0 * 1024.0 {
        format!("{:.1} GiB", b / (1024.0 * 1024.0 * 1024.0))
    } else {
        format!("{:.0} MiB", b / (1024.0 * 1024.0))
    }
}

/// What a stall means, for `run` and `cosim` alike.
pub fn stall_message(what: &str, at: String) -> String {
    format!(
        "simulated time stopped advancing at {at}: {what} schedules events forever at one instant \
         (zero-length frames or timeouts, or an external node that keeps answering with a timer at the same instant); \
         the report above is partial"
    )
}

/// The `--events` file, written in time order as events become final.
struct EventLog {
    file: AtomicFile,
    pending: Vec<BusEvent>,
    window: (Picos, Picos),
}

impl EventLog {
    fn new(file: AtomicFile, window: (Picos, Picos)) -> Self {
        EventLog { file, pending: Vec::new(), window }
    }

    /// Add events; write out every pending event before `settled` (all of
    /// them when `None`).
    fn take(&mut self, spec: &Spec, events: Vec<BusEvent>, settled: Option<Picos>) -> Result<(), Failure> {
        let (a, b) = (self.window.0 .0, self.window.1 .0);
        self.pending.extend(events.into_iter().filter(|e| e.t >= a && e.t <= b));
        // Stable sort: events at one instant keep the order they were recorded in.
        self.pending.sort_by_key(|e| e.t);
        let cut = match settled {
            Some(t) => self.pending.partition_point(|e| e.t < t.0),
            None => self.pending.len(),
        };
        let text = render_events(spec, &self.pending[..cut]);
        self.file.write(text.as_bytes())?;
        self.pending.drain(..cut);
        Ok(())
    }
}

/// Run to the end in slices of simulated time, with a progress bar on a
/// terminal once the run has taken more than a second.
fn drive(sim: &mut Simulation, spec: &Spec, max_step: Option<Picos>, mut after_slice: impl FnMut(&mut Simulation)) {
    const SLICES: u64 = 200;
    let end = spec.duration;
    let mut step = Picos((end.0 / SLICES).max(1));
    if let Some(m) = max_step {
        step = step.min(m).max(Picos(1));
    }
    let started = Instant::now();
    let tty = std::io::stderr().is_terminal();
    let mut bar: Option<indicatif::ProgressBar> = None;
    let mut t = Picos::ZERO;
    while t < end {
        t = (t + step).min(end);
        sim.run_until(t);
        after_slice(sim);
        if tty && bar.is_none() && started.elapsed() > Duration::from_secs(1) {
            let b = indicatif::ProgressBar::new(1000);
            b.set_style(
                indicatif::ProgressStyle::with_template("{spinner} simulated {msg} [{bar:40}] {percent}% eta {eta}")
                    .expect("valid template")
                    .progress_chars("=> "),
            );
            bar = Some(b);
        }
        if let Some(b) = &bar {
            b.set_position((t.0 as u128 * 1000 / end.0.max(1) as u128) as u64);
            b.set_message(format!("{t} of {end}"));
        }
    }
    if let Some(b) = bar {
        b.finish_and_clear();
    }
}

fn render_events(spec: &Spec, events: &[BusEvent]) -> String {
    use serde_json::{json, Value};
    let name = |i: usize| spec.nodes[i].name.as_str();
    let mut out = String::new();
    for e in events.iter() {
        // Keys in a fixed order, time and kind first, so a line reads left to right.
        let mut fields: Vec<(&str, Value)> = Vec::with_capacity(8);
        let kind = match e.kind {
            BusEventKind::DriverEnable { .. } => "driver_enable",
            BusEventKind::DriverRelease => "driver_release",
            BusEventKind::DriverOff => "driver_off",
            BusEventKind::FrameStart { .. } => "frame_start",
            BusEventKind::FrameEnd { .. } => "frame_end",
            BusEventKind::Contention { .. } => "contention",
        };
        fields.push(("t_ps", json!(e.t)));
        fields.push(("event", json!(kind)));
        fields.push(("t_s", json!(Picos(e.t).as_secs_f64())));
        fields.push(("node", json!(name(e.node))));
        match e.kind {
            BusEventKind::FrameStart { frame, to, .. } => {
                fields.push(("frame", json!(frame)));
                fields.push(("to", json!(name(to))));
            }
            BusEventKind::FrameEnd { frame, to, corrupted } => {
                fields.push(("frame", json!(frame)));
                fields.push(("to", json!(name(to))));
                fields.push(("corrupted", json!(corrupted)));
            }
            BusEventKind::Contention { other, position_m, overlap_ps } => {
                fields.push(("other", json!(name(other))));
                fields.push(("position_m", json!(position_m)));
                fields.push(("overlap_ps", json!(overlap_ps)));
                fields.push(("overlap_s", json!(Picos(overlap_ps).as_secs_f64())));
            }
            _ => {}
        }
        out.push('{');
        for (k, (key, v)) in fields.iter().enumerate() {
            if k > 0 {
                out.push(',');
            }
            out.push_str(&serde_json::to_string(key).expect("a key serializes"));
            out.push(':');
            out.push_str(&serde_json::to_string(v).expect("a value serializes"));
        }
        out.push_str("}\n");
    }
    out
}

/// `--replications N`: the first replication's report plus the interval of every metric.
fn replicated(spec: &Spec, n: u64, format: Format, jobs: usize) -> Result<u8, Failure> {
    if !(2..=10_000).contains(&n) {
        return Err(Failure::input(
            "--replications takes 1 to 10000 (an interval needs at least two; 1 is a plain run)",
        ));
    }
    let started = Instant::now();
    let reports = halfwire::replicate(spec, n, jobs);
    let wall = started.elapsed().as_secs_f64();
    let flat: Vec<_> =
        reports.iter().map(|r| halfwire::check::flatten(&serde_json::to_value(r).expect("serializable"))).collect();
    let summary = halfwire::stats::replication::summarize(&flat);
    let mut first = reports.into_iter().next().expect("n ≥ 2");
    first.set_wall_time(wall);
    let out = match format {
        Format::Json => {
            let mut v = serde_json::to_value(&first).expect("serializable");
            v["replications"] = serde_json::json!({ "count": n, "metrics": summary });
            let mut s = serde_json::to_string_pretty(&v).expect("serializable");
            s.push('\n');
            s
        }
        Format::Text => {
            let mut o = text::render(&first, console::colors_enabled());
            o.push_str(&format!("\nReplications: {n}, 95 % confidence intervals (Student t)\n"));
            for key in [
                "throughput.payload_bit_s",
                "throughput.carried",
                "latency_s.all.mean",
                "latency_s.all.p99",
                "latency_s.all.max",
                "contention.events",
                "floating.windows",
                "frames.dropped",
            ] {
                if let Some(m) = summary.get(key) {
                    let show = |x: f64| halfwire::check::show(key, x);
                    o.push_str(&format!(
                        "  {:<28} {:>14} ± {:<12} [{} … {}]\n",
                        key,
                        show(m.mean),
                        show(m.ci95_high - m.mean),
                        show(m.ci95_low),
                        show(m.ci95_high)
                    ));
                }
            }
            o
        }
    };
    print_stdout(&out)?;
    Ok(0)
}
