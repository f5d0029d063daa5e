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
