//! `resinlot upgrade`: brings a register written before issue #13 to the current layout
//! without rewriting any old row.
//!
//! Two steps, each done at most once, so an interrupted upgrade is completed by running it
//! again:
//! 1. the heads file is started (written whole, atomically) with one row per trend file
//!    recording its row count and last chain value as they are now;
//! 2. a certificate log in the earlier layout ([`certlog::COLUMNS_V1`]) is kept, byte for byte,
//!    as [`PREDECESSOR`] (a hard link, or a copy where links are not possible), and the log in
//!    the current layout is written beside it and renamed into place: a first *layout row*
//!    records the predecessor's file name, SHA-256, row count and last chain value, then the
//!    predecessor's rows follow with their cells unchanged (and empty anchors: when they were
//!    issued no anchor was kept).
//!
//! 3. every trend file and the certificate log written before layout v3 is *widened*: the
//!    header gains the extension columns ([`crate::record::layout`]) and every row gains empty
//!    cells before `chain`. The chain rule signs a row without trailing empty extension cells
//!    and seeds from the header without them, so every chain value, row count, heads-file entry
//!    and certificate anchor stays what it was; the widened file is parsed and checked to end
//!    in the same chain value before it replaces the old one (atomically, under the file's
//!    lock).
//!
//! `verify` checks an upgraded log back to its predecessor ([`check_predecessor`]).

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::record::certlog::{self, Layout};
use crate::record::heads::{self, State};
use crate::record::integrity::{self, FileCheck};
use crate::record::layout;
use crate::record::trend_file::{self, Trend, Wait};

/// File name the earlier certificate log is kept under after an upgrade (not `.csv`, so it is
/// never taken for a trend file).
pub const PREDECESSOR: &str = "certificates.csv.v1";

/// The reason recorded in a layout row.
pub const LAYOUT_REASON: &str =
    "layout upgrade (issue #13): the predecessor's rows follow with their cells unchanged";

/// What an upgrade did.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Upgraded {
    /// The heads file started, with the number of trend files it anchors.
    pub heads: Option<(PathBuf, usize)>,
    /// The certificate log's predecessor kept, with its SHA-256 and row count.
    pub log: Option<(PathBuf, String, usize)>,
    /// Files widened to layout v3, with their row counts.
    pub widened: Vec<(PathBuf, usize)>,
}

impl Upgraded {
    /// True when the register was already in the current layout.
    pub fn nothing_to_do(&self) -> bool {
        self.heads.is_none() && self.log.is_none() && self.widened.is_empty()
    }
}

/// Upgrades the register in `register` (whose certificates are in `certificates`). Refuses,
/// writing nothing, a register that does not verify, and one whose heads file was lost.
pub fn upgrade(register: &Path, certificates: &Path, now: &str, wait: Wait) -> Result<Upgraded> {
    if !register.is_dir() {
        return Err(Error::invalid(
            register.display().to_string(),
            "there is no register folder here",
            "Give the register folder with --register.",
        ));
    }
    let checks = integrity::check_register(register, certificates)?;
    if let Some(c) = checks.iter().find(|c| !c.ok()) {
        return Err(Error::invalid(
            format!("{}:{}", c.path.display(), c.line.unwrap_or(0)),
            format!(
                "the record is not intact ({}), so it is not upgraded",
                c.problem.as_deref().unwrap_or_default()
            ),
            "Run `resinlot verify`, repair what it names (restore from backup, or --quarantine a torn tail), then upgrade.",
        ));
    }
    let mut done = Upgraded::default();
    let st = heads::state(register)?;
    if st == State::Missing {
        return Err(heads::lost(register));
    }
    // Every trend file stays locked until the heads file records them.
    let mut locks = Vec::new();
    for p in crate::record::query::trend_files(register)? {
        locks.push(trend_file::lock_with(
            &p,
            "",
            &[],
            wait,
            &trend_file::is_trend_header,
        )?);
    }
    if st == State::Legacy {
        let trends: Vec<&Trend> = locks
            .iter()
            .map(|l| &l.trend)
            .filter(|t| !t.rows.is_empty())
            .collect();
        let rows: Vec<Vec<(&str, String)>> = trends
            .iter()
            .map(|t| {
                vec![
                    ("recorded_at", now.to_string()),
                    ("file", heads::file_name(&t.path)),
                    ("rows", t.rows.len().to_string()),
                    ("last_chain", t.head.clone()),
                ]
            })
            .collect();
        let text = chained_text(&heads::COLUMNS, &rows);
        let p = heads::path(register);
        crate::support::output::write_atomic(&p, text.as_bytes(), false)?;
        done.heads = Some((p, trends.len()));
    }
    if certlog::layout(register)? == Some(Layout::V1) {
        done.log = Some(upgrade_log(register, now, wait)?);
    }
    for l in &locks {
        if let Some(rows) = widen(&l.trend.path, &l.trend, &layout::TREND_EXTENSION)? {
            done.widened.push((l.trend.path.clone(), rows));
        }
    }
    let log_path = certlog::path(register);
    if log_path.is_file() {
        let log = trend_file::lock_with(&log_path, "", &[], wait, &certlog::header_ok)?;
        if !log.trend.columns.is_empty() {
            if let Some(rows) = widen(&log_path, &log.trend, &layout::LOG_EXTENSION)? {
                done.widened.push((log_path, rows));
            }
        }
    }
    drop(locks);
    Ok(done)
}

/// Step 3 of [`upgrade`]: widens the file at `path` (read under its lock as `trend`) to layout
/// v3 when it lacks `extension`. Returns its row count when it was widened.
fn widen(path: &Path, trend: &Trend, extension: &[&str]) -> Result<Option<usize>> {
    if trend.columns.is_empty() || layout::extension_len(&trend.columns) > 0 {
        return Ok(None);
    }
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    let wide = widened_bytes(&bytes, &trend.columns, extension);
    let (back, damage) = trend_file::parse_bytes(path, &wide, true, &|c| {
        layout::extension_len(c) == extension.len()
    });
    if damage.is_some() || back.rows.len() != trend.rows.len() || back.head != trend.head {
        return Err(Error::invalid(
            path.display().to_string(),
            "widening the file to the current layout would not keep its chain; nothing was written",
            "Run `resinlot verify` and report what it says; the file is left as it was.",
        ));
    }
    crate::support::output::write_atomic(path, &wide, true)?;
    Ok(Some(trend.rows.len()))
}

/// The bytes of a chained CSV widened to layout v3: the header with `extension` before
/// `chain`, every row with as many empty cells before its chain value; pure.
fn widened_bytes(bytes: &[u8], columns: &[String], extension: &[&str]) -> Vec<u8> {
    let mut out = Vec::with_capacity(bytes.len() + bytes.len() / 8);
    let pad = ",".repeat(extension.len());
    for (i, line) in bytes.split_inclusive(|&b| b == b'\n').enumerate() {
        if i == 0 {
            out.extend_from_slice(layout::widened(columns, extension).join(",").as_bytes());
            out.push(b'\n');
            continue;
        }
        match line.iter().rposition(|&b| b == b',') {
            Some(k) => {
                out.extend_from_slice(&line[..k]);
                out.extend_from_slice(pad.as_bytes());
                out.extend_from_slice(&line[k..]);
            }
            None => out.extend_from_slice(line),
        }
    }
    out
}

/// True when the log at `log_path` starts with a layout row (it was upgraded). Reads only the
/// first two lines.
pub fn is_upgraded(log_path: &Path) -> Result<bool> {
    use std::io::BufRead;
    let f = std::fs::File::open(log_path).map_err(|e| Error::io(log_path, "reading", e))?;
    let mut lines = std::io::BufReader::new(f).split(b'\n');
    let (Some(Ok(header)), Some(Ok(first))) = (lines.next(), lines.next()) else {
        return Ok(false);
    };
    let cols = trend_file::split_line(&String::from_utf8_lossy(&header));
    let cells = trend_file::split_line(&String::from_utf8_lossy(&first));
    Ok(cols
        .iter()
        .position(|c| c == "number")
        .and_then(|i| cells.get(i))
        .is_some_and(|n| n.is_empty()))
}

/// Step 2 of [`upgrade`]: keeps the earlier log as [`PREDECESSOR`] and writes the current one.
fn upgrade_log(register: &Path, now: &str, wait: Wait) -> Result<(PathBuf, String, usize)> {
    let log_path = certlog::path(register);
    let locked = trend_file::lock_with(&log_path, "", &[], wait, &certlog::header_ok)?;
    let old = &locked.trend;
    let bytes = std::fs::read(&log_path).map_err(|e| Error::io(&log_path, "reading", e))?;
    let sha = trend_file::hex(&<sha2::Sha256 as sha2::Digest>::digest(&bytes));
    let pred = register.join(PREDECESSOR);
    match std::fs::read(&pred) {
        Ok(held) if held == bytes => {} // kept by an interrupted upgrade
        Ok(_) => {
            return Err(Error::invalid(
                pred.display().to_string(),
                "a different earlier certificate log is already kept under this name",
                "Move that file aside (keep it: it may be part of the record) and run the upgrade again.",
            ))
        }
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            if std::fs::hard_link(&log_path, &pred).is_err() {
                crate::support::output::write_atomic(&pred, &bytes, false)?;
            }
        }
        Err(e) => return Err(Error::io(&pred, "reading", e)),
    }
    let mut rows: Vec<Vec<(&str, String)>> = vec![vec![
        ("issued_at", now.to_string()),
        ("file", PREDECESSOR.to_string()),
        ("sha256", sha.clone()),
        ("reason", LAYOUT_REASON.to_string()),
        ("trend_row", old.rows.len().to_string()),
        ("trend_chain", old.head.clone()),
    ]];
    for r in &old.rows {
        rows.push(
            carried_columns()
                .map(|c| (c, old.cell(r, c).to_string()))
                .collect(),
        );
    }
    let text = chained_text(&certlog::COLUMNS, &rows);
    crate::support::output::write_atomic(&log_path, text.as_bytes(), true)?;
    Ok((pred, sha, old.rows.len()))
}

/// The columns a carried-over row keeps from its predecessor (all but `seq` and `chain`).
fn carried_columns() -> impl Iterator<Item = &'static str> {
    certlog::COLUMNS_V1
        .into_iter()
        .filter(|c| *c != "seq" && *c != "chain")
}

/// The text of a hash-chained CSV with `columns` holding `rows` (cells by column name, missing
/// ones empty), numbered from 1, exactly as appending them one by one would write it.
fn chained_text(columns: &[&str], rows: &[Vec<(&str, String)>]) -> String {
    let header = columns.join(",");
    let names: Vec<String> = columns.iter().map(|c| c.to_string()).collect();
    let extension = layout::extension_len(&names);
    let mut head = trend_file::chain_seed(&names);
    let mut text = format!("{header}\n");
    for (k, cells) in rows.iter().enumerate() {
        let mut row = vec![String::new(); columns.len() - 1];
        row[0] = (k + 1).to_string();
        for (name, value) in cells {
            if let Some(i) = columns.iter().position(|c| c == name) {
                row[i] = value.clone();
            }
        }
        let body: Vec<String> = row.iter().map(|c| trend_file::text_cell(c)).collect();
        let body = body.join(",");
        head = trend_file::chain_hash(&head, layout::signed_body(&body, extension));
        text.push_str(&format!("{body},{head}\n"));
    }
    text
}

/// The predecessor's check, and the first problem of the upgraded log with its line.
pub type PredecessorCheck = (FileCheck, Option<(usize, String)>);

/// Checks an upgraded log `log` (read from `log_path`) back to its predecessor: when its first
/// row is a layout row, the predecessor it names must be beside it with the recorded SHA-256,
/// verify by itself, hold the recorded row count ending in the recorded chain value, and its
/// rows must follow the layout row unchanged. Returns the predecessor's check (intact ones
/// carry a note naming its SHA-256) and the first problem of the log itself with its line.
pub fn check_predecessor(log_path: &Path, log: &Trend) -> Result<Option<PredecessorCheck>> {
    let Some(first) = log.rows.first() else {
        return Ok(None);
    };
    if !certlog::is_layout_row(log, first) {
        return Ok(None);
    }
    let name = log.cell(first, "file");
    let at = |p: String| Some((first.line, p));
    let register = log_path.parent().unwrap_or(Path::new("."));
    let pred = register.join(name);
    let mut check = FileCheck::from(&pred, 0, None);
    if name != PREDECESSOR {
        let p = format!("the layout row names '{name}' as the predecessor, not {PREDECESSOR}");
        return Ok(Some((check, at(p))));
    }
    if !pred.is_file() {
        let p = format!(
            "the predecessor {} named by the layout row is missing: restore it from backup",
            pred.display()
        );
        return Ok(Some((check, at(p))));
    }
    let sha = integrity::file_sha256(&pred)?;
    if sha != log.cell(first, "sha256") {
        let p = format!(
            "the predecessor {} has SHA-256 {sha}, not {} as the layout row records: it was changed",
            pred.display(),
            log.cell(first, "sha256")
        );
        return Ok(Some((check, at(p))));
    }
    let bytes = std::fs::read(&pred).map_err(|e| Error::io(&pred, "reading", e))?;
    let (old, damage) = trend_file::parse_bytes(&pred, &bytes, true, &certlog::header_ok);
    if damage.is_some() {
        return Ok(Some((FileCheck::from(&pred, old.rows.len(), damage), None)));
    }
    check.rows = old.rows.len();
    let recorded_rows = log.cell(first, "trend_row");
    if recorded_rows != old.rows.len().to_string() || log.cell(first, "trend_chain") != old.head {
        let p = format!(
            "the layout row records {recorded_rows} rows ending in chain {}, the predecessor has {} ending in {}",
            log.cell(first, "trend_chain"),
            old.rows.len(),
            old.head
        );
        return Ok(Some((check, at(p))));
    }
    for (k, r) in old.rows.iter().enumerate() {
        let carried = log.rows.get(k + 1);
        let same =
            carried.is_some_and(|n| carried_columns().all(|c| old.cell(r, c) == log.cell(n, c)));
        if !same {
            let line = carried.map_or(log.rows.len() + 2, |n| n.line);
            let p = format!(
                "this row should carry line {} of the predecessor {} unchanged, and does not",
                r.line,
                pred.display()
            );
            return Ok(Some((check, Some((line, p)))));
        }
    }
    check.note = Some(format!(
        "{} rows, intact: the predecessor of {} (SHA-256 {sha}, as its layout row records)",
        old.rows.len(),
        log_path.display()
    ));
    Ok(Some((check, None)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::Duration;

    #[test]
    fn chained_text_matches_what_appending_writes() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("heads.csv");
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let mut l = trend_file::lock_with(
            &p,
            &heads::COLUMNS.join(","),
            &[],
            wait,
            &heads::is_heads_header,
        )
        .unwrap();
        let rows = vec![
            vec![("file", "A.csv".to_string()), ("rows", "2".to_string())],
            vec![
                ("file", "B, \"b\".csv".to_string()),
                ("rows", "=1".to_string()),
            ],
        ];
        for r in &rows {
            l.append(r).unwrap();
        }
        l.sync().unwrap();
        drop(l);
        assert_eq!(
            std::fs::read_to_string(&p).unwrap(),
            chained_text(&heads::COLUMNS, &rows)
        );
    }

    /// Issue #13: an upgraded log checks back to its predecessor, naming its SHA-256, and a
    /// carried row that differs from the predecessor's is named with its line.
    #[test]
    fn an_upgraded_log_checks_back_to_its_predecessor_issue_13() {
        use crate::record::certlog::{Entry, Log};
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let keys = vec!["acid_value".to_string()];
        let trend = trend_file::path_for(dir.path(), "P");
        trend_file::write_for_test(&trend, &keys, &[vec![("lot", "L1".into())]]);
        let mut log = Log::lock(dir.path(), wait).unwrap(); // earlier layout: no heads yet
        for n in ["FW-000001", "FW-000002"] {
            log.append(&Entry {
                number: n.into(),
                issued_at: "2026-10-01T10:00:00Z".into(),
                lot: "L1".into(),
                product: "P".into(),
                customer: String::new(),
                customer_name: "A, B & \"C\"".into(),
                file: format!("L1_{n}.pdf"),
                sha256: "ab".into(),
                supersedes: String::new(),
                reason: String::new(),
                ..Default::default()
            })
            .unwrap();
        }
        drop(log);
        let old = std::fs::read(certlog::path(dir.path())).unwrap();
        let (_, sha, rows) = upgrade_log(dir.path(), "2026-10-02T08:00:00Z", wait).unwrap();
        assert_eq!(rows, 2);
        assert_eq!(std::fs::read(dir.path().join(PREDECESSOR)).unwrap(), old);
        let p = certlog::path(dir.path());
        assert!(is_upgraded(&p).unwrap());
        let text = std::fs::read_to_string(&p).unwrap();
        let (mut log, d) = trend_file::parse_chained(&p, &text, true, &certlog::header_ok);
        assert!(d.is_none(), "{d:?}");
        let (pred, problem) = check_predecessor(&p, &log).unwrap().unwrap();
        assert_eq!(problem, None);
        assert!(pred.note.unwrap().contains(&format!("SHA-256 {sha}")));
        assert_eq!(certlog::entries(dir.path()).unwrap().len(), 2);
        let col = log.col("customer_name").unwrap();
        log.rows[2].cells[col] = "Someone else".into();
        let (_, problem) = check_predecessor(&p, &log).unwrap().unwrap();
        let (line, text) = problem.unwrap();
        assert_eq!(line, 4);
        assert!(
            text.contains("should carry line 3 of the predecessor"),
            "{text}"
        );
    }
}
