//! JSON rendering of a [`Report`].

use super::Report;

/// The report as one pretty-printed JSON document (with a trailing newline).
pub fn render(report: &Report) -> String {
    let mut s = serde_json::to_string_pretty(report).expect("a report always serializes");
    s.push('\n');
    s
}
