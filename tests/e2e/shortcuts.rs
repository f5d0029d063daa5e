//! Closed-form stretches are exact: with and without them (`Spec::shortcuts`,
//! the CLI's `--no-shortcuts`), every report is byte-identical apart from
//! `run`, and the bus events of a trace window are the same, over random
//! variants of every demo (every scheme) and on the demos themselves. The
//! reference is the event path of the same engine, which the rest of the
//! test suite checks against published results.

use halfwire::bus::trace::BusEvent;
use halfwire::engine::Simulation;
use halfwire::report::Report;
use halfwire::spec::Spec;
use halfwire::units::Picos;
use rand::{Rng, SeedableRng};

const DEMOS: [&str; 11] = [
    "fruit-grader",
    "buoy-link",
    "railcar-doors",
    "lighting-truss-tdma",
    "vineyard-probes",
    "greenhouse-csma",
    "solar-tracker-arbitration",
    "crowded-backplane",
    "irrigation-valves",
    "lift-shaft-sensors",
    "sluice-gates-cosim",
];

/// `rate = "R/s"` × f, and `period` and `jitter` ÷ f, within a traffic line.
fn scale_traffic(line: &str, f: f64) -> String {
    if !line.contains("pattern") {
        return line.to_owned();
    }
    let mut l = line.to_owned();
    if let Some(i) = l.find("rate = \"") {
        let start = i + 8;
        let end = start + l[start..].find('/').unwrap();
        let r: f64 = l[start..end].trim().parse().unwrap();
        l.replace_range(start..end, &format!("{}", r * f));
    }
    for key in ["period = \"", "jitter = \""] {
        if let Some(i) = l.find(key) {
            let start = i + key.len();
            let end = start + l[start..].find('"').unwrap();
            let p = halfwire::units::parse_time(&l[start..end]).unwrap();
            l.replace_range(start..end, &format!("{} ps", ((p.0 as f64 / f) as u64).max(1)));
        }
    }
    l
}

/// A random variant of a demo: seed, load (often light, so periods repeat),
/// timing, warmup, and often fixed firmware latencies and exact clocks
/// (which closed-form periods need). Returns the scenario text.
fn variant(rng: &mut impl Rng) -> (String, String) {
    let demo = DEMOS[rng.random_range(0..DEMOS.len())];
    let text = std::fs::read_to_string(format!("scenarios/{demo}.toml")).unwrap();
    let mut doc: toml_edit::DocumentMut = text.parse().unwrap();
    doc["seed"] = toml_edit::value(rng.random_range(0..1_000_000i64));
    doc["timing"] = toml_edit::value(["typical", "worst", "random"][rng.random_range(0..3)]);
    doc["duration"] = toml_edit::value(format!("{} ms", rng.random_range(3..40)));
    doc["warmup"] = toml_edit::value(format!("{} us", rng.random_range(0..2000)));
    if rng.random_bool(0.8) {
        let access = doc["access"].as_table_mut().unwrap();
        if access.contains_key("response_latency") {
            access["response_latency"] = toml_edit::value(format!("{} ns", rng.random_range(0..3000)));
        }
        if access.contains_key("drift_ppm") {
            access["drift_ppm"] = toml_edit::value(0);
        }
    }
    let f = [0.0001, 0.001, 0.01, 0.1, 0.5, 1.0, 3.0][rng.random_range(0..7)];
    let out = doc.to_string().lines().map(|l| scale_traffic(l, f)).collect::<Vec<_>>().join("\n");
    (demo.to_owned(), out)
}

/// The report as JSON without `run`, the bus events of `window`, and the
/// periods done in closed form. `slices` > 1 runs the scenario in that
/// many `run_until` steps.
fn outcome(spec: &Spec, shortcuts: bool, window: Option<(Picos, Picos)>, slices: u64) -> (String, Vec<BusEvent>, u64) {
    let mut spec = spec.clone();
    spec.shortcuts = shortcuts;
    let mut sim = Simulation::with_trace(&spec, halfwire::scheme::build(&spec), window);
    let mut events = Vec::new();
    for k in 1..=slices {
        sim.run_until(Picos(spec.duration.0 / slices * k));
        events.extend(sim.drain_trace());
    }
    let mut finished = sim.finish();
    events.append(&mut finished.events);
    events.sort_by_key(|e| (e.t, e.node));
    let mut v = serde_json::to_value(Report::of(finished)).unwrap();
    let periods = v["run"]["closed_form_periods"].as_u64().unwrap();
    v.as_object_mut().unwrap().remove("run");
    (serde_json::to_string(&v).unwrap(), events, periods)
}

#[test]
fn closed_form_periods_change_nothing_on_600_random_scenarios() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(0x5eed_c10c);
    let (mut with_periods, mut periods_total) = (0, 0u64);
    for case in 0..600 {
        let (demo, text) = variant(&mut rng);
        let spec = halfwire::scenario::parse_str(&text, &demo).unwrap_or_else(|e| panic!("case {case}: {e}\n{text}"));
        let window = rng.random_bool(0.3).then(|| {
            let a = rng.random_range(0..spec.duration.0);
            (Picos(a), Picos(a + rng.random_range(0..spec.duration.0 / 4)))
        });
        let slices = if rng.random_bool(0.25) { rng.random_range(2..40) } else { 1 };
        let (fast, fast_events, periods) = outcome(&spec, true, window, slices);
        let (plain, plain_events, none) = outcome(&spec, false, window, slices);
        assert_eq!(none, 0, "case {case}: --no-shortcuts did periods in closed form");
        if fast != plain || fast_events != plain_events {
            let path = std::env::temp_dir().join(format!("halfwire-shortcut-case-{case}.toml"));
            std::fs::write(&path, &text).unwrap();
            panic!(
                "case {case} ({demo}, window {window:?}, {slices} slices): closed-form periods changed the {} \
                 (scenario in {})",
                if fast != plain { "report" } else { "bus events" },
                path.display()
            );
        }
        with_periods += u64::from(periods > 0);
        periods_total += periods;
    }
    eprintln!("{with_periods} of 600 cases had closed-form periods ({periods_total} in all)");
    // The comparison means something only if periods were done in closed form.
    assert!(with_periods >= 150, "only {with_periods} of 600 cases had closed-form periods ({periods_total} in all)");
}

#[test]
fn closed_form_periods_change_nothing_on_the_demos() {
    for demo in DEMOS {
        let text = std::fs::read_to_string(format!("scenarios/{demo}.toml")).unwrap();
        let spec = halfwire::scenario::parse_str(&text, demo).unwrap();
        let third = spec.duration.0 / 3;
        let window = Some((Picos(third), Picos(third + third / 10)));
        let (fast, fast_events, _) = outcome(&spec, true, window, 1);
        let (plain, plain_events, _) = outcome(&spec, false, window, 1);
        assert!(fast == plain && fast_events == plain_events, "{demo}");
    }
}

/// Through the binary: the `--events` log and the VCD of a window are
/// byte-identical with and without `--no-shortcuts` (and so is the JSON
/// report, less `run`), on demos made periodic (fixed firmware latency, exact
/// clocks, light load). With `--events` the periods outside the window are
/// done in closed form; waveforms (`--vcd`) trace the run from its start, so
/// they take the event path throughout and must agree trivially.
#[test]
fn event_logs_and_vcds_of_a_window_are_the_same_without_shortcuts() {
    let dir = std::env::temp_dir().join(format!("halfwire-shortcut-files-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for (demo, window) in
        [("fruit-grader", "40ms..40.3ms"), ("railcar-doors", "100ms..102ms"), ("lighting-truss-tdma", "200ms..201ms")]
    {
        let text = std::fs::read_to_string(format!("scenarios/{demo}.toml")).unwrap();
        let mut doc: toml_edit::DocumentMut = text.parse().unwrap();
        let access = doc["access"].as_table_mut().unwrap();
        if access.contains_key("response_latency") {
            access["response_latency"] = toml_edit::value("500 ns");
        }
        if access.contains_key("drift_ppm") {
            access["drift_ppm"] = toml_edit::value(0);
        }
        // A token watchdog's timer is always pending, which ends a stretch.
        for key in ["token_timeout", "recovery_node", "faults"] {
            access.remove(key);
        }
        let light = doc.to_string().lines().map(|l| scale_traffic(l, 0.05)).collect::<Vec<_>>().join("\n");
        let scenario = dir.join(format!("{demo}.toml"));
        std::fs::write(&scenario, light).unwrap();
        for (flag, ext, skips) in [("--events", "jsonl", true), ("--vcd", "vcd", false)] {
            let mut outputs = Vec::new();
            for extra in [None, Some("--no-shortcuts")] {
                let file = dir.join(format!("{demo}-{}.{ext}", extra.is_some()));
                let mut args = vec![
                    "run",
                    scenario.to_str().unwrap(),
                    "--format",
                    "json",
                    "--window",
                    window,
                    flag,
                    file.to_str().unwrap(),
                ];
                args.extend(extra);
                let out = crate::common::halfwire(&args);
                assert!(out.status.success(), "{demo}: {}", String::from_utf8_lossy(&out.stderr));
                let mut report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
                let periods = report["run"]["closed_form_periods"].as_u64().unwrap();
                report.as_object_mut().unwrap().remove("run");
                outputs.push((report, std::fs::read(&file).unwrap(), periods));
            }
            let (fast, plain) = (&outputs[0], &outputs[1]);
            if skips {
                assert!(fast.2 > 10, "{demo}: only {} periods in closed form", fast.2);
            }
            assert_eq!(plain.2, 0, "{demo}");
            assert!(fast.1.len() > 100, "{demo}: the window holds events");
            assert_eq!(fast.0, plain.0, "{demo} {flag}: report");
            assert!(fast.1 == plain.1, "{demo}: {flag} output");
        }
    }
    std::fs::remove_dir_all(&dir).ok();
}
