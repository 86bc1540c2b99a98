//! The trend file: one append-only CSV per product, hash-chained, locked while appending.
//!
//! Layout: `seq,recorded_at,lot,product,manufactured,spec_revision,status,approver,supersedes,
//! reason,<key>,<key>_verdict,...,hydroxyl_value_entered,mn_uncertainty,notes,chain`. `chain` is the SHA-256 (hex) of
//! the previous row's chain value (the header's hash for the first row), a line feed, and this
//! row's text up to the comma before `chain`. Any later edit, deletion or reordering breaks it.
//! Layout v3 adds [`layout::TREND_EXTENSION`] columns before `chain`; see [`layout`] for how
//! rows written before them stay valid.

use std::fs::{File, OpenOptions};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use sha2::{Digest, Sha256};

use crate::error::{Error, Result};
use crate::record::layout;
use crate::spec::keys;

/// Columns before the property columns.
pub const PREFIX: [&str; 10] = [
    "seq",
    "recorded_at",
    "lot",
    "product",
    "manufactured",
    "spec_revision",
    "status",
    "approver",
    "supersedes",
    "reason",
];

/// Columns after the property columns in the earlier layout (layout v3 inserts
/// [`layout::TREND_EXTENSION`] before `chain`).
pub const SUFFIX: [&str; 4] = [
    keys::HYDROXYL_VALUE_ENTERED,
    "mn_uncertainty",
    "notes",
    "chain",
];

/// The trend file path of a product.
pub fn path_for(register: &Path, product: &str) -> PathBuf {
    register.join(format!("{product}.csv"))
}

/// The header line (without line feed) for a new trend file with these property keys, in the
/// current layout (v3).
pub fn header_line(keys: &[String]) -> String {
    let mut cols: Vec<String> = PREFIX.iter().map(|s| s.to_string()).collect();
    for k in keys {
        cols.push(k.clone());
        cols.push(format!("{k}_verdict"));
    }
    cols.extend(SUFFIX.iter().map(|s| s.to_string()));
    layout::widened(&cols, &layout::TREND_EXTENSION).join(",")
}

/// SHA-256 hex of `prev` + "\n" + `body`.
pub fn chain_hash(prev: &str, body: &str) -> String {
    let mut h = Sha256::new();
    h.update(prev.as_bytes());
    h.update(b"\n");
    h.update(body.as_bytes());
    hex(&h.finalize())
}

/// Lower-case hex of bytes.
pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// SHA-256 hex of a header line.
pub fn seed(header: &str) -> String {
    hex(&Sha256::digest(header.as_bytes()))
}

/// The chain seed of a file with these columns: SHA-256 hex of the header without its
/// extension columns ([`layout::seed_header`]).
pub fn chain_seed(columns: &[String]) -> String {
    seed(&layout::seed_header(columns))
}

/// Makes a text cell safe for a CSV opened in a spreadsheet: quotes it when needed and
/// neutralises formula-like text (leading =, +, -, @) with a leading apostrophe
/// (OWASP "CSV Injection" guidance). Numbers are written as they are.
pub fn text_cell(s: &str) -> String {
    let s = if s.starts_with(['=', '+', '-', '@']) && s.parse::<f64>().is_err() {
        format!("'{s}")
    } else {
        s.to_string()
    };
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s
    }
}

/// One parsed row of a trend file.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// Line number in the file (header is line 1).
    pub line: usize,
    /// Cells by column, unquoted.
    pub cells: Vec<String>,
}

/// A trend file read into memory.
#[derive(Debug, Clone)]
pub struct Trend {
    /// The file.
    pub path: PathBuf,
    /// Column names.
    pub columns: Vec<String>,
    /// Rows in file order.
    pub rows: Vec<Row>,
    /// Chain value of the last row (or the seed).
    pub head: String,
}

impl Trend {
    /// Index of a column.
    pub fn col(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c == name)
    }

    /// Property keys (columns between the prefix and the suffix that are not verdicts).
    pub fn keys(&self) -> Vec<String> {
        property_keys(&self.columns)
    }

    /// Cell `name` of `row`, empty when absent.
    pub fn cell<'a>(&self, row: &'a Row, name: &str) -> &'a str {
        self.col(name)
            .and_then(|i| row.cells.get(i))
            .map_or("", String::as_str)
    }

    /// The current (latest) row of each lot, in file order of their latest row.
    pub fn current_rows(&self) -> Vec<&Row> {
        let lot = self.col("lot").unwrap_or(2);
        let mut latest: std::collections::HashMap<&str, usize> = std::collections::HashMap::new();
        for (i, r) in self.rows.iter().enumerate() {
            latest.insert(r.cells[lot].as_str(), i);
        }
        let mut idx: Vec<usize> = latest.into_values().collect();
        idx.sort_unstable();
        idx.into_iter().map(|i| &self.rows[i]).collect()
    }

    /// Every row of one lot, newest first.
    pub fn lot_rows(&self, lot: &str) -> Vec<&Row> {
        let c = self.col("lot").unwrap_or(2);
        let mut v: Vec<&Row> = self.rows.iter().filter(|r| r.cells[c] == lot).collect();
        v.reverse();
        v
    }
}

/// A problem found when checking a trend file.
#[derive(Debug, Clone, PartialEq)]
pub struct Damage {
    /// Line number (1-based).
    pub line: usize,
    /// Byte offset of the line start.
    pub offset: u64,
    /// Lot on that line, when readable.
    pub lot: Option<String>,
    /// What is wrong.
    pub problem: String,
    /// True for a partial last line left by an interrupted write.
    pub torn_tail: bool,
    /// True for a complete, chain-valid last row that only lacks its line feed.
    pub newline_missing: bool,
}

/// Splits a CSV line into unquoted cells (the writer never puts line breaks inside cells).
pub fn split_line(line: &str) -> Vec<String> {
    let mut cells = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match (c, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            ('"', true) => quoted = false,
            ('"', false) if cur.is_empty() => quoted = true,
            (',', false) => cells.push(std::mem::take(&mut cur)),
            (c, _) => cur.push(c),
        }
    }
    cells.push(cur);
    cells
}

/// Number of extension columns in a trend-file header (0 in the earlier layout).
fn trend_extension(columns: &[String]) -> usize {
    match layout::extension_len(columns) {
        n if n == layout::TREND_EXTENSION.len() => n,
        _ => 0,
    }
}

/// The header without its extension columns.
fn base_columns(columns: &[String]) -> Vec<&str> {
    let n = trend_extension(columns);
    let mut base: Vec<&str> = columns.iter().map(String::as_str).collect();
    if n > 0 {
        let chain = base.len() - 1;
        base.drain(chain - n..chain);
    }
    base
}

/// True when `columns` is a trend-file header, in the current layout or the earlier one.
pub fn is_trend_header(columns: &[String]) -> bool {
    let base = base_columns(columns);
    base.len() >= PREFIX.len() + SUFFIX.len()
        && base[..PREFIX.len()] == PREFIX
        && base[base.len() - SUFFIX.len()..] == SUFFIX
}

/// True when a trend-file header is in the current layout (has the v3 extension columns).
pub fn is_current_trend_header(columns: &[String]) -> bool {
    is_trend_header(columns) && trend_extension(columns) > 0
}

/// Refuses a file whose header is not a trend-file header (the error names file and line 1).
pub fn check_trend_header(path: &Path, columns: &[String]) -> Result<()> {
    if is_trend_header(columns) {
        return Ok(());
    }
    Err(Error::invalid(
        format!("{}:1", path.display()),
        "this is not a resinlot trend file (unexpected header)",
        "Keep only trend files, certificates.csv and heads.csv in the register folder.",
    ))
}

/// Property keys of a trend-file header: the columns between the prefix and the suffix that
/// are not verdicts (none for a header that is not a trend-file header).
pub fn property_keys(columns: &[String]) -> Vec<String> {
    if !is_trend_header(columns) {
        return Vec::new();
    }
    let end = columns.len() - SUFFIX.len() - trend_extension(columns);
    columns[PREFIX.len()..end]
        .iter()
        .filter(|c| !c.ends_with("_verdict"))
        .cloned()
        .collect()
}

/// Parses trend-file text, checking structure and the hash chain. Returns the trend with the
/// rows read up to the first damage, and the damage if any.
pub fn parse(path: &Path, text: &str) -> (Trend, Option<Damage>) {
    parse_bytes(path, text.as_bytes(), true, &is_trend_header)
}

/// Parses any hash-chained resinlot CSV (trend file or certificate log). With `verify` false
/// the chain is not recomputed (fast read-only queries; `verify` and writers always check it).
pub fn parse_chained(
    path: &Path,
    text: &str,
    verify: bool,
    header_ok: &dyn Fn(&[String]) -> bool,
) -> (Trend, Option<Damage>) {
    parse_bytes(path, text.as_bytes(), verify, header_ok)
}

/// Parses a hash-chained resinlot CSV from its bytes, as [`parse_chained`] does, so that a
/// write torn inside a multi-byte character is still found and located (issue #13, item 5).
///
/// The last line, when it lacks its line feed, is judged as a row: if it parses and chains it
/// is a complete row that only lacks its line end (`newline_missing`, repaired by adding the
/// line feed); otherwise it is a torn tail (`torn_tail`, moved aside by quarantine). A line
/// that is not UTF-8 anywhere else is damage like any other (issue #13, items 3, 5 and 18).
pub fn parse_bytes(
    path: &Path,
    bytes: &[u8],
    verify: bool,
    header_ok: &dyn Fn(&[String]) -> bool,
) -> (Trend, Option<Damage>) {
    let mut trend = Trend {
        path: path.to_path_buf(),
        columns: Vec::new(),
        rows: Vec::new(),
        head: String::new(),
    };
    let mut offset = 0u64;
    let mut prev = String::new();
    for (i, raw) in bytes.split_inclusive(|&b| b == b'\n').enumerate() {
        let line_no = i + 1;
        let here = offset;
        offset += raw.len() as u64;
        let unterminated = !raw.ends_with(b"\n");
        let body = raw.strip_suffix(b"\n").unwrap_or(raw);
        let damage = |problem: String, lot: Option<String>, torn_tail: bool| Damage {
            line: line_no,
            offset: here,
            lot,
            problem,
            torn_tail,
            newline_missing: false,
        };
        let torn = |lot: Option<String>| {
            damage(
                format!(
                    "the last line is incomplete ({} bytes, no line end): an interrupted write",
                    raw.len()
                ),
                lot,
                true,
            )
        };
        let line = match std::str::from_utf8(body) {
            Ok(line) => line,
            Err(e) => {
                let lot = split_line(&String::from_utf8_lossy(body)).get(2).cloned();
                if unterminated {
                    return (trend, Some(torn(lot)));
                }
                let problem = format!(
                    "the line is not valid UTF-8 (byte {}): the file was edited or damaged",
                    here + e.valid_up_to() as u64
                );
                return (trend, Some(damage(problem, lot, false)));
            }
        };
        if i == 0 {
            if unterminated {
                return (trend, Some(torn(None)));
            }
            trend.columns = split_line(line);
            if !header_ok(&trend.columns) {
                let d = damage(
                    "the header is not the expected resinlot header".into(),
                    None,
                    false,
                );
                return (trend, Some(d));
            }
            prev = chain_seed(&trend.columns);
            trend.head = prev.clone();
            continue;
        }
        let cells = split_line(line);
        if let Some(problem) = row_problem(&trend, &cells) {
            let d = if unterminated {
                torn(cells.get(2).cloned())
            } else {
                damage(problem, cells.get(2).cloned(), false)
            };
            return (trend, Some(d));
        }
        if verify {
            let body = &line[..line.rfind(',').unwrap_or(0)];
            let body = layout::signed_body(body, layout::extension_len(&trend.columns));
            let expect = chain_hash(&prev, body);
            if cells[cells.len() - 1] != expect {
                let d = if unterminated {
                    torn(cells.get(2).cloned())
                } else {
                    damage(
                        "the chain value does not match the row's content: the row, or one before it, was changed".into(),
                        cells.get(2).cloned(),
                        false,
                    )
                };
                return (trend, Some(d));
            }
            prev = expect;
            trend.head = prev.clone();
        } else {
            trend.head = cells[cells.len() - 1].clone();
        }
        let lot = cells.get(2).cloned();
        trend.rows.push(Row {
            line: line_no,
            cells,
        });
        if unterminated {
            let d = Damage {
                newline_missing: true,
                ..damage(
                    "the last row is complete but lacks its line end".into(),
                    lot,
                    false,
                )
            };
            return (trend, Some(d));
        }
    }
    (trend, None)
}

/// What is wrong with the structure of the next row of `trend` (its field count or its
/// sequence number), if anything.
fn row_problem(trend: &Trend, cells: &[String]) -> Option<String> {
    if cells.len() != trend.columns.len() {
        return Some(format!(
            "{} fields where the header has {}",
            cells.len(),
            trend.columns.len()
        ));
    }
    if cells[0] != (trend.rows.len() + 1).to_string() {
        return Some(format!(
            "sequence number '{}' where {} was expected (row deleted or moved)",
            cells[0],
            trend.rows.len() + 1
        ));
    }
    None
}

/// Reads and checks a trend file; damage is an error naming file, line and lot.
pub fn read(path: &Path) -> Result<Trend> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    let (trend, damage) = parse_bytes(path, &bytes, true, &is_trend_header);
    match damage {
        None => Ok(trend),
        Some(d) => Err(damage_error(path, &d)),
    }
}

/// Reads a trend file for a query: structure is checked, the chain is not recomputed
/// (`resinlot verify` does that).
pub fn read_fast(path: &Path) -> Result<Trend> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    let (trend, damage) = parse_bytes(path, &bytes, false, &is_trend_header);
    match damage {
        None => Ok(trend),
        Some(d) => Err(damage_error(path, &d)),
    }
}

/// The error for a damaged trend file.
pub fn damage_error(path: &Path, d: &Damage) -> Error {
    Error::invalid(
        format!(
            "{}:{} (byte {}{})",
            path.display(),
            d.line,
            d.offset,
            d.lot
                .as_ref()
                .map(|l| format!(", lot '{l}'"))
                .unwrap_or_default()
        ),
        d.problem.clone(),
        repair_hint(path, d),
    )
}

/// What to do about damage `d` to `path`: a torn tail or a missing final line feed is repaired
/// by `resinlot verify --quarantine` (naming the register folder that holds the file); anything
/// else means the record was altered.
pub fn repair_hint(path: &Path, d: &Damage) -> String {
    let register = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let run = format!(
        "Run `resinlot verify --quarantine --register {}`",
        register.display()
    );
    if d.torn_tail {
        format!("{run} to move the fragment aside (it is kept), then re-release the lot.")
    } else if d.newline_missing {
        format!("{run} to restore the line end; the row itself is intact.")
    } else {
        "The record was altered: restore the file from backup; `resinlot verify` names the first broken row.".to_string()
    }
}

/// The line (with its line feed) that appends `cells` (by column name, missing ones empty) to
/// `trend` as its next row, and the row's cells as they read back; pure.
///
/// Every row is parsed back before it may be written (issue #13, item 6): a row that would
/// not read back as one line with the header's field count and the same cells (a line
/// break or carriage return in a cell, say) is refused, so the writer never produces a row
/// that blocks the file.
pub fn encode_row(trend: &Trend, cells: &[(&str, String)]) -> Result<(String, Vec<String>)> {
    let seq = trend.rows.len() + 1;
    let n = trend.columns.len();
    let mut row = vec![String::new(); n];
    row[0] = seq.to_string();
    for (name, value) in cells {
        if let Some(i) = trend.col(name) {
            row[i] = value.clone();
        } else if !value.is_empty() && is_extension_column(name) {
            return Err(needs_upgrade(&trend.path, name));
        }
    }
    let body: Vec<String> = row[..n - 1].iter().map(|c| text_cell(c)).collect();
    let body = body.join(",");
    let signed = layout::signed_body(&body, layout::extension_len(&trend.columns));
    let chain = chain_hash(&trend.head, signed);
    let line = format!("{body},{chain}\n");
    let back = split_line(&line[..line.len() - 1]);
    let bad = if line[..line.len() - 1].contains(['\n', '\r']) {
        row.iter().position(|c| c.contains(['\n', '\r']))
    } else if back.len() != n {
        Some(n - 1)
    } else {
        (0..n - 1).find(|&i| back[i] != row[i] && back[i] != format!("'{}", row[i]))
    };
    if let Some(i) = bad {
        return Err(Error::invalid(
            format!(
                "{} (row {seq}, column '{}')",
                trend.path.display(),
                trend.columns.get(i).map_or("?", String::as_str)
            ),
            format!(
                "the row would not read back as written (cell {:?}); nothing was written",
                row[i]
            ),
            "Remove line breaks and other control characters from the text that fills this column (spec, customer, results file or flag), then run again.",
        ));
    }
    Ok((line, back))
}

/// True for a column that only files in the current layout have.
fn is_extension_column(name: &str) -> bool {
    layout::TREND_EXTENSION.contains(&name) || layout::LOG_EXTENSION.contains(&name)
}

/// The refusal to record a value in a file written before its column existed: nothing is
/// dropped silently; `resinlot upgrade` widens the file first.
pub fn needs_upgrade(path: &Path, column: &str) -> Error {
    let register = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    Error::invalid(
        path.display().to_string(),
        format!(
            "this file was written in an earlier layout without the column '{column}', so the row cannot be recorded in full; nothing was written"
        ),
        format!(
            "Run `resinlot upgrade --register {}` once (it adds the new columns and keeps every row and chain value), then run the command again.",
            register.display()
        ),
    )
}

/// An exclusively locked trend file, open for appending.
pub struct Locked {
    file: File,
    /// The trend as read under the lock.
    pub trend: Trend,
    /// True when the file was created by this lock and still lacks its header.
    fresh: bool,
    header: String,
}

/// How long to wait for another process's lock before giving up.
#[derive(Debug, Clone, Copy)]
pub struct Wait {
    /// Give up after this long.
    pub timeout: Duration,
}

/// Opens (creating if needed) and exclusively locks a product's trend file, then reads it.
///
/// `keys` are the property columns for a new file; an existing file must hold every key in
/// `needed`. A message goes to stderr when the wait exceeds one second.
pub fn lock(path: &Path, keys: &[String], needed: &[String], wait: Wait) -> Result<Locked> {
    lock_with(path, &header_line(keys), needed, wait, &is_trend_header)
}

/// Locks any hash-chained resinlot CSV, creating it with `header` when missing.
pub fn lock_with(
    path: &Path,
    header: &str,
    needed: &[String],
    wait: Wait,
    header_ok: &dyn Fn(&[String]) -> bool,
) -> Result<Locked> {
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, "creating folder", e))?;
    }
    let start = Instant::now();
    let mut told = false;
    let mut file;
    loop {
        file = OpenOptions::new()
            .read(true)
            .append(true)
            .create(true)
            .open(path)
            .map_err(|e| Error::io(path, "opening", e))?;
        match file.try_lock() {
            // A lock holder may have removed a file it created but never wrote (see Drop):
            // then this handle is stale and the path must be opened again.
            Ok(()) if same_file(&file, path) => break,
            Ok(()) => continue,
            Err(std::fs::TryLockError::WouldBlock) => {}
            Err(std::fs::TryLockError::Error(e)) => return Err(Error::io(path, "locking", e)),
        }
        if !told && start.elapsed() > Duration::from_secs(1) {
            eprintln!(
                "resinlot: waiting for another release to finish writing {} ...",
                path.display()
            );
            told = true;
        }
        if start.elapsed() > wait.timeout {
            return Err(Error::invalid(
                path.display().to_string(),
                format!(
                    "another process has held the lock for more than {} s",
                    wait.timeout.as_secs()
                ),
                "Wait for the other release to finish, or raise --lock-timeout.",
            ));
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    let mut bytes = Vec::new();
    file.seek(SeekFrom::Start(0))
        .map_err(|e| Error::io(path, "reading", e))?;
    file.read_to_end(&mut bytes)
        .map_err(|e| Error::io(path, "reading", e))?;
    let header = header.to_string();
    let fresh = bytes.is_empty();
    let trend = if fresh {
        let columns = split_line(&header);
        Trend {
            path: path.to_path_buf(),
            head: chain_seed(&columns),
            columns,
            rows: vec![],
        }
    } else {
        let (trend, damage) = parse_bytes(path, &bytes, true, header_ok);
        if let Some(d) = damage {
            return Err(damage_error(path, &d));
        }
        trend
    };
    let missing: Vec<&String> = needed.iter().filter(|k| trend.col(k).is_none()).collect();
    if !missing.is_empty() {
        return Err(Error::invalid(
            path.display().to_string(),
            format!(
                "the trend file has no column for {}",
                missing.iter().map(|s| format!("'{s}'")).collect::<Vec<_>>().join(", ")
            ),
            "A spec revision added a property after this trend file was started: keep the old file as the record and start a new one (rename it), or remove the property.",
        ));
    }
    Ok(Locked {
        file,
        trend,
        fresh,
        header: if fresh { header } else { String::new() },
    })
}

/// True when the open `file` is still the file at `path` (same device and inode).
fn same_file(file: &File, path: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (file.metadata(), std::fs::metadata(path)) {
        (Ok(a), Ok(b)) => a.dev() == b.dev() && a.ino() == b.ino(),
        _ => false,
    }
}

impl Drop for Locked {
    /// A file this lock created but never wrote to is removed again (still under the lock),
    /// so a refused command leaves no empty trend file or log behind; then its folder, if
    /// that is now empty.
    fn drop(&mut self) {
        if self.fresh && self.file.metadata().is_ok_and(|m| m.len() == 0) {
            let _ = std::fs::remove_file(&self.trend.path);
            if let Some(dir) = self.trend.path.parent() {
                let _ = std::fs::remove_dir(dir);
            }
        }
    }
}

impl Locked {
    /// Appends one row (cells by column name, missing ones empty); each row is one write.
    /// Call [`Locked::sync`] before reporting success.
    pub fn append(&mut self, cells: &[(&str, String)]) -> Result<usize> {
        let path = self.trend.path.clone();
        if self.fresh {
            let h = format!("{}\n", self.header);
            self.file
                .write_all(h.as_bytes())
                .map_err(|e| Error::io(&path, "writing", e))?;
            self.fresh = false;
        }
        let (line, cells) = encode_row(&self.trend, cells)?;
        let seq = self.trend.rows.len() + 1;
        self.file
            .write_all(line.as_bytes())
            .map_err(|e| Error::io(&path, "writing", e))?;
        self.trend.head = cells[cells.len() - 1].clone();
        // Keep the stored cells as they read back from the file.
        self.trend.rows.push(Row {
            line: seq + 1,
            cells,
        });
        Ok(seq)
    }

    /// Appends several rows in one write (issue #16: the rows of one certificate): every row is
    /// encoded first, so a row that would be refused writes none of them.
    pub fn append_rows(&mut self, rows: &[Vec<(&str, String)>]) -> Result<()> {
        let (n0, head0) = (self.trend.rows.len(), self.trend.head.clone());
        let mut text = if self.fresh {
            format!("{}\n", self.header)
        } else {
            String::new()
        };
        for cells in rows {
            let (line, back) = match encode_row(&self.trend, cells) {
                Ok(x) => x,
                Err(e) => {
                    self.trend.rows.truncate(n0);
                    self.trend.head = head0;
                    return Err(e);
                }
            };
            text.push_str(&line);
            self.trend.head = back[back.len() - 1].clone();
            let seq = self.trend.rows.len() + 1;
            self.trend.rows.push(Row {
                line: seq + 1,
                cells: back,
            });
        }
        if let Err(e) = self.file.write_all(text.as_bytes()) {
            self.trend.rows.truncate(n0);
            self.trend.head = head0;
            return Err(Error::io(&self.trend.path, "writing", e));
        }
        self.fresh = false;
        Ok(())
    }

    /// True when the file did not exist (or was empty) when it was locked and nothing has
    /// been appended since.
    pub fn is_fresh(&self) -> bool {
        self.fresh
    }

    /// Flushes appended rows to stable storage.
    pub fn sync(&mut self) -> Result<()> {
        self.file
            .sync_all()
            .map_err(|e| Error::io(&self.trend.path, "syncing", e))
    }
}

/// Streams a trend file's rows for a read-only query, handing `visit` the 1-based line number
/// and the cells of the requested columns (in the order asked). The header is checked; rows
/// are not hash-verified (that is `verify`'s job). Memory stays flat however long the file is.
pub fn scan(
    path: &Path,
    wanted: &[&str],
    mut visit: impl FnMut(usize, &[&str]),
) -> Result<Vec<String>> {
    let file = File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(false)
        .from_reader(std::io::BufReader::with_capacity(1 << 20, file));
    let columns: Vec<String> = reader
        .headers()
        .map_err(|e| {
            Error::invalid(
                path.display().to_string(),
                e.to_string(),
                "Check the trend file with `resinlot verify`.",
            )
        })?
        .iter()
        .map(str::to_string)
        .collect();
    check_trend_header(path, &columns)?;
    let idx: Vec<Option<usize>> = wanted
        .iter()
        .map(|w| columns.iter().position(|c| c == w))
        .collect();
    let mut record = csv::ByteRecord::new();
    let mut line = 1usize;
    loop {
        match reader.read_byte_record(&mut record) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => {
                return Err(Error::invalid(
                    format!(
                        "{}:{}",
                        path.display(),
                        e.position().map_or(line + 1, |p| p.line() as usize)
                    ),
                    e.to_string(),
                    "Check the trend file with `resinlot verify`.",
                ))
            }
        }
        line += 1;
        let cells: Vec<&str> = idx
            .iter()
            .map(|i| {
                std::str::from_utf8(i.and_then(|i| record.get(i)).unwrap_or(b"")).unwrap_or("")
            })
            .collect();
        visit(line, &cells);
    }
    Ok(columns)
}

/// Test helper: writes `rows` to a trend file at `path` with property columns `keys`, as
/// `release` would (locked, chained, synced); returns the chain value of the last row.
#[cfg(test)]
pub(crate) fn write_for_test(path: &Path, keys: &[String], rows: &[Vec<(&str, String)>]) -> String {
    let wait = Wait {
        timeout: std::time::Duration::from_secs(5),
    };
    let mut l = lock(path, keys, keys, wait).unwrap();
    for row in rows {
        l.append(row).unwrap();
    }
    l.sync().unwrap();
    l.trend.head.clone()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn keys() -> Vec<String> {
        vec!["acid_value".into(), "mn".into()]
    }

    fn wait() -> Wait {
        Wait {
            timeout: Duration::from_secs(5),
        }
    }

    /// Layout v3 (issue #14): a file in the earlier layout reads as before, takes rows that
    /// carry nothing new, and refuses (writing nothing) a row with a value for a column it
    /// lacks, naming `resinlot upgrade`; its chain is the one the earlier build wrote.
    #[test]
    fn an_earlier_layout_file_refuses_values_it_has_no_column_for_issue_14() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        let narrow: Vec<String> = split_line(&header_line(&keys()))
            .into_iter()
            .filter(|c| !layout::TREND_EXTENSION.contains(&c.as_str()))
            .collect();
        std::fs::write(&p, format!("{}\n", narrow.join(","))).unwrap();
        let mut l = lock(&p, &keys(), &keys(), wait()).unwrap();
        assert!(!is_current_trend_header(&l.trend.columns));
        assert_eq!(l.trend.head, seed(&narrow.join(",")));
        l.append(&[("lot", "L1".into()), ("recorded_by", String::new())])
            .unwrap();
        let e = l
            .append(&[("lot", "L2".into()), ("recorded_by", "qc1".into())])
            .unwrap_err()
            .to_string();
        assert!(e.contains("without the column 'recorded_by'"), "{e}");
        assert!(e.contains("resinlot upgrade"), "{e}");
        l.sync().unwrap();
        drop(l);
        let t = read(&p).unwrap();
        assert_eq!(t.rows.len(), 1);
        // The row chains as the earlier build chained it: over the whole body.
        let line = std::fs::read_to_string(&p)
            .unwrap()
            .lines()
            .nth(1)
            .unwrap()
            .to_string();
        let k = line.rfind(',').unwrap();
        assert_eq!(
            chain_hash(&seed(&narrow.join(",")), &line[..k]),
            &line[k + 1..]
        );
    }

    /// Layout v3: a new file has the extension columns, seeds its chain from the header
    /// without them, and signs a row without its trailing empty extension cells.
    #[test]
    fn a_new_file_is_in_layout_v3_issue_14() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write_for_test(
            &p,
            &keys(),
            &[
                vec![("lot", "L1".into())],
                vec![("lot", "L2".into()), ("analysts", "AB;CD".into())],
            ],
        );
        let text = std::fs::read_to_string(&p).unwrap();
        let mut lines = text.lines();
        let header = split_line(lines.next().unwrap());
        assert!(is_current_trend_header(&header));
        assert_eq!(property_keys(&header), keys());
        let first = lines.next().unwrap();
        let k = first.rfind(',').unwrap();
        // The nine extension cells are empty and left out of what the chain signs.
        assert_eq!(&first[k - 9..k], ",,,,,,,,,");
        let signed = &first[..k - 9];
        assert_eq!(chain_hash(&chain_seed(&header), signed), &first[k + 1..]);
        let t = read(&p).unwrap();
        assert_eq!(t.cell(&t.rows[1], "analysts"), "AB;CD");
    }

    fn write_two(path: &Path) {
        let mut l = lock(path, &keys(), &keys(), wait()).unwrap();
        l.append(&[
            ("lot", "L1".into()),
            ("acid_value", "0.5".into()),
            ("approver", "=cmd".into()),
        ])
        .unwrap();
        l.append(&[("lot", "L2".into()), ("acid_value", "0.6".into())])
            .unwrap();
        l.sync().unwrap();
    }

    #[test]
    fn round_trip_and_chain() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write_two(&p);
        let t = read(&p).unwrap();
        assert_eq!(t.rows.len(), 2);
        assert_eq!(t.cell(&t.rows[0], "acid_value"), "0.5");
        // Formula-like text is neutralised (OWASP CSV injection guidance).
        assert_eq!(t.cell(&t.rows[0], "approver"), "'=cmd");
        assert_eq!(t.keys(), keys());
    }

    #[test]
    fn tampering_is_detected_with_line() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write_two(&p);
        let text = std::fs::read_to_string(&p).unwrap();
        let edited = text.replacen(",0.5,", ",0.4,", 1);
        let (_, d) = parse(&p, &edited);
        assert_eq!(d.unwrap().line, 2);
        let lines: Vec<&str> = text.lines().collect();
        let swapped = format!("{}\n{}\n{}\n", lines[0], lines[2], lines[1]);
        assert_eq!(parse(&p, &swapped).1.unwrap().line, 2);
        let deleted = format!("{}\n{}\n", lines[0], lines[2]);
        assert!(parse(&p, &deleted).1.unwrap().problem.contains("sequence"));
    }

    #[test]
    fn torn_tail_is_reported_and_blocks_append() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write_two(&p);
        let mut f = OpenOptions::new().append(true).open(&p).unwrap();
        f.write_all(b"3,2026-").unwrap();
        let d = parse(&p, &std::fs::read_to_string(&p).unwrap()).1.unwrap();
        assert!(d.torn_tail);
        assert!(lock(&p, &keys(), &keys(), wait()).is_err());
    }

    /// Issue #13 item 3: a complete, chain-valid last row without its line feed is not torn.
    #[test]
    fn a_complete_last_row_without_line_end_is_not_torn_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write_two(&p);
        let bytes = std::fs::read(&p).unwrap();
        let cut = &bytes[..bytes.len() - 1];
        let (t, d) = parse_bytes(&p, cut, true, &is_trend_header);
        let d = d.unwrap();
        assert!(d.newline_missing && !d.torn_tail, "{d:?}");
        assert_eq!((d.line, d.lot.as_deref()), (3, Some("L2")));
        assert_eq!(t.rows.len(), 2);
        // One byte fewer and the row no longer chains: that is a torn tail.
        let d = parse_bytes(&p, &bytes[..bytes.len() - 2], true, &is_trend_header).1;
        assert!(d.unwrap().torn_tail);
    }

    /// Issue #13 items 5 and 18: a tail cut inside a UTF-8 character is a torn tail; a line
    /// that is not UTF-8 elsewhere is named with its line and byte.
    #[test]
    fn bytes_that_are_not_utf8_are_located_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write_two(&p);
        let mut bytes = std::fs::read(&p).unwrap();
        let complete = bytes.len() as u64;
        bytes.extend_from_slice("3,2026-10-02T08:00:00Z,L3,,,,,,,,,,,,Mü".as_bytes());
        bytes.pop(); // half of the "ü"
        let d = parse_bytes(&p, &bytes, true, &is_trend_header).1.unwrap();
        assert!(d.torn_tail, "{d:?}");
        assert_eq!((d.offset, d.lot.as_deref()), (complete, Some("L3")));
        let mut bad = std::fs::read(&p).unwrap();
        let at = bad.iter().position(|&b| b == b'L').unwrap();
        bad[at] = 0xFC; // a Latin-1 "ü" in row 1
        let d = parse_bytes(&p, &bad, true, &is_trend_header).1.unwrap();
        assert!(!d.torn_tail && d.line == 2, "{d:?}");
        assert!(d.problem.contains("not valid UTF-8"), "{}", d.problem);
    }

    /// Issue #13 item 13: the repair hint names `resinlot verify --quarantine` and the folder.
    #[test]
    fn the_repair_hint_names_verify_quarantine_issue_13() {
        let d = Damage {
            line: 3,
            offset: 10,
            lot: None,
            problem: "x".into(),
            torn_tail: true,
            newline_missing: false,
        };
        let hint = repair_hint(Path::new("reg/P.csv"), &d);
        assert!(
            hint.contains("`resinlot verify --quarantine --register reg`"),
            "{hint}"
        );
        let altered = Damage {
            torn_tail: false,
            ..d
        };
        assert!(repair_hint(Path::new("P.csv"), &altered).contains("restore the file"));
    }

    /// Issue #13 item 6: a row that would not read back (a line break in a cell) is refused
    /// before a byte is written.
    #[test]
    fn a_row_that_would_not_read_back_is_refused_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write_two(&p);
        let before = std::fs::read(&p).unwrap();
        let mut l = lock(&p, &keys(), &keys(), wait()).unwrap();
        let e = l
            .append(&[("lot", "L3".into()), ("spec_revision", "C\nD".into())])
            .unwrap_err();
        let text = e.to_string();
        assert!(text.contains("column 'spec_revision'"), "{text}");
        assert!(text.contains("would not read back"), "{text}");
        let e = l.append(&[("lot", "L3".into()), ("notes", "a\rb".into())]);
        assert!(e.is_err());
        drop(l);
        assert_eq!(std::fs::read(&p).unwrap(), before);
        // Commas, quotes and formula-like text still read back.
        let t = read(&p).unwrap();
        let (_, cells) =
            encode_row(&t, &[("lot", "L3".into()), ("notes", "=a, \"b\"".into())]).unwrap();
        assert_eq!(t.cell(&Row { line: 4, cells }, "notes"), "'=a, \"b\"");
    }

    #[test]
    fn split_line_unquotes() {
        assert_eq!(split_line("a,\"b,c\",\"d\"\"e\""), vec!["a", "b,c", "d\"e"]);
    }
}
