//! Writing results: to standard output, or to files that appear whole or not at all (written
//! beside their destination under a recognisable temporary name, then renamed over it).

use crate::error::{Error, ErrorKind, Result};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::{Mutex, MutexGuard};
use tempfile::NamedTempFile;

/// The temporary files written so far and not yet renamed into place, for the signal handler.
static PENDING: Mutex<Vec<PathBuf>> = Mutex::new(vec![]);

fn pending() -> MutexGuard<'static, Vec<PathBuf>> {
    PENDING.lock().unwrap_or_else(|poisoned| poisoned.into_inner())
}

/// Makes an interrupt (SIGINT, SIGTERM, SIGHUP) remove the temporary files of writes in
/// progress before the process ends as the signal would have ended it. For the command line;
/// a library user keeps its own signal handling unless it calls this.
pub fn remove_temporaries_on_signal() {
    use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM};
    let Ok(mut signals) = signal_hook::iterator::Signals::new([SIGINT, SIGTERM, SIGHUP]) else {
        return; // without a handler the signal ends the process as before
    };
    std::thread::spawn(move || {
        if let Some(signal) = signals.forever().next() {
            // the lock keeps a write from renaming or registering a file meanwhile
            let pending = pending();
            for path in pending.iter() {
                let _ = std::fs::remove_file(path);
            }
            let _ = signal_hook::low_level::emulate_default_handler(signal);
            std::process::exit(128 + signal);
        }
    });
}

/// An I/O error about `path`. The error of an operation on a temporary file is never one of
/// tempfile's own (which name the temporary), so the report names only the destination.
fn io(path: &Path, e: std::io::Error) -> Error {
    Error::new(ErrorKind::Io { path: path.display().to_string(), why: e.to_string() })
}

/// A file written whole beside its destination, as `.NAME.spinfold-tmp-XXXXXX`, and not yet
/// renamed over it. Dropped without `commit`, it is removed.
struct Staged {
    file: Option<NamedTempFile>,
    target: PathBuf,
}

impl Staged {
    /// Writes `text` to a temporary file beside `target`. A new file gets the mode the umask
    /// leaves of 0666, as any file a program creates; a file being replaced keeps its mode.
    fn new(target: &Path, text: &str) -> std::io::Result<Staged> {
        let dir = target.parent().filter(|d| !d.as_os_str().is_empty()).unwrap_or(Path::new("."));
        // at most 200 bytes of the name, so that the temporary's name stays within the usual 255
        let name = target.file_name().map_or("output".into(), |n| n.to_string_lossy());
        let cut = (0..=name.len().min(200)).rev().find(|&k| name.is_char_boundary(k)).unwrap_or(0);
        let prefix = format!(".{}.spinfold-tmp-", &name[..cut]);
        let replaced = std::fs::metadata(target).ok().filter(|m| m.is_file()).map(|m| m.permissions());
        let mut pending = pending();
        let file = tempfile::Builder::new().prefix(&prefix).make_in(dir, |path| {
            let mut options = std::fs::OpenOptions::new();
            options.write(true).create_new(true);
            #[cfg(unix)]
            std::os::unix::fs::OpenOptionsExt::mode(&mut options, 0o666);
            options.open(path)
        })?;
        pending.push(file.path().to_path_buf());
        drop(pending);
        let staged = Staged { file: Some(file), target: target.to_path_buf() };
        {
            let mut file = staged.file.as_ref().expect("just created").as_file();
            if let Some(permissions) = replaced {
                file.set_permissions(permissions)?;
            }
            file.write_all(text.as_bytes())?;
            file.flush()?;
        }
        Ok(staged)
    }

    /// Renames the file over its destination.
    fn commit(mut self) -> std::io::Result<()> {
        let mut pending = pending();
        let file = self.file.take().expect("a staged file is committed once");
        pending.retain(|p| p != file.path());
        // on failure the file comes back with the error and is removed, still under the lock
        file.persist(&self.target).map(drop).map_err(|e| e.error)
    }
}

impl Drop for Staged {
    fn drop(&mut self) {
        if let Some(file) = self.file.take() {
            let mut pending = pending();
            pending.retain(|p| p != file.path());
            drop(file); // removes it, before the lock is let go
        }
    }
}

/// Writes `text` to standard output (no path, or `-`) or to a file that appears whole or not
/// at all.
pub fn write_output(path: Option<&str>, text: &str) -> Result<()> {
    match path {
        None | Some("-") => {
            let mut out = std::io::stdout().lock();
            out.write_all(text.as_bytes())
                .and_then(|_| out.flush())
                .map_err(|e| io(Path::new("standard output"), e))
        }
        Some(p) => {
            let target = Path::new(p);
            Staged::new(target, text).and_then(Staged::commit).map_err(|e| io(target, e))
        }
    }
}

/// Writes (file name, text) pairs into the directory `dir`, creating it if needed. Every file
/// is written beside its destination before any is renamed into place, so that a full disk or
/// a refused write leaves none of them; a rename that fails says which files were written and
/// which were not.
pub fn write_files(dir: &str, files: &[(String, String)]) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| io(Path::new(dir), e))?;
    let targets: Vec<PathBuf> = files.iter().map(|(name, _)| Path::new(dir).join(name)).collect();
    let failed = |target: &Path, e: std::io::Error, outcome: String| {
        Error::new(ErrorKind::Io { path: target.display().to_string(), why: format!("{e}; {outcome}") })
    };
    let staged = targets
        .iter()
        .zip(files)
        .map(|(target, (_, text))| {
            Staged::new(target, text)
                .map_err(|e| failed(target, e, format!("none of the {} files was written", files.len())))
        })
        .collect::<Result<Vec<Staged>>>()?;
    let list =
        |paths: &[PathBuf]| paths.iter().map(|p| format!("`{}`", p.display())).collect::<Vec<_>>().join(", ");
    for (k, file) in staged.into_iter().enumerate() {
        file.commit().map_err(|e| {
            let before = if k == 0 { "nothing".to_string() } else { list(&targets[..k]) };
            failed(
                &targets[k],
                e,
                format!("written before it: {before}; not written: {}", list(&targets[k..])),
            )
        })?;
    }
    Ok(())
}
