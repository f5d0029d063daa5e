//! Writing output files without ever leaving a partial one behind.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

use super::Failure;

fn folder_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// Check early, before a long run, that an output path can be written and
/// is not one of the inputs.
pub fn check_writable(path: &Path, inputs: &[&Path]) -> Result<(), Failure> {
    let dir = folder_of(path);
    if !dir.is_dir() {
        return Err(Failure::input(format!("{}: the folder {} does not exist", path.display(), dir.display())));
    }
    if let Ok(out) = path.canonicalize() {
        for input in inputs {
            if input.canonicalize().is_ok_and(|i| i == out) {
                return Err(Failure::input(format!("{}: refusing to overwrite an input file", path.display())));
            }
        }
    }
    Ok(())
}

/// An output file written through a temporary file in the same folder and
/// renamed into place only by [`AtomicFile::commit`]; dropped uncommitted,
/// it leaves nothing behind.
pub struct AtomicFile {
    path: PathBuf,
    tmp: tempfile::NamedTempFile,
}

impl AtomicFile {
    pub fn create(path: &Path) -> Result<Self, Failure> {
        let tmp = tempfile::NamedTempFile::new_in(folder_of(path)).map_err(|e| fail(path, e))?;
        Ok(AtomicFile { path: path.to_owned(), tmp })
    }

    pub fn write(&mut self, data: &[u8]) -> Result<(), Failure> {
        self.tmp.write_all(data).map_err(|e| fail(&self.path, e))
    }

    /// A second handle on the temporary file, for writers that want to own one.
    pub fn handle(&self) -> Result<std::fs::File, Failure> {
        self.tmp.reopen().map_err(|e| fail(&self.path, e))
    }

    pub fn commit(mut self) -> Result<(), Failure> {
        self.tmp.flush().map_err(|e| fail(&self.path, e))?;
        // Temporary files are created private (0600); an output file gets the
        // usual permissions.
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let _ = self.tmp.as_file().set_permissions(std::fs::Permissions::from_mode(0o644));
        }
        let path = self.path.clone();
        self.tmp.persist(&path).map_err(|e| fail(&path, e.error))?;
        Ok(())
    }
}

fn fail(path: &Path, e: std::io::Error) -> Failure {
    Failure::input(format!("{}: cannot write: {e}", path.display()))
}

/// Print to stdout, turning a closed or full stdout into a clean failure
/// instead of a panic.
pub fn print_stdout(text: &str) -> Result<(), Failure> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(Failure::input(format!("cannot write to stdout: {e}"))),
    }
}

static QUIET: AtomicBool = AtomicBool::new(false);

/// `--quiet`: status lines off.
pub fn set_quiet(quiet: bool) {
    QUIET.store(quiet, Ordering::Relaxed);
}

pub fn quiet() -> bool {
    QUIET.load(Ordering::Relaxed)
}

/// A status line on stderr, unless `--quiet`.
macro_rules! say {
    ($($arg:tt)*) => {
        if !$crate::cli::output::quiet() {
            eprintln!($($arg)*);
        }
    };
}
pub(crate) use say;

/// `--jobs N`: N at a time; 0 or absent, one per core.
pub fn jobs(n: Option<usize>) -> usize {
    match n {
        None | Some(0) => std::thread::available_parallelism().map_or(1, |j| j.get()),
        Some(n) => n,
    }
}
