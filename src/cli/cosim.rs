//! `halfwire cosim`: run a scenario whose external nodes are driven by
//! other processes over loopback TCP, in lockstep virtual time.

use std::net::SocketAddr;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use clap::{Args, ValueEnum};
use halfwire::cosim::{self, ClientMessage};
use halfwire::engine::Simulation;
use halfwire::report::{json, text, Report, Warning};
use halfwire::spec::Spec;
use tokio::net::TcpListener;

use super::gateway::{self, Client, Outgoing, TcpGateway, Writers};
use super::output::print_stdout;
use super::output::say;
use super::run::Format;
use super::Failure;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum OnFault {
    /// End the run: exit 1, with the partial report.
    Abort,
    /// The faulty node goes quiet and the run continues.
    Silence,
}

#[derive(Debug, Args)]
pub struct CosimArgs {
    /// Scenario file (TOML) with one or more `external = true` nodes.
    pub file: PathBuf,
    /// Address to listen on; port 0 picks a free port (printed on stderr).
    #[arg(long, value_name = "ADDR:PORT", default_value = "127.0.0.1:0")]
    pub listen: String,
    /// Accept a non-loopback listen address (clients from other machines).
    #[arg(long)]
    pub allow_remote: bool,
    /// Wall-clock time to wait for every external node to connect and say hello (a time with a unit, e.g. "30 s").
    #[arg(long, value_name = "TIME", default_value = "30 s")]
    pub connect_timeout: String,
    /// Wall-clock time a node may take to answer one batch of events (a time with a unit).
    #[arg(long, value_name = "TIME", default_value = "10 s")]
    pub answer_timeout: String,
    /// What a client fault does to the run.
    #[arg(long, value_enum, default_value_t = OnFault::Abort)]
    pub on_client_fault: OnFault,
    /// Output format of the report on stdout.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    #[command(flatten)]
    pub overrides: super::overrides::ScenarioOverrides,
}

/// A wall-clock timeout: a time with a unit, more than 0 and at most a day.
fn seconds(what: &str, text: &str) -> Result<Duration, Failure> {
    let t = halfwire::units::parse_time(text).map_err(|e| Failure::input(format!("{what}: {e}")))?;
    if t < halfwire::units::Picos::from_ms(1) || t.as_secs_f64() > 86_400.0 {
        return Err(Failure::input(format!("{what} takes 1 ms to 1 day (86400 s), not {t}")));
    }
    Ok(Duration::from_nanos(t.0 / 1000))
}

pub fn cosim(args: CosimArgs) -> Result<u8, Failure> {
    let spec = args.overrides.load(&args.file)?;
    let external: Vec<usize> = (0..spec.nodes.len()).filter(|&i| spec.nodes[i].external).collect();
    if external.is_empty() {
        return Err(Failure::input(format!(
            "{}: the scenario has no external nodes: mark polling slaves with `external = true` in their [[node]] table",
            args.file.display()
        )));
    }
    let addr: SocketAddr = args.listen.parse().map_err(|e| {
        Failure::input(format!("--listen {:?}: not an address and port like 127.0.0.1:7400 ({e})", args.listen))
    })?;
    if !addr.ip().is_loopback() {
        if !args.allow_remote {
            return Err(Failure::input(format!(
                "--listen {addr}: refusing a non-loopback address, which lets other machines drive this run; \
                 add --allow-remote if that is what you want"
            )));
        }
        eprintln!("warning: listening on {addr}, reachable from other machines; the protocol has no authentication");
    }
    let connect = seconds("--connect-timeout", &args.connect_timeout)?;
    let answer = seconds("--answer-timeout", &args.answer_timeout)?;
    let runtime = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
        .map_err(|e| Failure::internal(format!("cannot start the network runtime: {e}")))?;
    runtime.block_on(session(spec, external, addr, connect, answer, args.on_client_fault, args.format))
}

/// Faults before the run (bad hellos, missing nodes): they become report lines.
struct EarlyFault {
    node: Option<String>,
    message: String,
}

async fn session(
    spec: Spec,
    external: Vec<usize>,
    addr: SocketAddr,
    connect: Duration,
    answer: Duration,
    on_fault: OnFault,
    format: Format,
) -> Result<u8, Failure> {
    let listener =
        TcpListener::bind(addr).await.map_err(|e| Failure::input(format!("--listen {addr}: cannot listen: {e}")))?;
    let local = listener.local_addr().map_err(|e| Failure::internal(e.to_string()))?;
    say!(
        "halfwire cosim: listening on {local}; waiting for {}",
        halfwire::units::count(external.len() as u64, "external node")
    );
    let interrupt = Arc::new(AtomicBool::new(false));
    let flag = interrupt.clone();
    tokio::spawn(async move {
        if tokio::signal::ctrl_c().await.is_ok() {
            eprintln!("\ninterrupted: ending the run at the current virtual time");
            flag.store(true, Ordering::SeqCst);
        }
    });
    let writers: Writers = Arc::default();
    let mut clients: Vec<Option<Client>> = (0..spec.nodes.len()).map(|_| None).collect();
    let mut early: Vec<EarlyFault> = Vec::new();
    let deadline = tokio::time::Instant::now() + connect;
    let mut abort = false;
    while external.iter().any(|&n| clients[n].is_none()) && !interrupt.load(Ordering::SeqCst) {
        let accepted = tokio::select! {
            r = tokio::time::timeout_at(deadline, listener.accept()) => r,
            _ = tokio::time::sleep(Duration::from_millis(100)) => continue,
        };
        let Ok(Ok((stream, peer))) = accepted else { break };
        // One small line per message each way: send each at once.
        let _ = stream.set_nodelay(true);
        let (mut reader, writer) = gateway::split(stream);
        // A hello is awaited no longer than the answer time-out or the connect deadline.
        let hello_deadline = (tokio::time::Instant::now() + answer).min(deadline);
        let hello = tokio::time::timeout_at(hello_deadline, gateway::read_line_bounded(&mut reader)).await;
        let first = match &hello {
            Ok(Ok(Some(l))) => l.clone(),
            _ => String::new(),
        };
        let client = gateway::spawn_client(reader, writer);
        let outcome = match hello {
            Err(_) => Err("no hello within --answer-timeout (or before --connect-timeout ran out)".to_owned()),
            Ok(Err(e)) => Err(e),
            Ok(Ok(None)) => Err("the client closed the connection before its hello".to_owned()),
            Ok(Ok(Some(_))) => match cosim::parse_line(&first) {
                Ok(ClientMessage::Hello { protocol, node }) => check_hello(&spec, &clients, &protocol, &node),
                Ok(_) => Err("the first message must be a hello".to_owned()),
                Err(e) => Err(e),
            },
        };
        match outcome {
            Ok(n) => {
                let _ = client.out.send(Outgoing::Line(cosim::line(&cosim::welcome_message(&spec, n))));
                say!("halfwire cosim: {} connected from {peer}", spec.nodes[n].name);
                clients[n] = Some(client);
            }
            Err(message) => {
                let node = cosim::parse_line(&first).ok().and_then(|m| match m {
                    ClientMessage::Hello { node, .. } => Some(node),
                    _ => None,
                });
                eprintln!("halfwire cosim: refused a client from {peer}: {message}");
                let _ = client.out.send(Outgoing::Line(cosim::line(&cosim::error_message(&message, None))));
                let _ = client.out.send(Outgoing::Close);
                client.reader.abort();
                writers.lock().expect("no poisoned lock").push(client.writer);
                early.push(EarlyFault { node, message: format!("before the run, a client from {peer}: {message}") });
                if on_fault == OnFault::Abort {
                    abort = true;
                    break;
                }
            }
        }
    }
    for &n in &external {
        if clients[n].is_none() && !abort {
            eprintln!("halfwire cosim: {} did not connect within --connect-timeout", spec.nodes[n].name);
            // Under silence the run records it as the node's fault at its first event.
            if on_fault == OnFault::Abort {
                let message = format!("{} did not connect within --connect-timeout", spec.nodes[n].name);
                early.push(EarlyFault { node: Some(spec.nodes[n].name.clone()), message });
                abort = true;
            }
        }
    }
    let abort_on_fault = on_fault == OnFault::Abort;
    let gw = TcpGateway {
        spec: spec.clone(),
        clients,
        answer_timeout: answer,
        interrupt: interrupt.clone(),
        waited: Duration::ZERO,
        writers: writers.clone(),
    };
    let start_aborted = abort || interrupt.load(Ordering::SeqCst);
    let run_spec = spec.clone();
    let stopped = interrupt.clone();
    let (report, faults) = tokio::task::spawn_blocking(move || {
        let started = Instant::now();
        let mut sim =
            Simulation::with_gateway(&run_spec, halfwire::scheme::build(&run_spec), Box::new(gw), abort_on_fault);
        if start_aborted {
            sim.interrupt();
        }
        sim.run_until(run_spec.duration);
        let reason = if stopped.load(Ordering::SeqCst) {
            "interrupted"
        } else if sim.stalled().is_some() {
            "stalled"
        } else if sim.aborted().is_some() {
            "aborted"
        } else {
            "end"
        };
        sim.close_external(reason);
        let faults = sim.faults().len();
        let mut report = Report::of(sim.finish());
        report.set_wall_time(started.elapsed().as_secs_f64());
        (report, faults)
    })
    .await
    .map_err(|e| Failure::internal(format!("the simulation thread failed: {e}")))?;
    let handles: Vec<_> = std::mem::take(&mut *writers.lock().expect("no poisoned lock"));
    for h in handles {
        let _ = tokio::time::timeout(Duration::from_secs(2), h).await;
    }
    finish(report, early, faults, abort, &interrupt, format)
}

fn check_hello(spec: &Spec, clients: &[Option<Client>], protocol: &str, node: &str) -> Result<usize, String> {
    if protocol != cosim::PROTOCOL {
        return Err(format!("protocol {protocol:?} is not spoken here: this halfwire speaks {}", cosim::PROTOCOL));
    }
    let Some(n) = spec.nodes.iter().position(|x| x.name == node) else {
        return Err(format!("no node named {node:?} in the scenario"));
    };
    if !spec.nodes[n].external {
        let list: Vec<&str> = spec.nodes.iter().filter(|x| x.external).map(|x| x.name.as_str()).collect();
        return Err(format!("node {node:?} is not external (external nodes: {})", list.join(", ")));
    }
    if clients[n].is_some() {
        return Err(format!("node {node:?} is already connected: a duplicate hello"));
    }
    Ok(n)
}

fn finish(
    mut report: Report,
    early: Vec<EarlyFault>,
    faults: usize,
    abort: bool,
    interrupt: &AtomicBool,
    format: Format,
) -> Result<u8, Failure> {
    let early_count = early.len();
    for f in early {
        report.warnings.push(Warning { code: "cosim-client-fault", node: f.node, message: f.message });
    }
    let out = match format {
        Format::Json => json::render(&report),
        Format::Text => text::render_titled(&report, "halfwire cosim", console::colors_enabled()),
    };
    print_stdout(&out)?;
    if interrupt.load(Ordering::SeqCst) {
        return Ok(super::status::INTERRUPTED);
    }
    if let Some(at) = report.stalled_at_s {
        // As `run` does: the scenario and its clients never let time move on.
        eprintln!("error: {}", super::run::stall_message("the co-simulation", halfwire::units::format_seconds(at)));
        return Ok(2);
    }
    if abort || (report.aborted_at_s.is_some() && faults > 0) {
        eprintln!(
            "halfwire cosim: a client fault ended the run (--on-client-fault abort); the report above is partial"
        );
        return Ok(super::status::FAILED);
    }
    if faults + early_count > 0 {
        eprintln!(
            "halfwire cosim: {}; the faulty nodes went quiet (--on-client-fault silence)",
            halfwire::units::count((faults + early_count) as u64, "client fault")
        );
    }
    Ok(0)
}
