//! Record integrity: checks every trend file and the certificate log, quarantines torn tails,
//! and identifies certificate PDFs by their SHA-256.

use std::io::Write;
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::error::{Error, Result};
use crate::record::trend_file::{self, Damage};

/// The state of one checked file.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct FileCheck {
    /// The file checked.
    pub path: PathBuf,
    /// Rows that verified.
    pub rows: usize,
    /// The first problem, if any.
    pub problem: Option<String>,
    /// Line of the problem (1-based).
    pub line: Option<usize>,
    /// Byte offset of the problem line.
    pub offset: Option<u64>,
    /// Lot on the problem line.
    pub lot: Option<String>,
    /// True when the problem is a torn last line (quarantine can resolve it).
    pub torn_tail: bool,
}

impl FileCheck {
    fn from(path: &Path, rows: usize, d: Option<Damage>) -> FileCheck {
        FileCheck {
            path: path.to_path_buf(),
            rows,
            problem: d.as_ref().map(|d| d.problem.clone()),
            line: d.as_ref().map(|d| d.line),
            offset: d.as_ref().map(|d| d.offset),
            lot: d.as_ref().and_then(|d| d.lot.clone()),
            torn_tail: d.as_ref().is_some_and(|d| d.torn_tail),
        }
    }

    /// True when nothing is wrong.
    pub fn ok(&self) -> bool {
        self.problem.is_none()
    }
}

/// SHA-256 of a file's bytes, hex.
pub fn file_sha256(path: &Path) -> Result<String> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    Ok(trend_file::hex(&Sha256::digest(&bytes)))
}

/// Checks every trend file in `register`, the certificate log, and each logged certificate
/// against the PDF in `certificates` (present, same SHA-256).
pub fn check_register(register_dir: &Path, certificates: &Path) -> Result<Vec<FileCheck>> {
    let mut out = Vec::new();
    for path in crate::record::query::trend_files(register_dir)? {
        let text = crate::spec::read_text(&path)?;
        let (t, d) = trend_file::parse(&path, &text);
        out.push(FileCheck::from(&path, t.rows.len(), d));
    }
    let log = crate::record::certlog::path(register_dir);
    if log.exists() {
        match crate::record::certlog::check(register_dir)? {
            Some(d) => out.push(FileCheck::from(&log, 0, Some(d))),
            None => {
                let entries = crate::record::certlog::entries(register_dir)?;
                let mut check = FileCheck::from(&log, entries.len(), None);
                for (i, e) in entries.iter().enumerate() {
                    let pdf = certificates.join(&e.file);
                    let problem = if !pdf.is_file() {
                        Some(format!(
                            "certificate {} ({}) is missing from {}",
                            e.number,
                            e.file,
                            certificates.display()
                        ))
                    } else if file_sha256(&pdf)? != e.sha256 {
                        Some(format!(
                            "certificate {} ({}) differs from the issued file (SHA-256 mismatch)",
                            e.number, e.file
                        ))
                    } else {
                        None
                    };
                    if problem.is_some() {
                        check.problem = problem;
                        check.line = Some(i + 2);
                        check.lot = Some(e.lot.clone());
                        break;
                    }
                }
                out.push(check);
            }
        }
    }
    Ok(out)
}

/// Moves a torn last line of `path` to a side file `<name>.torn-<offset>` (never deleting
/// it), truncates the trend file to its last complete line, and appends a line to
/// `quarantine.log` beside it. Holds the file's lock throughout. Returns the side file.
pub fn quarantine(path: &Path, offset: u64, now: &str) -> Result<PathBuf> {
    let file = std::fs::OpenOptions::new()
        .read(true)
        .write(true)
        .open(path)
        .map_err(|e| Error::io(path, "opening", e))?;
    file.lock().map_err(|e| Error::io(path, "locking", e))?;
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    let (_, damage) = trend_file::parse(path, &String::from_utf8_lossy(&bytes));
    match damage {
        Some(d) if d.torn_tail && d.offset == offset => {}
        _ => {
            return Err(Error::invalid(
                path.display().to_string(),
                "the file no longer has a torn tail at that offset",
                "Run `resinlot verify` again to see its current state.",
            ))
        }
    }
    let fragment = &bytes[offset as usize..];
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    let side = path.with_file_name(format!("{name}.torn-{offset}"));
    crate::support::output::write_atomic(&side, fragment, false)?;
    file.set_len(offset)
        .map_err(|e| Error::io(path, "truncating", e))?;
    file.sync_all().map_err(|e| Error::io(path, "syncing", e))?;
    let log = path.with_file_name("quarantine.log");
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(&log)
        .map_err(|e| Error::io(&log, "opening", e))?;
    let line = format!(
        "{now}\tmoved {} bytes from {} at byte {offset} to {}\n",
        fragment.len(),
        path.display(),
        side.display()
    );
    f.write_all(line.as_bytes())
        .and_then(|()| f.sync_all())
        .map_err(|e| Error::io(&log, "writing", e))?;
    Ok(side)
}

/// What the issue log says about a certificate PDF.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "verdict", rename_all = "snake_case")]
pub enum CertVerdict {
    /// The bytes are exactly those issued.
    Genuine {
        /// The log entry.
        entry: crate::record::certlog::Entry,
    },
    /// A certificate of this file name was issued, but these bytes differ.
    Altered {
        /// The entry of the same file name.
        entry: crate::record::certlog::Entry,
        /// SHA-256 of the file given.
        sha256: String,
    },
    /// Nothing in the log matches.
    Unknown {
        /// SHA-256 of the file given.
        sha256: String,
    },
}

/// Identifies a certificate PDF against the issue log.
pub fn verify_certificate(pdf: &Path, register_dir: &Path) -> Result<CertVerdict> {
    let sha = file_sha256(pdf)?;
    let entries = crate::record::certlog::entries(register_dir)?;
    if let Some(e) = entries.iter().find(|e| e.sha256 == sha) {
        return Ok(CertVerdict::Genuine { entry: e.clone() });
    }
    let name = pdf
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    if let Some(e) = entries.iter().find(|e| e.file == name) {
        return Ok(CertVerdict::Altered {
            entry: e.clone(),
            sha256: sha,
        });
    }
    Ok(CertVerdict::Unknown { sha256: sha })
}
