//! Command-line interface: one file per command.

mod bound;
mod budget;
mod check;
mod cosim;
mod diff;
mod gateway;
mod merge;
mod output;
mod overrides;
mod rows;
mod run;
mod size;
mod sweep;
mod waves;

use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// `--version`: the package version, the commit it was built from and the target.
const VERSION: &str =
    concat!(env!("CARGO_PKG_VERSION"), " (commit ", env!("HALFWIRE_COMMIT"), ", ", env!("HALFWIRE_TARGET"), ")");

/// Deterministic discrete-event simulator for shared half-duplex differential buses.
#[derive(Debug, Parser)]
#[command(name = "halfwire", version = VERSION, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
    /// Print no status lines on stderr (warnings and errors still show).
    #[arg(long, short, global = true)]
    quiet: bool,
    /// Colour in text output: auto (on a terminal, unless NO_COLOR is set), always or never.
    #[arg(long, value_enum, value_name = "WHEN", default_value_t = ColorWhen::Auto, global = true)]
    color: ColorWhen,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
enum ColorWhen {
    Auto,
    Always,
    Never,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Simulate a scenario and report throughput, latency, contention and floating-line windows.
    Run(run::RunArgs),
    /// Check the line electrically and compute the minimum safe turnaround of every hand-over.
    Budget(budget::BudgetArgs),
    /// Worst-case latency bound of every flow with bounded arrivals, from the timing model.
    Bound(bound::BoundArgs),
    /// The largest (or smallest) value of one scenario key at which every [[expect]] holds.
    Size(size::SizeArgs),
    /// Run scenario files and check their [[expect]] requirements (exit 1 if any fails).
    Check(check::CheckArgs),
    /// Compare two JSON reports metric by metric (exit 1 on a regression beyond tolerance).
    Diff(diff::DiffArgs),
    /// Run a scenario over a grid of key values (all cores, resumable, shardable); rows as JSON lines.
    Sweep(sweep::SweepArgs),
    /// Combine sweep row files (shards, replications) into one row per point.
    Merge(merge::MergeArgs),
    /// Run a scenario whose external nodes are driven by other processes over loopback TCP (lockstep).
    Cosim(cosim::CosimArgs),
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell) on stdout.
    Completions {
        /// The shell to complete for.
        #[arg(value_enum, value_name = "SHELL")]
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff) on stdout: `halfwire man > halfwire.1`.
    Man,
}

/// A failure the command reports: a message and its exit status.
#[derive(Debug)]
pub struct Failure {
    pub code: u8,
    pub message: String,
}

/// Exit statuses (documented in the README).
pub mod status {
    /// An expectation or a regression failed (and a co-simulation client fault ended the run).
    pub const FAILED: u8 = 1;
    /// Bad input: a scenario, an argument, or an output that cannot be written.
    pub const INPUT: u8 = 2;
    /// An internal error: a bug in halfwire, or the system failed it (a thread, the network runtime).
    pub const INTERNAL: u8 = 3;
    /// Nothing to draw: the run gave no data for the picture asked for.
    pub const NOTHING_TO_PLOT: u8 = 4;
    /// Stopped by Ctrl-C.
    pub const INTERRUPTED: u8 = 130;
}

impl Failure {
    /// Bad input from the user (exit 2).
    pub fn input(message: impl Into<String>) -> Self {
        Failure { code: status::INPUT, message: message.into() }
    }

    /// An internal error (exit 3).
    pub fn internal(message: impl Into<String>) -> Self {
        Failure { code: status::INTERNAL, message: message.into() }
    }
}

impl From<halfwire::scenario::ScenarioError> for Failure {
    fn from(e: halfwire::scenario::ScenarioError) -> Self {
        Failure::input(e.to_string())
    }
}

/// Log to stderr, filtered by RUST_LOG (e.g. `RUST_LOG=halfwire=debug`).
/// Events carry simulated time (`t_ps`), so wall-clock stamps are left out.
fn init_tracing(color: bool) {
    use tracing_subscriber::EnvFilter;
    let filter = EnvFilter::try_from_default_env().unwrap_or_else(|_| EnvFilter::new("warn"));
    let _ = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_ansi(color)
        .without_time()
        .with_target(false)
        .try_init();
}

pub fn main() -> ExitCode {
    // A panic is a bug: say so plainly and exit 3 (the unwind reaches `catch_unwind` below,
    // so temporary output files are still cleaned up).
    std::panic::set_hook(Box::new(|info| {
        let place = info.location().map(|l| format!(" at {}:{}", l.file(), l.line())).unwrap_or_default();
        let what = info
            .payload()
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| info.payload().downcast_ref::<String>().cloned())
            .unwrap_or_default();
        eprintln!(
            "internal error: {what}{place}\nthis is a bug in halfwire, not in your scenario: please report it with the scenario and the command"
        );
    }));
    match std::panic::catch_unwind(run) {
        Ok(code) => code,
        Err(_) => ExitCode::from(status::INTERNAL),
    }
}

fn run() -> ExitCode {
    let cli = Cli::parse();
    // Colour follows the usual conventions: only on a terminal, never with
    // NO_COLOR, unless --color says otherwise.
    let no_color = std::env::var_os("NO_COLOR").is_some_and(|v| !v.is_empty());
    let (out, err) = match cli.color {
        ColorWhen::Always => (true, true),
        ColorWhen::Never => (false, false),
        ColorWhen::Auto if no_color => (false, false),
        ColorWhen::Auto => (console::colors_enabled(), console::colors_enabled_stderr()),
    };
    console::set_colors_enabled(out);
    console::set_colors_enabled_stderr(err);
    output::set_quiet(cli.quiet);
    init_tracing(console::colors_enabled_stderr());
    let result = match cli.command {
        Command::Run(args) => run::run(args),
        Command::Budget(args) => budget::budget(args),
        Command::Bound(args) => bound::bound(args),
        Command::Size(args) => size::size(args),
        Command::Check(args) => check::check(args),
        Command::Diff(args) => diff::diff(args),
        Command::Sweep(args) => sweep::sweep(args),
        Command::Merge(args) => merge::merge(args),
        Command::Cosim(args) => cosim::cosim(args),
        Command::Completions { shell } => {
            let mut text = Vec::new();
            clap_complete::generate(shell, &mut <Cli as clap::CommandFactory>::command(), "halfwire", &mut text);
            output::print_stdout(&String::from_utf8_lossy(&text)).map(|()| 0)
        }
        Command::Man => {
            let mut text = Vec::new();
            match clap_mangen::Man::new(<Cli as clap::CommandFactory>::command()).render(&mut text) {
                Ok(()) => output::print_stdout(&String::from_utf8_lossy(&text)).map(|()| 0),
                Err(e) => Err(Failure::internal(format!("cannot render the manual page: {e}"))),
            }
        }
    };
    match result {
        Ok(code) => ExitCode::from(code),
        Err(f) => {
            eprintln!("error: {}", f.message);
            ExitCode::from(f.code)
        }
    }
}
