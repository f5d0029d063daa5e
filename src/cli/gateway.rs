//! The TCP side of co-simulation: one tokio task pair per client (reader and
//! writer), channels to the engine, and per-message wall-clock time-outs.
//! The engine runs on a blocking thread and calls [`TcpGateway::exchange`].

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{mpsc, Arc};
use std::time::{Duration, Instant};

use halfwire::cosim;
use halfwire::engine::external::{Batch, Gateway, Intent};
use halfwire::spec::{NodeId, Spec};
use halfwire::units::Picos;
use tokio::io::{AsyncWriteExt, BufReader};
use tokio::net::TcpStream;
use tokio::sync::mpsc as amp;

/// What a client's reader task reports.
#[derive(Debug)]
pub enum Incoming {
    Line(String),
    Closed(String),
}

/// What a client's writer task is asked to do.
#[derive(Debug)]
pub enum Outgoing {
    Line(String),
    Close,
}

/// One connected client.
#[derive(Debug)]
pub struct Client {
    pub out: amp::UnboundedSender<Outgoing>,
    pub inbox: mpsc::Receiver<Incoming>,
    pub writer: tokio::task::JoinHandle<()>,
    /// Stopped when the client is dropped: a faulted client is not read any more.
    pub reader: tokio::task::JoinHandle<()>,
}

/// The longest line a client may send, without its newline (1 MiB): a
/// client that sends more is at fault, and memory stays bounded.
pub const MAX_LINE_BYTES: usize = 1 << 20;

/// Read one line of at most [`MAX_LINE_BYTES`]; `Ok(None)` at the end of the stream.
pub async fn read_line_bounded<R: tokio::io::AsyncBufRead + Unpin>(r: &mut R) -> Result<Option<String>, String> {
    use tokio::io::AsyncBufReadExt as _;
    let mut line = Vec::new();
    loop {
        let chunk = r.fill_buf().await.map_err(|e| format!("the connection failed: {e}"))?;
        if chunk.is_empty() {
            if line.is_empty() {
                return Ok(None);
            }
            break;
        }
        let (take, done) = match chunk.iter().position(|&b| b == b'\n') {
            Some(i) => (i, true),
            None => (chunk.len(), false),
        };
        line.extend_from_slice(&chunk[..take]);
        r.consume(take + usize::from(done));
        if line.len() > MAX_LINE_BYTES {
            return Err("the client sent a line longer than 1 MiB (the protocol's limit)".into());
        }
        if done {
            break;
        }
    }
    if line.last() == Some(&b'\r') {
        line.pop();
    }
    String::from_utf8(line).map(Some).map_err(|_| "the client sent a line that is not UTF-8".into())
}

/// Writer tasks of closed clients, awaited before the process exits so that
/// the last lines (an error, a bye) reach the clients.
pub type Writers = Arc<std::sync::Mutex<Vec<tokio::task::JoinHandle<()>>>>;

/// Start the reader and writer tasks of a connection (already past its first line).
pub fn spawn_client(
    reader: BufReader<tokio::net::tcp::OwnedReadHalf>,
    mut writer: tokio::net::tcp::OwnedWriteHalf,
) -> Client {
    let (in_tx, inbox) = mpsc::channel();
    let (out, mut out_rx) = amp::unbounded_channel::<Outgoing>();
    let mut reader = reader;
    let reader = tokio::spawn(async move {
        loop {
            match read_line_bounded(&mut reader).await {
                Ok(Some(l)) => {
                    if in_tx.send(Incoming::Line(l)).is_err() {
                        break;
                    }
                }
                Ok(None) => {
                    let _ = in_tx.send(Incoming::Closed("the client closed the connection".into()));
                    break;
                }
                Err(e) => {
                    let _ = in_tx.send(Incoming::Closed(e));
                    break;
                }
            }
        }
    });
    let writer = tokio::spawn(async move {
        while let Some(m) = out_rx.recv().await {
            match m {
                Outgoing::Line(l) => {
                    if writer.write_all(l.as_bytes()).await.is_err() || writer.flush().await.is_err() {
                        break;
                    }
                }
                Outgoing::Close => {
                    let _ = writer.shutdown().await;
                    break;
                }
            }
        }
    });
    Client { out, inbox, writer, reader }
}

/// Split a freshly accepted stream.
pub fn split(stream: TcpStream) -> (BufReader<tokio::net::tcp::OwnedReadHalf>, tokio::net::tcp::OwnedWriteHalf) {
    let (r, w) = stream.into_split();
    (BufReader::new(r), w)
}

#[derive(Debug)]
pub struct TcpGateway {
    pub spec: Spec,
    /// Per node: its client, while connected.
    pub clients: Vec<Option<Client>>,
    pub answer_timeout: Duration,
    pub interrupt: Arc<AtomicBool>,
    /// Wall time spent waiting for answers, for the speed figures.
    pub waited: Duration,
    pub writers: Writers,
}

impl TcpGateway {
    fn send(&self, node: NodeId, v: &serde_json::Value) {
        if let Some(c) = &self.clients[node] {
            let _ = c.out.send(Outgoing::Line(cosim::line(v)));
        }
    }
}

impl TcpGateway {
    fn drop_client(&mut self, node: NodeId) {
        if let Some(c) = self.clients[node].take() {
            c.reader.abort();
            let _ = c.out.send(Outgoing::Close);
            self.writers.lock().expect("no poisoned lock").push(c.writer);
        }
    }
}

impl Gateway for TcpGateway {
    fn exchange(&mut self, batch: &Batch) -> Result<Vec<Intent>, String> {
        let node = batch.node;
        let Some(client) = &self.clients[node] else {
            return Err("the node did not connect within --connect-timeout".into());
        };
        let _ = client.out.send(Outgoing::Line(cosim::line(&cosim::events_message(&self.spec, batch))));
        let started = Instant::now();
        let deadline = started + self.answer_timeout;
        let mut intents = Vec::new();
        loop {
            if self.interrupt.load(Ordering::SeqCst) {
                return Err("interrupted".into());
            }
            let now = Instant::now();
            if now >= deadline {
                return Err(format!(
                    "no answer within {} s of wall time (--answer-timeout): the node must end every answer with {{\"type\":\"wait\"}}",
                    self.answer_timeout.as_secs_f64()
                ));
            }
            // Wake at least every 100 ms to notice Ctrl-C.
            let slice = (deadline - now).min(Duration::from_millis(100));
            match client.inbox.recv_timeout(slice) {
                Ok(Incoming::Line(l)) => {
                    if l.trim().is_empty() {
                        continue;
                    }
                    let msg = cosim::parse_line(&l)?;
                    match cosim::to_intent(&self.spec, node, msg)? {
                        Some(i) => intents.push(i),
                        None => {
                            self.waited += started.elapsed();
                            return Ok(intents);
                        }
                    }
                }
                Ok(Incoming::Closed(why)) => return Err(format!("{why} in the middle of the run")),
                Err(mpsc::RecvTimeoutError::Timeout) => {}
                Err(mpsc::RecvTimeoutError::Disconnected) => return Err("the connection was lost".into()),
            }
        }
    }

    fn fault(&mut self, node: NodeId, at: Picos, message: &str) {
        self.send(node, &cosim::error_message(message, Some(at)));
        self.drop_client(node);
    }

    fn close(&mut self, at: Picos, reason: &str) {
        for node in 0..self.clients.len() {
            self.send(node, &cosim::bye_message(at, reason));
            self.drop_client(node);
        }
    }

    fn interrupted(&self) -> bool {
        self.interrupt.load(Ordering::SeqCst)
    }
}
