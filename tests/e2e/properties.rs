//! Property tests of engine invariants over randomly drawn small buses, each
//! run through the built binary.

use crate::common;

use common::Bus;
use proptest::prelude::*;
use serde_json::Value;

fn bus_strategy() -> impl Strategy<Value = (Bus, u64, u64)> {
    (1usize..6, 0u64..40, 0u64..40, 0u32..3, prop::bool::ANY, 0u64..4, 1u64..1000).prop_map(
        |(slaves, turn_ns, mturn_ns, mpp, type1, load_k, seed)| {
            let turn: &'static str = Box::leak(format!("{turn_ns} ns").into_boxed_str());
            let mturn: &'static str = Box::leak(format!("{mturn_ns} ns").into_boxed_str());
            let bus = Bus {
                slaves,
                turnaround: turn,
                master_turnaround: mturn,
                max_per_poll: mpp,
                receiver: if type1 { "type1" } else { "type2" },
                rate_per_s: load_k as f64 * 8_000.0,
                duration: "400 us",
                warmup: "20 us",
                seed,
                ..Bus::default()
            };
            (bus, turn_ns, mturn_ns)
        },
    )
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 32, ..ProptestConfig::default() })]

    #[test]
    fn engine_invariants((bus, turn_ns, mturn_ns) in bus_strategy()) {
        let j: Value = bus.run();
        // Utilization partitions the measured window.
        let u = &j["utilization"];
        let sum: f64 = ["payload", "overhead", "gaps", "idle", "wasted"]
            .iter().map(|k| u[k].as_f64().unwrap()).sum();
        prop_assert!((sum - 1.0).abs() < 1e-9, "utilization sums to {}", sum);
        // Every resolved data frame is delivered or corrupted.
        let f = &j["frames"];
        prop_assert_eq!(
            f["attempts"].as_u64().unwrap(),
            f["delivered"].as_u64().unwrap() + f["corrupted"].as_u64().unwrap()
        );
        // Contention exactly when a hand-over is too short: disable 9 ns,
        // receiver delay 5 ns, so a turnaround below 4 ns overlaps.
        let unsafe_handover = turn_ns < 4 || mturn_ns < 4;
        let events = j["contention"]["events"].as_u64().unwrap();
        prop_assert_eq!(events > 0, unsafe_handover, "contention {} turn {} mturn {}", events, turn_ns, mturn_ns);
        if !unsafe_handover {
            prop_assert_eq!(f["corrupted"].as_u64().unwrap(), 0);
            prop_assert_eq!(u["wasted"].as_f64().unwrap(), 0.0);
        }
        // Hand-over slack: negative exactly on the hand-overs that contend
        // (the closed-form slack against the overlap geometry, pair by pair),
        // and every contention here is a hand-over's.
        let h = &j["handover"];
        for p in h["pairs"].as_array().unwrap() {
            let (min, contended) = (p["slack_min_s"].as_f64().unwrap(), p["contended"].as_u64().unwrap());
            prop_assert_eq!(min < 0.0, contended > 0, "pair {}", p);
        }
        prop_assert_eq!(h["contended"].as_u64().unwrap() > 0, events > 0, "{} / {}", h, j["contention"]);
        // Without contention the tightest hand-over is the shorter turnaround
        // plus the receiver delay (5 ns) less the disable time (9 ns), exactly.
        if !unsafe_handover && h["count"].as_u64().unwrap() > 0 {
            let want = (turn_ns.min(mturn_ns) as i64 - 4) * 1000;
            prop_assert_eq!((h["slack_min_s"].as_f64().unwrap() * 1e12).round() as i64, want);
        }
        // No latency is shorter than a data frame's time on the wire (5.6 µs).
        let all = &j["latency_s"]["all"];
        if all["count"].as_u64().unwrap() > 0 {
            prop_assert!(all["p50"].as_f64().unwrap() >= 5.6e-6 * 0.999);
            prop_assert!(all["max"].as_f64().unwrap() >= all["p99"].as_f64().unwrap());
        }
        // Floating windows only where a receiver has no failsafe.
        if bus.receiver == "type2" {
            prop_assert_eq!(j["floating"]["windows"].as_u64().unwrap(), 0);
        } else {
            prop_assert!(j["floating"]["windows"].as_u64().unwrap() > 0);
        }
    }
}

/// Every demo (one or more per scheme), with a random seed, interframe gap and load.
fn demo_variant() -> impl Strategy<Value = (String, String)> {
    let demos: Vec<String> = [
        "fruit-grader",
        "buoy-link",
        "railcar-doors",
        "lighting-truss-tdma",
        "vineyard-probes",
        "greenhouse-csma",
        "solar-tracker-arbitration",
    ]
    .iter()
    .map(|d| d.to_string())
    .collect();
    (prop::sample::select(demos), 1u64..10_000, 0u64..3_000, 5u64..40).prop_map(|(demo, seed, gap_ns, load)| {
        let text = std::fs::read_to_string(format!("scenarios/{demo}.toml")).unwrap();
        let mut doc: toml_edit::DocumentMut = text.parse().unwrap();
        doc["seed"] = toml_edit::value(seed as i64);
        doc["frame"]["interframe_gap"] = toml_edit::value(format!("{gap_ns} ns"));
        // More load: every Poisson rate and periodic period scaled.
        let out = doc.to_string().lines().map(|l| scale_traffic(l, load)).collect::<Vec<_>>().join("\n");
        (demo, out)
    })
}

/// `rate = "R/s"` × k and `period = "P"` ÷ k within a traffic line (jitter is dropped).
fn scale_traffic(line: &str, k: u64) -> String {
    if k == 1 || !line.contains("pattern") {
        return line.to_owned();
    }
    let mut l = line.to_owned();
    if let Some(i) = l.find("rate = \"") {
        let start = i + 8;
        let end = start + l[start..].find('/').unwrap();
        let r: f64 = l[start..end].trim().parse().unwrap();
        l.replace_range(start..end, &format!("{}", r * k as f64));
    }
    if let Some(i) = l.find("period = \"") {
        let start = i + 10;
        let end = start + l[start..].find('"').unwrap();
        let p = halfwire::units::parse_time(&l[start..end]).unwrap();
        l.replace_range(start..end, &format!("{} ps", (p.0 / k).max(1)));
        if let Some(j) = l.find(", jitter = \"") {
            let e = j + 12 + l[j + 12..].find('"').unwrap() + 1;
            l.replace_range(j..e, "");
        }
    }
    l
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    /// Engine invariant: a node never asserts its enable before its previous
    /// occupancy is off plus the interframe gap (the dominant bits of an
    /// arbitration field, and the frame that continues it, are one frame).
    #[test]
    fn no_node_enables_before_its_previous_occupancy_is_off_plus_the_gap((demo, text) in demo_variant()) {
        use halfwire::bus::trace::BusEventKind;
        let mut spec = halfwire::scenario::parse_str(&text, &demo).unwrap();
        spec.duration = spec.duration.min(halfwire::units::Picos::from_ms(30));
        spec.warmup = halfwire::units::Picos::ZERO;
        let gap = spec.frame.interframe_gap.0;
        let window = Some((halfwire::units::Picos::ZERO, halfwire::units::Picos::MAX));
        let mut sim = halfwire::engine::Simulation::with_trace(&spec, halfwire::scheme::build(&spec), window);
        sim.run_until(spec.duration);
        let mut events = sim.finish().events;
        events.sort_by_key(|e| e.t);
        // Per node: (off of the previous occupancy, was it dominant).
        let mut last: Vec<Option<(u64, bool)>> = vec![None; spec.nodes.len()];
        let mut enables = 0;
        let mut dominant_open = vec![false; spec.nodes.len()];
        for e in &events {
            match e.kind {
                BusEventKind::DriverEnable { dominant } => {
                    enables += 1;
                    if let Some((off, prev_dominant)) = last[e.node] {
                        if !dominant && !prev_dominant {
                            prop_assert!(e.t >= off + gap,
                                "{demo}: {} enables at {} ps, before its previous off ({off} ps) + {gap} ps",
                                spec.nodes[e.node].name, e.t);
                        }
                    }
                    dominant_open[e.node] = dominant;
                }
                BusEventKind::DriverOff => last[e.node] = Some((e.t, dominant_open[e.node])),
                _ => {}
            }
        }
        prop_assert!(enables > 0, "{demo}: no driver enabled");
    }
}
