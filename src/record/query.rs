//! Read-only queries on the record: find a lot fast, suggest near ids, filter lots by windows.

use std::path::{Path, PathBuf};

use chrono::NaiveDate;

use crate::error::{Error, Result};
use crate::record::lines;
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

/// The rows of `lot` in one trend file (file order), found by a byte search before any parse:
/// the file is read in 8 MiB chunks and only lines containing `,lot,` are split, so memory
/// stays small and a million-lot file is searched at memory speed.
pub fn lot_rows_in(path: &Path, lot: &str) -> Result<Option<Trend>> {
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

/// The current (latest) row of one lot, reduced to what queries need (compact: a million
/// lots fit in well under 300 MB).
#[derive(Debug, Clone, PartialEq)]
pub struct LotRow {
    /// Line in the trend file.
    pub line: usize,
    /// Lot id.
    pub lot: Box<str>,
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
/// the life of the process.
fn intern(table: &mut Vec<&'static str>, text: &[u8]) -> &'static str {
    let t = std::str::from_utf8(text).unwrap_or("?");
    if let Some(s) = table.iter().find(|s| **s == t) {
        return s;
    }
    let s: &'static str = Box::leak(t.to_string().into_boxed_str());
    table.push(s);
    s
}

/// Splits one CSV line into field spans (start, end) up to column `upto`, honouring quotes;
/// a quoted field's span excludes its outer quotes (doubled quotes inside stay doubled, which
/// never matters for the ids, dates and numbers read here).
fn split_spans(line: &[u8], upto: usize, out: &mut Vec<(usize, usize)>) {
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

/// Streams a trend file and keeps the latest row of every lot, with the values of `keys` (and
/// the expanded uncertainty of Mn when asked). Returns the property keys the file has, and the
/// lots in order of their latest row.
///
/// Reads in 8 MiB chunks and splits only the columns it needs, so a million-lot file takes a
/// fraction of a second and memory grows only with the lots kept.
pub fn current_lots(
    path: &Path,
    keys: &[String],
    with_mn_uncertainty: bool,
) -> Result<(Vec<String>, Vec<LotRow>)> {
    let (file_keys, rows, _) = current_lots_with(path, keys, with_mn_uncertainty, false)?;
    Ok((file_keys, rows))
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

/// [`current_lots`] with each kept lot's [`Life`] (parallel to the lots).
pub fn current_lots_with_life(
    path: &Path,
    keys: &[String],
    with_mn_uncertainty: bool,
) -> Result<(Vec<String>, Vec<LotRow>, Vec<Life>)> {
    current_lots_with(path, keys, with_mn_uncertainty, true)
}

fn current_lots_with(
    path: &Path,
    keys: &[String],
    with_mn_uncertainty: bool,
    with_life: bool,
) -> Result<(Vec<String>, Vec<LotRow>, Vec<Life>)> {
    use std::hash::BuildHasher;
    let header = read_header(path)?;
    let file_keys = trend_file::property_keys(&header);
    let mut reader = RowReader::new(path, &header, keys, with_mn_uncertainty)?;
    let mut life_reader = with_life.then(|| LifeReader::new(&header));
    if let Some(l) = &life_reader {
        // One split of each line serves both readers.
        reader.upto = reader.upto.max(l.upto);
    }
    let mut lives: Vec<Life> = Vec::new();
    let hasher = std::collections::hash_map::RandomState::new();
    // About 250 bytes a row: reserve once instead of growing through a million pushes.
    let estimate = std::fs::metadata(path).map_or(0, |m| m.len() as usize / 250);
    let mut keys_seen: Vec<(u64, u32)> = Vec::with_capacity(estimate);
    let mut rows: Vec<LotRow> = Vec::with_capacity(estimate);
    lines::for_each_line(path, lines::CHUNK, |line_no, line| {
        if line_no == 1 || line.is_empty() {
            return Ok(());
        }
        let row = reader.read(line_no, line)?;
        keys_seen.push((hasher.hash_one(&*row.lot), rows.len() as u32));
        rows.push(row);
        if let Some(l) = &mut life_reader {
            lives.push(l.read(&reader.spans, line));
        }
        Ok(())
    })?;
    keep_latest(&mut rows, keys_seen, with_life.then_some(&mut lives));
    Ok((file_keys, rows, lives))
}

/// Turns trend-file lines into [`LotRow`]s, splitting only up to the last column needed.
struct RowReader<'a> {
    path: &'a Path,
    /// Column of lot, manufactured, status, spec_revision, mn_uncertainty, then the keys.
    want: Vec<usize>,
    /// The last column needed.
    upto: usize,
    with_mn_uncertainty: bool,
    spans: Vec<(usize, usize)>,
    statuses: Vec<&'static str>,
    revisions: Vec<&'static str>,
}

impl<'a> RowReader<'a> {
    /// A reader for a file with these (checked) `header` columns; refuses a key it lacks.
    fn new(
        path: &'a Path,
        header: &[String],
        keys: &[String],
        with_mn_uncertainty: bool,
    ) -> Result<RowReader<'a>> {
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
        let upto = *want.iter().max().expect("non-empty");
        Ok(RowReader {
            path,
            want,
            upto,
            with_mn_uncertainty,
            spans: Vec::with_capacity(upto + 2),
            statuses: Vec::new(),
            revisions: Vec::new(),
        })
    }

    /// The row on line `line_no`; refuses a line with fewer fields than needed.
    fn read(&mut self, line_no: usize, line: &[u8]) -> Result<LotRow> {
        split_spans(line, self.upto, &mut self.spans);
        if self.spans.len() <= self.upto {
            return Err(Error::invalid(
                format!("{}:{line_no}", self.path.display()),
                "the row has fewer fields than the header",
                "Check the trend file with `resinlot verify`.",
            ));
        }
        let (spans, want) = (&self.spans, &self.want);
        let field = |i: usize| {
            let (a, b) = spans[want[i]];
            &line[a..b.min(line.len())]
        };
        let num = |s: &[u8]| -> Option<f64> {
            if s.is_empty() {
                None
            } else {
                std::str::from_utf8(s)
                    .ok()
                    .and_then(|t| t.parse::<f64>().ok())
            }
        };
        Ok(LotRow {
            line: line_no,
            lot: Box::from(std::str::from_utf8(field(0)).unwrap_or("?")),
            manufactured: Day::from_bytes(field(1)),
            status: intern(&mut self.statuses, field(2)),
            revision: intern(&mut self.revisions, field(3)),
            mn_uncertainty: if self.with_mn_uncertainty {
                num(field(4))
            } else {
                None
            },
            values: (5..want.len()).map(|i| num(field(i))).collect(),
        })
    }
}

/// Keeps each lot's last row: sorts the (lot hash, row) pairs, and within a run of equal
/// hashes keeps, for every distinct lot id, the highest row (a retest supersedes what came
/// before). Rows stay in file order.
///
/// With `lives` (parallel to `rows`), each kept lot's life gets the latest retest date of any
/// of the lot's rows, and the lives are kept alongside.
fn keep_latest(
    rows: &mut Vec<LotRow>,
    mut keys_seen: Vec<(u64, u32)>,
    mut lives: Option<&mut Vec<Life>>,
) {
    keys_seen.sort_unstable();
    let mut keep = vec![true; rows.len()];
    let mut i = 0;
    while i < keys_seen.len() {
        let mut j = i + 1;
        while j < keys_seen.len() && keys_seen[j].0 == keys_seen[i].0 {
            j += 1;
        }
        for a in i..j {
            let ra = keys_seen[a].1 as usize;
            if keys_seen[a + 1..j]
                .iter()
                .any(|&(_, rb)| rows[rb as usize].lot == rows[ra].lot)
            {
                keep[ra] = false;
            } else if let Some(lives) = lives.as_deref_mut() {
                let retested = keys_seen[i..j]
                    .iter()
                    .filter(|&&(_, rb)| rows[rb as usize].lot == rows[ra].lot)
                    .filter_map(|&(_, rb)| lives[rb as usize].retested)
                    .max();
                lives[ra].retested = retested;
            }
        }
        i = j;
    }
    if let Some(lives) = lives {
        let mut k = 0;
        lives.retain(|_| {
            k += 1;
            keep[k - 1]
        });
    }
    let mut k = 0;
    rows.retain(|_| {
        k += 1;
        keep[k - 1]
    });
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

/// The property keys of a trend file (from its header only).
pub fn trend_keys(path: &Path) -> Result<Vec<String>> {
    Ok(trend_file::property_keys(&read_header(path)?))
}

#[cfg(test)]
mod tests {
    use super::*;

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
        let (_, rows) = current_lots(&p, &keys, false).unwrap();
        let got: Vec<(&str, Option<f64>)> = rows.iter().map(|r| (&*r.lot, r.values[0])).collect();
        assert_eq!(got, [("B2", Some(0.6)), ("A1", Some(0.4)), ("C3", None)]);
        assert_eq!(&*rows[0].manufactured, "2026-01-01");
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
        let (_, rows, lives) = current_lots_with_life(&p, &keys, false).unwrap();
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
