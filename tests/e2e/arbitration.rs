//! Bitwise arbitration, through the built binary: the lowest identifier wins
//! when the bit time respects the loop-delay bound (documented in
//! `src/scheme/arbitration.rs`), worst-case latencies stay within the
//! response-time analysis of Davis, Burns, Bril & Lukkien, "Controller Area
//! Network (CAN) schedulability analysis: refuted, revisited and revised",
//! Real-Time Systems 35(3), 2007, and arbitration fails below the bound.

use crate::common;

use common::{halfwire, run_toml, section_times};

/// A periodic message: (identifier, period µs, jitter µs, payload bytes).
type Flow = (u64, u64, u64, u64);

/// Four nodes on a 30 m line (unequal spacing): (name, position m, messages).
const NODES: &[(&str, f64, &[Flow])] = &[
    ("engine", 0.0, &[(0x010, 1000, 20, 8), (0x300, 10_000, 0, 8)]),
    ("brakes", 4.0, &[(0x020, 2000, 50, 4)]),
    ("doors", 17.0, &[(0x100, 5000, 100, 8)]),
    ("lights", 30.0, &[(0x200, 4000, 0, 2), (0x400, 20_000, 500, 8)]),
];

fn scenario(bit_rate: &str, times: (&str, &str, &str)) -> String {
    let mut nodes = String::new();
    for (name, x, flows) in NODES {
        let traffic: Vec<String> = flows
            .iter()
            .map(|(id, period, jitter, bytes)| {
                format!(
                    "{{ pattern = \"periodic\", period = \"{period} us\", jitter = \"{jitter} us\", payload = \"{bytes} B\", id = {id} }}"
                )
            })
            .collect();
        nodes += &format!("[[node]]\nname = \"{name}\"\nposition = \"{x} m\"\ntraffic = [{}]\n", traffic.join(", "));
    }
    let (en, dis, rx) = times;
    format!(
        r#"
duration = "400 ms"
warmup = "20 ms"
[line]
length = "30 m"
impedance = "120 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "{en}"
disable_time = "{dis}"
receiver_delay = "{rx}"
load = "20 pF"
receiver = "type2"
[frame]
bit_rate = "{bit_rate}"
overhead_bits = 40
[access]
scheme = "arbitration"
id_bits = 11
idle_bits = 11
sample_point = 0.75
{nodes}"#
    )
}

/// Worst-case response time per identifier (seconds): the sufficient test
/// of Davis et al. (2007): w = max(B, C_m) + Σ_hp ⌈(w + J_k + τ_bit)/T_k⌉·C_k,
/// R = w + C_m, with B the longest lower-priority frame. Our "frame" C is
/// the worst time one message holds the bus: arbitration field, data bits,
/// the idle period before the next start bit, and the transceiver and wire
/// delays of one hand-over. Latency is measured from the actual (jittered)
/// arrival, so J enters only through the interference terms.
fn wcrt(tb: f64, d_max: f64, en: f64, dis: f64, rx: f64) -> Vec<(u64, f64)> {
    let flows: Vec<(u64, f64, f64, f64)> = NODES
        .iter()
        .flat_map(|(_, _, f)| f.iter())
        .map(|&(id, period, jitter, bytes)| {
            let c = (1.0 + 11.0 + 40.0 + 8.0 * bytes as f64 + 11.0) * tb + dis + d_max + rx + en;
            (id, period as f64 * 1e-6, jitter as f64 * 1e-6, c)
        })
        .collect();
    flows
        .iter()
        .map(|&(id, _, _, c)| {
            let blocking = flows.iter().filter(|f| f.0 > id).map(|f| f.3).fold(0.0, f64::max).max(c);
            let mut w = blocking;
            loop {
                let next = blocking
                    + flows.iter().filter(|f| f.0 < id).map(|f| ((w + f.2 + tb) / f.1).ceil() * f.3).sum::<f64>();
                if (next - w).abs() < 1e-15 {
                    break;
                }
                w = next;
            }
            (id, w + c)
        })
        .collect()
}

#[test]
fn above_the_bound_the_lowest_identifier_wins_within_the_response_time_bound() {
    let j = run_toml(&scenario("500 kbit/s", ("50 ns", "50 ns", "40 ns")));
    let s = &j["scheme"];
    // 500 kbit/s: 2 µs bits, against a bound of well under 1 µs on 30 m.
    assert!(s["min_bit_time_s"].as_f64().unwrap() < 1e-6);
    assert_eq!(s["priority_inversions"], 0, "the lowest identifier always wins");
    assert_eq!(s["arbitration_failures"], 0);
    assert!(s["lost"].as_u64().unwrap() > 10, "arbitration really happened");
    assert_eq!(j["frames"]["corrupted"], 0);
    assert_eq!(j["contention"]["events"], 0);
    // End-to-end delay: the loaded-line formula section by section.
    let nodes: Vec<(f64, f64)> = NODES.iter().map(|n| (n.1, 20e-12)).collect();
    let times = section_times(5e-9, 120.0, 30.0, &nodes);
    let bounds = wcrt(2e-6, times[3] - times[0], 50e-9, 50e-9, 40e-9);
    for (id, bound) in bounds {
        let key = format!("{id:#06x}");
        let observed = j["latency_s"]["ids"][&key]["max"].as_f64().unwrap();
        let count = j["latency_s"]["ids"][&key]["count"].as_u64().unwrap();
        eprintln!("{key}: {count} messages, worst {:.1} µs, bound {:.1} µs", observed * 1e6, bound * 1e6);
        assert!(count > 10);
        assert!(observed <= bound, "{key}: worst latency {observed} above the analysis bound {bound}");
    }
}

#[test]
fn below_the_bound_arbitration_fails() {
    // Fast transceivers (2 ns) but 30 m of line: at 100 Mbit/s a far
    // node's bits arrive many bits late, so two nodes can both finish the
    // identifier believing they won, and their frames collide.
    let j = run_toml(&scenario("100 Mbit/s", ("2 ns", "2 ns", "2 ns")));
    let s = &j["scheme"];
    assert!(s["bit_time_s"].as_f64().unwrap() < s["min_bit_time_s"].as_f64().unwrap());
    assert!(s["arbitration_failures"].as_u64().unwrap() > 0);
    assert!(j["contention"]["events"].as_u64().unwrap() > 0);
    assert!(j["frames"]["corrupted"].as_u64().unwrap() > 0);
}

#[test]
fn receivers_without_failsafe_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("a.toml");
    std::fs::write(&path, scenario("500 kbit/s", ("50 ns", "50 ns", "40 ns")).replace("type2", "type1")).unwrap();
    let out = halfwire(&["run", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("recessive") && err.contains("type1"), "{err}");
}
