//! Writing output files without ever leaving a partial one behind.

use std::io::Write;
use std::path::Path;

use super::Failure;

/// Write `data` to `path` through a temporary file in the same folder, renamed
/// into place only once complete.
pub fn write_atomic(path: &Path, data: &[u8]) -> Result<(), Failure> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    if !dir.is_dir() {
        return Err(Failure::input(format!(
            "{}: the folder {} does not exist",
            path.display(),
            dir.display()
        )));
    }
    let fail = |e: std::io::Error| Failure::input(format!("{}: cannot write: {e}", path.display()));
    let mut tmp = tempfile::NamedTempFile::new_in(dir).map_err(fail)?;
    tmp.write_all(data).map_err(fail)?;
    tmp.flush().map_err(fail)?;
    tmp.persist(path).map_err(|e| fail(e.error))?;
    Ok(())
}

/// Check early that an output path can be written, before a long run.
pub fn check_writable(path: &Path) -> Result<(), Failure> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    if !dir.is_dir() {
        return Err(Failure::input(format!(
            "{}: the folder {} does not exist",
            path.display(),
            dir.display()
        )));
    }
    Ok(())
}
