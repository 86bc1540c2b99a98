//! The certificates folder as the record sees it: certificate files `<lot>_<number>.pdf`,
//! internal certificates pending as `.part` files while their trend row is appended, the
//! numbers those names hold, and what `verify` checks and repairs there (issue #13, items 7–9).
//!
//! An internal certificate is filed in four steps, each leaving a state that is detected and
//! completed: (1) its bytes go to `<lot>_<number>.pdf.<product>-<seq>.part` (fsync'd) before
//! trend row `seq` is appended; (2) the row is appended; (3) the part is linked to its final
//! name; (4) it is logged, and only then is the part removed. A part whose row was never
//! written is stray (removed by `verify --quarantine`); a part whose row was written is a row
//! still lacking its certificate (completed by running the release again, see
//! [`complete_pending`]).

use std::collections::{BTreeMap, HashSet};
use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::record::certlog::{self, Entry, Log};
use crate::record::trend_file::{self, Trend, Wait};

/// Start of the `reason` of a log entry that voids a certificate file found without its log
/// entry: the number stays used, the file is not a valid certificate.
pub const VOID_MARK: &str = "VOID:";

/// The reason recorded for a voided file.
const VOID_REASON: &str = "VOID: certificate file found without a log entry (an interrupted issue); logged by verify --quarantine, not a valid certificate";

/// Start of the name of a temporary file of [`crate::support::output::write_atomic`].
const TEMP_PREFIX: &str = ".resinlot-";

/// True when `e` voids a certificate file rather than issuing one.
pub fn is_void(e: &Entry) -> bool {
    e.reason.starts_with(VOID_MARK)
}

/// The name of the pending part of certificate file `final_name`, the internal certificate of
/// row `seq` of `product`'s trend file.
pub fn part_name(final_name: &str, product: &str, seq: usize) -> String {
    format!("{final_name}.{product}-{seq}.part")
}

/// A pending internal certificate, read from its part's name.
#[derive(Debug, Clone, PartialEq)]
pub struct Part {
    /// The part's file name.
    pub name: String,
    /// The certificate's final file name (`<lot>_<number>.pdf`).
    pub final_name: String,
    /// Product whose trend row it certifies.
    pub product: String,
    /// Sequence number of that row.
    pub seq: usize,
}

/// Reads a part name written by [`part_name`]; `None` for any other name.
pub fn parse_part(name: &str) -> Option<Part> {
    let head = name.strip_suffix(".part")?;
    let (head, seq) = head.rsplit_once('-')?;
    if seq.is_empty() || !seq.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    let at = head.rfind(".pdf.")?;
    let (final_name, product) = (&head[..at + 4], &head[at + 5..]);
    if product.is_empty() || final_name.len() <= 4 {
        return None;
    }
    Some(Part {
        name: name.to_string(),
        final_name: final_name.to_string(),
        product: product.to_string(),
        seq: seq.parse().ok()?,
    })
}

/// The sequence number held by a certificate file name `<lot>_<prefix><digits>.pdf` (or its
/// pending part); `None` for a name of another form or prefix.
pub fn number_in_name(name: &str, prefix: &str) -> Option<u64> {
    let part = parse_part(name);
    let final_name = part.as_ref().map_or(name, |p| p.final_name.as_str());
    let stem = final_name.strip_suffix(".pdf")?;
    let marker = format!("_{prefix}");
    stem.rmatch_indices(&marker)
        .find_map(|(i, _)| certlog::number_seq(&stem[i + 1..], prefix))
}

/// What the certificates folder holds, by kind (names only, sorted).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Listing {
    /// Certificate files (`*.pdf`).
    pub pdfs: Vec<String>,
    /// Pending internal certificates.
    pub parts: Vec<Part>,
    /// Temporary files of an interrupted atomic write (`.resinlot-*.part`).
    pub temps: Vec<String>,
}

impl Listing {
    /// Reads the folder; a missing folder holds nothing.
    pub fn read(dir: &Path) -> Result<Listing> {
        let mut l = Listing::default();
        let rd = match std::fs::read_dir(dir) {
            Ok(rd) => rd,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(l),
            Err(e) => return Err(Error::io(dir, "reading folder", e)),
        };
        for e in rd {
            let e = e.map_err(|e| Error::io(dir, "reading folder", e))?;
            let name = e.file_name().to_string_lossy().to_string();
            if name.starts_with(TEMP_PREFIX) && name.ends_with(".part") {
                l.temps.push(name);
            } else if let Some(p) = parse_part(&name) {
                l.parts.push(p);
            } else if name.ends_with(".pdf") {
                l.pdfs.push(name);
            }
        }
        l.pdfs.sort();
        l.temps.sort();
        l.parts.sort_by(|a, b| a.name.cmp(&b.name));
        Ok(l)
    }

    /// How many certificate files (issued or pending) the folder holds.
    pub fn certificate_count(&self) -> usize {
        self.pdfs.len() + self.parts.len()
    }

    /// The highest sequence number with `prefix` among the certificate files and pending parts
    /// (0 when none): a number seen here is never issued again (issue #13, item 8).
    pub fn highest_number(&self, prefix: &str) -> u64 {
        self.pdfs
            .iter()
            .map(String::as_str)
            .chain(self.parts.iter().map(|p| p.name.as_str()))
            .filter_map(|n| number_in_name(n, prefix))
            .max()
            .unwrap_or(0)
    }
}

/// Syncs a folder so that a link, rename or removal in it survives a crash.
fn sync_dir(dir: &Path) -> Result<()> {
    std::fs::File::open(dir)
        .and_then(|f| f.sync_all())
        .map_err(|e| Error::io(dir, "syncing folder", e))
}

/// True when two files hold the same bytes.
fn same_bytes(a: &Path, b: &Path) -> Result<bool> {
    let x = std::fs::read(a).map_err(|e| Error::io(a, "reading", e))?;
    let y = std::fs::read(b).map_err(|e| Error::io(b, "reading", e))?;
    Ok(x == y)
}

/// Files the pending certificate `part` of folder `dir` (steps 3 and 4 above): links it to its
/// final name `entry.file` (never replacing another file), logs `entry` unless the log already
/// holds that file, then removes the part. Safe to repeat after an interruption at any point.
/// The caller holds the log's lock (and the trend file's).
pub fn finish(log: &mut Log, dir: &Path, part: &str, entry: &Entry) -> Result<()> {
    let from = dir.join(part);
    let to = dir.join(&entry.file);
    match std::fs::hard_link(&from, &to) {
        Ok(()) => {}
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            if !to.is_file() || !same_bytes(&from, &to)? {
                return Err(Error::invalid(
                    to.display().to_string(),
                    format!("another file of this name is in the way of the pending certificate {part}"),
                    "Move the other file aside (it is not the certificate the record expects) and run again.",
                ));
            }
        }
        // A file system without hard links: copy the bytes atomically instead.
        Err(_) => {
            let bytes = std::fs::read(&from).map_err(|e| Error::io(&from, "reading", e))?;
            crate::support::output::write_atomic(&to, &bytes, false)?;
        }
    }
    sync_dir(dir)?;
    if !log.entries().iter().any(|e| e.file == entry.file) {
        log.append(entry)?;
    }
    std::fs::remove_file(&from).map_err(|e| Error::io(&from, "removing", e))?;
    sync_dir(dir)
}

/// The trend row certified by pending `part`, when it was written: row `seq` of the trend,
/// recording the lot the part's name starts with.
fn row_of<'t>(trend: &'t Trend, part: &Part) -> Option<&'t trend_file::Row> {
    let row = trend.rows.get(part.seq.checked_sub(1)?)?;
    let lot = trend.cell(row, "lot");
    (trend.cell(row, "seq") == part.seq.to_string()
        && !lot.is_empty()
        && part.final_name.starts_with(&format!("{lot}_")))
    .then_some(row)
}

/// The log entry of the internal certificate pending as `part` for `row`, as the release that
/// wrote the row would have logged it: it supersedes the lot's latest internal certificate,
/// with the row's reason.
fn pending_entry(
    log: &Log,
    trend: &Trend,
    row: &trend_file::Row,
    part: &Part,
    sha256: String,
    now: &str,
) -> Entry {
    let lot = trend.cell(row, "lot").to_string();
    let number = part.final_name[lot.len() + 1..part.final_name.len() - 4].to_string();
    let supersedes = log
        .entries()
        .into_iter()
        .rev()
        .find(|e| e.lot == lot && e.customer.is_empty() && !is_void(e) && e.number != number)
        .map(|e| e.number)
        .unwrap_or_default();
    Entry {
        number,
        issued_at: now.to_string(),
        lot,
        product: part.product.clone(),
        customer: String::new(),
        customer_name: String::new(),
        file: part.final_name.clone(),
        sha256,
        supersedes,
        reason: trend.cell(row, "reason").to_string(),
        ..Default::default()
    }
}

/// One internal certificate completed by [`complete_pending`].
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Completed {
    /// Certificate number.
    pub certificate_number: String,
    /// Lot id.
    pub lot: String,
    /// The certificate file.
    pub path: PathBuf,
}

/// Completes every internal certificate of `trend` left pending in `dir` by an interrupted
/// release whose row was written (issue #13, item 7): files it with [`finish`]. Called by
/// `release` under the trend file's and the log's locks; parts of rows never written are left
/// to `verify --quarantine`.
pub fn complete_pending(
    log: &mut Log,
    dir: &Path,
    trend: &Trend,
    product: &str,
    now: &str,
) -> Result<Vec<Completed>> {
    let mut done = Vec::new();
    for part in Listing::read(dir)?
        .parts
        .into_iter()
        .filter(|p| p.product == product)
    {
        let Some(row) = row_of(trend, &part) else {
            continue;
        };
        let sha = crate::record::integrity::file_sha256(&dir.join(&part.name))?;
        let entry = pending_entry(log, trend, row, &part, sha, now);
        finish(log, dir, &part.name, &entry)?;
        done.push(Completed {
            certificate_number: entry.number,
            lot: entry.lot,
            path: dir.join(&part.final_name),
        });
    }
    Ok(done)
}

/// What `verify --quarantine` does about a finding in the certificates folder.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Fix {
    /// Nothing: the message says what to do.
    None,
    /// Remove the stray temporary file.
    RemoveStray,
    /// Log the unlogged certificate file as void.
    LogVoid,
}

/// A problem found in the certificates folder.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Finding {
    /// The file concerned.
    pub path: PathBuf,
    /// What is wrong.
    pub problem: String,
    /// What to do.
    pub fix: String,
    /// What `verify --quarantine` does about it.
    pub repair: Fix,
}

/// Checks the certificates folder against the register (issue #13, items 7–9): a missing log
/// while certificates exist; rows whose internal certificate is still pending; stray parts and
/// temporary files; certificate files the log does not name. A damaged log or trend file is
/// reported by [`crate::record::integrity::check_register`] and skipped here.
pub fn check_folder(register: &Path, certificates: &Path) -> Result<Vec<Finding>> {
    let listing = Listing::read(certificates)?;
    let mut out = Vec::new();
    let log_path = certlog::path(register);
    let log_missing = std::fs::metadata(&log_path).map_or(true, |m| m.len() == 0);
    if log_missing {
        if listing.certificate_count() > 0 {
            out.push(Finding {
                path: log_path,
                problem: format!(
                    "the certificate log is missing, but {} certificate file(s) are in {}: numbering would start again at 000001",
                    listing.certificate_count(),
                    certificates.display()
                ),
                fix: "Restore the certificate log from backup; no certificate is issued until it is back.".into(),
                repair: Fix::None,
            });
        }
        return Ok(out);
    }
    let Ok(entries) = certlog::entries(register) else {
        return Ok(out);
    };
    let logged: HashSet<&str> = entries.iter().map(|e| e.file.as_str()).collect();
    let mut trends: BTreeMap<String, Option<Trend>> = BTreeMap::new();
    for part in &listing.parts {
        let trend = trends.entry(part.product.clone()).or_insert_with(|| {
            let p = trend_file::path_for(register, &part.product);
            p.is_file()
                .then(|| trend_file::read_fast(&p).ok())
                .flatten()
        });
        let path = certificates.join(&part.name);
        let row = trend.as_ref().and_then(|t| row_of(t, part));
        match row {
            None if trend.is_none()
                && trend_file::path_for(register, &part.product).is_file() => {}
            None => out.push(Finding {
                path,
                problem: format!(
                    "stray pending certificate: row {} of {}'s trend file was never written (an interrupted release)",
                    part.seq, part.product
                ),
                fix: "Run `resinlot verify --quarantine` to remove it.".into(),
                repair: Fix::RemoveStray,
            }),
            Some(_) if logged.contains(part.final_name.as_str())
                && certificates.join(&part.final_name).is_file() =>
            {
                out.push(Finding {
                    path,
                    problem: format!(
                        "stray pending certificate: {} is already filed and logged",
                        part.final_name
                    ),
                    fix: "Run `resinlot verify --quarantine` to remove it.".into(),
                    repair: Fix::RemoveStray,
                })
            }
            Some(row) => {
                let t = trend.as_ref().expect("row found in it");
                out.push(Finding {
                    path,
                    problem: format!(
                        "row {} of {} (lot '{}') has no internal certificate: {} is pending (an interrupted release)",
                        part.seq,
                        t.path.display(),
                        t.cell(row, "lot"),
                        part.final_name
                    ),
                    fix: "Run the same release again: the lot is unchanged and its certificate is filed and logged.".into(),
                    repair: Fix::None,
                })
            }
        }
    }
    for name in &listing.temps {
        out.push(Finding {
            path: certificates.join(name),
            problem: "stray temporary file of an interrupted write".into(),
            fix: "Run `resinlot verify --quarantine` to remove it.".into(),
            repair: Fix::RemoveStray,
        });
    }
    let pending: HashSet<&str> = listing
        .parts
        .iter()
        .map(|p| p.final_name.as_str())
        .collect();
    for name in &listing.pdfs {
        if logged.contains(name.as_str()) || pending.contains(name.as_str()) {
            continue;
        }
        let path = certificates.join(name);
        if !std::fs::symlink_metadata(&path).is_ok_and(|m| m.is_file()) {
            out.push(Finding {
                path,
                problem: "a link or folder with a certificate's name: resinlot never writes certificates through links, and does not issue its number".into(),
                fix: "Remove it, or replace it with the certificate file it should be.".into(),
                repair: Fix::None,
            });
            continue;
        }
        out.push(Finding {
            path: certificates.join(name),
            problem: "certificate file not in the certificate log (an interrupted certify); its number is not issued again".into(),
            fix: "Run `resinlot verify --quarantine` to log it as void, then issue the certificate again.".into(),
            repair: Fix::LogVoid,
        });
    }
    Ok(out)
}

/// Lot and number of an unlogged certificate file `<lot>_<number>.pdf`: the number is split
/// off after a prefix the log uses, else after the last `_`.
fn lot_and_number(name: &str, entries: &[Entry]) -> (String, String) {
    let stem = name.strip_suffix(".pdf").unwrap_or(name);
    for e in entries.iter().rev() {
        let prefix = e.number.trim_end_matches(|c: char| c.is_ascii_digit());
        if number_in_name(name, prefix).is_some() {
            if let Some((i, _)) = stem
                .rmatch_indices(&format!("_{prefix}"))
                .find(|(i, _)| certlog::number_seq(&stem[i + 1..], prefix).is_some())
            {
                return (stem[..i].to_string(), stem[i + 1..].to_string());
            }
        }
    }
    match stem.rsplit_once('_') {
        Some((lot, number)) => (lot.to_string(), number.to_string()),
        None => (String::new(), stem.to_string()),
    }
}

/// Repairs what [`check_folder`] can (issue #13, items 7 and 8), under the locks of the trend
/// files the pending parts name and then the certificate log's (the order `release` takes
/// them): removes stray parts and temporary files, and logs each unlogged certificate file as
/// void. Each repair is a line in `quarantine.log` in the register; returns one line per
/// repair for the user.
pub fn repair_folder(
    register: &Path,
    certificates: &Path,
    now: &str,
    wait: Wait,
) -> Result<Vec<String>> {
    let first = check_folder(register, certificates)?;
    if first.iter().all(|f| f.repair == Fix::None) {
        return Ok(vec![]);
    }
    let mut products: Vec<String> = Listing::read(certificates)?
        .parts
        .into_iter()
        .map(|p| p.product)
        .filter(|p| trend_file::path_for(register, p).is_file())
        .collect();
    products.sort();
    products.dedup();
    let mut _locks = Vec::new();
    for p in &products {
        _locks.push(trend_file::lock(
            &trend_file::path_for(register, p),
            &[],
            &[],
            wait,
        )?);
    }
    let mut log = Log::lock(register, wait)?;
    if log.is_new() {
        return Ok(vec![]);
    }
    let entries = log.entries();
    let mut done = Vec::new();
    for f in check_folder(register, certificates)? {
        let name = f
            .path
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_default();
        let line = match f.repair {
            Fix::None => continue,
            Fix::RemoveStray => {
                std::fs::remove_file(&f.path).map_err(|e| Error::io(&f.path, "removing", e))?;
                format!("removed {} ({})", f.path.display(), f.problem)
            }
            Fix::LogVoid => {
                let (lot, number) = lot_and_number(&name, &entries);
                let product = crate::record::query::find_lot(register, &lot)
                    .ok()
                    .flatten()
                    .and_then(|t| t.rows.first().map(|r| t.cell(r, "product").to_string()))
                    .unwrap_or_default();
                log.append(&Entry {
                    number: number.clone(),
                    issued_at: now.to_string(),
                    lot,
                    product,
                    customer: String::new(),
                    customer_name: String::new(),
                    file: name.clone(),
                    sha256: crate::record::integrity::file_sha256(&f.path)?,
                    supersedes: String::new(),
                    reason: VOID_REASON.to_string(),
                    ..Default::default()
                })?;
                format!(
                    "logged {} as void: certificate number {number} stays used, the file is not a valid certificate",
                    f.path.display()
                )
            }
        };
        let q = register.join("quarantine.log");
        std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(&q)
            .and_then(|mut file| {
                file.write_all(format!("{now}\t{line}\n").as_bytes())?;
                file.sync_all()
            })
            .map_err(|e| Error::io(&q, "writing", e))?;
        done.push(line);
    }
    sync_dir(certificates)?;
    Ok(done)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn part_names_round_trip() {
        let n = part_name("T26-101_FW-000004.pdf", "PD-2000", 12);
        assert_eq!(n, "T26-101_FW-000004.pdf.PD-2000-12.part");
        let p = parse_part(&n).unwrap();
        assert_eq!(
            (p.final_name.as_str(), p.product.as_str(), p.seq),
            ("T26-101_FW-000004.pdf", "PD-2000", 12)
        );
        assert_eq!(parse_part(".resinlot-abc.part"), None);
        assert_eq!(parse_part("x.pdf"), None);
    }

    /// Issue #13 item 8: numbers are read from final and pending names, for the site's prefix.
    #[test]
    fn numbers_in_names_issue_13() {
        assert_eq!(number_in_name("T26_101_FW-000004.pdf", "FW-"), Some(4));
        assert_eq!(
            number_in_name("L1_FW-000009.pdf.PD-2000-3.part", "FW-"),
            Some(9)
        );
        assert_eq!(number_in_name("L1_XY-000009.pdf", "FW-"), None);
        assert_eq!(number_in_name("L1_FW-0000x9.pdf", "FW-"), None);
        let e = |number: &str| Entry {
            number: number.into(),
            issued_at: String::new(),
            lot: String::new(),
            product: String::new(),
            customer: String::new(),
            customer_name: String::new(),
            file: String::new(),
            sha256: String::new(),
            supersedes: String::new(),
            reason: String::new(),
            ..Default::default()
        };
        assert_eq!(
            lot_and_number("A_B_FW_000005.pdf", &[e("FW_000001")]),
            ("A_B".into(), "FW_000005".into())
        );
        assert_eq!(
            lot_and_number("A_FW-000005.pdf", &[]),
            ("A".into(), "FW-000005".into())
        );
    }

    #[test]
    fn listing_sorts_files_by_kind() {
        let dir = tempfile::tempdir().unwrap();
        for n in [
            "L1_FW-000002.pdf",
            "L2_FW-000007.pdf.P-3.part",
            ".resinlot-x1.part",
            "L1_FW-000002.html",
        ] {
            std::fs::write(dir.path().join(n), b"x").unwrap();
        }
        let l = Listing::read(dir.path()).unwrap();
        assert_eq!(l.pdfs, ["L1_FW-000002.pdf"]);
        assert_eq!(l.temps, [".resinlot-x1.part"]);
        assert_eq!(l.parts.len(), 1);
        assert_eq!(l.certificate_count(), 2);
        assert_eq!(l.highest_number("FW-"), 7);
        assert_eq!(
            Listing::read(&dir.path().join("none")).unwrap(),
            Listing::default()
        );
    }
}
