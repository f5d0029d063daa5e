//! Polling under Poisson load against published queueing results.
//!
//! Mapping (exact for this model): a poll's arrival at a slave's receiver is
//! the server's arrival at that queue; a slave with a message extends the
//! visit by b = (Ld − Le)·tb over an empty visit (data reply instead of empty
//! reply); the empty visit itself is the switchover r. Waiting time W runs
//! from arrival to the snapshot at the slave, so each message's latency is
//! W + (T_s + e_s + Ld·tb + d(s,M) + r_M).

use crate::common;

use common::{mean_ci, par_map, pollaczek_khinchine, section_times, takagi, wire_ps, Bus};

const TB: f64 = 10e-9; // 100 Mbit/s
const LD: f64 = 560.0; // 48 overhead + 512 payload bits, NRZ
const LE: f64 = 16.0;
const LP: f64 = 32.0;

struct Setup {
    bus: Bus,
    b: f64,
    r: f64,
    lambda: f64,
}

/// One replication's mean wait (through the built binary).
fn mean_wait(bus: &Bus) -> f64 {
    let j = bus.run();
    // Wire delay slave → master from the handbook loaded-line formula, section by section.
    let mut nodes = vec![(0.0, 5e-12)];
    nodes.extend((0..bus.slaves).map(|i| (bus.first_m + bus.spacing_m * i as f64, 5e-12)));
    let times = section_times(5e-9, 100.0, bus.length_m, &nodes);
    let (mut sum, mut count) = (0.0, 0.0);
    for (name, l) in j["latency_s"]["nodes"].as_object().unwrap() {
        let k: f64 = name.trim_start_matches('s').parse().unwrap();
        let d = wire_ps(&times, 0, k as usize) as f64 * 1e-12;
        let tail = 20e-9 + 7e-9 + LD * TB + d + 5e-9;
        let n = l["count"].as_f64().unwrap();
        sum += (l["mean"].as_f64().unwrap() - tail) * n;
        count += n;
    }
    assert!(count > 1000.0, "too few messages: {count}");
    sum / count
}

fn setup(slaves: usize, rho: f64) -> Setup {
    let b = (LD - LE) * TB;
    // Empty visit: e_M + Lp·tb + d + r_s + T_s + e_s + Le·tb + d + r_M + T_M,
    // with d ≈ 0 on this 1 cm line (at most 60 ps; neglected, < 1e-4 of r).
    let r = 7e-9 + LP * TB + 5e-9 + 20e-9 + 7e-9 + LE * TB + 5e-9 + 30e-9;
    let lambda = rho / (slaves as f64 * b);
    let bus = Bus {
        length_m: 0.01,
        slaves,
        first_m: 0.001,
        spacing_m: 0.001,
        rate_per_s: lambda,
        duration: "300 ms",
        warmup: "10 ms",
        ..Bus::default()
    };
    Setup { bus, b, r, lambda }
}

fn replicate(s: &Setup, reps: u64) -> (f64, f64) {
    let seeds: Vec<u64> = (1..=reps).collect();
    let ws = par_map(&seeds, |&seed| mean_wait(&Bus { seed, ..s.bus.clone() }));
    mean_ci(&ws)
}

#[test]
fn reference_formulas_match_the_published_check_values() {
    // Takagi (1986) / Bertsekas & Gallager §3.5.2 check: N = 8, r = 0.1, b = 1
    // (deterministic), ρ = 0.5 gives W = 1.25, 1.35, 1.50.
    let lambda = 0.5 / 8.0;
    assert!((takagi::exhaustive(8.0, lambda, 1.0, 1.0, 0.1) - 1.25).abs() < 1e-12);
    assert!((takagi::gated(8.0, lambda, 1.0, 1.0, 0.1) - 1.35).abs() < 1e-12);
    assert!((takagi::one_limited(8.0, lambda, 1.0, 1.0, 0.1) - 1.50).abs() < 1e-12);
    // M/D/1 at ρ = 0.5, D = 1: W = 0.5 (Pollaczek–Khinchine).
    assert!((pollaczek_khinchine(0.5, 1.0, 0.5) - 0.5).abs() < 1e-12);
    // With no switchover a single 1-limited queue is exactly M/D/1.
    assert!((takagi::one_limited(1.0, 0.5, 1.0, 1.0, 0.0) - 0.5).abs() < 1e-12);
}

#[test]
fn one_limited_symmetric_polling_matches_takagi() {
    // Symmetric 1-limited polling, N = 8, ρ = 0.5 (Takagi 1986, deterministic switchover).
    let s = setup(8, 0.5);
    let expected = takagi::one_limited(8.0, s.lambda, s.b, s.b * s.b, s.r);
    let (mean, half) = replicate(&s, 30);
    eprintln!("W sim {mean:.4e} ± {half:.2e} s, Takagi {expected:.4e} s");
    assert!((mean - expected).abs() <= half, "W = {mean} ± {half}, expected {expected}");
    // The interval is tight enough to mean something: within 3 % of W.
    assert!(half < 0.03 * expected, "half-width {half}");
}

#[test]
fn single_slave_is_an_m_d_1_queue_with_switchover() {
    // One slave, 1-limited: the N = 1 case of the same result, an M/D/1 queue
    // whose server also spends r per visit; at r → 0 it is M/D/1 itself (see
    // the formula check above).
    let s = setup(1, 0.5);
    let expected = takagi::one_limited(1.0, s.lambda, s.b, s.b * s.b, s.r);
    let md1 = pollaczek_khinchine(s.lambda, s.b * s.b, 0.5);
    let (mean, half) = replicate(&s, 10);
    eprintln!("W sim {mean:.4e} ± {half:.2e} s, exact {expected:.4e} s, plain M/D/1 {md1:.4e} s");
    assert!((mean - expected).abs() <= half, "W = {mean} ± {half}, expected {expected}");
    assert!(mean > md1, "the switchover adds to the M/D/1 wait");
}
