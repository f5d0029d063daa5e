//! ALOHA throughput against the classic results: S = G·e^(−2G) for pure
//! ALOHA (Abramson 1970) and S = G·e^(−G) for slotted ALOHA (Roberts 1972);
//! see also Bertsekas & Gallager, Data Networks, §4.2.
//!
//! Setting: 200 nodes at one point (no wire delay), zero enable and disable
//! times, 5.6 µs frames; each node holds one message at a time (queue_limit
//! = 1, so a new message is sent on arrival and attempts stay close to the
//! Poisson assumption) and backs off exponentially, 1 ms on average (~180
//! frame times). G and S come from the run: `throughput.offered` counts every
//! transmission, `throughput.carried` the delivered ones.

mod common;

use common::mean_ci;

fn scenario(slotted: bool, rate: f64, seed: u64) -> String {
    format!(
        r#"
seed = {seed}
duration = "400 ms"
warmup = "20 ms"
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
backoff = {{ mean = "1 ms" }}
[nodes]
count = 200
first = "0 m"
spacing = "0 m"
prefix = "n"
traffic = {{ pattern = "poisson", rate = "{rate}/s", payload = "64 B", queue_limit = 1 }}
"#
    )
}

/// Mean G, mean S and the residual S − f(G) with its 95 % half-width over 10 replications.
fn measure(slotted: bool, rate: f64, f: fn(f64) -> f64) -> (f64, f64, f64, f64) {
    let (mut gs, mut ss, mut rs) = (vec![], vec![], vec![]);
    for seed in 1..=10 {
        let spec = halfwire::scenario::parse_str(&scenario(slotted, rate, seed), "aloha.toml").unwrap();
        let r = halfwire::simulate(&spec);
        let (g, s) = (r.throughput.offered, r.throughput.carried);
        gs.push(g);
        ss.push(s);
        rs.push(s - f(g));
    }
    let (residual, half) = mean_ci(&rs);
    (mean_ci(&gs).0, mean_ci(&ss).0, residual, half)
}

fn pure(g: f64) -> f64 {
    g * (-2.0 * g).exp()
}

fn slotted(g: f64) -> f64 {
    g * (-g).exp()
}

#[test]
fn pure_aloha_follows_g_exp_minus_2g() {
    for (rate, g_near) in [(100.0, 0.2), (230.0, 0.5), (500.0, 1.0)] {
        let (g, s, residual, half) = measure(false, rate, pure);
        eprintln!("pure: G {g:.3} S {s:.4} theory {:.4} residual {residual:+.4} ± {half:.4}", pure(g));
        assert!((g - g_near).abs() < 0.15, "G {g} should be near {g_near}");
        assert!(residual.abs() <= half.max(1e-4), "S − G·e^(−2G) = {residual} ± {half} at G = {g}");
    }
    // Near the maximum the throughput is 1/(2e) = 0.18394.
    let (g, s, _, _) = measure(false, 230.0, pure);
    assert!((s - 1.0 / (2.0 * std::f64::consts::E)).abs() < 0.004, "S {s} at G {g}");
}

#[test]
fn slotted_aloha_follows_g_exp_minus_g() {
    for (rate, g_near) in [(300.0, 0.45), (850.0, 1.0), (5000.0, 1.4)] {
        let (g, s, residual, half) = measure(true, rate, slotted);
        eprintln!("slotted: G {g:.3} S {s:.4} theory {:.4} residual {residual:+.4} ± {half:.4}", slotted(g));
        assert!((g - g_near).abs() < 0.15, "G {g} should be near {g_near}");
        assert!(residual.abs() <= half.max(1e-4), "S − G·e^(−G) = {residual} ± {half} at G = {g}");
    }
    // Near the maximum the throughput is 1/e = 0.36788.
    let (g, s, _, _) = measure(true, 850.0, slotted);
    assert!((s - 1.0 / std::f64::consts::E).abs() < 0.006, "S {s} at G {g}");
}
