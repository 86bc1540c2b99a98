//! Record integrity: checks every trend file and the certificate log, quarantines torn tails,
//! and identifies certificate PDFs by their SHA-256.

use std::io::{Seek, SeekFrom, Write};
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
    /// True when the last row is complete but lacks its line feed (quarantine restores it).
    pub newline_missing: bool,
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
            newline_missing: d.as_ref().is_some_and(|d| d.newline_missing),
        }
    }

    /// True when `verify --quarantine` can repair the problem (a torn tail or a missing final
    /// line feed).
    pub fn repairable(&self) -> bool {
        self.torn_tail || self.newline_missing
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

/// True when `columns` is the certificate log's header.
fn is_log_header(columns: &[String]) -> bool {
    columns == crate::record::certlog::COLUMNS.as_slice()
}

/// Checks every trend file in `register`, the certificate log, and each logged certificate
/// against the PDF in `certificates` (present, same SHA-256).
pub fn check_register(register_dir: &Path, certificates: &Path) -> Result<Vec<FileCheck>> {
    let mut out = Vec::new();
    for path in crate::record::query::trend_files(register_dir)? {
        // Bytes, not text: a file that is not UTF-8 is reported BROKEN at its line and the
        // other files are still checked (issue #13, item 18).
        let bytes = std::fs::read(&path).map_err(|e| Error::io(&path, "reading", e))?;
        let (t, d) = trend_file::parse_bytes(&path, &bytes, true, &trend_file::is_trend_header);
        out.push(FileCheck::from(&path, t.rows.len(), d));
    }
    let log = crate::record::certlog::path(register_dir);
    if log.exists() {
        let bytes = std::fs::read(&log).map_err(|e| Error::io(&log, "reading", e))?;
        match trend_file::parse_bytes(&log, &bytes, true, &is_log_header).1 {
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

/// What `verify --quarantine` did to one file.
#[derive(Debug, Clone, PartialEq)]
pub enum Repair {
    /// The torn last line was moved to this side file and the file truncated before it.
    Quarantined(PathBuf),
    /// The complete last row lacked its line feed; the line feed was appended.
    NewlineRestored,
}

/// The side file for a torn tail cut at `offset` of `path`, holding `fragment`: the first of
/// `<name>.torn-<offset>`, `<name>.torn-<offset>.2`, ... that is free or already holds exactly
/// `fragment` (left by an earlier, interrupted quarantine), with `true` when it still has to
/// be written.
fn side_file(path: &Path, offset: u64, fragment: &[u8]) -> Result<(PathBuf, bool)> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    for k in 1u32.. {
        let suffix = if k == 1 {
            String::new()
        } else {
            format!(".{k}")
        };
        let side = path.with_file_name(format!("{name}.torn-{offset}{suffix}"));
        match std::fs::read(&side) {
            Ok(held) if held == fragment => return Ok((side, false)),
            Ok(_) => continue,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok((side, true)),
            Err(e) => return Err(Error::io(&side, "reading", e)),
        }
    }
    unreachable!("some suffix is always free")
}

/// Repairs the end of `path` found damaged at `offset` by [`check_register`], holding the
/// file's lock throughout, and appends a line to `quarantine.log` beside it:
/// - a torn last line (one that fails to parse or to chain) is moved to a side file
///   `<name>.torn-<offset>` (never deleted) and the file is truncated to its last complete line;
/// - a complete, chain-valid last row that only lacks its line feed gets the line feed back
///   (issue #13, item 3).
///
/// Works on bytes, so a tail cut inside a UTF-8 character is handled (item 5), and is
/// idempotent: a side file left by an interrupted run with the same bytes is reused (item 14).
pub fn quarantine(path: &Path, offset: u64, now: &str) -> Result<Repair> {
    let mut file = std::fs::OpenOptions::new()
        .read(true)
        .write(true)
        .open(path)
        .map_err(|e| Error::io(path, "opening", e))?;
    file.lock().map_err(|e| Error::io(path, "locking", e))?;
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    let header_ok = |c: &[String]| trend_file::is_trend_header(c) || is_log_header(c);
    let (_, damage) = trend_file::parse_bytes(path, &bytes, true, &header_ok);
    let log_line;
    let repair = match damage {
        Some(d) if d.newline_missing && d.offset == offset => {
            file.seek(SeekFrom::End(0))
                .and_then(|_| file.write_all(b"\n"))
                .and_then(|()| file.sync_all())
                .map_err(|e| Error::io(path, "writing", e))?;
            log_line = format!(
                "{now}\trestored the missing line end of the complete last row of {} (line {}, byte {offset})\n",
                path.display(),
                d.line
            );
            Repair::NewlineRestored
        }
        Some(d) if d.torn_tail && d.offset == offset => {
            let fragment = &bytes[offset as usize..];
            let (side, write) = side_file(path, offset, fragment)?;
            if write {
                crate::support::output::write_atomic(&side, fragment, false)?;
            }
            file.set_len(offset)
                .map_err(|e| Error::io(path, "truncating", e))?;
            file.sync_all().map_err(|e| Error::io(path, "syncing", e))?;
            log_line = format!(
                "{now}\tmoved {} bytes from {} at byte {offset} to {}\n",
                fragment.len(),
                path.display(),
                side.display()
            );
            Repair::Quarantined(side)
        }
        _ => {
            return Err(Error::invalid(
                path.display().to_string(),
                "the file no longer has a torn tail or a missing line end at that offset",
                "Run `resinlot verify` again to see its current state.",
            ))
        }
    };
    let log = path.with_file_name("quarantine.log");
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(&log)
        .map_err(|e| Error::io(&log, "opening", e))?;
    f.write_all(log_line.as_bytes())
        .and_then(|()| f.sync_all())
        .map_err(|e| Error::io(&log, "writing", e))?;
    Ok(repair)
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::trend_file::{lock, Wait};
    use std::time::Duration;

    /// A trend file with two rows (invented values).
    fn two_rows(dir: &Path) -> PathBuf {
        let p = dir.join("P.csv");
        let keys = vec!["acid_value".to_string()];
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let mut l = lock(&p, &keys, &keys, wait).unwrap();
        l.append(&[("lot", "L1".into()), ("acid_value", "0.5".into())])
            .unwrap();
        l.append(&[("lot", "L2".into()), ("acid_value", "0.6".into())])
            .unwrap();
        l.sync().unwrap();
        p
    }

    /// Issue #13 item 3: the missing line end of a complete row is restored, nothing moved.
    #[test]
    fn a_missing_line_end_is_restored_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let p = two_rows(dir.path());
        let whole = std::fs::read(&p).unwrap();
        std::fs::write(&p, &whole[..whole.len() - 1]).unwrap();
        let c = &check_register(dir.path(), dir.path()).unwrap()[0];
        assert!(c.newline_missing && c.repairable() && c.rows == 2, "{c:?}");
        let r = quarantine(&p, c.offset.unwrap(), "now").unwrap();
        assert_eq!(r, Repair::NewlineRestored);
        assert_eq!(std::fs::read(&p).unwrap(), whole);
        assert!(check_register(dir.path(), dir.path()).unwrap()[0].ok());
    }

    /// Issue #13 item 14: a side file left by an interrupted quarantine is reused; one holding
    /// other bytes is kept and the fragment goes to the next free name.
    #[test]
    fn quarantine_is_idempotent_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let p = two_rows(dir.path());
        let whole = std::fs::read(&p).unwrap();
        let fragment = b"3,2026-10-02T08:00:00Z,L3,P";
        let torn = [whole.as_slice(), fragment].concat();
        std::fs::write(&p, &torn).unwrap();
        let offset = whole.len() as u64;
        let side = dir.path().join(format!("P.csv.torn-{offset}"));
        std::fs::write(&side, fragment).unwrap(); // the interrupted run got this far
        assert_eq!(
            quarantine(&p, offset, "now").unwrap(),
            Repair::Quarantined(side.clone())
        );
        assert_eq!(std::fs::read(&p).unwrap(), whole);
        std::fs::write(&p, &torn).unwrap();
        std::fs::write(&side, b"other bytes").unwrap();
        let next = dir.path().join(format!("P.csv.torn-{offset}.2"));
        assert_eq!(
            quarantine(&p, offset, "now").unwrap(),
            Repair::Quarantined(next.clone())
        );
        assert_eq!(std::fs::read(&side).unwrap(), b"other bytes");
        assert_eq!(std::fs::read(&next).unwrap(), fragment);
        assert!(quarantine(&p, offset, "now").is_err(), "nothing left to do");
    }
}
