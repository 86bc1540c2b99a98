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
    /// What `verify` says of a file that is not simply "N rows, intact" (a register written
    /// before heads were kept, the predecessor of an upgraded log).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
    /// True when the trend file only grew past its latest head (a release interrupted between
    /// appending its rows and recording their head): quarantine records the head.
    pub heads_behind: bool,
    /// True when certificates are still current although a later trend row rejected or held
    /// their lot (a withdrawal interrupted after its trend row, issue #14): quarantine
    /// records the withdrawals.
    pub withdrawals_owed: bool,
}

impl FileCheck {
    /// The check of `path` with `rows` verified rows and the damage found, if any.
    pub(crate) fn from(path: &Path, rows: usize, d: Option<Damage>) -> FileCheck {
        FileCheck {
            path: path.to_path_buf(),
            rows,
            problem: d.as_ref().map(|d| d.problem.clone()),
            line: d.as_ref().map(|d| d.line),
            offset: d.as_ref().map(|d| d.offset),
            lot: d.as_ref().and_then(|d| d.lot.clone()),
            torn_tail: d.as_ref().is_some_and(|d| d.torn_tail),
            newline_missing: d.as_ref().is_some_and(|d| d.newline_missing),
            note: None,
            heads_behind: false,
            withdrawals_owed: false,
        }
    }

    /// True when `verify --quarantine` can repair the problem (a torn tail or a missing final
    /// line feed).
    pub fn repairable(&self) -> bool {
        self.torn_tail || self.newline_missing || self.heads_behind || self.withdrawals_owed
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
    crate::record::certlog::header_ok(columns)
}

/// Checks every trend file in `register`, the certificate log, and each logged certificate
/// against the PDF in `certificates` (present, same SHA-256).
pub fn check_register(register_dir: &Path, certificates: &Path) -> Result<Vec<FileCheck>> {
    let mut out = Vec::new();
    let mut chains = Chains::new();
    for path in crate::record::query::trend_files(register_dir)? {
        // Bytes, not text: a file that is not UTF-8 is reported BROKEN at its line and the
        // other files are still checked (issue #13, item 18).
        let bytes = std::fs::read(&path).map_err(|e| Error::io(&path, "reading", e))?;
        let (t, d) = trend_file::parse_bytes(&path, &bytes, true, &trend_file::is_trend_header);
        if d.is_none() {
            chains.insert(
                crate::record::heads::file_name(&path),
                (out.len(), row_chains(&t)),
            );
        }
        out.push(FileCheck::from(&path, t.rows.len(), d));
    }
    let log = crate::record::certlog::path(register_dir);
    if log.exists() {
        let bytes = std::fs::read(&log).map_err(|e| Error::io(&log, "reading", e))?;
        match trend_file::parse_bytes(&log, &bytes, true, &is_log_header).1 {
            Some(d) => out.push(FileCheck::from(&log, 0, Some(d))),
            None => {
                let t = crate::record::certlog::read(register_dir)?;
                let issues: Vec<(usize, crate::record::certlog::Entry)> = t
                    .iter()
                    .flat_map(|t| {
                        t.rows
                            .iter()
                            .filter(|r| crate::record::certlog::is_issue_row(t, r))
                            .map(|r| (r.line, crate::record::certlog::entry_of(t, r)))
                    })
                    .collect();
                let mut check = FileCheck::from(&log, issues.len(), None);
                // Issue rows only: event rows (issue #14) and layout rows name no file.
                for (line, e) in &issues {
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
                        check.line = Some(*line);
                        check.lot = Some(e.lot.clone());
                        break;
                    }
                }
                out.push(check);
            }
        }
    }
    check_anchors(register_dir, &chains, &mut out)?;
    Ok(out)
}

/// The chain value of every row of each intact trend file, by file name, with the index of
/// the file's check.
type Chains = std::collections::HashMap<String, (usize, Vec<String>)>;

fn row_chains(t: &trend_file::Trend) -> Vec<String> {
    t.rows
        .iter()
        .map(|r| r.cells.last().cloned().unwrap_or_default())
        .collect()
}

/// Records `problem` at `line` on check `c` unless it already has one.
fn flag(c: &mut FileCheck, line: usize, lot: Option<String>, problem: String) {
    if c.problem.is_none() {
        c.problem = Some(problem);
        c.line = Some(line);
        c.offset = None;
        c.lot = lot;
    }
}

/// Cross-checks the trend files against the anchors kept outside them (issue #13, item 4):
/// every row of the heads file must match the trend file it names (row count and last chain
/// value), the latest head of each file must be its current end, and every certificate-log row
/// with an anchor must find its row with that chain value. An upgraded log is checked back to
/// its predecessor. A register written before heads were kept gets a note, not a fault.
fn check_anchors(register: &Path, chains: &Chains, out: &mut Vec<FileCheck>) -> Result<()> {
    use crate::record::heads::{self, State};
    let heads_path = heads::path(register);
    match heads::state(register)? {
        State::Fresh => {}
        State::Legacy => {
            let mut c = FileCheck::from(&heads_path, 0, None);
            c.note = Some(
                "none: this register was written before heads were kept, and is checked without them; `resinlot upgrade` adds them".into(),
            );
            out.push(c);
        }
        State::Missing => {
            let mut c = FileCheck::from(&heads_path, 0, None);
            c.problem = Some(heads::lost(register).to_string());
            out.push(c);
        }
        State::Kept => {
            let bytes =
                std::fs::read(&heads_path).map_err(|e| Error::io(&heads_path, "reading", e))?;
            let (t, d) =
                trend_file::parse_bytes(&heads_path, &bytes, true, &heads::is_heads_header);
            let mut c = FileCheck::from(&heads_path, t.rows.len(), d);
            if c.ok() {
                let all = heads::heads_of(&t);
                for h in &all {
                    let Some((i, ch)) = chains.get(&h.file) else {
                        if !register.join(&h.file).exists() {
                            flag(&mut c, h.line, None, format!("it records the head of {}, which is missing from the register (restore it from backup)", h.file));
                        }
                        continue;
                    };
                    let chain_at = |k: usize| ch.get(k.wrapping_sub(1)).cloned();
                    if let Some(p) = heads::disagreement(&heads_path, h, ch.len(), &chain_at) {
                        flag(&mut out[*i], ch.len().min(h.rows) + 2, None, p);
                    }
                }
                let last = heads::latest(&all);
                for (file, (i, ch)) in chains {
                    let p = match last.get(file.as_str()) {
                        Some(h) if ch.len() > h.rows => format!(
                            "rows {} to {} have no head in {}: they were added after its line {} (an interrupted release, or rows added by hand)",
                            h.rows + 1,
                            ch.len(),
                            heads_path.display(),
                            h.line
                        ),
                        None if !ch.is_empty() => format!(
                            "the file has {} rows but {} records no head for it",
                            ch.len(),
                            heads_path.display()
                        ),
                        _ => continue,
                    };
                    let line = last.get(file.as_str()).map_or(2, |h| h.rows + 2);
                    let c = &mut out[*i];
                    if c.ok() {
                        c.heads_behind = true;
                    }
                    flag(c, line, None, p);
                }
            }
            out.push(c);
        }
    }
    let log_path = crate::record::certlog::path(register);
    let Some(log_i) = out.iter().position(|c| c.path == log_path && c.ok()) else {
        return Ok(());
    };
    let bytes = std::fs::read(&log_path).map_err(|e| Error::io(&log_path, "reading", e))?;
    let (log, _) =
        trend_file::parse_bytes(&log_path, &bytes, true, &crate::record::certlog::header_ok);
    for a in crate::record::certlog::anchors(&log) {
        let file = format!("{}.csv", a.product);
        let Some((i, ch)) = chains.get(&file) else {
            if !register.join(&file).exists() {
                let p = format!(
                    "certificate {} certifies row {} of {file}, which is missing from the register",
                    a.number, a.row
                );
                flag(&mut out[log_i], a.line, Some(a.lot.clone()), p);
            }
            continue;
        };
        let at = format!("{}:{}", log_path.display(), a.line);
        let p = match ch.get(a.row.wrapping_sub(1)) {
            None => format!(
                "row {} (lot '{}') is missing: certificate {} certifies it ({at}); the file has {} rows",
                a.row,
                a.lot,
                a.number,
                ch.len()
            ),
            Some(c) if *c != a.chain => format!(
                "row {} differs from the row certificate {} certifies ({at}): rows were replaced",
                a.row, a.number
            ),
            Some(_) => continue,
        };
        flag(&mut out[*i], a.row + 1, Some(a.lot.clone()), p);
    }
    if out[log_i].ok() {
        let owed = crate::record::lifecycle::owed_withdrawals(register, &log)?;
        if let Some(o) = owed.first() {
            let p = format!(
                "certificate {} of lot {} is still current although {} came after it ({}){}: its withdrawal was never logged (an interrupted command)",
                o.entry.number,
                o.entry.lot,
                o.cause.cell(),
                o.cause.reason,
                if owed.len() > 1 {
                    format!(" ({} certificates in all)", owed.len())
                } else {
                    String::new()
                }
            );
            let c = &mut out[log_i];
            flag(c, o.line, Some(o.entry.lot.clone()), p);
            c.withdrawals_owed = true;
        }
    }
    if let Some((pred, problem)) = crate::record::upgrade::check_predecessor(&log_path, &log)? {
        if let Some((line, p)) = problem {
            flag(&mut out[log_i], line, None, p);
        }
        out.insert(log_i, pred);
    }
    Ok(())
}

/// What `verify --quarantine` did to one file.
#[derive(Debug, Clone, PartialEq)]
pub enum Repair {
    /// The trend file had grown past its latest head; its head was recorded.
    HeadRecorded {
        /// The rows the trend file holds now.
        rows: usize,
    },
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
    let header_ok = |c: &[String]| {
        trend_file::is_trend_header(c)
            || is_log_header(c)
            || crate::record::heads::is_heads_header(c)
    };
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

/// Appends `text` (lines ending in a line feed) to the register's `quarantine.log`, synced.
pub fn append_quarantine_log(register: &Path, text: &str) -> Result<()> {
    let log = register.join("quarantine.log");
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(&log)
        .map_err(|e| Error::io(&log, "opening", e))?;
    f.write_all(text.as_bytes())
        .and_then(|()| f.sync_all())
        .map_err(|e| Error::io(&log, "writing", e))
}

/// Records the head of the trend file `path` in the register's heads file when the file only
/// grew past its latest head (or has rows and no head yet): a release interrupted after
/// appending its rows and before recording their head (issue #13, item 4). Holds the trend
/// file's and the heads file's locks, re-checks under them that every earlier head still
/// matches, and logs the repair in `quarantine.log`.
pub fn record_head(path: &Path, now: &str) -> Result<Repair> {
    use crate::record::heads::{self, HeadsLog};
    let register = path.parent().unwrap_or(Path::new("."));
    let wait = trend_file::Wait {
        timeout: std::time::Duration::from_secs(60),
    };
    let locked = trend_file::lock_with(path, "", &[], wait, &trend_file::is_trend_header)?;
    let t = &locked.trend;
    let mut heads = HeadsLog::open_behind(register, t)?;
    heads.record(std::iter::once(t), now)?;
    let log = register.join("quarantine.log");
    let line = format!(
        "{now}\trecorded the head of {} at {} rows in {}: rows were appended without one (an interrupted release)\n",
        path.display(),
        t.rows.len(),
        heads::path(register).display()
    );
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(&log)
        .map_err(|e| Error::io(&log, "opening", e))?;
    f.write_all(line.as_bytes())
        .and_then(|()| f.sync_all())
        .map_err(|e| Error::io(&log, "writing", e))?;
    Ok(Repair::HeadRecorded { rows: t.rows.len() })
}

/// What the issue log says about a certificate PDF (issue #14): exactly one of five
/// verdicts, whose snake_case names are the JSON key `verdict`. Only `genuine` means "a
/// current certificate, exactly as issued".
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "verdict", rename_all = "snake_case")]
pub enum CertVerdict {
    /// The bytes are exactly those issued, and the certificate is current.
    Genuine {
        /// The log entry.
        entry: crate::record::certlog::Entry,
    },
    /// The bytes are those issued, but a reissue replaced the certificate.
    Superseded {
        /// The log entry.
        entry: crate::record::certlog::Entry,
        /// The certificate that replaces it.
        superseded_by: String,
        /// When it was replaced.
        superseded_at: String,
        /// The reissue's reason.
        reason: String,
    },
    /// The bytes are those issued, but the certificate was withdrawn (the lot was rejected
    /// or put on hold afterwards) or logged as void.
    Withdrawn {
        /// The log entry.
        entry: crate::record::certlog::Entry,
        /// When it was withdrawn.
        withdrawn_at: String,
        /// Why.
        reason: String,
        /// The trend row that caused it ("PD-2000.csv row 63"); empty for a void file.
        cause: String,
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

impl CertVerdict {
    /// The verdict's name: genuine, superseded, withdrawn, altered or unknown.
    pub fn name(&self) -> &'static str {
        match self {
            CertVerdict::Genuine { .. } => "genuine",
            CertVerdict::Superseded { .. } => "superseded",
            CertVerdict::Withdrawn { .. } => "withdrawn",
            CertVerdict::Altered { .. } => "altered",
            CertVerdict::Unknown { .. } => "unknown",
        }
    }

    /// True only for a current certificate exactly as issued.
    pub fn is_genuine(&self) -> bool {
        matches!(self, CertVerdict::Genuine { .. })
    }
}

/// The verdict on a file whose SHA-256 `sha` matches issued certificate `entry`, given the
/// certificate's `standing` in the log. Pure.
pub fn verdict_for(
    entry: &crate::record::certlog::Entry,
    standing: Option<&crate::record::certlog::Standing>,
) -> CertVerdict {
    use crate::record::certlog::Standing;
    let entry = entry.clone();
    match standing {
        Some(Standing::Superseded { by, at, reason }) => CertVerdict::Superseded {
            entry,
            superseded_by: by.clone(),
            superseded_at: at.clone(),
            reason: reason.clone(),
        },
        Some(Standing::Withdrawn { at, reason, cause }) => CertVerdict::Withdrawn {
            entry,
            withdrawn_at: at.clone(),
            reason: reason.clone(),
            cause: cause.clone(),
        },
        _ => CertVerdict::Genuine { entry },
    }
}

/// Identifies a certificate PDF, or its JSON data companion (issue #17), against the issue
/// log: its bytes against every issued certificate's SHA-256 (either file's), then its
/// standing (superseded, withdrawn) in the log; altered when a certificate of that file name
/// (`<lot>_<number>.pdf` or `.json`) was issued with other bytes.
pub fn verify_certificate(pdf: &Path, register_dir: &Path) -> Result<CertVerdict> {
    let sha = file_sha256(pdf)?;
    let name = pdf
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    identify(sha, &name, register_dir)
}

/// Identifies certificate bytes held in memory (an upload to the web page, issue #21) against
/// the issue log, under the file name they came with; nothing is written.
pub fn verify_certificate_bytes(
    bytes: &[u8],
    name: &str,
    register_dir: &Path,
) -> Result<CertVerdict> {
    identify(trend_file::hex(&Sha256::digest(bytes)), name, register_dir)
}

/// The verdict for a certificate of SHA-256 `sha` that came under the file name `name`.
fn identify(sha: String, name: &str, register_dir: &Path) -> Result<CertVerdict> {
    let log = crate::record::certlog::read(register_dir)?;
    let entries: Vec<crate::record::certlog::Entry> = match &log {
        Some(t) => t
            .rows
            .iter()
            .filter(|r| crate::record::certlog::is_issue_row(t, r))
            .map(|r| crate::record::certlog::entry_of(t, r))
            .collect(),
        None => Vec::new(),
    };
    let standings = log
        .as_ref()
        .map(crate::record::certlog::standings)
        .unwrap_or_default();
    if let Some(e) = entries
        .iter()
        .find(|e| e.sha256 == sha || (!e.json_sha256.is_empty() && e.json_sha256 == sha))
    {
        return Ok(verdict_for(e, standings.get(&e.number)));
    }
    // A JSON companion's name maps to its PDF's name in the log (issue #17).
    let as_pdf = name
        .strip_suffix(".json")
        .map(|stem| format!("{stem}.pdf"))
        .unwrap_or_else(|| name.to_string());
    if let Some(e) = entries.iter().find(|e| e.file == as_pdf) {
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

    /// Issue #14: a file with the issued bytes is genuine only while its certificate is
    /// current; otherwise superseded or withdrawn, with the details.
    #[test]
    fn the_verdict_follows_the_certificates_standing_issue_14() {
        use crate::record::certlog::{Entry, Standing};
        let e = Entry {
            number: "FW-000004".into(),
            issued_at: "2026-10-01T10:00:00Z".into(),
            lot: "L1".into(),
            product: "P".into(),
            customer: "acme".into(),
            customer_name: "Acme Foams".into(),
            file: "L1_FW-000004.pdf".into(),
            sha256: "ab".into(),
            supersedes: String::new(),
            reason: String::new(),
            ..Default::default()
        };
        assert!(verdict_for(&e, Some(&Standing::Current)).is_genuine());
        assert!(verdict_for(&e, None).is_genuine());
        let v = verdict_for(
            &e,
            Some(&Standing::Superseded {
                by: "FW-000005".into(),
                at: "2026-10-02T00:00:00Z".into(),
                reason: "PO corrected".into(),
            }),
        );
        assert_eq!(v.name(), "superseded");
        let json = serde_json::to_value(&v).unwrap();
        assert_eq!(json["verdict"], "superseded");
        assert_eq!(json["superseded_by"], "FW-000005");
        let v = verdict_for(
            &e,
            Some(&Standing::Withdrawn {
                at: "2026-10-03T00:00:00Z".into(),
                reason: "lot rejected".into(),
                cause: "P.csv row 7".into(),
            }),
        );
        assert!(!v.is_genuine());
        assert_eq!(
            serde_json::to_value(&v).unwrap()["withdrawn_at"],
            "2026-10-03T00:00:00Z"
        );
        assert_eq!(
            CertVerdict::Unknown { sha256: "x".into() }.name(),
            "unknown"
        );
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
