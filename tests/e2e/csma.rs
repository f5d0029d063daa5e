//! CSMA against published results, through the built binary.
//!
//! - Non-persistent CSMA: Kleinrock & Tobagi, "Packet switching in radio
//!   channels: Part I", IEEE Trans. Commun. COM-23(12), 1975:
//!   S = G·e^(−aG) / (G(1 + 2a) + e^(−aG)), with a = τ/T and G counting every
//!   channel access attempt, rescheduled ones included.
//! - CSMA/CD efficiency: Metcalfe & Boggs, "Ethernet: distributed packet
//!   switching for local computer networks", CACM 19(7), 1976:
//!   E = (P/C) / (P/C + W·T_slot), W = (1 − A)/A, A = (1 − 1/Q)^(Q−1). Its
//!   assumptions: Q stations always ready; in every contention slot each
//!   transmits with probability 1/Q; a collision costs one slot; no jam.
//!
//! Every pair of nodes is equally far apart, as the analyses assume: all
//! nodes sit at one point and the sensing latency τ is the receiver delay.
//! Frames last T = 5.6 µs; enable and disable times are zero.

use crate::common;

use common::{mean_ci, par_map, run_toml};
use serde_json::Value;

const T: f64 = 5.6e-6;

fn kt_non_persistent(g: f64, a: f64) -> f64 {
    g * (-a * g).exp() / (g * (1.0 + 2.0 * a) + (-a * g).exp())
}

fn kt_one_persistent(g: f64, a: f64) -> f64 {
    let num = g * (1.0 + g + a * g * (1.0 + g + a * g / 2.0)) * (-g * (1.0 + 2.0 * a)).exp();
    let den = g * (1.0 + 2.0 * a) - (1.0 - (-a * g).exp()) + (1.0 + a * g) * (-g * (1.0 + a)).exp();
    num / den
}

fn metcalfe_boggs(q: f64, slot: f64) -> f64 {
    let a = (1.0 - 1.0 / q).powf(q - 1.0);
    let w = (1.0 - a) / a;
    T / (T + w * slot)
}

fn scenario(tau_ns: u64, nodes: usize, rate: f64, access: &str, seed: u64) -> String {
    format!(
        r#"
seed = {seed}
duration = "300 ms"
warmup = "50 ms"
[line]
length = "1 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "0 s"
disable_time = "0 s"
receiver_delay = "{tau_ns} ns"
load = "1 pF"
receiver = "type2"
[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 48
[access]
scheme = "csma"
{access}
[nodes]
count = {nodes}
first = "0 m"
spacing = "0 m"
prefix = "n"
traffic = {{ pattern = "poisson", rate = "{rate}/s", payload = "64 B", queue_limit = 1 }}
"#
    )
}

/// Ten replications: the reports.
fn runs(tau_ns: u64, nodes: usize, rate: f64, access: &str) -> Vec<Value> {
    let seeds: Vec<u64> = (1..=10).collect();
    par_map(&seeds, |&seed| run_toml(&scenario(tau_ns, nodes, rate, access, seed)))
}

fn g_s(j: &Value) -> (f64, f64) {
    (j["throughput"]["offered"].as_f64().unwrap(), j["throughput"]["carried"].as_f64().unwrap())
}

const NON_PERSISTENT: &str = "persistence = \"non\"\nack_timeout = \"1 us\"\nbackoff = { mean = \"300 us\" }";

#[test]
fn formula_check_values() {
    // Reference-sheet values for Kleinrock & Tobagi (1975) at a = 0.01.
    assert!((kt_non_persistent(1.0, 0.01) - 0.49255).abs() < 5e-6);
    assert!((kt_non_persistent(10.0, 0.01) - 0.81481).abs() < 5e-6);
    assert!((kt_one_persistent(1.0, 0.01) - 0.52864).abs() < 5e-6);
}

#[test]
fn non_persistent_csma_matches_kleinrock_tobagi() {
    // Tolerance: the 95 % interval of 10 replications (t(0.975; 9) = 2.262)
    // plus 0.5 % of S for 1000 senders standing in for infinitely many.
    for (tau_ns, a, rate, g_near) in
        [(56, 0.01, 95.0, 1.0), (56, 0.01, 300.0, 10.0), (560, 0.1, 60.0, 0.6), (560, 0.1, 100.0, 2.3)]
    {
        let reports = runs(tau_ns, 1000, rate, NON_PERSISTENT);
        let pts: Vec<(f64, f64)> = reports.iter().map(g_s).collect();
        let residuals: Vec<f64> = pts.iter().map(|&(g, s)| s - kt_non_persistent(g, a)).collect();
        let (r, half) = mean_ci(&residuals);
        let g = mean_ci(&pts.iter().map(|p| p.0).collect::<Vec<_>>()).0;
        let s = mean_ci(&pts.iter().map(|p| p.1).collect::<Vec<_>>()).0;
        eprintln!("a {a}: G {g:.3} S {s:.4} K&T {:.4} residual {r:+.5} ± {half:.5}", kt_non_persistent(g, a));
        assert!((g - g_near).abs() < 0.25 * g_near, "G {g} should be near {g_near}");
        assert!(r.abs() <= half + 0.005 * s, "S − K&T = {r} ± {half} at a = {a}, G = {g}");
    }
}

#[test]
fn collision_detection_beats_non_persistent_csma() {
    // The same senders at a = 0.1; with collision detection a collided
    // frame is cut short, so at the same offered G more of the line carries data.
    let cd = "persistence = \"non\"\ncollision_detect = true\nbackoff = { mean = \"300 us\" }\nmax_attempts = 0";
    for j in runs(560, 1000, 100.0, cd) {
        let (g, s) = g_s(&j);
        let plain = kt_non_persistent(g, 0.1);
        assert!(s > plain * 1.05, "CSMA/CD S {s} vs non-persistent {plain} at G {g}");
        assert!(j["scheme"]["collisions_detected"].as_u64().unwrap() > 0);
    }
}

#[test]
fn csma_cd_efficiency_under_metcalfe_boggs_assumptions() {
    // Q = 16 saturated stations, p-persistent with p = 1/Q, retrying at once
    // after a collision, no jam: the contention model Metcalfe & Boggs
    // analyse. The default slot (2τ + detection delay, rounded up to bit
    // times) is their T_slot.
    for (tau_ns, slot) in [(56u64, 170e-9), (560, 1.68e-6)] {
        let access = "persistence = 0.0625\ncollision_detect = true\njam_bits = 0\nbackoff = \"0 s\"\nmax_attempts = 0";
        let seeds: Vec<u64> = (1..=5).collect();
        let es = par_map(&seeds, |&seed| g_s(&run_toml(&scenario(tau_ns, 16, 100_000.0, access, seed))).1);
        let (e, half) = mean_ci(&es);
        let expected = metcalfe_boggs(16.0, slot);
        eprintln!("τ {tau_ns} ns: E {e:.4} ± {half:.4}, Metcalfe & Boggs {expected:.4}");
        assert!((e - expected).abs() < 0.02 * expected, "E {e} vs {expected}");
    }
}

#[test]
fn ethernet_style_backoff_stays_below_the_ideal_contention_bound() {
    // 1-persistent with binary exponential backoff and a 32-bit jam: every
    // waiting station starts as soon as the line goes quiet, so contention
    // costs more than under the ideal 1/Q rule; efficiency stays below
    // Metcalfe & Boggs' figure.
    let j = run_toml(&scenario(56, 16, 100_000.0, "persistence = 1\ncollision_detect = true", 1));
    let (_, e) = g_s(&j);
    let bound = metcalfe_boggs(16.0, 170e-9);
    assert!(e < bound && e > 0.75, "E {e}, bound {bound}");
    assert!(j["scheme"]["collisions_detected"].as_u64().unwrap() > 100);
    // (Stations that keep losing to a recent winner reach max_attempts and
    // give messages up: the capture effect of binary exponential backoff.)
}

#[test]
fn a_sender_keeps_the_interframe_gap_so_others_get_the_line() {
    // Saturated 1-persistent CSMA/CD with a 20 µs interframe gap: after each
    // frame the sender pauses, so waiting stations win the line in turn.
    let text = scenario(56, 8, 100_000.0, "persistence = 1\ncollision_detect = true", 1)
        .replace("overhead_bits = 48", "overhead_bits = 48\ninterframe_gap = \"20 us\"");
    let j = run_toml(&text);
    let senders =
        j["latency_s"]["nodes"].as_object().unwrap().values().filter(|l| l["count"].as_u64().unwrap() > 100).count();
    assert!(senders >= 7, "only {senders} of 8 stations got frames through");
}
