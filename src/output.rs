//! Writing results: to standard output, or to a file that appears whole or not at all
//! (written beside its destination, then renamed over it).

use crate::error::{Error, ErrorKind, Result};
use std::io::Write;
use std::path::Path;

pub fn write_output(path: Option<&str>, text: &str) -> Result<()> {
    let io = |p: &str, e: std::io::Error| Error::new(ErrorKind::Io { path: p.into(), why: e.to_string() });
    match path {
        None | Some("-") => {
            let mut out = std::io::stdout().lock();
            out.write_all(text.as_bytes()).and_then(|_| out.flush()).map_err(|e| io("standard output", e))
        }
        Some(p) => {
            let target = Path::new(p);
            let dir = target.parent().filter(|d| !d.as_os_str().is_empty()).unwrap_or(Path::new("."));
            let mut file = tempfile::NamedTempFile::new_in(dir).map_err(|e| io(p, e))?;
            file.write_all(text.as_bytes()).and_then(|_| file.flush()).map_err(|e| io(p, e))?;
            file.persist(target).map_err(|e| io(p, e.error))?;
            Ok(())
        }
    }
}
