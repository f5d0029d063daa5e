//! TDMA against bounds derived from the documented timing model (see
//! `src/scheme/tdma.rs`): the guard needed for a hand-over, and throughput
//! equal to the analytic slot utilisation. Through the built binary.

use crate::common;

use common::{run_toml, section_times, tdma_pair, wire_ps};
use serde_json::Value;

const EN: f64 = 7e-9;
const DIS: f64 = 9e-9;
const DUR: f64 = 5.6e-6; // 560 bits at 100 Mbit/s

fn contention(j: &Value) -> u64 {
    j["contention"]["events"].as_u64().unwrap()
}

#[test]
fn guard_bound_with_clock_error() {
    // P's clock is exact and its frame fills its slot (L_P = g + e + T), so P
    // releases exactly at its slot's end, O_R = L_P after the beacon. R's
    // clock runs 100 ppm fast (ε), so it enables early. With every node
    // compensating the beacon's delay, R enables at (O_R + g)/(1+ε) and P's
    // tail reaches R at O_R + disable + d(P,R). Safe iff
    //   g ≥ (disable + d)(1+ε) + ε(e + T)) / (1 − ε)
    // — the disable time, the wire delay between consecutive owners and the
    // clock error accumulated since the beacon.
    let eps = 100e-6;
    // d(P,R): the loaded-line formula section by section (tk 0 m, P 2 m, R 9 m, 5 pF each).
    let times = section_times(5e-9, 100.0, 10.0, &[(0.0, 5e-12), (2.0, 5e-12), (9.0, 5e-12)]);
    let d = wire_ps(&times, 1, 2) as f64 * 1e-12;
    let g_star = ((DIS + d) * (1.0 + eps) + eps * (EN + DUR)) / (1.0 - eps);
    let run = |g: f64| {
        let g_ps = (g * 1e12).round() as u64;
        let slot_p = g_ps + 7_000 + 5_600_000;
        let slot_r = slot_p + 1_000_000;
        run_toml(&tdma_pair(g_ps, slot_p, slot_r, "compensate = true\nclock_ppm = { r = 100.0 }"))
    };
    let safe = run(g_star + 3e-12); // ±3 ps: each clock conversion is rounded to the picosecond
    let short = run(g_star - 3e-12);
    eprintln!("g* = {:.3} ns; contention {} above, {} below", g_star * 1e9, contention(&safe), contention(&short));
    assert_eq!(contention(&safe), 0, "3 ps above the bound: no contention");
    assert!(contention(&short) > 0, "3 ps below the bound: contention");
    assert!(safe["frames"]["delivered"].as_u64().unwrap() > 1000);
    // Without the clock error the same guard is ample; without compensation
    // the lag difference (R is 7 m further from the timekeeper) helps R here.
    let exact = run_toml(&tdma_pair(
        ((DIS + d) * 1e12).round() as u64 + 1_000,
        ((DIS + d) * 1e12).round() as u64 + 1_000 + 5_607_000,
        10_000_000,
        "compensate = true",
    ));
    assert_eq!(contention(&exact), 0);
}

#[test]
fn throughput_equals_the_slot_utilisation() {
    // Two frames fit each slot: L = g + e + 2T + ifg + 100 ns slack.
    let g = 100_000u64;
    let slot = g + 7_000 + 2 * 5_600_000 + 40_000 + 100_000;
    let j = run_toml(&tdma_pair(g, slot, slot, ""));
    // Cycle = beacon slot (g + e + 32 bits) + both slots.
    let cycle = (g + 7_000 + 320_000 + 2 * slot) as f64 * 1e-12;
    let expected = 4.0 * DUR / cycle;
    let carried = j["throughput"]["carried"].as_f64().unwrap();
    let window = j["simulated_s"].as_f64().unwrap();
    // Counted by delivery inside the window: at most one cycle off at each edge.
    let edge = 2.0 * 4.0 * DUR / window;
    eprintln!("carried {carried:.5}, slot utilisation {expected:.5} ± {edge:.5}");
    assert!((carried - expected).abs() <= edge, "carried {carried} vs {expected}");
    assert!((j["scheme"]["cycle_s"].as_f64().unwrap() - cycle).abs() < 1e-15);
    let usable = j["scheme"]["usable_fraction"].as_f64().unwrap();
    assert!((usable - 2.0 * (slot - g - 7_000) as f64 * 1e-12 / cycle).abs() < 1e-12);
    assert_eq!(contention(&j), 0);
}

#[test]
fn a_slot_too_short_for_a_frame_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.toml");
    std::fs::write(&path, tdma_pair(100_000, 1_000_000, 10_000_000, "")).unwrap();
    let out = common::halfwire(&["run", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("access.slots[0]") && err.contains("cannot hold"), "{err}");
}
