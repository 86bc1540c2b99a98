//! The output layer: printing to stdout and writing files atomically; renderers only build bytes.

use std::io::Write;
use std::path::Path;

use crate::error::{Error, Result};

/// Prints `text` to stdout; a closed pipe surfaces as an error that `main` treats as success.
pub fn print(text: &str) -> std::io::Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())?;
    out.flush()
}

/// True when `err` is (or wraps) a broken-pipe I/O error.
pub fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|e| {
        e.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// Writes `bytes` to `path` atomically: a temporary file in the same folder, fsync'd, then
/// renamed into place. With `overwrite = false` an existing file is never replaced.
pub fn write_atomic(path: &Path, bytes: &[u8], overwrite: bool) -> Result<()> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, "creating folder", e))?;
    let mut builder = tempfile::Builder::new();
    builder.prefix(".resinlot-").suffix(".part");
    // Created 0666 less the umask, as an ordinary file and the trend files are (issue #13,
    // item 17); the temporary-file default of 0600 would hide certificates from the lab group.
    #[cfg(unix)]
    builder.permissions(std::os::unix::fs::PermissionsExt::from_mode(0o666));
    let mut tmp = builder
        .tempfile_in(dir)
        .map_err(|e| Error::io(dir, "creating a temporary file", e))?;
    tmp.write_all(bytes)
        .and_then(|()| tmp.as_file().sync_all())
        .map_err(|e| Error::io(tmp.path(), "writing", e))?;
    if overwrite {
        tmp.persist(path)
            .map_err(|e| Error::io(path, "renaming into place", e.error))?;
    } else {
        tmp.persist_noclobber(path).map_err(|e| {
            if e.error.kind() == std::io::ErrorKind::AlreadyExists {
                Error::invalid(
                    path.display().to_string(),
                    "the file already exists and is never overwritten",
                    "Issue a new revision instead, or choose another output folder.",
                )
            } else {
                Error::io(path, "renaming into place", e.error)
            }
        })?;
    }
    sync_dir(dir);
    Ok(())
}

/// Best-effort fsync of a folder so a rename survives a power loss (no-op where unsupported).
pub fn sync_dir(dir: &Path) {
    if let Ok(f) = std::fs::File::open(dir) {
        let _ = f.sync_all();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_refuses_to_clobber() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.txt");
        write_atomic(&p, b"one", false).unwrap();
        assert!(write_atomic(&p, b"two", false).is_err());
        assert_eq!(std::fs::read(&p).unwrap(), b"one");
        write_atomic(&p, b"three", true).unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"three");
        // No temporary files left behind.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    /// Issue #13 item 17: outputs honour the umask like any file the user creates (0644 under
    /// the usual umask 022), where the temporary file's own default would be 0600.
    #[cfg(unix)]
    #[test]
    fn atomic_write_honours_the_umask_issue_13() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let plain = dir.path().join("plain.txt");
        std::fs::write(&plain, b"x").unwrap();
        let p = dir.path().join("b.pdf");
        write_atomic(&p, b"pdf", false).unwrap();
        let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode(&p), mode(&plain));
    }
}
