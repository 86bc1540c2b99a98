//! Read-only queries on the record: find a lot fast, suggest near ids, filter lots by windows.

use std::path::{Path, PathBuf};

use chrono::NaiveDate;

use crate::error::{Error, Result};
use crate::record::lines;
use crate::record::scan;
use crate::record::trend_file::{self, Row, Trend};

/// Every product trend file in a register folder, sorted: every `.csv` file but the
/// certificate log and the heads file.
pub fn trend_files(register: &Path) -> Result<Vec<PathBuf>> {
    let rd = std::fs::read_dir(register).map_err(|e| Error::io(register, "reading folder", e))?;
    let mut v: Vec<PathBuf> = rd
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            p.extension().is_some_and(|x| x == "csv")
                && p.file_name()
                    .is_some_and(|n| n != "certificates.csv" && n != crate::record::heads::FILE)
        })
        .collect();
    v.sort();
    Ok(v)
}

/// The rows of `lot` in one trend file (file order), with their line numbers. Goes through the trend file's lot index ([`crate::record::index`]), checked against the
/// file before use and rebuilt when stale, so a million-lot file answers in milliseconds.
pub fn lot_rows_in(path: &Path, lot: &str) -> Result<Option<Trend>> {
    crate::record::index::lot_rows(path, lot)
}

/// [`lot_rows_in`] without the index: a byte search before any parse (the file is read in
/// 8 MiB chunks and only lines containing `,lot,` are split, so memory stays small). The
/// reference the index is tested against.
pub fn lot_rows_scanned(path: &Path, lot: &str) -> Result<Option<Trend>> {
    lot_rows_chunked(path, lot, lines::CHUNK)
}

fn lot_rows_chunked(path: &Path, lot: &str, chunk: usize) -> Result<Option<Trend>> {
    let needle = format!(",{lot},");
    let finder = memchr::memmem::Finder::new(needle.as_bytes());
    let mut columns: Option<Vec<String>> = None;
    let mut rows = Vec::new();
    let mut line_base = 1usize; // line number of the block's first line
    lines::for_each_block(path, chunk, |buf| {
        let end = buf.len();
        let mut body_from = 0;
        if columns.is_none() {
            let header_end = memchr::memchr(b'\n', buf).unwrap_or(end);
            let cols = trend_file::split_line(&String::from_utf8_lossy(&buf[..header_end]));
            trend_file::check_trend_header(path, &cols)?;
            columns = Some(cols);
            body_from = (header_end + 1).min(end);
            line_base += 1;
        }
        let cols = columns.as_ref().expect("set above");
        let mut counted_to = body_from;
        let mut line_at = line_base;
        for pos in finder.find_iter(&buf[body_from..]).map(|p| p + body_from) {
            let ls = memchr::memrchr(b'\n', &buf[..pos])
                .map_or(0, |i| i + 1)
                .max(body_from);
            let le = memchr::memchr(b'\n', &buf[pos..]).map_or(end, |i| pos + i);
            line_at += memchr::memchr_iter(b'\n', &buf[counted_to..ls]).count();
            counted_to = ls;
            let cells = trend_file::split_line(&String::from_utf8_lossy(&buf[ls..le]));
            if cells.get(2).map(String::as_str) == Some(lot)
                && cells.len() == cols.len()
                && rows.last().is_none_or(|r: &Row| r.line != line_at)
            {
                rows.push(Row {
                    line: line_at,
                    cells,
                });
            }
        }
        line_base += memchr::memchr_iter(b'\n', &buf[body_from..]).count();
        Ok(())
    })?;
    if rows.is_empty() {
        return Ok(None);
    }
    let head = rows
        .last()
        .map(|r| r.cells[r.cells.len() - 1].clone())
        .unwrap_or_default();
    Ok(Some(Trend {
        path: path.to_path_buf(),
        columns: columns.unwrap_or_default(),
        rows,
        head,
    }))
}

/// Finds `lot` in any product's trend file, written in any case: lot ids are unique without
/// regard to case (issue #14), so an id typed in another case finds the recorded lot (the
/// rows carry the id as recorded). The exact id is searched first, at memory speed; only a
/// miss streams the lot column of every file.
pub fn find_lot(register: &Path, lot: &str) -> Result<Option<Trend>> {
    for path in trend_files(register)? {
        if let Some(t) = lot_rows_in(&path, lot)? {
            return Ok(Some(t));
        }
    }
    if let Some((path, id)) = recorded_id(register, lot)? {
        return lot_rows_in(&path, &id);
    }
    Ok(None)
}

/// The trend file and recorded id of the lot whose id equals `lot` without regard to ASCII
/// case, if any.
pub fn recorded_id(register: &Path, lot: &str) -> Result<Option<(PathBuf, String)>> {
    for path in trend_files(register)? {
        let mut found: Option<String> = None;
        trend_file::scan(&path, &["lot"], |_, cells| {
            if found.is_none() && cells[0].eq_ignore_ascii_case(lot) {
                found = Some(cells[0].to_string());
            }
        })?;
        if let Some(id) = found {
            return Ok(Some((path, id)));
        }
    }
    Ok(None)
}

/// The certificate numbered `number` (case-insensitive) among `certs` (the log's
/// certificates, [`crate::record::certlog::all_certificates`]), with all its lots and its
/// status (issue #16: `lookup FW-000123`).
pub fn certificate(
    certs: &[crate::record::certlog::Certificate],
    number: &str,
) -> Option<crate::record::certlog::Certificate> {
    certs
        .iter()
        .find(|c| c.number.eq_ignore_ascii_case(number))
        .cloned()
}

/// Up to `n` existing lot ids closest to `lot` (Jaro-Winkler similarity, case-insensitive).
pub fn suggestions(register: &Path, lot: &str, n: usize) -> Result<Vec<String>> {
    let target = lot.to_ascii_uppercase();
    let mut scored: Vec<(f64, String)> = Vec::new();
    for path in trend_files(register)? {
        let t = trend_file::read_fast(&path)?;
        let c = t.col("lot").unwrap_or(2);
        for r in &t.rows {
            let id = &r.cells[c];
            if scored.iter().any(|(_, s)| s == id) {
                continue;
            }
            let s = strsim::jaro_winkler(&target, &id.to_ascii_uppercase());
            scored.push((s, id.clone()));
        }
    }
    scored.sort_by(|a, b| b.0.total_cmp(&a.0).then_with(|| a.1.cmp(&b.1)));
    Ok(scored
        .into_iter()
        .filter(|(s, _)| *s > 0.7)
        .take(n)
        .map(|(_, id)| id)
        .collect())
}

/// A window on one property, either end open.
#[derive(Debug, Clone, PartialEq)]
pub struct Window {
    /// Property key.
    pub key: String,
    /// Lower bound (inclusive).
    pub lo: Option<f64>,
    /// Upper bound (inclusive).
    pub hi: Option<f64>,
}

impl Window {
    /// True when `v` lies in the window.
    pub fn contains(&self, v: f64) -> bool {
        self.lo.is_none_or(|lo| v >= lo) && self.hi.is_none_or(|hi| v <= hi)
    }
}

/// Parses `key=lo..hi` (either end may be empty).
pub fn parse_window(text: &str) -> Result<Window> {
    let bad = |problem: String| {
        Error::invalid(
            format!("--where '{text}'"),
            problem,
            "Write key=lo..hi with either end open, e.g. mn=1900..2100 or acid_value=..0.5.",
        )
    };
    let (key, range) = text
        .split_once('=')
        .ok_or_else(|| bad("there is no '='".into()))?;
    let (lo, hi) = range
        .split_once("..")
        .ok_or_else(|| bad("there is no '..' in the range".into()))?;
    let num = |s: &str| -> Result<Option<f64>> {
        let s = s.trim();
        if s.is_empty() {
            return Ok(None);
        }
        match s.parse::<f64>() {
            Ok(v) if v.is_finite() => Ok(Some(v)),
            _ => Err(bad(format!("'{s}' is not a number"))),
        }
    };
    let w = Window {
        key: key.trim().to_string(),
        lo: num(lo)?,
        hi: num(hi)?,
    };
    if let (Some(a), Some(b)) = (w.lo, w.hi) {
        if a > b {
            return Err(bad(format!("the lower end {a} is above the upper end {b}")));
        }
    }
    if w.lo.is_none() && w.hi.is_none() {
        return Err(bad("both ends are open".into()));
    }
    Ok(w)
}

/// Parses a YYYY-MM-DD date given to `flag`.
pub fn parse_date(flag: &str, text: &str) -> Result<NaiveDate> {
    NaiveDate::parse_from_str(text, "%Y-%m-%d").map_err(|_| {
        Error::invalid(
            format!("{flag} '{text}'"),
            "not a date",
            "Write dates as YYYY-MM-DD.",
        )
    })
}

/// A manufacture date kept inline as its ten ASCII bytes (YYYY-MM-DD); derefs to `&str`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
pub struct Day([u8; 10]);

impl Day {
    /// The ten bytes as they are (the lot table cache keeps them so).
    pub(crate) fn from_raw(b: &[u8]) -> Day {
        let mut d = [0u8; 10];
        d.copy_from_slice(&b[..10]);
        Day(d)
    }

    /// The ten bytes.
    pub(crate) fn as_bytes(&self) -> &[u8; 10] {
        &self.0
    }

    fn from_bytes(b: &[u8]) -> Day {
        let mut d = [b'?'; 10];
        let n = b.len().min(10);
        d[..n].copy_from_slice(&b[..n]);
        Day(d)
    }
}

impl From<&str> for Day {
    fn from(s: &str) -> Day {
        Day::from_bytes(s.as_bytes())
    }
}

impl From<NaiveDate> for Day {
    fn from(d: NaiveDate) -> Day {
        Day::from(d.to_string().as_str())
    }
}

impl std::ops::Deref for Day {
    type Target = str;
    fn deref(&self) -> &str {
        std::str::from_utf8(&self.0).unwrap_or("?")
    }
}

impl std::fmt::Display for Day {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self)
    }
}

impl serde::Serialize for Day {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.serialize_str(self)
    }
}

/// A lot id kept inline when it is short (up to 22 bytes, as lot ids are), on the heap
/// otherwise; derefs to `&str`. Saves an allocation per lot in a million-lot query.
#[derive(Clone, PartialEq, Eq, Hash)]
pub struct LotId(LotIdRepr);

#[derive(Clone, PartialEq, Eq, Hash)]
enum LotIdRepr {
    Inline { len: u8, bytes: [u8; 22] },
    Heap(Box<str>),
}

impl From<&str> for LotId {
    fn from(s: &str) -> LotId {
        if s.len() <= 22 {
            let mut bytes = [0u8; 22];
            bytes[..s.len()].copy_from_slice(s.as_bytes());
            LotId(LotIdRepr::Inline {
                len: s.len() as u8,
                bytes,
            })
        } else {
            LotId(LotIdRepr::Heap(s.into()))
        }
    }
}

impl From<String> for LotId {
    fn from(s: String) -> LotId {
        LotId::from(s.as_str())
    }
}

impl std::ops::Deref for LotId {
    type Target = str;
    fn deref(&self) -> &str {
        match &self.0 {
            // Built from a whole &str, so the inline bytes are UTF-8.
            LotIdRepr::Inline { len, bytes } => {
                std::str::from_utf8(&bytes[..*len as usize]).unwrap_or("?")
            }
            LotIdRepr::Heap(s) => s,
        }
    }
}

impl AsRef<str> for LotId {
    fn as_ref(&self) -> &str {
        self
    }
}

impl PartialEq<str> for LotId {
    fn eq(&self, other: &str) -> bool {
        &**self == other
    }
}

impl PartialEq<&str> for LotId {
    fn eq(&self, other: &&str) -> bool {
        &**self == *other
    }
}

impl std::fmt::Debug for LotId {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        std::fmt::Debug::fmt(&**self, f)
    }
}

impl std::fmt::Display for LotId {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self)
    }
}

impl serde::Serialize for LotId {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.serialize_str(self)
    }
}

/// The current (latest) row of one lot, reduced to what queries need (compact: a million
/// lots fit in well under 300 MB).
#[derive(Debug, Clone, PartialEq)]
pub struct LotRow {
    /// Line in the trend file.
    pub line: usize,
    /// Lot id.
    pub lot: LotId,
    /// Manufacture date.
    pub manufactured: Day,
    /// Status (snake_case).
    pub status: &'static str,
    /// Spec revision applied.
    pub revision: &'static str,
    /// Expanded uncertainty of Mn.
    pub mn_uncertainty: Option<f64>,
    /// Values of the requested keys, in order (None when empty).
    pub values: Vec<Option<f64>>,
}

/// Interns short labels (statuses, revisions): a handful of distinct values per file, kept for
/// the life of the process. `table` is the scan's own cache; a miss there looks in one table
/// for the whole process, so a long-running process (`resinlot serve`, issue #21) that scans
/// the record on every request keeps one copy of each label, not one per scan.
/// One process-wide copy of a short label (see [`intern`]).
pub(crate) fn intern_label(text: &str) -> &'static str {
    intern(&mut Vec::new(), text.as_bytes())
}

fn intern(table: &mut Vec<&'static str>, text: &[u8]) -> &'static str {
    static INTERNED: std::sync::Mutex<Vec<&'static str>> = std::sync::Mutex::new(Vec::new());
    let t = std::str::from_utf8(text).unwrap_or("?");
    if let Some(s) = table.iter().find(|s| **s == t) {
        return s;
    }
    let mut all = INTERNED.lock().unwrap_or_else(|e| e.into_inner());
    let s: &'static str = match all.iter().find(|s| **s == t) {
        Some(s) => s,
        None => {
            let s: &'static str = Box::leak(t.to_string().into_boxed_str());
            all.push(s);
            s
        }
    };
    table.push(s);
    s
}

/// Splits one CSV line into field spans (start, end) up to column `upto`, honouring quotes;
/// a quoted field's span excludes its outer quotes (doubled quotes inside stay doubled, which
/// never matters for the ids, dates and numbers read here).
pub(crate) fn split_spans(line: &[u8], upto: usize, out: &mut Vec<(usize, usize)>) {
    out.clear();
    // Fields here are short (ids, dates, numbers): a plain byte loop beats a vector search
    // per field. A quote anywhere before the last field needed hands the line to the
    // quote-aware split below (issue #20).
    let mut start = 0;
    let mut plain = true;
    for (i, &b) in line.iter().enumerate() {
        if b == b',' {
            out.push((start, i));
            if out.len() > upto {
                return;
            }
            start = i + 1;
        } else if b == b'"' {
            plain = false;
            break;
        }
    }
    if plain {
        out.push((start, line.len()));
        return;
    }
    split_spans_quoted(line, upto, out);
}

/// [`split_spans`] for a line with quotes.
fn split_spans_quoted(line: &[u8], upto: usize, out: &mut Vec<(usize, usize)>) {
    out.clear();
    let mut start = 0;
    let mut quoted_from: Option<usize> = None; // inside a quoted field opened here
    let mut quote_end = 0;
    let mut skip = false; // the second quote of a doubled (escaped) quote
    for i in memchr::memchr2_iter(b',', b'"', line) {
        if line[i] == b'"' {
            if skip {
                skip = false;
                continue;
            }
            match quoted_from {
                None if i == start => quoted_from = Some(i + 1),
                Some(_) if line.get(i + 1) == Some(&b'"') => skip = true,
                Some(_) => {
                    quote_end = i;
                    quoted_from = None;
                }
                None => {}
            }
            continue;
        }
        if quoted_from.is_some() {
            continue; // a comma inside quotes
        }
        let span = if line.get(start) == Some(&b'"') && quote_end > start {
            (start + 1, quote_end)
        } else {
            (start, i)
        };
        out.push(span);
        if out.len() > upto {
            return;
        }
        start = i + 1;
    }
    let span = if line.get(start) == Some(&b'"') && quote_end > start {
        (start + 1, quote_end)
    } else {
        (start, line.len())
    };
    out.push(span);
}

/// The latest row of every lot of a trend file, column by column ([`LotTable`]), with the
/// values of `keys` (and the expanded uncertainty of Mn when asked), in order of their latest
/// row; and the property keys the file has.
///
/// Answered from the lot table cache ([`crate::record::table_cache`]) when it is current.
/// Otherwise the body is scanned in parallel ([`scan::parallel_body`], one range per core) and
/// only the columns needed are split, straight into compact column vectors (no record per
/// row); each lot is kept as a 64-bit hash ([`scan::lot_hash`]) and the ids are compared
/// whenever two hashes agree, so the latest row of each lot is exact.
pub fn current_table(
    path: &Path,
    keys: &[String],
    with_mn_uncertainty: bool,
) -> Result<(Vec<String>, LotTable)> {
    current_lots_in(path, keys, with_mn_uncertainty, false, None)
}

/// What `find` needs to know of a lot's life besides its latest row (issue #14): the test
/// date of its latest retest (which may extend its retest date) and the customer its latest
/// row releases it to under concession (`""` for none).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Life {
    /// Test date of the lot's latest retest row (`tested_to`, else the day it was recorded).
    pub retested: Option<Day>,
    /// Customer (file stem) of a concession on the lot's latest row; empty for none.
    pub concession: &'static str,
}

/// [`current_table`] with each kept lot's [`Life`] ([`LotTable::lives`]).
pub fn current_table_with_life(
    path: &Path,
    keys: &[String],
    with_mn_uncertainty: bool,
) -> Result<(Vec<String>, LotTable)> {
    current_lots_in(path, keys, with_mn_uncertainty, true, None)
}

/// [`current_table`], with the lots' lives when `with_life`, and the number of scan parts fixed
/// when `parts` is given (None: one per core for a large file).
fn current_lots_in(
    path: &Path,
    keys: &[String],
    with_mn_uncertainty: bool,
    with_life: bool,
    parts: Option<usize>,
) -> Result<(Vec<String>, LotTable)> {
    let header = read_header(path)?;
    let file_keys = trend_file::property_keys(&header);
    // Checks the keys against the header first, whatever answers.
    RowLayout::new(path, &header, keys, with_mn_uncertainty)?;
    if parts.is_none() && keys.iter().all(|k| file_keys.contains(k)) {
        // Through the lot table cache (issue #20): the scan below, of every property with
        // the uncertainty and the lives, runs only when the cache is stale or missing.
        let table = crate::record::table_cache::current(
            path,
            &file_keys,
            keys,
            with_mn_uncertainty,
            with_life,
            || scan_table(path, &header, &file_keys, true, true, None),
        )?;
        return Ok((file_keys, table));
    }
    let table = scan_table(path, &header, keys, with_mn_uncertainty, with_life, parts)?;
    Ok((file_keys, table))
}

/// The scan's answer without the cache, as rows and lives (the reference the cache is tested
/// against).
#[cfg(test)]
pub(crate) fn scanned_for_test(path: &Path, keys: &[&str]) -> (Vec<LotRow>, Vec<Life>) {
    let keys: Vec<String> = keys.iter().map(|s| s.to_string()).collect();
    let header = read_header(path).unwrap();
    let mut t = scan_table(path, &header, &keys, true, true, None).unwrap();
    let lives = std::mem::take(&mut t.lives);
    (t.into_rows(), lives)
}

/// The scan behind [`current_lots_in`]: the latest row of every lot with `keys`.
fn scan_table(
    path: &Path,
    header: &[String],
    keys: &[String],
    with_mn_uncertainty: bool,
    with_life: bool,
    parts: Option<usize>,
) -> Result<LotTable> {
    let mut layout = RowLayout::new(path, header, keys, with_mn_uncertainty)?;
    if with_life {
        // One split of each line serves both the row and its life.
        layout.upto = layout.upto.max(LifeReader::new(header).upto);
    }
    let parts = scan::parallel_body_in(
        path,
        parts,
        |_| {
            PartRows::new(
                keys.len(),
                with_mn_uncertainty,
                with_life.then(|| LifeReader::new(header)),
            )
        },
        |part, n, _, line| {
            if line.is_empty() {
                return Ok(());
            }
            part.read(&layout, n, line)
        },
    )?;
    Ok(latest_table(parts, keys.len()))
}

/// How many of the rows on `lines` (1-based line numbers, as in [`LotRow::line`]) record a
/// censored result (`<L`, below the limit of quantification) in each of `keys`: trend
/// excludes those from its statistics and says how many (issue #15). Streams the file once.
pub fn censored_counts(path: &Path, keys: &[String], lines: &[usize]) -> Result<Vec<usize>> {
    let header = read_header(path)?;
    let cols: Vec<Option<usize>> = keys
        .iter()
        .map(|k| header.iter().position(|c| c == k))
        .collect();
    // The lines in file order, walked alongside the file (no hash set of a million lines).
    let mut wanted: Vec<usize> = lines.to_vec();
    wanted.sort_unstable();
    let mut next = 0usize;
    let mut counts = vec![0; keys.len()];
    lines::for_each_line(path, lines::CHUNK, |line_no, line| {
        while next < wanted.len() && wanted[next] < line_no {
            next += 1;
        }
        if line_no == 1 || wanted.get(next) != Some(&line_no) || !line.contains(&b'<') {
            return Ok(());
        }
        let cells = trend_file::split_line(&String::from_utf8_lossy(line));
        for (n, c) in counts.iter_mut().zip(&cols) {
            if c.and_then(|i| cells.get(i))
                .is_some_and(|v| v.starts_with('<'))
            {
                *n += 1;
            }
        }
        Ok(())
    })?;
    Ok(counts)
}

/// The recorded cells of `keys` on the rows at `lines` (line number to cells, in `keys`
/// order) for the results [`LotRow::values`] cannot hold: words and censored results
/// (issue #15). Streams the file once; rows whose cells among `keys` are all numbers or empty
/// are left out.
pub fn raw_cells(
    path: &Path,
    keys: &[String],
    lines: &[usize],
) -> Result<std::collections::HashMap<usize, Vec<String>>> {
    let header = read_header(path)?;
    let cols: Vec<Option<usize>> = keys
        .iter()
        .map(|k| header.iter().position(|c| c == k))
        .collect();
    let wanted: std::collections::HashSet<usize> = lines.iter().copied().collect();
    let mut out = std::collections::HashMap::new();
    if keys.is_empty() {
        return Ok(out);
    }
    lines::for_each_line(path, lines::CHUNK, |line_no, line| {
        if line_no == 1 || !wanted.contains(&line_no) {
            return Ok(());
        }
        let cells = trend_file::split_line(&String::from_utf8_lossy(line));
        let mine: Vec<String> = cols
            .iter()
            .map(|c| c.and_then(|i| cells.get(i)).cloned().unwrap_or_default())
            .collect();
        if mine
            .iter()
            .any(|v| !v.is_empty() && v.parse::<f64>().is_err())
        {
            out.insert(line_no, mine);
        }
        Ok(())
    })?;
    Ok(out)
}

/// Column positions a query reads: lot, manufactured, status, spec_revision, mn_uncertainty,
/// then the keys.
struct RowLayout {
    want: Vec<usize>,
    /// The last column needed.
    upto: usize,
}

impl RowLayout {
    /// The layout for a file with these (checked) `header` columns; refuses a key it lacks.
    /// A line is split only up to the last column needed (`mn_uncertainty`, near the end of
    /// the row, only when asked for).
    fn new(
        path: &Path,
        header: &[String],
        keys: &[String],
        with_mn_uncertainty: bool,
    ) -> Result<RowLayout> {
        let col = |name: &str| header.iter().position(|c| c == name);
        let fixed = [
            "lot",
            "manufactured",
            "status",
            "spec_revision",
            "mn_uncertainty",
        ];
        let mut want: Vec<usize> = Vec::new();
        for f in fixed {
            want.push(col(f).expect("trend header checked"));
        }
        for k in keys {
            want.push(col(k).ok_or_else(|| {
                Error::invalid(
                    path.display().to_string(),
                    format!("no column '{k}'"),
                    "Check the property key.",
                )
            })?);
        }
        let upto = want
            .iter()
            .enumerate()
            .filter(|&(i, _)| i != 4 || with_mn_uncertainty)
            .map(|(_, &c)| c)
            .max()
            .expect("non-empty");
        Ok(RowLayout { want, upto })
    }
}

/// The rows of one scanned part, column by column: lot ids in one byte arena, short labels
/// (status, revision) as indices into a small table, values in one flat vector.
struct PartRows {
    keys: usize,
    with_mn_uncertainty: bool,
    spans: Vec<(usize, usize)>,
    hash: Vec<u64>,
    ids: Vec<u8>,
    id_end: Vec<u32>,
    line: Vec<u32>,
    made: Vec<Day>,
    status: Vec<u8>,
    revision: Vec<u8>,
    labels: Vec<Vec<u8>>,
    /// NaN for an empty cell (as in [`LotTable`]).
    mn_uncertainty: Vec<f64>,
    /// Row-major, `keys` per row, NaN for an empty cell.
    values: Vec<f64>,
    /// The lives of the rows, when asked for.
    life: Option<LifeReader>,
    lives: Vec<Life>,
}

impl PartRows {
    fn new(keys: usize, with_mn_uncertainty: bool, life: Option<LifeReader>) -> PartRows {
        PartRows {
            life,
            lives: Vec::new(),
            keys,
            with_mn_uncertainty,
            spans: Vec::new(),
            hash: Vec::new(),
            ids: Vec::new(),
            id_end: Vec::new(),
            line: Vec::new(),
            made: Vec::new(),
            status: Vec::new(),
            revision: Vec::new(),
            labels: Vec::new(),
            mn_uncertainty: Vec::new(),
            values: Vec::new(),
        }
    }

    fn len(&self) -> usize {
        self.line.len()
    }

    fn id(&self, i: usize) -> &[u8] {
        let from = if i == 0 {
            0
        } else {
            self.id_end[i - 1] as usize
        };
        &self.ids[from..self.id_end[i] as usize]
    }

    fn label(&mut self, text: &[u8]) -> u8 {
        if let Some(i) = self.labels.iter().position(|l| l == text) {
            return i as u8;
        }
        // More than 255 distinct statuses and revisions in one part cannot come from resinlot;
        // the last slot then stands for the rest (they read as "?").
        if self.labels.len() >= 255 {
            return 255;
        }
        self.labels.push(text.to_vec());
        (self.labels.len() - 1) as u8
    }

    /// Reads line `n` of the part; refuses a line with fewer fields than needed.
    fn read(
        &mut self,
        layout: &RowLayout,
        n: usize,
        line: &[u8],
    ) -> std::result::Result<(), scan::LineFault> {
        let mut spans = std::mem::take(&mut self.spans);
        split_spans(line, layout.upto, &mut spans);
        if spans.len() <= layout.upto {
            return Err(scan::LineFault {
                local_line: n,
                problem: "the row has fewer fields than the header".into(),
            });
        }
        let field = |i: usize| {
            let (a, b) = spans[layout.want[i]];
            &line[a..b.min(line.len())]
        };
        let lot = field(0);
        self.hash.push(scan::lot_hash(lot));
        self.ids.extend_from_slice(lot);
        self.id_end.push(self.ids.len() as u32);
        self.line.push(n as u32);
        self.made.push(Day::from_bytes(field(1)));
        let (s, r) = (self.label(field(2)), self.label(field(3)));
        self.status.push(s);
        self.revision.push(r);
        if self.with_mn_uncertainty {
            self.mn_uncertainty
                .push(number(field(4)).unwrap_or(f64::NAN));
        }
        for i in 0..self.keys {
            self.values.push(number(field(5 + i)).unwrap_or(f64::NAN));
        }
        if let Some(l) = &mut self.life {
            self.lives.push(l.read(&spans, line));
        }
        self.spans = spans;
        Ok(())
    }
}

/// A recorded cell as a number (None when empty or not a number): [`exact_decimal`] for the
/// plain decimals resinlot writes, the standard library's parser for anything else.
fn number(s: &[u8]) -> Option<f64> {
    if s.is_empty() {
        return None;
    }
    exact_decimal(s).or_else(|| {
        std::str::from_utf8(s)
            .ok()
            .and_then(|t| t.parse::<f64>().ok())
    })
}

/// Powers of ten that are exact in binary64 (10^0 to 10^22).
const EXACT_POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// A plain decimal `[-]digits[.digits]` of at most 15 significant digits, read exactly as the
/// standard library reads it but without its general machinery (issue #20); None for any
/// other form, which the caller hands to the standard parser.
///
/// Clinger's fast path: with the digits read as an integer m < 10^15 < 2^53 and k ≤ 22 digits
/// after the point, both m and 10^k are exact doubles, and one IEEE 754 division rounds
/// m / 10^k correctly, which is the correctly rounded value of the decimal text. Source:
/// W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990, §4.
pub(crate) fn exact_decimal(s: &[u8]) -> Option<f64> {
    let (negative, body) = match s.first()? {
        b'-' => (true, &s[1..]),
        _ => (false, s),
    };
    let mut mantissa: u64 = 0;
    let mut digits = 0u32;
    let mut point: Option<usize> = None;
    for (i, &b) in body.iter().enumerate() {
        match b {
            b'0'..=b'9' => {
                digits += 1;
                if digits > 15 {
                    return None;
                }
                mantissa = mantissa * 10 + u64::from(b - b'0');
            }
            b'.' if point.is_none() && i > 0 => point = Some(i),
            _ => return None,
        }
    }
    let after = match point {
        Some(p) if p + 1 == body.len() => return None, // "5." goes to the standard parser
        Some(p) => body.len() - p - 1,
        None if digits == 0 => return None,
        None => 0,
    };
    let v = mantissa as f64 / EXACT_POW10[after];
    Some(if negative { -v } else { v })
}

/// The latest row of every lot over the scanned parts, in file order: the (hash, row) pairs
/// are sorted, and within a run of equal hashes, for every distinct lot id, only the highest
/// row is kept (a retest supersedes what came before).
///
/// With lives (the parts read them), each kept lot's life gets the latest retest date of any
/// of the lot's rows, and the table's lives are parallel to its rows (empty otherwise).
///
/// Memory (issue #20): the parts' hash columns are dropped once the pairs are made, and each
/// part is dropped as soon as its kept rows are copied into the table.
fn latest_table(mut parts: Vec<scan::Part<PartRows>>, keys: usize) -> LotTable {
    // Row r of the whole file is row r - first[k] of part k.
    let mut first = Vec::with_capacity(parts.len());
    let mut line_base = Vec::with_capacity(parts.len());
    let (mut rows, mut lines) = (0usize, 1usize);
    for p in &parts {
        first.push(rows);
        line_base.push(lines);
        rows += p.state.len();
        lines += p.lines;
    }
    let locate = |r: usize| {
        let k = first.partition_point(|&f| f <= r) - 1;
        (k, r - first[k])
    };
    let mut pairs: Vec<(u64, u32)> = Vec::with_capacity(rows);
    for (k, p) in parts.iter_mut().enumerate() {
        let hash = std::mem::take(&mut p.state.hash);
        pairs.extend(
            hash.iter()
                .enumerate()
                .map(|(i, &h)| (h, (first[k] + i) as u32)),
        );
    }
    {
        use rayon::slice::ParallelSliceMut;
        pairs.par_sort_unstable();
    }
    let mut keep = vec![true; rows];
    let with_life = parts.iter().any(|p| p.state.life.is_some());
    let with_mn = parts.iter().any(|p| p.state.with_mn_uncertainty);
    let mut retested: Vec<(u32, Option<Day>)> = Vec::new();
    let id = |r: u32| {
        let (k, i) = locate(r as usize);
        parts[k].state.id(i)
    };
    let life = |r: u32| {
        let (k, i) = locate(r as usize);
        parts[k].state.lives[i]
    };
    let mut i = 0;
    while i < pairs.len() {
        let mut j = i + 1;
        while j < pairs.len() && pairs[j].0 == pairs[i].0 {
            j += 1;
        }
        for a in i..j {
            let ra = pairs[a].1;
            if pairs[a + 1..j].iter().any(|&(_, rb)| id(rb) == id(ra)) {
                keep[ra as usize] = false;
            } else if with_life && j - i > 1 {
                let latest = pairs[i..j]
                    .iter()
                    .filter(|&&(_, rb)| id(rb) == id(ra))
                    .filter_map(|&(_, rb)| life(rb).retested)
                    .max();
                retested.push((ra, latest));
            }
        }
        i = j;
    }
    drop(pairs);
    for (r, latest) in retested {
        let (k, i) = locate(r as usize);
        parts[k].state.lives[i].retested = latest;
    }
    let kept = keep.iter().filter(|&&k| k).count();
    let mut table = LotTable::with_capacity(keys, kept, with_mn, with_life);
    let mut cache: Vec<&'static str> = Vec::new();
    for (k, p) in parts.into_iter().enumerate() {
        let p = p.state;
        let labels: Vec<u8> = p
            .labels
            .iter()
            .map(|l| table.label_index(intern(&mut cache, l)))
            .collect();
        let label = |i: u8| labels.get(i as usize).copied().unwrap_or(LotTable::UNKNOWN);
        for i in 0..p.len() {
            if !keep[first[k] + i] {
                continue;
            }
            table.line.push(line_base[k] as u32 + p.line[i]);
            table.ids.extend_from_slice(p.id(i));
            table.id_end.push(table.ids.len() as u32);
            table.made.push(p.made[i]);
            table.status.push(label(p.status[i]));
            table.revision.push(label(p.revision[i]));
            if with_mn {
                table
                    .mn_uncertainty
                    .push(p.mn_uncertainty.get(i).copied().unwrap_or(f64::NAN));
            }
            table
                .values
                .extend_from_slice(&p.values[i * keys..(i + 1) * keys]);
            if let Some(l) = p.lives.get(i) {
                table.lives.push(*l);
            }
        }
        // `p` is dropped here: its memory is free before the next part is copied.
    }
    table
}

/// The current lots of a trend file column by column (issue #20): what [`LotRow`] holds for
/// each lot, without a record per lot. Ids share one byte buffer, statuses and revisions are
/// indices into a small table of labels, empty numbers are NaN. A million lots with one
/// property take about 36 MB.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LotTable {
    pub(crate) keys: usize,
    pub(crate) line: Vec<u32>,
    pub(crate) ids: Vec<u8>,
    pub(crate) id_end: Vec<u32>,
    pub(crate) made: Vec<Day>,
    pub(crate) status: Vec<u8>,
    pub(crate) revision: Vec<u8>,
    pub(crate) labels: Vec<&'static str>,
    /// Empty unless asked for; NaN for an empty cell.
    pub(crate) mn_uncertainty: Vec<f64>,
    /// Row-major, `keys` per lot; NaN for an empty cell.
    pub(crate) values: Vec<f64>,
    /// Parallel to the lots when asked for (`find`), empty otherwise.
    pub(crate) lives: Vec<Life>,
}

impl LotTable {
    /// The label index that reads as "?" (more distinct labels than a table holds).
    const UNKNOWN: u8 = 255;

    fn with_capacity(keys: usize, lots: usize, with_mn: bool, with_life: bool) -> LotTable {
        LotTable {
            keys,
            line: Vec::with_capacity(lots),
            ids: Vec::new(),
            id_end: Vec::with_capacity(lots),
            made: Vec::with_capacity(lots),
            status: Vec::with_capacity(lots),
            revision: Vec::with_capacity(lots),
            labels: Vec::new(),
            mn_uncertainty: Vec::with_capacity(if with_mn { lots } else { 0 }),
            values: Vec::with_capacity(lots * keys),
            lives: Vec::with_capacity(if with_life { lots } else { 0 }),
        }
    }

    fn label_index(&mut self, label: &'static str) -> u8 {
        if let Some(i) = self.labels.iter().position(|l| *l == label) {
            return i as u8;
        }
        if self.labels.len() >= Self::UNKNOWN as usize {
            return Self::UNKNOWN;
        }
        self.labels.push(label);
        (self.labels.len() - 1) as u8
    }

    /// This table (loaded with every property `file_keys`) with only the values of `keys`,
    /// and the uncertainty and lives only when asked for.
    pub(crate) fn project(
        mut self,
        file_keys: &[String],
        keys: &[String],
        with_mn_uncertainty: bool,
        with_life: bool,
    ) -> LotTable {
        let cols: Vec<usize> = keys
            .iter()
            .map(|k| file_keys.iter().position(|f| f == k).expect("keys checked"))
            .collect();
        let n = self.len();
        let mut values = Vec::with_capacity(n * cols.len());
        for i in 0..n {
            for &c in &cols {
                values.push(self.values[i * self.keys + c]);
            }
        }
        self.values = values;
        self.keys = cols.len();
        if !with_mn_uncertainty {
            self.mn_uncertainty = Vec::new();
        }
        if !with_life {
            self.lives = Vec::new();
        }
        self
    }

    /// Number of lots.
    pub fn len(&self) -> usize {
        self.line.len()
    }

    /// True when the table holds no lot.
    pub fn is_empty(&self) -> bool {
        self.line.is_empty()
    }

    /// Number of property values per lot (the keys the table was loaded with).
    pub fn keys(&self) -> usize {
        self.keys
    }

    /// Line of lot `i`'s latest row in the trend file.
    pub fn line(&self, i: usize) -> usize {
        self.line[i] as usize
    }

    /// Id of lot `i`.
    pub fn lot(&self, i: usize) -> &str {
        let from = if i == 0 {
            0
        } else {
            self.id_end[i - 1] as usize
        };
        std::str::from_utf8(&self.ids[from..self.id_end[i] as usize]).unwrap_or("?")
    }

    /// Manufacture date of lot `i`.
    pub fn made(&self, i: usize) -> Day {
        self.made[i]
    }

    /// Status of lot `i` (snake_case).
    pub fn status(&self, i: usize) -> &'static str {
        self.labels
            .get(self.status[i] as usize)
            .copied()
            .unwrap_or("?")
    }

    /// Spec revision applied to lot `i`.
    pub fn revision(&self, i: usize) -> &'static str {
        self.labels
            .get(self.revision[i] as usize)
            .copied()
            .unwrap_or("?")
    }

    /// Value of key `k` (in load order) of lot `i`; None when the cell is empty.
    pub fn value(&self, i: usize, k: usize) -> Option<f64> {
        let v = self.values[i * self.keys + k];
        (!v.is_nan()).then_some(v)
    }

    /// Expanded uncertainty of lot `i`'s Mn, when it was loaded and recorded.
    pub fn mn_uncertainty(&self, i: usize) -> Option<f64> {
        self.mn_uncertainty.get(i).copied().filter(|v| !v.is_nan())
    }

    /// Lot `i` as a row.
    pub fn row(&self, i: usize) -> LotRow {
        LotRow {
            line: self.line(i),
            lot: LotId::from(self.lot(i)),
            manufactured: self.made[i],
            status: self.status(i),
            revision: self.revision(i),
            mn_uncertainty: self.mn_uncertainty(i),
            values: (0..self.keys).map(|k| self.value(i, k)).collect(),
        }
    }

    /// Puts lot `i` into `row`, reusing its allocation (for a pass over every lot).
    pub fn row_into(&self, i: usize, row: &mut LotRow) {
        row.line = self.line(i);
        row.lot = LotId::from(self.lot(i));
        row.manufactured = self.made[i];
        row.status = self.status(i);
        row.revision = self.revision(i);
        row.mn_uncertainty = self.mn_uncertainty(i);
        row.values.clear();
        row.values.extend((0..self.keys).map(|k| self.value(i, k)));
    }

    /// The distinct spec revisions of the lots.
    pub fn revisions(&self) -> Vec<&'static str> {
        let mut seen = [false; 256];
        for &r in &self.revision {
            seen[r as usize] = true;
        }
        (0..256)
            .filter(|&r| seen[r])
            .map(|r| self.labels.get(r).copied().unwrap_or("?"))
            .collect()
    }

    /// The lives of the lots (parallel to them) when they were loaded; empty otherwise.
    pub fn lives(&self) -> &[Life] {
        &self.lives
    }

    /// Every lot as a row, in table order.
    pub fn into_rows(self) -> Vec<LotRow> {
        (0..self.len()).map(|i| self.row(i)).collect()
    }

    /// A table of these rows (each with `keys` values), in their order.
    pub fn from_rows(rows: &[LotRow]) -> LotTable {
        let keys = rows.first().map_or(0, |r| r.values.len());
        let with_mn = rows.iter().any(|r| r.mn_uncertainty.is_some());
        let mut t = LotTable::with_capacity(keys, rows.len(), with_mn, false);
        for r in rows {
            t.line.push(r.line as u32);
            t.ids.extend_from_slice(r.lot.as_bytes());
            t.id_end.push(t.ids.len() as u32);
            t.made.push(r.manufactured);
            let (s, v) = (t.label_index(r.status), t.label_index(r.revision));
            t.status.push(s);
            t.revision.push(v);
            if with_mn {
                t.mn_uncertainty.push(r.mn_uncertainty.unwrap_or(f64::NAN));
            }
            for k in 0..keys {
                t.values
                    .push(r.values.get(k).copied().flatten().unwrap_or(f64::NAN));
            }
        }
        t
    }

    /// The lots at `order` (indices into this table), in that order; the table itself when
    /// `order` is every lot in table order.
    pub fn gather(self, order: &[u32]) -> LotTable {
        if order.len() == self.len() && order.iter().enumerate().all(|(i, &o)| o as usize == i) {
            return self;
        }
        let mut t = LotTable::with_capacity(
            self.keys,
            order.len(),
            !self.mn_uncertainty.is_empty(),
            !self.lives.is_empty(),
        );
        t.labels = self.labels.clone();
        for &o in order {
            let i = o as usize;
            t.line.push(self.line[i]);
            let from = if i == 0 {
                0
            } else {
                self.id_end[i - 1] as usize
            };
            t.ids
                .extend_from_slice(&self.ids[from..self.id_end[i] as usize]);
            t.id_end.push(t.ids.len() as u32);
            t.made.push(self.made[i]);
            t.status.push(self.status[i]);
            t.revision.push(self.revision[i]);
            if let Some(&u) = self.mn_uncertainty.get(i) {
                t.mn_uncertainty.push(u);
            }
            t.values
                .extend_from_slice(&self.values[i * self.keys..(i + 1) * self.keys]);
            if let Some(l) = self.lives.get(i) {
                t.lives.push(*l);
            }
        }
        t
    }
}

/// Reads the [`Life`] cells of a row: `supersedes`, `disposition`, `concession_customer`,
/// `recorded_at` and `tested_to` (the layout-v3 ones may be absent in an earlier file).
struct LifeReader {
    cols: [Option<usize>; 5],
    upto: usize,
    customers: Vec<&'static str>,
}

impl LifeReader {
    fn new(header: &[String]) -> LifeReader {
        let col = |name: &str| header.iter().position(|c| c == name);
        let cols = [
            col("supersedes"),
            col("disposition"),
            col("concession_customer"),
            col("recorded_at"),
            col("tested_to"),
        ];
        LifeReader {
            upto: cols.iter().flatten().copied().max().unwrap_or(0),
            cols,
            customers: Vec::new(),
        }
    }

    /// The life of `line`, split into `spans` (at least up to `self.upto`) by the row reader.
    fn read(&mut self, spans: &[(usize, usize)], line: &[u8]) -> Life {
        let cell = |i: usize| -> &[u8] {
            match self.cols[i].and_then(|c| spans.get(c)) {
                Some(&(a, b)) => &line[a..b.min(line.len())],
                None => b"",
            }
        };
        let retest = !cell(0).is_empty() && cell(1).is_empty();
        let retested = retest.then(|| {
            let tested = cell(4);
            if tested.len() >= 10 {
                Day::from_bytes(&tested[..10])
            } else {
                Day::from_bytes(&cell(3)[..cell(3).len().min(10)])
            }
        });
        let concession = if cell(1) == b"concession" {
            let c = cell(2);
            intern(&mut self.customers, c)
        } else {
            ""
        };
        Life {
            retested,
            concession,
        }
    }
}

/// The checked header columns of a trend file (its first line only).
fn read_header(path: &Path) -> Result<Vec<String>> {
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let mut first = String::new();
    std::io::BufRead::read_line(&mut std::io::BufReader::new(file), &mut first)
        .map_err(|e| Error::io(path, "reading", e))?;
    let columns = trend_file::split_line(first.trim_end());
    trend_file::check_trend_header(path, &columns)?;
    Ok(columns)
}

/// The checked header columns of the trend file at `path` (its first line only).
pub fn header_columns(path: &Path) -> Result<Vec<String>> {
    read_header(path)
}

/// The property keys of a trend file (from its header only).
pub fn trend_keys(path: &Path) -> Result<Vec<String>> {
    Ok(trend_file::property_keys(&read_header(path)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The current lots as rows (through the cache, as the commands read them).
    fn current_rows(p: &Path, keys: &[String]) -> (Vec<String>, Vec<LotRow>) {
        let (k, t) = current_table(p, keys, false).unwrap();
        (k, t.into_rows())
    }

    /// Issue #20: the fast decimal reader gives the standard library's value bit for bit
    /// (the reference: Rust's `f64::from_str`, correctly rounded) on every form it accepts,
    /// and declines the forms it does not handle.
    #[test]
    fn exact_decimal_matches_the_standard_parser() {
        let mut next = crate::support::test_rng::xorshift(0x2545_f491_4f6c_dd1d);
        for _ in 0..200_000 {
            let r = next();
            let int_digits = 1 + (r % 9) as usize;
            let frac_digits = ((r >> 8) % 8) as usize;
            let mut t = String::new();
            if r >> 20 & 1 == 1 {
                t.push('-');
            }
            for k in 0..int_digits {
                t.push(char::from(b'0' + ((r >> (24 + 3 * k)) % 10) as u8));
            }
            if frac_digits > 0 {
                t.push('.');
                for _ in 0..frac_digits {
                    t.push(char::from(b'0' + (next() % 10) as u8));
                }
            }
            let want: f64 = t.parse().unwrap();
            let got = exact_decimal(t.as_bytes());
            if int_digits + frac_digits <= 15 {
                assert_eq!(got.map(f64::to_bits), Some(want.to_bits()), "{t}");
            }
            assert_eq!(
                number(t.as_bytes()).map(f64::to_bits),
                Some(want.to_bits()),
                "{t}"
            );
        }
        for declined in [
            "",
            "-",
            ".5",
            "5.",
            "1e3",
            "+1",
            "1.2.3",
            "0x10",
            "1234567890123456",
        ] {
            assert_eq!(exact_decimal(declined.as_bytes()), None, "{declined}");
        }
        assert_eq!(number(b"5."), Some(5.0));
        assert_eq!(number(b"1e3"), Some(1000.0));
        assert_eq!(number(b"<0.05"), None);
        assert_eq!(
            exact_decimal(b"-0").map(f64::to_bits),
            Some((-0.0f64).to_bits())
        );
    }

    /// Issue #20: the plain byte split and the quote-aware split agree on lines without quotes,
    /// and a quote anywhere sends the line to the quote-aware one.
    #[test]
    fn plain_split_agrees_with_the_quoted_split() {
        for line in [
            &b"a,b,,c"[..],
            b"",
            b",",
            b"1,2,3,4,5,6",
            b"x,\"y,z\",w",
            b"x,y,\"z\"\"q\",w",
        ] {
            for upto in 0..6 {
                let (mut a, mut b) = (Vec::new(), Vec::new());
                split_spans(line, upto, &mut a);
                split_spans_quoted(line, upto, &mut b);
                assert_eq!(a, b, "{:?} upto {upto}", String::from_utf8_lossy(line));
            }
        }
    }

    /// Writes a trend file at `p` with the columns `keys` holding `rows`, through the lock and
    /// append of `record::trend_file` (test fixture: invented lots and values).
    #[test]
    fn chunked_search_finds_rows_across_chunk_boundaries() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        let keys = vec!["acid_value".to_string()];
        let rows: Vec<_> = ["A1", "B22", "A1", "C333", "A11"]
            .into_iter()
            .map(|lot| vec![("lot", lot.to_string()), ("acid_value", "0.5".into())])
            .collect();
        trend_file::write_for_test(&p, &keys, &rows);
        let full = trend_file::read(&p).unwrap();
        for chunk in [1, 7, 64, 1 << 20] {
            let t = lot_rows_chunked(&p, "A1", chunk).unwrap().unwrap();
            let seqs: Vec<&str> = t.rows.iter().map(|r| r.cells[0].as_str()).collect();
            assert_eq!(seqs, ["1", "3"], "chunk {chunk}");
            assert_eq!(
                t.rows[1].line, full.rows[2].line,
                "line numbers, chunk {chunk}"
            );
            assert!(lot_rows_chunked(&p, "Z9", chunk).unwrap().is_none());
        }
    }

    /// Issue #21: a long-running server scans on every request; each label is kept once for
    /// the process, not once per scan.
    #[test]
    fn labels_are_interned_once_across_scans_issue_21() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        let keys = vec!["acid_value".to_string()];
        let rows = vec![vec![
            ("lot", "A1".to_string()),
            ("status", "quarantined_for_issue_21".into()),
            ("spec_revision", "R21".into()),
        ]];
        trend_file::write_for_test(&p, &keys, &rows);
        let (_, first) = current_rows(&p, &keys);
        let (_, second) = current_rows(&p, &keys);
        assert_eq!(first[0].status, "quarantined_for_issue_21");
        assert!(std::ptr::eq(first[0].status, second[0].status));
        assert!(std::ptr::eq(first[0].revision, second[0].revision));
    }

    #[test]
    fn current_lots_keep_the_latest_row_of_each_lot() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        let keys = vec!["acid_value".to_string()];
        let rows: Vec<_> = [("A1", "0.5"), ("B2", "0.6"), ("A1", "0.4"), ("C3", "")]
            .into_iter()
            .map(|(lot, av)| {
                vec![
                    ("lot", lot.to_string()),
                    ("acid_value", av.into()),
                    ("manufactured", "2026-01-01".into()),
                ]
            })
            .collect();
        trend_file::write_for_test(&p, &keys, &rows);
        let (_, rows) = current_rows(&p, &keys);
        let got: Vec<(&str, Option<f64>)> = rows.iter().map(|r| (&*r.lot, r.values[0])).collect();
        assert_eq!(got, [("B2", Some(0.6)), ("A1", Some(0.4)), ("C3", None)]);
        assert_eq!(&*rows[0].manufactured, "2026-01-01");
    }

    /// Issue #20: split into several parts, the scan still keeps exactly the latest row of
    /// each lot (a retest in a later part supersedes) and numbers lines as the file does.
    #[test]
    fn parallel_parts_keep_the_latest_row_and_exact_lines_issue_20() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        let keys = vec!["acid_value".to_string()];
        let lots = ["A1", "B2", "C3", "A1", "D4", "B2", "E5", "A1"];
        let rows: Vec<_> = lots
            .iter()
            .enumerate()
            .map(|(i, lot)| {
                vec![
                    ("lot", lot.to_string()),
                    ("acid_value", format!("0.{}", i + 1)),
                    ("manufactured", "2026-01-01".into()),
                    ("status", "released".into()),
                ]
            })
            .collect();
        trend_file::write_for_test(&p, &keys, &rows);
        let (_, one) = current_lots_in(&p, &keys, true, true, Some(1)).unwrap();
        assert_eq!(one.lives.len(), one.len());
        for parts in [2, 3, 5, 8] {
            let (_, got) = current_lots_in(&p, &keys, true, true, Some(parts)).unwrap();
            assert_eq!(
                got.clone().into_rows(),
                one.clone().into_rows(),
                "parts {parts}"
            );
            assert_eq!(got.lives, one.lives, "parts {parts}");
        }
        let one = one.into_rows();
        let got: Vec<(&str, usize, Option<f64>)> =
            one.iter().map(|r| (&*r.lot, r.line, r.values[0])).collect();
        // Header is line 1, so row i (from 0) is line i + 2.
        assert_eq!(
            got,
            [
                ("C3", 4, Some(0.3)),
                ("D4", 6, Some(0.5)),
                ("B2", 7, Some(0.6)),
                ("E5", 8, Some(0.7)),
                ("A1", 9, Some(0.8))
            ]
        );
        assert_eq!(one[0].status, "released");
    }

    /// Issue #20: ids whose hashes collide are still told apart (every hash forced equal).
    #[test]
    fn colliding_hashes_are_told_apart_by_the_ids_issue_20() {
        let mut part = PartRows::new(1, false, None);
        for (i, id) in ["X1", "Y2", "X1", "Z3"].iter().enumerate() {
            part.hash.push(7);
            part.ids.extend_from_slice(id.as_bytes());
            part.id_end.push(part.ids.len() as u32);
            part.line.push(i as u32 + 1);
            part.made.push(Day::from("2026-01-01"));
            part.status.push(0);
            part.revision.push(0);
            part.values.push(i as f64);
        }
        part.labels.push(b"released".to_vec());
        let rows = latest_table(
            vec![scan::Part {
                state: part,
                lines: 4,
            }],
            1,
        )
        .into_rows();
        let got: Vec<(&str, usize)> = rows.iter().map(|r| (&*r.lot, r.line)).collect();
        assert_eq!(got, [("Y2", 3), ("X1", 4), ("Z3", 5)]);
    }

    #[test]
    fn lot_ids_inline_or_on_the_heap_read_back() {
        for id in [
            "",
            "A1",
            "PD-2000-26-000123",
            "a-very-long-lot-identifier-of-40-bytes!!",
        ] {
            let l = LotId::from(id);
            assert_eq!(&*l, id);
            assert_eq!(l, id);
            assert_eq!(l.to_string(), id);
            assert_eq!(serde_json::to_string(&l).unwrap(), format!("\"{id}\""));
        }
        assert_ne!(LotId::from("A1"), LotId::from("A10"));
    }

    /// Issue #14: each kept lot's life carries the latest retest date of any of its rows
    /// (also when a disposition row came after it) and its concession customer; lot ids typed
    /// in another case find the recorded lot. Invented rows.
    #[test]
    fn lives_follow_retests_and_concessions_issue_14() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        let keys = vec!["acid_value".to_string()];
        let row = |lot: &str, at: &str, extra: &[(&'static str, &str)]| {
            let mut r = vec![
                ("lot", lot.to_string()),
                ("acid_value", "0.5".to_string()),
                ("manufactured", "2025-11-01".to_string()),
                ("recorded_at", at.to_string()),
            ];
            r.extend(extra.iter().map(|(k, v)| (*k, v.to_string())));
            r
        };
        trend_file::write_for_test(
            &p,
            &keys,
            &[
                row("A1", "2025-11-02T08:00:00Z", &[]),
                row("B2", "2025-11-03T08:00:00Z", &[]),
                row("A1", "2026-11-05T08:00:00Z", &[("supersedes", "1")]),
                row(
                    "A1",
                    "2026-11-06T08:00:00Z",
                    &[
                        ("supersedes", "3"),
                        ("disposition", "concession"),
                        ("concession_customer", "acme"),
                    ],
                ),
                row(
                    "B2",
                    "2026-11-07T08:00:00Z",
                    &[("supersedes", "2"), ("tested_to", "2026-11-04")],
                ),
            ],
        );
        let (_, table) = current_table_with_life(&p, &keys, false).unwrap();
        let lives = table.lives().to_vec();
        let rows = table.into_rows();
        let got: Vec<(&str, Option<String>, &str)> = rows
            .iter()
            .zip(&lives)
            .map(|(r, l)| (&*r.lot, l.retested.map(|d| d.to_string()), l.concession))
            .collect();
        assert_eq!(
            got,
            [
                ("A1", Some("2026-11-05".to_string()), "acme"),
                // tested_to, when recorded, is the retest's test date.
                ("B2", Some("2026-11-04".to_string()), ""),
            ]
        );
        let found = find_lot(dir.path(), "a1").unwrap().unwrap();
        assert_eq!(found.rows.len(), 3);
        assert_eq!(found.cell(&found.rows[0], "lot"), "A1");
        assert!(find_lot(dir.path(), "a2").unwrap().is_none());
    }

    #[test]
    fn spans_honour_quotes() {
        let line = b"1,\"a, b\",\"say \"\"hi\"\"\",,x";
        let mut v = Vec::new();
        split_spans(line, 4, &mut v);
        let f: Vec<&[u8]> = v.iter().map(|&(a, b)| &line[a..b]).collect();
        assert_eq!(f, [&b"1"[..], b"a, b", b"say \"\"hi\"\"", b"", b"x"]);
        split_spans(line, 1, &mut v);
        assert_eq!(v.len(), 2, "stops after the wanted column");
    }

    proptest::proptest! {
        #[test]
        fn spans_agree_with_the_writer(cells in proptest::collection::vec("[a-z0-9 ,\"=.-]{0,8}", 1..8)) {
            // Encode as the trend-file writer does, split, unescape: the cells come back.
            let line: Vec<String> = cells.iter().map(|c| trend_file::text_cell(c)).collect();
            let line = line.join(",");
            let mut v = Vec::new();
            split_spans(line.as_bytes(), cells.len() + 2, &mut v);
            let back: Vec<String> = v.iter().map(|&(a, b)| line[a..b].replace("\"\"", "\"")).collect();
            let expect: Vec<String> = trend_file::split_line(&line);
            proptest::prop_assert_eq!(back, expect);
        }
    }

    #[test]
    fn windows_open_on_either_end() {
        let w = parse_window("mn=1900..2100").unwrap();
        assert!(w.contains(1900.0) && w.contains(2100.0) && !w.contains(2100.1));
        let w = parse_window("acid_value=..0.5").unwrap();
        assert_eq!((w.lo, w.hi), (None, Some(0.5)));
        assert!(parse_window("mn=1950..").unwrap().contains(5000.0));
        assert!(parse_window("mn=2100..1900").is_err());
        assert!(parse_window("mn").is_err());
        assert!(parse_window("mn=..").is_err());
        assert!(parse_window("mn=a..b").is_err());
    }
}
