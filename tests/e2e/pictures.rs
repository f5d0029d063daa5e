//! Pictures: the VCD read back with the `vcd` crate's parser (not ours) and
//! checked against the `--events` log of the same run; the SVGs parsed with
//! roxmltree; the timing diagram and the VCD agreeing on their edges.

use crate::common;

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use common::halfwire;
use serde_json::Value;
use vcd::{Command, IdCode, Value as V};

/// The first contention of this demo (a pure-ALOHA collision between probe17
/// and probe32) lies inside this window.
const DEMO: &str = "scenarios/vineyard-probes.toml";
const WINDOW: &str = "2.0088s..2.0094s";
const FROM_PS: u64 = 2_008_800_000_000;
const TO_PS: u64 = 2_009_400_000_000;

fn ok(out: &std::process::Output) {
    assert!(out.status.success(), "status {:?}, stderr: {}", out.status, String::from_utf8_lossy(&out.stderr));
}

/// Every value change of every signal, by "scope.signal", as (time, value text).
fn read_vcd(path: &Path) -> BTreeMap<String, Vec<(u64, String)>> {
    let mut p = vcd::Parser::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let header = p.parse_header().unwrap();
    assert_eq!(header.timescale, Some((1, vcd::TimescaleUnit::PS)));
    let mut names: BTreeMap<IdCode, String> = BTreeMap::new();
    fn walk(items: &[vcd::ScopeItem], prefix: &str, names: &mut BTreeMap<IdCode, String>) {
        for it in items {
            match it {
                vcd::ScopeItem::Scope(s) => walk(&s.items, &format!("{prefix}{}.", s.identifier), names),
                vcd::ScopeItem::Var(v) => {
                    names.insert(v.code, format!("{prefix}{}", v.reference));
                }
                _ => {}
            }
        }
    }
    walk(&header.items, "", &mut names);
    let mut out: BTreeMap<String, Vec<(u64, String)>> = BTreeMap::new();
    let mut t = 0;
    let text = |v: &V| match v {
        V::V0 => "0",
        V::V1 => "1",
        V::X => "x",
        V::Z => "z",
    };
    for cmd in p {
        match cmd.unwrap() {
            Command::Timestamp(ts) => t = ts,
            Command::ChangeScalar(id, v) => out.entry(names[&id].clone()).or_default().push((t, text(&v).into())),
            Command::ChangeVector(id, v) => {
                out.entry(names[&id].clone()).or_default().push((t, v.iter().map(|b| text(&b)).collect()))
            }
            _ => {}
        }
    }
    out
}

/// The value of a signal at `t` (after the changes at `t`).
fn at(changes: &[(u64, String)], t: u64) -> &str {
    changes.iter().rev().find(|(ct, _)| *ct <= t).map(|(_, v)| v.as_str()).expect("a value at t")
}

fn events(path: &Path) -> Vec<Value> {
    std::fs::read_to_string(path).unwrap().lines().map(|l| serde_json::from_str(l).unwrap()).collect()
}

#[test]
fn the_vcd_matches_the_event_log_including_x_during_contention() {
    let dir = tempfile::tempdir().unwrap();
    let (vcd, log) = (dir.path().join("bus.vcd"), dir.path().join("events.jsonl"));
    ok(&halfwire(&[
        "run",
        DEMO,
        "--vcd",
        vcd.to_str().unwrap(),
        "--events",
        log.to_str().unwrap(),
        "--window",
        WINDOW,
    ]));
    let waves = read_vcd(&vcd);
    let spec = halfwire::scenario::load(Path::new(DEMO)).unwrap();
    for n in &spec.nodes {
        for s in ["enable", "line", "rx"] {
            assert!(waves.contains_key(&format!("bus.{}.{s}", n.name)), "missing {}.{s}", n.name);
        }
    }
    assert!(waves.contains_key("bus.drivers") && waves.contains_key("bus.contention"));
    let evs = events(&log);
    let mut checked = 0;
    let mut contention = None;
    for e in &evs {
        let t = e["t_ps"].as_u64().unwrap();
        let node = e["node"].as_str().unwrap();
        let sig = |s: &str| &waves[&format!("bus.{node}.{s}")];
        match e["event"].as_str().unwrap() {
            // The enable rises exactly at driver_enable and falls at driver_release;
            "driver_enable" => assert_eq!(at(sig("enable"), t), "1", "{node} enable at {t}"),
            "driver_release" => {
                assert_eq!(at(sig("enable"), t), "0", "{node} release at {t}");
                assert_eq!(at(sig("enable"), t - 1), "1");
            }
            // the output goes high-impedance at driver_off.
            "driver_off" => assert_eq!(at(sig("line"), t), "z", "{node} off at {t}"),
            "contention" => contention = Some(e.clone()),
            _ => continue,
        }
        checked += 1;
    }
    assert!(checked >= 4, "the window holds an enable, releases, offs and the contention: {checked}");
    let c = contention.expect("the window holds the demo's first contention");
    let t = c["t_ps"].as_u64().unwrap();
    let overlap = (c["overlap_s"].as_f64().unwrap() * 1e12).round() as u64;
    assert_eq!(at(&waves["bus.contention"], t), "1");
    assert_eq!(at(&waves["bus.contention"], t - 1), "0");
    assert_eq!(u32::from_str_radix(at(&waves["bus.drivers"], t + 1), 2), Ok(2), "two drivers on the line");
    // The worst position is a receiver's: there its output is x for the
    // whole overlap, delayed by the receiver (position from the event log).
    let pos = c["position_m"].as_f64().unwrap();
    let r = spec.nodes.iter().find(|n| (n.position_m - pos).abs() < 1e-9).expect("a node at the worst position");
    let rx = &waves[&format!("bus.{}.rx", r.name)];
    let d = r.transceiver.receiver_delay.0;
    assert_ne!(at(rx, t + d - 1), "x");
    assert_eq!(at(rx, t + d), "x");
    assert_eq!(at(rx, t + d + overlap - 1), "x");
    assert_ne!(at(rx, t + d + overlap), "x");
    // Changes stay inside the window.
    assert!(waves.values().flatten().all(|(t, _)| (FROM_PS..=TO_PS).contains(t)));
}

fn svg(path: &Path) -> String {
    let text = std::fs::read_to_string(path).unwrap();
    roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{}: not well-formed XML: {e}", path.display()));
    text
}

fn with_class<'a>(doc: &'a roxmltree::Document, class: &str) -> Vec<roxmltree::Node<'a, 'a>> {
    doc.descendants().filter(|n| n.attribute("class") == Some(class)).collect()
}

fn texts(doc: &roxmltree::Document) -> Vec<String> {
    doc.descendants().filter(|n| n.has_tag_name("text")).filter_map(|n| n.text().map(str::to_owned)).collect()
}

#[test]
fn the_timing_diagram_has_a_lane_per_node_and_the_vcd_edges() {
    let dir = tempfile::tempdir().unwrap();
    let (vcd, svg_path) = (dir.path().join("bus.vcd"), dir.path().join("bus.svg"));
    ok(&halfwire(&[
        "run",
        DEMO,
        "--vcd",
        vcd.to_str().unwrap(),
        "--plot-timing",
        svg_path.to_str().unwrap(),
        "--window",
        WINDOW,
    ]));
    let text = svg(&svg_path);
    let doc = roxmltree::Document::parse(&text).unwrap();
    let spec = halfwire::scenario::load(Path::new(DEMO)).unwrap();
    let lanes: Vec<&str> = with_class(&doc, "lane").iter().map(|n| n.attribute("data-node").unwrap()).collect();
    let names: Vec<&str> = spec.nodes.iter().map(|n| n.name.as_str()).collect();
    // 41 nodes: the idle lanes are hidden by default, leaving the two that drive, in node order.
    assert_eq!(lanes, ["probe17", "probe32"], "only the lanes of nodes that drive in the window");
    let labels = texts(&doc);
    assert!(
        labels.iter().any(|t| t.contains("2 of 41 nodes drive in the window (39 idle lanes hidden)")),
        "{labels:?}"
    );
    for l in ["line", "enable asserted", "two drivers at once (contention)", "data frame"] {
        assert!(labels.iter().any(|t| t == l), "label {l:?} missing");
    }
    // Times count from the window's start, which is stated once.
    let start = with_class(&doc, "window-start");
    assert_eq!(start[0].attribute("data-start-ps").unwrap(), FROM_PS.to_string());
    assert!(start[0].text().unwrap().starts_with("t = 0 at 2.009 s"), "{:?}", start[0].text());
    let ticks: Vec<&str> = with_class(&doc, "tick").iter().map(|n| n.text().unwrap()).collect();
    assert_eq!(ticks.first(), Some(&"0 µs"), "{ticks:?}");
    assert!(ticks.contains(&"600 µs"), "{ticks:?}");
    assert!(labels.iter().any(|t| t.starts_with("time since the window's start")), "{labels:?}");
    // Every lane on request.
    let all = dir.path().join("all.svg");
    ok(&halfwire(&["run", DEMO, "--plot-timing", all.to_str().unwrap(), "--window", WINDOW, "--idle-lanes", "show"]));
    let all_text = svg(&all);
    let all_doc = roxmltree::Document::parse(&all_text).unwrap();
    let all_lanes: Vec<&str> = with_class(&all_doc, "lane").iter().map(|n| n.attribute("data-node").unwrap()).collect();
    assert_eq!(all_lanes, names, "one lane per node, in node order");
    // Contention is banded on the lanes whose receivers see it, and nowhere else.
    let rx = read_vcd(&vcd);
    for lane in with_class(&all_doc, "lane") {
        let node = lane.attribute("data-node").unwrap();
        let class = |c: &str| lane.descendants().any(|n| n.attribute("class") == Some(c));
        // The VCD shows both an undriven and a contended input as x.
        let undefined = rx[&format!("bus.{node}.rx")].iter().any(|(t, v)| *t >= FROM_PS && *t <= TO_PS && v == "x");
        if class("rx-contended") {
            assert!(undefined, "{node}: a contention band, but its receiver never reads x");
        }
        assert_eq!(undefined, class("rx-contended") || class("floating"), "{node}");
    }

    assert!(!with_class(&doc, "contention").is_empty(), "the contention is highlighted");
    assert!(!with_class(&doc, "rx-contended").is_empty());
    // The diagram's enable and release marks are exactly the VCD's edges inside the window.
    let waves = read_vcd(&vcd);
    for (class, value) in [("edge-enable", "1"), ("edge-release", "0")] {
        let drawn: BTreeSet<u64> =
            with_class(&doc, class).iter().map(|n| n.attribute("data-t-ps").unwrap().parse().unwrap()).collect();
        let dumped: BTreeSet<u64> = names
            .iter()
            .flat_map(|n| waves[&format!("bus.{n}.enable")].iter())
            .filter(|(t, v)| *t > FROM_PS && v == value)
            .map(|(t, _)| *t)
            .collect();
        assert!(!drawn.is_empty(), "{class}");
        assert_eq!(drawn, dumped, "{class}: SVG and VCD disagree");
    }
}

#[test]
fn a_two_node_diagram_shows_floating_windows_and_gaps() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("buoy.svg");
    ok(&halfwire(&[
        "run",
        "scenarios/buoy-link.toml",
        "--plot-timing",
        p.to_str().unwrap(),
        "--window",
        "10ms..10.2ms",
    ]));
    let text = svg(&p);
    let doc = roxmltree::Document::parse(&text).unwrap();
    assert_eq!(with_class(&doc, "lane").len(), 2);
    assert!(!with_class(&doc, "floating").is_empty(), "type-1 receivers without bias float between drivers");
    let gaps = with_class(&doc, "gap");
    assert!(!gaps.is_empty());
    // Each gap is measured at the new driver's position: its label is its
    // length there and the node, and it is the enable less the other
    // driver's off time and the wire delay between the two.
    let gap_ps: i64 = gaps[0].attribute("data-gap-ps").unwrap().parse().unwrap();
    let at = gaps[0].attribute("data-at").unwrap();
    let label = format!("{} at {at}", halfwire::units::format_seconds(gap_ps as f64 / 1e12));
    assert!(texts(&doc).contains(&label), "gap label {label}");
    // Empty replies are named.
    assert!(texts(&doc).iter().any(|t| t == "empty reply"), "{:?}", texts(&doc));
}

#[test]
fn a_hand_over_that_contends_at_the_responder_is_labelled_as_an_overlap_there() {
    // A 2 km cable (about 10 µs end to end), 1 µs turnarounds and drivers
    // that take 3 µs to turn off: each node answers 1 µs after the other's
    // frame ends at its receiver, while that driver's output still reaches
    // it for about 2 µs more. Measured between the two drivers' own clocks
    // the hand-over looks like a gap of about 8 µs; at the responder it is
    // an overlap, which the simulation counts as contention.
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("long.svg");
    let sets = [
        "line.length=\"2 km\"",
        "node[1].position=\"2 km\"",
        "node[0].turnaround=\"1 us\"",
        "node[1].turnaround=\"1 us\"",
        "access.response_latency=\"0 s\"",
        "transceiver.disable_time=\"3 us\"",
    ];
    let mut args = vec!["run", "scenarios/buoy-link.toml"];
    for s in &sets {
        args.extend(["--set", s]);
    }
    let report = halfwire(&[&args[..], &["--format", "json"]].concat());
    let report: Value = serde_json::from_slice(&report.stdout).unwrap();
    let worst_ps = (report["contention"]["overlap_max_s"].as_f64().unwrap() * 1e12).round() as i64;
    assert!(worst_ps > 0);
    ok(&halfwire(&[&args[..], &["--plot-timing", p.to_str().unwrap(), "--window", "10ms..10.3ms"]].concat()));
    let text = svg(&p);
    let doc = roxmltree::Document::parse(&text).unwrap();
    let gaps = with_class(&doc, "gap");
    assert!(!gaps.is_empty());
    for g in &gaps {
        let gap: i64 = g.attribute("data-gap-ps").unwrap().parse().unwrap();
        assert_eq!(gap, -worst_ps, "each hand-over overlaps at its responder by the report's worst overlap");
    }
    let label = format!("overlap {} at sensor", halfwire::units::format_seconds(worst_ps as f64 / 1e12));
    assert!(texts(&doc).contains(&label), "{label} in {:?}", texts(&doc));
}

#[test]
fn latency_and_sweep_plots_hold_their_series_and_labels() {
    let dir = tempfile::tempdir().unwrap();
    let lat = dir.path().join("lat.svg");
    ok(&halfwire(&["run", "scenarios/railcar-doors.toml", "--plot-latency", lat.to_str().unwrap()]));
    let text = svg(&lat);
    let doc = roxmltree::Document::parse(&text).unwrap();
    let series: Vec<&str> = with_class(&doc, "series").iter().map(|n| n.attribute("data-name").unwrap()).collect();
    assert_eq!(series.len(), 9, "eight doors and all nodes: {series:?}");
    assert!(series.iter().any(|s| s.starts_with("door01 (")));
    let labels = texts(&doc);
    // An exceedance chart: the fraction of messages slower than each latency, "1 in N" on a log axis.
    for l in [
        "every message",
        "1 in 10",
        "1 in 100",
        "messages slower than this latency",
        "latency, arrival to delivery [s]",
    ] {
        assert!(labels.iter().any(|t| t == l), "{l} missing from {labels:?}");
    }
    // Each curve ends where its data does: one end mark per series, at 1 in its count.
    assert_eq!(with_class(&doc, "sample-end").len(), 9);
    // The demo's p99 ≤ 500 µs requirement on all nodes is drawn.
    let req = with_class(&doc, "requirement");
    assert_eq!(req.len(), 1);
    assert_eq!(req[0].attribute("data-label"), Some("requirement: p99 ≤ 500 µs (all)"));
    // A sweep whose low-load points fail the demo's throughput requirement.
    let plot = dir.path().join("sweep.svg");
    ok(&halfwire(&[
        "sweep",
        "scenarios/fruit-grader.toml",
        "--vary=nodes.traffic.rate=1000/s..3000/s step 1000/s",
        "--vary=access.turnaround=20ns,1us",
        "--duration",
        "20 ms",
        "--plot",
        plot.to_str().unwrap(),
        "--y",
        "latency_s.all.p99",
    ]));
    let text = svg(&plot);
    let doc = roxmltree::Document::parse(&text).unwrap();
    let series: Vec<&str> = with_class(&doc, "series").iter().map(|n| n.attribute("data-name").unwrap()).collect();
    assert_eq!(series, ["turnaround = 20ns", "turnaround = 1us"]);
    let labels = texts(&doc);
    assert!(labels.iter().any(|t| t == "Poisson rate per node [1/s]"), "{labels:?}");
    assert!(labels.iter().any(|t| t == "p99 latency, all nodes [s]"), "{labels:?}");
    // The demo's requirement on the plotted metric is a line; a ring marks
    // only the points that fail it, a square those failing another one.
    let req = with_class(&doc, "requirement");
    assert_eq!(req.len(), 1);
    assert_eq!(req[0].attribute("data-label"), Some("requirement: ≤ 150 µs"));
    assert!(labels.iter().any(|t| t == "fails the requirement on p99 latency, all nodes"));
    // 24 cards × 1000/s × 64 B is 12.3 Mbit/s, below the demo's 20 Mbit/s
    // requirement, while its p99 meets 150 µs at 20 ns: a square, not a ring.
    assert!(!with_class(&doc, "failed-other").is_empty());
    assert!(labels.iter().any(|t| t == "meets it, but fails another requirement"));
    let rows_failing_p99 = with_class(&doc, "failed").len();
    assert!(rows_failing_p99 >= 1, "the 1 µs turnaround at 3000/s misses the p99 requirement");
}

#[test]
fn bad_picture_input_is_an_error_with_exit_status_2() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("x.vcd");
    let f = f.to_str().unwrap();
    let cases: [(&[&str], &str); 6] = [
        (&["run", DEMO, "--vcd", f, "--window", "30s..31s"], "lies outside the simulated time"),
        (&["run", DEMO, "--plot-timing", f, "--window", "2ms..1ms"], "is after the end"),
        (&["run", DEMO, "--vcd", "/no/such/folder/x.vcd"], "does not exist"),
        (&["run", DEMO, "--plot-latency", "/no/such/folder/x.svg"], "does not exist"),
        (
            &["sweep", DEMO, "--vary=nodes.count=2,3", "--plot", f, "--y", "latency_s.all.p98"],
            "did you mean \"latency_s.all.p99\"",
        ),
        (
            &["sweep", DEMO, "--vary=nodes.count=2,3", "--plot", "/no/such/folder/x.svg", "--y", "throughput.carried"],
            "does not exist",
        ),
    ];
    for (args, needle) in cases {
        let out = halfwire(args);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert!(err.contains(needle), "{args:?}: {err}");
    }
    assert!(!Path::new(f).exists(), "no output file is left behind");
}
