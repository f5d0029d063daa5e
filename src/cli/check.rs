//! `halfwire check`: run scenario files and evaluate their expectations.

use std::fmt::Write;
use std::path::{Path, PathBuf};

use clap::Args;
use halfwire::check::{self, Outcome};
use halfwire::spec::Spec;

use super::output::{check_writable, print_stdout, AtomicFile};
use super::overrides::ScenarioOverrides;
use super::run::Format;
use super::Failure;

#[derive(Debug, Args)]
pub struct CheckArgs {
    /// Scenario files and/or folders (searched recursively for *.toml).
    #[arg(required = true)]
    pub paths: Vec<PathBuf>,
    /// Output format on stdout.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Also write JUnit XML (one test case per expectation, one suite per scenario).
    #[arg(long, value_name = "FILE")]
    pub junit: Option<PathBuf>,
    /// Scenarios run at once; 0 or absent: one per core.
    #[arg(long, value_name = "N")]
    pub jobs: Option<usize>,
    /// Run each scenario N times with independent seeds: expectations compare
    /// the mean, and `confidence = true` ones the 95 % confidence limit.
    #[arg(long, value_name = "N")]
    pub replications: Option<u64>,
    #[command(flatten)]
    pub overrides: ScenarioOverrides,
}

/// One scenario's result.
#[derive(Debug, serde::Serialize)]
pub struct ScenarioResult {
    pub file: String,
    pub name: String,
    pub outcomes: Vec<Outcome>,
    pub wall_s: f64,
}

/// The scenario files named by `paths` (folders searched recursively for
/// `*.toml`, in name order), and a message for every path that cannot be used.
/// Symbolic links are followed, with loops detected and skipped; anything
/// that is not a regular file (a FIFO, a device) is refused, never opened.
fn collect(paths: &[PathBuf]) -> (Vec<PathBuf>, Vec<String>) {
    let mut files = Vec::new();
    let mut bad = Vec::new();
    for p in paths {
        if halfwire::scenario::is_stdin(p) {
            files.push(p.clone());
            continue;
        }
        match std::fs::metadata(p) {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                bad.push(format!("{}: no such file or folder", p.display()))
            }
            Err(e) => bad.push(format!("{}: cannot read: {e}", p.display())),
            Ok(m) if m.is_dir() => walk(p, &mut files, &mut bad),
            Ok(m) if m.is_file() => files.push(p.clone()),
            Ok(_) => bad.push(format!("{}: not a regular file: a scenario is read from a file", p.display())),
        }
    }
    if files.is_empty() && bad.is_empty() {
        bad.push(format!(
            "no scenario files (*.toml) in {}",
            paths.iter().map(|p| p.display().to_string()).collect::<Vec<_>>().join(", ")
        ));
    }
    (files, bad)
}

fn walk(dir: &Path, files: &mut Vec<PathBuf>, bad: &mut Vec<String>) {
    let shown = |p: Option<&Path>| p.map_or_else(|| dir.display().to_string(), |x| x.display().to_string());
    for entry in walkdir::WalkDir::new(dir).follow_links(true).sort_by_file_name() {
        match entry {
            Ok(e) => {
                let is_toml = e.path().extension().and_then(|x| x.to_str()) == Some("toml");
                if !is_toml || e.file_type().is_dir() {
                    continue;
                }
                if e.file_type().is_file() {
                    files.push(e.into_path());
                } else {
                    bad.push(format!("{}: not a regular file: a scenario is read from a file", e.path().display()));
                }
            }
            Err(e) if e.loop_ancestor().is_some() => eprintln!(
                "note: {}: a symbolic link back into {}; not followed again",
                shown(e.path()),
                shown(e.loop_ancestor())
            ),
            Err(e) => bad.push(format!("{}: cannot read: {e}", shown(e.path()))),
        }
    }
}

/// Validate one scenario and its expectations (nothing runs).
fn prepare(
    path: &Path,
    overrides: &ScenarioOverrides,
    replications: u64,
) -> Result<(Spec, Vec<check::Resolved>), Failure> {
    let spec = overrides.load(path)?;
    let resolved = check::prepare(&halfwire::scenario::source_name(path), &spec, replications)?;
    Ok((spec, resolved))
}

pub fn check(args: CheckArgs) -> Result<u8, Failure> {
    let (files, mut bad) = collect(&args.paths);
    if let Some(j) = &args.junit {
        check_writable(j, &files.iter().map(PathBuf::as_path).collect::<Vec<_>>())?;
    }
    // Validate everything before running anything, and name every bad file.
    let mut work = Vec::new();
    for f in &files {
        match prepare(f, &args.overrides, args.replications.unwrap_or(1)) {
            Ok((spec, resolved)) => work.push((f.clone(), spec, resolved)),
            Err(e) => bad.push(e.message),
        }
    }
    if !bad.is_empty() {
        let n = bad.len();
        return Err(Failure::input(format!(
            "{}\n{n} {} cannot be checked; nothing was run",
            bad.join("\n"),
            if n == 1 { "path" } else { "paths" }
        )));
    }
    let jobs = super::output::jobs(args.jobs);
    if let Some(n) = args.replications {
        if !(2..=10_000).contains(&n) {
            return Err(Failure::input("--replications takes 2 to 10000 (an interval needs at least two)"));
        }
    }
    let results = run_all(&work, jobs, args.replications);
    let failed: usize = results.iter().map(|r| r.outcomes.iter().filter(|o| !o.pass).count()).sum();
    let total: usize = results.iter().map(|r| r.outcomes.len()).sum();
    if let Some(path) = &args.junit {
        let mut f = AtomicFile::create(path)?;
        f.write(junit(&results).as_bytes())?;
        f.commit()?;
    }
    let out = match args.format {
        Format::Json => {
            let v = serde_json::json!({ "scenarios": results, "expectations": total, "failed": failed });
            let mut s = serde_json::to_string_pretty(&v).expect("serializable");
            s.push('\n');
            s
        }
        Format::Text => render(&results, total, failed),
    };
    print_stdout(&out)?;
    Ok(if failed > 0 { super::status::FAILED } else { 0 })
}

/// Run the scenarios on `jobs` threads; results in file order whatever the
/// finishing order, so the output never depends on `jobs`.
fn run_all(
    work: &[(PathBuf, Spec, Vec<check::Resolved>)],
    jobs: usize,
    replications: Option<u64>,
) -> Vec<ScenarioResult> {
    let next = std::sync::atomic::AtomicUsize::new(0);
    let slots: Vec<std::sync::Mutex<Option<ScenarioResult>>> =
        work.iter().map(|_| std::sync::Mutex::new(None)).collect();
    std::thread::scope(|s| {
        for _ in 0..jobs.min(work.len()) {
            s.spawn(|| loop {
                let i = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                let Some((file, spec, resolved)) = work.get(i) else { break };
                let started = std::time::Instant::now();
                // Replications run one after another here: the scenarios already share the cores.
                let runs: Vec<_> = halfwire::replicate(spec, replications.unwrap_or(1), 1)
                    .iter()
                    .map(|r| check::flatten(&serde_json::to_value(r).expect("serializable")))
                    .collect();
                let outcomes = check::judge(resolved, &runs);
                *slots[i].lock().expect("no poisoned slot") = Some(ScenarioResult {
                    file: file.display().to_string(),
                    name: spec.name.clone(),
                    outcomes,
                    wall_s: started.elapsed().as_secs_f64(),
                });
            });
        }
    });
    slots.into_iter().map(|m| m.into_inner().expect("no poisoned slot").expect("every scenario ran")).collect()
}

fn render(results: &[ScenarioResult], total: usize, failed: usize) -> String {
    let mut o = String::new();
    for r in results {
        let _ = writeln!(o, "{} ({})", r.file, r.name);
        if r.outcomes.is_empty() {
            let _ = writeln!(o, "  (no expectations)");
        }
        for x in &r.outcomes {
            let verdict = if x.pass { "pass" } else { "FAIL" };
            let _ = write!(
                o,
                "  {verdict}  {} = {}  (required {} {})",
                x.metric,
                check::show(&x.metric, x.measured),
                x.op,
                check::show(&x.metric, x.required)
            );
            if let Some(m) = &x.message {
                let _ = write!(o, "  {m}");
            }
            let _ = writeln!(o);
        }
    }
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "{}, {}: {} passed, {} failed",
        halfwire::units::count(results.len() as u64, "scenario"),
        halfwire::units::count(total as u64, "expectation"),
        total - failed,
        failed
    );
    o
}

fn junit(results: &[ScenarioResult]) -> String {
    use quick_xml::events::{BytesDecl, BytesEnd, BytesStart, BytesText, Event};
    let mut w = quick_xml::Writer::new_with_indent(Vec::new(), b' ', 2);
    let total: usize = results.iter().map(|r| r.outcomes.len()).sum();
    let failed: usize = results.iter().map(|r| r.outcomes.iter().filter(|o| !o.pass).count()).sum();
    let _ = w.write_event(Event::Decl(BytesDecl::new("1.0", Some("UTF-8"), None)));
    let mut root = BytesStart::new("testsuites");
    root.push_attribute(("name", "halfwire check"));
    root.push_attribute(("tests", total.to_string().as_str()));
    root.push_attribute(("failures", failed.to_string().as_str()));
    let _ = w.write_event(Event::Start(root));
    for r in results {
        let fails = r.outcomes.iter().filter(|o| !o.pass).count();
        let mut suite = BytesStart::new("testsuite");
        suite.push_attribute(("name", r.name.as_str()));
        suite.push_attribute(("file", r.file.as_str()));
        suite.push_attribute(("tests", r.outcomes.len().to_string().as_str()));
        suite.push_attribute(("failures", fails.to_string().as_str()));
        suite.push_attribute(("time", format!("{:.3}", r.wall_s).as_str()));
        let _ = w.write_event(Event::Start(suite));
        for x in &r.outcomes {
            let name = format!("{} {} {}", x.metric, x.op, check::show(&x.metric, x.required));
            let mut case = BytesStart::new("testcase");
            case.push_attribute(("name", name.as_str()));
            case.push_attribute(("classname", r.name.as_str()));
            if x.pass {
                let _ = w.write_event(Event::Empty(case));
            } else {
                let _ = w.write_event(Event::Start(case));
                let detail = format!(
                    "{} measured {}, required {} {}{}",
                    x.metric,
                    check::show(&x.metric, x.measured),
                    x.op,
                    check::show(&x.metric, x.required),
                    x.message.as_deref().map(|m| format!(": {m}")).unwrap_or_default()
                );
                let mut failure = BytesStart::new("failure");
                failure.push_attribute(("message", detail.as_str()));
                let _ = w.write_event(Event::Start(failure));
                let _ = w.write_event(Event::Text(BytesText::new(&detail)));
                let _ = w.write_event(Event::End(BytesEnd::new("failure")));
                let _ = w.write_event(Event::End(BytesEnd::new("testcase")));
            }
        }
        let _ = w.write_event(Event::End(BytesEnd::new("testsuite")));
    }
    let _ = w.write_event(Event::End(BytesEnd::new("testsuites")));
    let mut s = String::from_utf8(w.into_inner()).expect("XML is UTF-8");
    s.push('\n');
    s
}
