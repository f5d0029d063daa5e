//! Shared helpers of the benchmarks: the scenarios they time.

use std::path::PathBuf;

/// A file in the benchmarks' folder.
pub fn path(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(name)
}

/// The reference polling bus (`reference-polling.toml`) as text.
pub fn reference_text() -> String {
    std::fs::read_to_string(path("reference-polling.toml")).expect("the reference scenario")
}
