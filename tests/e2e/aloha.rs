//! ALOHA throughput against the classic results: S = G·e^(−2G) for pure
//! ALOHA (Abramson 1970) and S = G·e^(−G) for slotted ALOHA (Roberts 1972);
//! see also Bertsekas & Gallager, Data Networks, §4.2.
//!
//! Setting: 1000 nodes at one point (no wire delay), zero enable and disable
//! times, 5.6 µs frames; each node holds one message at a time (queue_limit
//! = 1, so a new message is sent on arrival and attempts stay close to the
//! Poisson assumption) and backs off exponentially, 5 ms on average (~900
//! frame times). G and S come from each run through the built binary:
//! `throughput.offered` counts every transmission, `throughput.carried` the
//! delivered ones.
//!
//! Tolerance: the 95 % confidence interval of 10 replications (Student t,
//! t(0.975; 9) = 2.262), widened by 0.5 % of S for the finite population:
//! the published results are for infinitely many senders, and 1000 senders
//! shift S by a few tenths of a percent (measured while building this test).

use crate::common;

use common::{mean_ci, par_map, run_toml};

fn scenario(slotted: bool, rate: f64, seed: u64) -> String {
    format!(
        r#"
seed = {seed}
duration = "500 ms"
warmup = "100 ms"
[line]
length = "1 m"
impedance = "100 ohm"
delay = "5 ns/m"
[transceiver]
drive_current = "11.3 mA"
enable_time = "0 s"
disable_time = "0 s"
receiver_delay = "0 s"
load = "1 pF"
receiver = "type2"
[frame]
bit_rate = "100 Mbit/s"
overhead_bits = 48
[access]
scheme = "aloha"
slotted = {slotted}
ack_timeout = "100 ns"
backoff = {{ mean = "5 ms" }}
[nodes]
count = 1000
first = "0 m"
spacing = "0 m"
prefix = "n"
traffic = {{ pattern = "poisson", rate = "{rate}/s", payload = "64 B", queue_limit = 1 }}
"#
    )
}

/// Mean G, mean S and the residual S − f(G) with its 95 % half-width over 10 replications.
fn measure(slotted: bool, rate: f64, f: fn(f64) -> f64) -> (f64, f64, f64, f64) {
    let seeds: Vec<u64> = (1..=10).collect();
    let runs = par_map(&seeds, |&seed| {
        let j = run_toml(&scenario(slotted, rate, seed));
        (j["throughput"]["offered"].as_f64().unwrap(), j["throughput"]["carried"].as_f64().unwrap())
    });
    let gs: Vec<f64> = runs.iter().map(|r| r.0).collect();
    let ss: Vec<f64> = runs.iter().map(|r| r.1).collect();
    let rs: Vec<f64> = runs.iter().map(|&(g, s)| s - f(g)).collect();
    let (residual, half) = mean_ci(&rs);
    (mean_ci(&gs).0, mean_ci(&ss).0, residual, half)
}

/// The finite-population allowance (see the module docs).
fn allowance(s: f64) -> f64 {
    0.005 * s
}

fn pure(g: f64) -> f64 {
    g * (-2.0 * g).exp()
}

fn slotted(g: f64) -> f64 {
    g * (-g).exp()
}

#[test]
fn pure_aloha_follows_g_exp_minus_2g() {
    for (rate, g_near) in [(20.0, 0.15), (45.0, 0.5), (100.0, 1.0)] {
        let (g, s, residual, half) = measure(false, rate, pure);
        eprintln!("pure: G {g:.3} S {s:.4} theory {:.4} residual {residual:+.5} ± {half:.5}", pure(g));
        assert!((g - g_near).abs() < 0.1, "G {g} should be near {g_near}");
        assert!(residual.abs() <= half + allowance(s), "S − G·e^(−2G) = {residual} ± {half} at G = {g}");
        if g_near == 0.5 {
            // The maximum, 1/(2e) = 0.18394 at G = 0.5.
            assert!((s - 1.0 / (2.0 * std::f64::consts::E)).abs() < 0.003, "S {s} at G {g}");
        }
    }
}

#[test]
fn slotted_aloha_follows_g_exp_minus_g() {
    for (rate, g_near) in [(60.0, 0.45), (160.0, 1.0), (500.0, 1.33)] {
        let (g, s, residual, half) = measure(true, rate, slotted);
        eprintln!("slotted: G {g:.3} S {s:.4} theory {:.4} residual {residual:+.5} ± {half:.5}", slotted(g));
        assert!((g - g_near).abs() < 0.1, "G {g} should be near {g_near}");
        assert!(residual.abs() <= half + allowance(s), "S − G·e^(−G) = {residual} ± {half} at G = {g}");
        if g_near == 1.0 {
            // The maximum, 1/e = 0.36788 at G = 1.
            assert!((s - 1.0 / std::f64::consts::E).abs() < 0.004, "S {s} at G {g}");
        }
    }
}
