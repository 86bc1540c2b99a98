//! The output layer: printing to stdout and writing files atomically; renderers only build bytes.

use std::io::Write;
use std::path::{Component, Path, PathBuf};

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

/// The kinds of output file resinlot writes outside the record (charts and reports). Each is
/// stamped so that a later run can tell its own file from anyone else's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OutputKind {
    /// An SVG chart: a comment after the root element says resinlot wrote it.
    Svg,
    /// A PNG chart: a `tEXt` chunk `Software = resinlot` (PNG specification §11.3.4.3).
    Png,
    /// A PDF report: the document information's Creator is "resinlot" and its identifier
    /// starts with [`REPORT_ID_PREFIX`].
    Pdf,
}

impl OutputKind {
    /// What the kind is called in messages.
    fn name(self) -> &'static str {
        match self {
            OutputKind::Svg => "an SVG chart",
            OutputKind::Png => "a PNG chart",
            OutputKind::Pdf => "a PDF report",
        }
    }
}

/// The comment that marks an SVG file as resinlot's.
const SVG_STAMP: &[u8] = b"<!-- written by resinlot -->\n";
/// The `tEXt` keyword and text that mark a PNG file as resinlot's.
const PNG_STAMP: &[u8] = b"Software\0resinlot";
/// "resinlot" as the UTF-16BE hex string printpdf writes for the Creator entry.
const PDF_STAMP: &[u8] = b"/Creator<FEFF0072006500730069006E006C006F0074>";
/// How a trend report's document identifier starts; a certificate's is its number, so a
/// certificate is never taken for a report that may be replaced.
pub const REPORT_ID_PREFIX: &str = "trend-";
/// The identifier entry as printpdf writes it for a report.
const PDF_REPORT_ID: &[u8] = b"/Identifier(trend-";

/// Adds resinlot's mark to an output file's bytes (SVG comment, PNG `tEXt` chunk; a PDF report
/// carries its Creator already).
pub fn stamp(kind: OutputKind, mut bytes: Vec<u8>) -> Vec<u8> {
    match kind {
        OutputKind::Svg => {
            if !bytes.ends_with(b"\n") {
                bytes.push(b'\n');
            }
            bytes.extend_from_slice(SVG_STAMP);
            bytes
        }
        OutputKind::Png => {
            // The last chunk is IEND: 4 length bytes, "IEND", 4 CRC bytes.
            let Some(at) = bytes.len().checked_sub(12) else {
                return bytes;
            };
            if &bytes[at + 4..at + 8] != b"IEND" {
                return bytes;
            }
            let mut chunk = Vec::with_capacity(PNG_STAMP.len() + 12);
            chunk.extend_from_slice(&(PNG_STAMP.len() as u32).to_be_bytes());
            chunk.extend_from_slice(b"tEXt");
            chunk.extend_from_slice(PNG_STAMP);
            chunk.extend_from_slice(&crc32fast::hash(&chunk[4..]).to_be_bytes());
            bytes.splice(at..at, chunk);
            bytes
        }
        OutputKind::Pdf => bytes,
    }
}

/// True when `bytes` are a file of `kind` that resinlot wrote (see [`stamp`]).
pub fn is_ours(kind: OutputKind, bytes: &[u8]) -> bool {
    let has = |needle: &[u8]| bytes.windows(needle.len()).any(|w| w == needle);
    match kind {
        OutputKind::Svg => bytes.starts_with(b"<svg") && bytes.ends_with(SVG_STAMP),
        OutputKind::Png => bytes.starts_with(b"\x89PNG\r\n\x1a\n") && has(PNG_STAMP),
        OutputKind::Pdf => bytes.starts_with(b"%PDF-") && has(PDF_STAMP) && has(PDF_REPORT_ID),
    }
}

/// Where `path` really points: symlinks followed, `.` and `..` resolved. For a file that does
/// not exist yet, its nearest existing folder is resolved and the rest appended.
fn resolve(path: &Path) -> Result<PathBuf> {
    if let Ok(p) = std::fs::canonicalize(path) {
        return Ok(p);
    }
    if path.symlink_metadata().is_ok() {
        return Err(Error::invalid(
            path.display().to_string(),
            "the path is a symbolic link to nothing",
            "Remove the link or choose another file name.",
        ));
    }
    let absolute = std::path::absolute(path).map_err(|e| Error::io(path, "resolving", e))?;
    let mut existing = absolute.as_path();
    let mut rest = Vec::new();
    while !existing.exists() {
        match (existing.parent(), existing.file_name()) {
            (Some(parent), Some(name)) => {
                rest.push(name.to_owned());
                existing = parent;
            }
            _ => break,
        }
    }
    let mut resolved =
        std::fs::canonicalize(existing).map_err(|e| Error::io(existing, "resolving", e))?;
    for name in rest.iter().rev() {
        resolved.push(name);
    }
    if resolved.components().any(|c| c == Component::ParentDir) {
        return Err(Error::invalid(
            path.display().to_string(),
            "the path climbs with '..' out of a folder that does not exist",
            "Give the output path without '..'.",
        ));
    }
    Ok(resolved)
}

/// Checks that an output of `kind` may be written at `path`: it must not land inside any of
/// the record folders `record` (specs, register, certificates; symlinks followed), and it may
/// replace only a file that resinlot itself wrote as the same kind of output (issue #13,
/// item 1).
pub fn check_destination(path: &Path, kind: OutputKind, record: &[&Path]) -> Result<()> {
    let target = resolve(path)?;
    for dir in record {
        let dir_resolved = match std::fs::canonicalize(dir) {
            Ok(d) => d,
            Err(_) => std::path::absolute(dir).map_err(|e| Error::io(dir, "resolving", e))?,
        };
        if target.starts_with(&dir_resolved) {
            return Err(Error::invalid(
                path.display().to_string(),
                format!(
                    "this would write {} into the record folder {}",
                    kind.name(),
                    dir.display()
                ),
                "Write charts and reports outside the specs, register and certificates folders, \
                 e.g. into outputs/.",
            ));
        }
    }
    if target.is_dir() {
        return Err(Error::invalid(
            path.display().to_string(),
            "the path is a folder",
            "Give a file name, e.g. outputs/chart.svg.",
        ));
    }
    if target.exists() {
        let old = std::fs::read(&target).map_err(|e| Error::io(&target, "reading", e))?;
        if !is_ours(kind, &old) {
            return Err(Error::invalid(
                path.display().to_string(),
                format!(
                    "the file exists and is not {} written by resinlot, so it is not replaced",
                    kind.name()
                ),
                "Choose a new file name, or move the file away first if it may go.",
            ));
        }
    }
    Ok(())
}

/// Writes a chart or report: checks the destination ([`check_destination`]), stamps the bytes
/// as resinlot's ([`stamp`]) and writes them atomically, replacing an earlier output of the same
/// kind.
pub fn write_output(path: &Path, bytes: Vec<u8>, kind: OutputKind, record: &[&Path]) -> Result<()> {
    check_destination(path, kind, record)?;
    write_atomic(path, &stamp(kind, bytes), true)
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

    fn tiny_png() -> Vec<u8> {
        // Signature, then an IEND chunk (length 0, "IEND", CRC 0xAE426082 from the PNG spec).
        let mut png = b"\x89PNG\r\n\x1a\n".to_vec();
        png.extend_from_slice(&[0, 0, 0, 0]);
        png.extend_from_slice(b"IEND");
        png.extend_from_slice(&[0xAE, 0x42, 0x60, 0x82]);
        png
    }

    #[test]
    fn stamps_are_recognised_and_foreign_files_are_not() {
        let svg = stamp(OutputKind::Svg, b"<svg></svg>".to_vec());
        assert!(is_ours(OutputKind::Svg, &svg));
        assert!(!is_ours(OutputKind::Svg, b"<svg></svg>\n"));
        let png = stamp(OutputKind::Png, tiny_png());
        assert!(is_ours(OutputKind::Png, &png));
        assert!(!is_ours(OutputKind::Png, &tiny_png()));
        // The tEXt chunk's CRC covers type and data (PNG specification §5.3).
        let chunk = &png[8..8 + 12 + PNG_STAMP.len()];
        let crc = u32::from_be_bytes(chunk[chunk.len() - 4..].try_into().unwrap());
        assert_eq!(crc, crc32fast::hash(&chunk[4..chunk.len() - 4]));
        assert!(png.ends_with(&tiny_png()[8..]), "IEND stays last");
        assert!(!is_ours(OutputKind::Pdf, b"%PDF-1.7 /Creator(someone)"));
        // A certificate (resinlot's, but not a report) is never taken for a report.
        let cert = [
            b"%PDF-1.7 ".as_slice(),
            PDF_STAMP,
            b"/Identifier(FW-000001)",
        ]
        .concat();
        assert!(!is_ours(OutputKind::Pdf, &cert));
        let report = [
            b"%PDF-1.7 ".as_slice(),
            PDF_STAMP,
            b"/Identifier(trend-PD-2000-2026-12-01)",
        ]
        .concat();
        assert!(is_ours(OutputKind::Pdf, &report));
        assert!(!is_ours(OutputKind::Svg, b"lot,product\n"));
    }

    /// Issue #13 item 1: an output never lands in a record folder, also through a symlink,
    /// and never replaces a file resinlot did not write as that kind of output.
    #[test]
    fn outputs_stay_out_of_the_record_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let register = dir.path().join("register");
        std::fs::create_dir(&register).unwrap();
        std::fs::write(register.join("PD-2000.csv"), b"seq\n").unwrap();
        let record = [register.as_path()];
        let svg = || b"<svg></svg>".to_vec();
        let e = write_output(
            &register.join("PD-2000.csv"),
            svg(),
            OutputKind::Svg,
            &record,
        );
        assert!(e.unwrap_err().to_string().contains("record folder"));
        let e = write_output(&register.join("new.svg"), svg(), OutputKind::Svg, &record);
        assert!(e.is_err(), "a new file inside the record is refused too");
        #[cfg(unix)]
        {
            let link = dir.path().join("chart.svg");
            std::os::unix::fs::symlink(register.join("PD-2000.csv"), &link).unwrap();
            let e = write_output(&link, svg(), OutputKind::Svg, &record);
            assert!(e.unwrap_err().to_string().contains("record folder"));
        }
        let foreign = dir.path().join("notes.svg");
        std::fs::write(&foreign, b"<svg>mine</svg>").unwrap();
        let e = write_output(&foreign, svg(), OutputKind::Svg, &record).unwrap_err();
        assert!(
            e.to_string()
                .contains("not an SVG chart written by resinlot"),
            "{e}"
        );
        assert_eq!(std::fs::read(&foreign).unwrap(), b"<svg>mine</svg>");
        // Its own earlier output is replaced.
        let ours = dir.path().join("out/c.svg");
        write_output(&ours, svg(), OutputKind::Svg, &record).unwrap();
        write_output(&ours, b"<svg>2</svg>".to_vec(), OutputKind::Svg, &record).unwrap();
        assert!(std::fs::read(&ours).unwrap().starts_with(b"<svg>2</svg>"));
        assert_eq!(
            std::fs::read(register.join("PD-2000.csv")).unwrap(),
            b"seq\n"
        );
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
