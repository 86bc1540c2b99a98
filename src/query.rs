//! Read-only queries on the record: find a lot fast, suggest near ids, filter lots by windows.

use std::path::{Path, PathBuf};

use chrono::NaiveDate;

use crate::error::{Error, Result};
use crate::register::{self, Row, Trend};

/// Every product trend file in a register folder, sorted.
pub fn trend_files(register: &Path) -> Result<Vec<PathBuf>> {
    let rd = std::fs::read_dir(register).map_err(|e| Error::io(register, "reading folder", e))?;
    let mut v: Vec<PathBuf> = rd
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            p.extension().is_some_and(|x| x == "csv")
                && p.file_name().is_some_and(|n| n != "certificates.csv")
        })
        .collect();
    v.sort();
    Ok(v)
}

/// The rows of `lot` in one trend file (file order), found by a byte search before any parse:
/// the header is read, then only lines containing `,lot,` are split.
pub fn lot_rows_in(path: &Path, lot: &str) -> Result<Option<Trend>> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    let header_end = memchr::memchr(b'\n', &bytes).unwrap_or(bytes.len());
    let header = String::from_utf8_lossy(&bytes[..header_end]).to_string();
    let columns = register::split_line(&header);
    if !register::is_trend_header(&columns) {
        return Err(Error::invalid(
            path.display().to_string(),
            "this is not a resinlot trend file (unexpected header)",
            "Keep only trend files and certificates.csv in the register folder.",
        ));
    }
    let needle = format!(",{lot},");
    let finder = memchr::memmem::Finder::new(needle.as_bytes());
    let mut rows = Vec::new();
    for pos in finder.find_iter(&bytes) {
        let start = memchr::memrchr(b'\n', &bytes[..pos]).map_or(0, |i| i + 1);
        let end = memchr::memchr(b'\n', &bytes[pos..]).map_or(bytes.len(), |i| pos + i);
        let line = String::from_utf8_lossy(&bytes[start..end]);
        let cells = register::split_line(&line);
        if cells.get(2).map(String::as_str) == Some(lot) && cells.len() == columns.len() {
            let line_no = memchr::memchr_iter(b'\n', &bytes[..start]).count() + 1;
            if rows.last().is_none_or(|r: &Row| r.line != line_no) {
                rows.push(Row {
                    line: line_no,
                    cells,
                });
            }
        }
    }
    if rows.is_empty() {
        return Ok(None);
    }
    let head = rows
        .last()
        .map(|r| r.cells[r.cells.len() - 1].clone())
        .unwrap_or_default();
    Ok(Some(Trend {
        path: path.to_path_buf(),
        columns,
        rows,
        head,
    }))
}

/// Finds `lot` in any product's trend file.
pub fn find_lot(register: &Path, lot: &str) -> Result<Option<Trend>> {
    for path in trend_files(register)? {
        if let Some(t) = lot_rows_in(&path, lot)? {
            return Ok(Some(t));
        }
    }
    Ok(None)
}

/// Up to `n` existing lot ids closest to `lot` (Jaro-Winkler similarity, case-insensitive).
pub fn suggestions(register: &Path, lot: &str, n: usize) -> Result<Vec<String>> {
    let target = lot.to_ascii_uppercase();
    let mut scored: Vec<(f64, String)> = Vec::new();
    for path in trend_files(register)? {
        let t = register::read_fast(&path)?;
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

/// The current (latest) row of one lot, reduced to what queries need.
#[derive(Debug, Clone, PartialEq)]
pub struct LotRow {
    /// Line in the trend file.
    pub line: usize,
    /// Lot id.
    pub lot: String,
    /// Manufacture date (YYYY-MM-DD).
    pub manufactured: String,
    /// Status (snake_case).
    pub status: String,
    /// Spec revision applied.
    pub revision: String,
    /// Expanded uncertainty of Mn.
    pub mn_uncertainty: Option<f64>,
    /// Values of the requested keys, in order (None when empty).
    pub values: Vec<Option<f64>>,
}

/// Streams a trend file and keeps the latest row of every lot, with the values of `keys`.
/// Returns the property keys the file has, and the lots in order of their latest row.
pub fn current_lots(path: &Path, keys: &[String]) -> Result<(Vec<String>, Vec<LotRow>)> {
    let mut wanted: Vec<&str> = vec![
        "lot",
        "manufactured",
        "status",
        "spec_revision",
        "mn_uncertainty",
    ];
    wanted.extend(keys.iter().map(String::as_str));
    let mut index: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
    let mut rows: Vec<LotRow> = Vec::new();
    let num = |s: &str| {
        if s.is_empty() {
            None
        } else {
            s.parse::<f64>().ok()
        }
    };
    let columns = register::scan(path, &wanted, |line, c| {
        let row = LotRow {
            line,
            lot: String::new(),
            manufactured: c[1].to_string(),
            status: c[2].to_string(),
            revision: c[3].to_string(),
            mn_uncertainty: num(c[4]),
            values: c[5..].iter().map(|v| num(v)).collect(),
        };
        match index.get(c[0]) {
            Some(&i) => {
                rows[i] = LotRow {
                    lot: rows[i].lot.clone(),
                    ..row
                }
            }
            None => {
                index.insert(c[0].to_string(), rows.len());
                rows.push(LotRow {
                    lot: c[0].to_string(),
                    ..row
                });
            }
        }
    })?;
    rows.sort_by_key(|r| r.line);
    let n = columns.len();
    let file_keys = columns[register::PREFIX.len()..n - register::SUFFIX.len()]
        .iter()
        .filter(|c| !c.ends_with("_verdict"))
        .cloned()
        .collect();
    Ok((file_keys, rows))
}

/// The property keys of a trend file (from its header only).
pub fn trend_keys(path: &Path) -> Result<Vec<String>> {
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let mut first = String::new();
    std::io::BufRead::read_line(&mut std::io::BufReader::new(file), &mut first)
        .map_err(|e| Error::io(path, "reading", e))?;
    let columns = register::split_line(first.trim_end());
    if !register::is_trend_header(&columns) {
        return Err(Error::invalid(
            format!("{}:1", path.display()),
            "this is not a resinlot trend file (unexpected header)",
            "Keep only trend files and certificates.csv in the register folder.",
        ));
    }
    let n = columns.len();
    Ok(columns[register::PREFIX.len()..n - register::SUFFIX.len()]
        .iter()
        .filter(|c| !c.ends_with("_verdict"))
        .cloned()
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

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
