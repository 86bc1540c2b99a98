//! The heads file `register/heads.csv`: an anchor for the trend files kept outside them.
//!
//! Layout: `seq,recorded_at,file,rows,last_chain,chain`, hash-chained like a trend file (see
//! [`crate::record::trend_file`]). After every append to a trend file, under the trend file's
//! lock and the heads file's lock, one row records the trend file's name, its row count and the
//! chain value of its last row. A trend file shortened from the end (`sed -i '$d'`) still
//! chains by itself; its heads no longer match, and `verify` names the missing rows
//! (issue #13, item 4).
//!
//! A register written before heads were kept has trend rows, no heads file and a certificate
//! log (if any) in the earlier layout: it is a *legacy* register and keeps working without
//! heads until `resinlot upgrade` adds them. A missing heads file where the certificate log
//! is already in the current layout is a loss, never legacy.

use std::collections::HashMap;
use std::fs::File;
use std::io::{Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};
use std::time::Duration;

use crate::error::{Error, Result};
use crate::record::trend_file::{self, Locked, Trend, Wait};

/// Columns of the heads file.
pub const COLUMNS: [&str; 6] = ["seq", "recorded_at", "file", "rows", "last_chain", "chain"];

/// The heads file's name inside the register folder.
pub const FILE: &str = "heads.csv";

/// How long an append waits for the heads file's lock (held only for a few rows' writing).
const HEADS_WAIT: Duration = Duration::from_secs(60);

/// The heads file's path inside a register folder.
pub fn path(register: &Path) -> PathBuf {
    register.join(FILE)
}

/// True when `columns` is the heads file's header.
pub fn is_heads_header(columns: &[String]) -> bool {
    columns == COLUMNS
}

/// One row of the heads file.
#[derive(Debug, Clone, PartialEq)]
pub struct Head {
    /// Line of the row in the heads file (header is line 1).
    pub line: usize,
    /// File name of the trend file inside the register folder.
    pub file: String,
    /// Rows the trend file held.
    pub rows: usize,
    /// Chain value of the trend file's last row then.
    pub last_chain: String,
}

/// The heads of a parsed heads file, in file order.
pub fn heads_of(t: &Trend) -> Vec<Head> {
    t.rows
        .iter()
        .map(|r| Head {
            line: r.line,
            file: t.cell(r, "file").to_string(),
            rows: t.cell(r, "rows").parse().unwrap_or(0),
            last_chain: t.cell(r, "last_chain").to_string(),
        })
        .collect()
}

/// The latest head of each file.
pub fn latest(heads: &[Head]) -> HashMap<&str, &Head> {
    heads.iter().map(|h| (h.file.as_str(), h)).collect()
}

/// Whether and how a register keeps heads.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum State {
    /// The heads file exists and is kept on every append.
    Kept,
    /// No trend file holds a row yet: the first append starts the heads file.
    Fresh,
    /// Written before heads were kept (trend rows, no heads file, no certificate log in the
    /// current layout): works as it is; `resinlot upgrade` adds the heads.
    Legacy,
    /// No heads file although the certificate log is in the current layout: it was lost.
    Missing,
}

/// The register's [`State`]. Pure apart from reading the folder: a trend file counts as
/// holding rows when it is not empty.
pub fn state(register: &Path) -> Result<State> {
    if path(register).exists() {
        return Ok(State::Kept);
    }
    if !register.is_dir() {
        return Ok(State::Fresh);
    }
    let log = crate::record::certlog::layout(register)?;
    let mut rows = false;
    for p in crate::record::query::trend_files(register)? {
        let len = std::fs::metadata(&p).map_err(|e| Error::io(&p, "reading", e))?;
        rows |= len.len() > 0;
    }
    Ok(match log {
        Some(crate::record::certlog::Layout::Current) if rows => State::Missing,
        Some(crate::record::certlog::Layout::V1) => State::Legacy,
        _ if rows => State::Legacy,
        _ => State::Fresh,
    })
}

/// How the trend file (`rows` rows, `chain_at(k)` the chain value of row k, 1-based) disagrees
/// with the head `h` recorded in `heads_file`, if it does; the message names the rows.
pub fn disagreement(
    heads_file: &Path,
    h: &Head,
    rows: usize,
    chain_at: &dyn Fn(usize) -> Option<String>,
) -> Option<String> {
    let at = format!("{}:{}", heads_file.display(), h.line);
    if rows < h.rows {
        let missing = if h.rows == rows + 1 {
            format!("row {} is missing", h.rows)
        } else {
            format!("rows {} to {} are missing", rows + 1, h.rows)
        };
        return Some(format!(
            "{missing}: {at} records {} rows ending in chain {}, the file has {rows} (rows were deleted from the end)",
            h.rows,
            short(&h.last_chain)
        ));
    }
    if h.rows > 0 && chain_at(h.rows).as_deref() != Some(h.last_chain.as_str()) {
        return Some(format!(
            "row {} differs from the head recorded at {at} (chain {}): rows were replaced",
            h.rows,
            short(&h.last_chain)
        ));
    }
    None
}

/// The first 12 hex digits of a chain value, enough to name it in a message.
fn short(chain: &str) -> &str {
    &chain[..chain.len().min(12)]
}

/// The heads file, locked for one append to the trend files.
pub struct HeadsLog {
    locked: Locked,
}

impl HeadsLog {
    /// Locks the heads file for an append to `trends` (each already locked by the caller, as
    /// read under its lock, before anything is written). Returns `None` for a legacy register,
    /// which keeps no heads until it is upgraded. Refuses, writing nothing, a trend file that
    /// disagrees with its latest head, one with rows but no head, and a lost heads file.
    pub fn open<'a>(
        register: &Path,
        trends: impl Iterator<Item = &'a Trend>,
    ) -> Result<Option<HeadsLog>> {
        let st = state(register)?;
        if st == State::Legacy {
            return Ok(None);
        }
        if st == State::Missing {
            return Err(lost(register));
        }
        let locked = lock_heads(register)?;
        let heads = heads_of(&locked.trend);
        let last = latest(&heads);
        for t in trends {
            let name = file_name(&t.path);
            let chain_at = |k: usize| t.rows.get(k - 1).map(|r| last_cell(&r.cells));
            let problem = match last.get(name.as_str()) {
                Some(h) => disagreement(&path(register), h, t.rows.len(), &chain_at).or_else(|| {
                    (t.rows.len() > h.rows).then(|| {
                        format!(
                            "rows {} to {} have no head in {}: they were added after its line {} (an interrupted release, or rows added by hand)",
                            h.rows + 1,
                            t.rows.len(),
                            path(register).display(),
                            h.line
                        )
                    })
                }),
                None if !t.rows.is_empty() => Some(format!(
                    "the file has {} rows but {} records no head for it",
                    t.rows.len(),
                    path(register).display()
                )),
                None => None,
            };
            if let Some(problem) = problem {
                return Err(Error::invalid(
                    t.path.display().to_string(),
                    problem,
                    "The trend file and its heads disagree, so nothing was written: run `resinlot verify`; rows without a head (an interrupted release) are recorded by `resinlot verify --quarantine`, missing or replaced rows are restored from backup.",
                ));
            }
        }
        Ok(Some(HeadsLog { locked }))
    }

    /// Locks the heads file to record the head of `t` (locked by the caller), which must have
    /// grown past its latest head with every earlier head still matching, or hold rows and
    /// no head yet; anything else is refused (restoring from backup is for people to decide).
    pub fn open_behind(register: &Path, t: &Trend) -> Result<HeadsLog> {
        if state(register)? != State::Kept {
            return Err(Error::invalid(
                path(register).display().to_string(),
                "there is no heads file to record the head in",
                "Run `resinlot verify` to see the register's state.",
            ));
        }
        let locked = lock_heads(register)?;
        let name = file_name(&t.path);
        let heads = heads_of(&locked.trend);
        let chain_at = |k: usize| t.rows.get(k - 1).map(|r| last_cell(&r.cells));
        let mut behind = true;
        for h in heads.iter().filter(|h| h.file == name) {
            if let Some(p) = disagreement(&path(register), h, t.rows.len(), &chain_at) {
                return Err(Error::invalid(
                    t.path.display().to_string(),
                    p,
                    "Restore the trend file (or heads.csv) from backup; nothing was written.",
                ));
            }
            behind = t.rows.len() > h.rows;
        }
        if !behind || t.rows.is_empty() {
            return Err(Error::invalid(
                t.path.display().to_string(),
                "the file's head is already recorded",
                "Run `resinlot verify` again to see its current state.",
            ));
        }
        Ok(HeadsLog { locked })
    }

    /// Appends the head of each trend in `trends` (as it stands after the append) and syncs.
    pub fn record<'a>(&mut self, trends: impl Iterator<Item = &'a Trend>, now: &str) -> Result<()> {
        for t in trends {
            self.locked.append(&[
                ("recorded_at", now.to_string()),
                ("file", file_name(&t.path)),
                ("rows", t.rows.len().to_string()),
                ("last_chain", t.head.clone()),
            ])?;
        }
        self.locked.sync()
    }
}

/// Locks the heads file of `register` (created with its header when missing), waiting at
/// most `HEADS_WAIT` for another writer.
fn lock_heads(register: &Path) -> Result<Locked> {
    let wait = Wait {
        timeout: HEADS_WAIT,
    };
    trend_file::lock_with(
        &path(register),
        &COLUMNS.join(","),
        &[],
        wait,
        &is_heads_header,
    )
}

/// The error for a lost heads file.
pub fn lost(register: &Path) -> Error {
    Error::invalid(
        path(register).display().to_string(),
        "the heads file is missing, although the certificate log is in the layout that keeps heads",
        "Restore heads.csv from backup; nothing was written.",
    )
}

/// File name of a path, as heads record it.
pub fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default()
}

fn last_cell(cells: &[String]) -> String {
    cells.last().cloned().unwrap_or_default()
}

/// The row number (`seq`) and chain value of the latest row of `lot` in the trend file `path`
/// (see [`ReverseIndex`]).
pub fn latest_row_of(path: &Path, lot: &str) -> Result<Option<(usize, String)>> {
    ReverseIndex::new(path).find(lot)
}

/// Finds the latest row of lots in a trend file by reading it backwards in 1 MiB blocks, so
/// that rows just appended are found at once however long the file, and remembers every lot
/// passed on the way, so that the lots of one release cost one pass over their rows. Only
/// complete lines count (a torn tail is skipped). Rows appended after a block was read are not
/// seen: the row found is then still a row of the lot with its chain value.
pub struct ReverseIndex {
    path: PathBuf,
    file: Option<File>,
    /// Bytes before this offset are still to be read.
    end: u64,
    /// The start of a line cut by the last block read (it continues after `end`).
    carry: Vec<u8>,
    /// True until the file's last line has been looked at.
    last_line: bool,
    seen: HashMap<String, (usize, String)>,
}

/// Lots a [`ReverseIndex`] remembers at most; beyond, it searches afresh for each.
const REMEMBER: usize = 200_000;

impl ReverseIndex {
    /// An index of the trend file `path` (read lazily; a missing file finds nothing).
    pub fn new(path: &Path) -> ReverseIndex {
        ReverseIndex {
            path: path.to_path_buf(),
            file: None,
            end: u64::MAX,
            carry: Vec::new(),
            last_line: true,
            seen: HashMap::new(),
        }
    }

    /// The row number (`seq`) and chain value of the latest row of `lot`, if any.
    pub fn find(&mut self, lot: &str) -> Result<Option<(usize, String)>> {
        if let Some(hit) = self.seen.get(lot) {
            return Ok(Some(hit.clone()));
        }
        if self.seen.len() >= REMEMBER {
            return ReverseIndex::new(&self.path).find(lot);
        }
        if self.end == u64::MAX {
            match File::open(&self.path) {
                Ok(f) => {
                    self.end = f
                        .metadata()
                        .map_err(|e| Error::io(&self.path, "reading", e))?
                        .len();
                    self.file = Some(f);
                }
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => self.end = 0,
                Err(e) => return Err(Error::io(&self.path, "reading", e)),
            }
        }
        const BLOCK: u64 = 1 << 20;
        while self.end > 0 {
            let Some(f) = self.file.as_mut() else { break };
            let start = self.end.saturating_sub(BLOCK);
            let mut buf = vec![0u8; (self.end - start) as usize];
            f.seek(SeekFrom::Start(start))
                .and_then(|_| f.read_exact(&mut buf))
                .map_err(|e| Error::io(&self.path, "reading", e))?;
            buf.extend_from_slice(&self.carry);
            self.end = start;
            let body_from = if start == 0 {
                0
            } else {
                match memchr::memchr(b'\n', &buf) {
                    Some(i) => i + 1,
                    None => {
                        self.carry = buf;
                        continue;
                    }
                }
            };
            self.carry = buf[..body_from].to_vec();
            let mut found = None;
            let lines: Vec<&[u8]> = buf[body_from..].split_inclusive(|&b| b == b'\n').collect();
            for (k, line) in lines.iter().enumerate().rev() {
                let last_line = std::mem::replace(&mut self.last_line, false);
                if (last_line && !line.ends_with(b"\n")) || (start == 0 && k == 0) {
                    continue; // a torn tail, or the header
                }
                if let Some((row_lot, seq, chain)) = row_anchor(line) {
                    if row_lot == lot && found.is_none() {
                        found = Some((seq, chain.clone()));
                    }
                    if self.seen.len() < REMEMBER && !self.seen.contains_key(row_lot) {
                        self.seen.insert(row_lot.to_string(), (seq, chain));
                    }
                }
            }
            if found.is_some() {
                return Ok(found);
            }
        }
        Ok(None)
    }
}

/// The lot, row number and chain value of one trend-file line. `seq` and `recorded_at` never
/// hold a comma: the lot is the third field; the chain value (hex) is the last.
fn row_anchor(line: &[u8]) -> Option<(&str, usize, String)> {
    let line = line.strip_suffix(b"\n").unwrap_or(line);
    let mut fields = line.split(|&b| b == b',');
    let seq = std::str::from_utf8(fields.next()?).ok()?.parse().ok()?;
    let lot = std::str::from_utf8(fields.nth(1)?).ok()?;
    let chain = std::str::from_utf8(line.rsplit(|&b| b == b',').next()?).ok()?;
    Some((lot, seq, chain.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::trend_file::lock;

    fn wait() -> Wait {
        Wait {
            timeout: Duration::from_secs(5),
        }
    }

    /// A trend file with `n` rows of invented values, lots L1..Ln.
    fn rows(dir: &Path, n: usize) -> Trend {
        let p = dir.join("P.csv");
        let keys = vec!["acid_value".to_string()];
        let mut l = lock(&p, &keys, &keys, wait()).unwrap();
        for i in 1..=n {
            l.append(&[("lot", format!("L{i}")), ("acid_value", "0.5".into())])
                .unwrap();
        }
        l.sync().unwrap();
        l.trend.clone()
    }

    #[test]
    fn heads_are_recorded_and_a_shortened_file_is_refused_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let t = rows(dir.path(), 3);
        assert_eq!(state(dir.path()).unwrap(), State::Legacy);
        std::fs::write(path(dir.path()), format!("{}\n", COLUMNS.join(","))).unwrap();
        let mut h = match HeadsLog::open(dir.path(), [&t].into_iter()) {
            Err(e) => e.to_string(),
            Ok(_) => panic!("a file with rows and no head must be refused"),
        };
        assert!(h.contains("records no head"), "{h}");
        std::fs::remove_file(path(dir.path())).unwrap();
        // Started afresh: the heads file is written on the first append.
        std::fs::remove_file(&t.path).unwrap();
        let t = rows(dir.path(), 0);
        assert_eq!(state(dir.path()).unwrap(), State::Fresh);
        let mut log = HeadsLog::open(dir.path(), [&t].into_iter())
            .unwrap()
            .unwrap();
        drop(t);
        let t = rows(dir.path(), 3);
        log.record([&t].into_iter(), "2026-10-02T08:00:00Z")
            .unwrap();
        drop(log);
        assert_eq!(state(dir.path()).unwrap(), State::Kept);
        assert!(HeadsLog::open(dir.path(), [&t].into_iter()).is_ok());
        let mut short = t.clone();
        short.rows.pop();
        h = match HeadsLog::open(dir.path(), [&short].into_iter()) {
            Err(e) => e.to_string(),
            Ok(_) => panic!("a shortened file must be refused"),
        };
        assert!(h.contains("row 3 is missing"), "{h}");
    }

    #[test]
    fn the_reverse_index_remembers_the_lots_it_passed() {
        let dir = tempfile::tempdir().unwrap();
        let t = rows(dir.path(), 5);
        let chain = |k: usize| t.rows[k - 1].cells.last().unwrap().clone();
        let mut idx = ReverseIndex::new(&t.path);
        assert_eq!(idx.find("L2").unwrap(), Some((2, chain(2))));
        assert_eq!(
            idx.seen.len(),
            5,
            "every lot of the block read is remembered"
        );
        assert_eq!(idx.find("L4").unwrap(), Some((4, chain(4))));
        assert_eq!(idx.find("L1").unwrap(), Some((1, chain(1))));
        assert_eq!(idx.find("L9").unwrap(), None);
    }

    #[test]
    fn latest_row_of_reads_backwards_across_blocks() {
        let dir = tempfile::tempdir().unwrap();
        let t = rows(dir.path(), 3);
        let chain = |k: usize| t.rows[k - 1].cells.last().unwrap().clone();
        assert_eq!(latest_row_of(&t.path, "L2").unwrap(), Some((2, chain(2))));
        assert_eq!(latest_row_of(&t.path, "L3").unwrap(), Some((3, chain(3))));
        assert_eq!(latest_row_of(&t.path, "L9").unwrap(), None);
        assert_eq!(
            latest_row_of(&dir.path().join("none.csv"), "L1").unwrap(),
            None
        );
        // A torn tail naming the lot is skipped.
        let mut bytes = std::fs::read(&t.path).unwrap();
        bytes.extend_from_slice(b"4,2026-10-02T08:00:00Z,L3,P");
        std::fs::write(&t.path, &bytes).unwrap();
        assert_eq!(latest_row_of(&t.path, "L3").unwrap(), Some((3, chain(3))));
    }

    #[test]
    fn disagreement_names_missing_and_replaced_rows() {
        let h = Head {
            line: 4,
            file: "P.csv".into(),
            rows: 5,
            last_chain: "abcdef0123456789".into(),
        };
        let chain = |k: usize| (k <= 3).then(|| "abcdef0123456789".to_string());
        let d = disagreement(Path::new("r/heads.csv"), &h, 3, &chain).unwrap();
        assert!(
            d.starts_with("rows 4 to 5 are missing: r/heads.csv:4"),
            "{d}"
        );
        let other = |_: usize| Some("00".to_string());
        let d = disagreement(Path::new("h"), &h, 5, &other).unwrap();
        assert!(d.contains("row 5 differs"), "{d}");
        let same = |_: usize| Some("abcdef0123456789".to_string());
        assert_eq!(disagreement(Path::new("h"), &h, 6, &same), None);
    }
}
