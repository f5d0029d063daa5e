//! Reading and writing sweep rows: JSON lines, appended and flushed one
//! whole line at a time, and the optional CSV beside them.

use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use halfwire::sweep::row::Row;

use super::Failure;

/// Metrics given their own CSV column, in this order.
pub const CSV_METRICS: [&str; 14] = [
    "throughput.payload_bit_s",
    "throughput.carried",
    "latency_s.all.count",
    "latency_s.all.mean",
    "latency_s.all.p50",
    "latency_s.all.p99",
    "latency_s.all.p999",
    "latency_s.all.max",
    "contention.events",
    "contention.overlap_max_s",
    "floating.windows",
    "floating.longest_s",
    "frames.delivered",
    "frames.dropped",
];

/// Rows read from a file, and where a truncated last line was.
pub struct ReadRows {
    pub rows: Vec<Row>,
    /// Byte length of the complete lines, when the file ends in a partial line.
    pub truncated_at: Option<u64>,
}

/// Read a rows file. A last line without its newline is a row cut short by
/// a crash: it is left out (and reported). Any other bad line is an error.
pub fn read(path: &Path) -> Result<ReadRows, Failure> {
    let mut reader: Box<dyn BufRead> = if halfwire::scenario::is_stdin(path) {
        Box::new(BufReader::new(std::io::stdin()))
    } else {
        let file = File::open(path).map_err(|e| Failure::input(format!("{}: cannot read: {e}", path.display())))?;
        Box::new(BufReader::new(file))
    };
    let mut rows = Vec::new();
    let mut line = String::new();
    let mut offset = 0u64;
    let mut number = 0;
    loop {
        line.clear();
        let n =
            reader.read_line(&mut line).map_err(|e| Failure::input(format!("{}: cannot read: {e}", path.display())))?;
        if n == 0 {
            return Ok(ReadRows { rows, truncated_at: None });
        }
        number += 1;
        if !line.ends_with('\n') {
            return Ok(ReadRows { rows, truncated_at: Some(offset) });
        }
        offset += n as u64;
        if line.trim().is_empty() {
            continue;
        }
        let row: Row = serde_json::from_str(&line)
            .map_err(|e| Failure::input(format!("{}:{number}:{}: not a sweep row: {e}", path.display(), e.column())))?;
        if row.schema != halfwire::sweep::SCHEMA {
            return Err(Failure::input(format!(
                "{}:{number}: rows of format {:?}; this halfwire reads {}",
                path.display(),
                row.schema,
                halfwire::sweep::SCHEMA
            )));
        }
        rows.push(row);
    }
}

/// Where rows go: stdout or a file opened for appending.
pub enum Sink {
    Stdout,
    File(File, PathBuf),
}

impl Sink {
    pub fn append(path: &Path) -> Result<Sink, Failure> {
        let f = OpenOptions::new()
            .create(true)
            .append(true)
            .open(path)
            .map_err(|e| Failure::input(format!("{}: cannot open for writing: {e}", path.display())))?;
        Ok(Sink::File(f, path.to_owned()))
    }

    /// Cut a partial last line left by a crash, so the next row starts on a line of its own.
    pub fn truncate_partial(path: &Path, at: u64) -> Result<(), Failure> {
        let f = OpenOptions::new()
            .write(true)
            .open(path)
            .map_err(|e| Failure::input(format!("{}: cannot open for writing: {e}", path.display())))?;
        f.set_len(at).map_err(|e| Failure::input(format!("{}: cannot truncate: {e}", path.display())))?;
        Ok(())
    }

    /// Write one row as one JSON line and flush it.
    pub fn write(&mut self, row: &Row) -> Result<(), String> {
        let mut line = serde_json::to_string(row).expect("a row serializes");
        line.push('\n');
        match self {
            Sink::Stdout => {
                let mut out = std::io::stdout().lock();
                out.write_all(line.as_bytes()).and_then(|_| out.flush()).map_err(|e| format!("stdout: {e}"))
            }
            Sink::File(f, path) => f
                .write_all(line.as_bytes())
                .and_then(|_| f.flush())
                .map_err(|e| format!("{}: cannot write: {e}", path.display())),
        }
    }
}

/// What `sweep` and `merge` print on stdout.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum RowFormat {
    /// One JSON object per line: the full rows.
    Json,
    /// CSV: the headline columns of `--csv`.
    Csv,
}

/// The columns of the rows' CSV: `point`, `replication` (a sweep's
/// index) or `replications` (how many `merge` pooled), each parameter as
/// written and, for a key with a unit, in SI units, the headline metrics
/// and the failed expectations.
#[derive(Clone, Debug)]
pub struct CsvLayout {
    merged: bool,
    /// Per parameter: the unit of its SI column, if it has one. Fixed by
    /// [`CsvLayout::new`], or else by the first row, so every line has the
    /// header's columns.
    si: Option<Vec<Option<String>>>,
}

impl CsvLayout {
    /// `si`: per swept key, its unit when any of its values has one.
    pub fn new(merged: bool, si: Option<Vec<Option<String>>>) -> CsvLayout {
        CsvLayout { merged, si }
    }

    fn si(&mut self, row: &Row) -> &[Option<String>] {
        self.si.get_or_insert_with(|| row.params.iter().map(|p| p.unit.clone()).collect())
    }

    pub fn header(&mut self, row: &Row) -> Vec<String> {
        let merged = self.merged;
        let mut head = vec!["point".to_owned(), if merged { "replications" } else { "replication" }.to_owned()];
        for (p, unit) in row.params.iter().zip(self.si(row)) {
            head.push(p.key.clone());
            if let Some(u) = unit {
                head.push(format!("{} ({u})", p.key));
            }
        }
        head.extend(CSV_METRICS.iter().map(|m| metric_header(m)));
        head.push("expectations_failed".into());
        head
    }

    pub fn record(&mut self, row: &Row) -> Vec<String> {
        let replication = if self.merged {
            row.replications.len().to_string()
        } else {
            row.replications.iter().map(u64::to_string).collect::<Vec<_>>().join(" ")
        };
        let mut rec = vec![row.point.to_string(), replication];
        for (p, unit) in row.params.iter().zip(self.si(row)) {
            rec.push(p.value_text());
            if unit.is_some() {
                rec.push(p.si.filter(|_| p.unit.is_some()).map(|x| x.to_string()).unwrap_or_default());
            }
        }
        rec.extend(CSV_METRICS.iter().map(|m| row.metrics.get(*m).map(|x| x.to_string()).unwrap_or_default()));
        rec.push(row.expectations.failed.join(" "));
        rec
    }

    /// Whole rows as CSV text, with the header.
    pub fn text(mut self, rows: &[Row]) -> String {
        let mut w = csv::Writer::from_writer(Vec::new());
        if let Some(first) = rows.first() {
            w.write_record(self.header(first)).expect("writing into memory");
        }
        for r in rows {
            w.write_record(self.record(r)).expect("writing into memory");
        }
        String::from_utf8(w.into_inner().expect("writing into memory")).expect("CSV of UTF-8 fields")
    }
}

/// Rows as CSV appended to a file or stdout: one header, then one line per row.
pub struct Csv {
    writer: csv::Writer<Box<dyn Write>>,
    name: String,
    header_done: bool,
    layout: CsvLayout,
}

impl Csv {
    /// Append to a file (no header if it already holds lines).
    pub fn append(path: &Path, layout: CsvLayout) -> Result<Csv, Failure> {
        let mut f = OpenOptions::new()
            .create(true)
            .append(true)
            .open(path)
            .map_err(|e| Failure::input(format!("{}: cannot open for writing: {e}", path.display())))?;
        let empty = f.seek(SeekFrom::End(0)).map_err(|e| Failure::input(format!("{}: {e}", path.display())))? == 0;
        Ok(Csv {
            writer: csv::Writer::from_writer(Box::new(f)),
            name: path.display().to_string(),
            header_done: !empty,
            layout,
        })
    }

    /// To stdout.
    pub fn stdout(layout: CsvLayout) -> Csv {
        Csv {
            writer: csv::Writer::from_writer(Box::new(std::io::stdout())),
            name: "stdout".into(),
            header_done: false,
            layout,
        }
    }

    pub fn write(&mut self, row: &Row) -> Result<(), String> {
        let fail = |e: csv::Error| format!("{}: cannot write: {e}", self.name);
        if !self.header_done {
            self.writer.write_record(self.layout.header(row)).map_err(fail)?;
            self.header_done = true;
        }
        self.writer.write_record(self.layout.record(row)).map_err(fail)?;
        match self.writer.flush() {
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
            r => r.map_err(|e| format!("{}: cannot write: {e}", self.name)),
        }
    }
}

/// `latency_s.all.p99 (s)`: the metric with its unit, when it has one.
fn metric_header(m: &str) -> String {
    match halfwire::check::dimension_of(m) {
        Some(d) => format!("{m} ({})", halfwire::sweep::axis::base_unit(d)),
        None => m.to_owned(),
    }
}
