//! The lot table cache: a derived, rebuildable file beside each trend file that holds the
//! current row of every lot column by column ([`LotTable`]), so `trend`, `find` and the web
//! product page read only the columns they need instead of parsing the whole trend file
//! (issue #20).
//!
//! Like the lot index ([`crate::record::index`]) it is never part of the record: the trend
//! file stays the single source of truth, and the cache is named `.<product>.lot-table`
//! (hidden, not `.csv`), so `verify`, `upgrade`, the demo manifest and
//! [`crate::record::query::trend_files`] pass it by. Before use it is checked against the
//! trend file as it stands: length, the chain value of the last row, and the file's identity
//! and change times (inode, mtime, ctime), so an append, a truncation, a replacement or a hand
//! edit makes it stale. A stale, missing, damaged or unreadable cache is rebuilt silently by
//! one parallel scan; when the folder is not writable the scan's answer is used and nothing is
//! kept.
//!
//! Layout (little-endian): `RLOTTB01`; the trend file's stamp (as the lot index has it); the
//! lot count `n`, the id bytes `b`, the number of property columns `k`; the property keys, the
//! status and revision labels and the concession customers (each a u32 count, then u16 length
//! and bytes per text); then the sections, in this order: line (u32 × n), id end (u32 × n),
//! ids (b bytes), manufacture date (10 bytes × n), status and revision (label index, u8 × n
//! each), Mn uncertainty (f64 × n, NaN for empty), retest date (10 bytes × n, zeros for none),
//! concession (customer index + 1, u8 × n, 0 for none), then each property's values (f64 × n,
//! NaN for empty).

use std::fs::File;
use std::os::unix::fs::FileExt;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::record::index::Stamp;
use crate::record::query::{Day, Life, LotTable};

const MAGIC: &[u8; 8] = b"RLOTTB01";

/// The cache file of a trend file: `.<stem>.lot-table` in the same folder (a name
/// [`crate::record::index::is_index_name`] knows as derived).
pub fn path_for(trend: &Path) -> PathBuf {
    crate::record::index::derived_path(trend, ".lot-table")
}

/// The current lots of the trend file at `path` with the values of `keys` (which the caller
/// has checked against the header), the Mn uncertainty when asked and the lives when asked:
/// from the cache when it is current, else from `scan` (every property, uncertainty and
/// lives), whose table is then kept as the new cache.
pub fn current(
    path: &Path,
    file_keys: &[String],
    keys: &[String],
    with_mn_uncertainty: bool,
    with_life: bool,
    scan: impl FnOnce() -> Result<LotTable>,
) -> Result<LotTable> {
    let file = File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let stamp = Stamp::of(&file, path)?;
    let cache = path_for(path);
    if let Some(t) = read(
        &cache,
        &stamp,
        file_keys,
        keys,
        with_mn_uncertainty,
        with_life,
    ) {
        return Ok(t);
    }
    let full = scan()?;
    // Kept for the next query; a folder that cannot be written to only costs the scan.
    let _ = crate::support::output::write_atomic(&cache, &encode(&full, file_keys, &stamp), true);
    Ok(full.project(file_keys, keys, with_mn_uncertainty, with_life))
}

fn put_texts<'a>(out: &mut Vec<u8>, texts: impl ExactSizeIterator<Item = &'a str>) {
    out.extend_from_slice(&(texts.len() as u32).to_le_bytes());
    for t in texts {
        let b = &t.as_bytes()[..t.len().min(u16::MAX as usize)];
        out.extend_from_slice(&(b.len() as u16).to_le_bytes());
        out.extend_from_slice(b);
    }
}

/// The cache bytes of `t` (loaded with every property `file_keys`, the Mn uncertainty and the
/// lives) for a trend file with `stamp`.
fn encode(t: &LotTable, file_keys: &[String], stamp: &Stamp) -> Vec<u8> {
    let n = t.len();
    let mut out = Vec::with_capacity(128 + n * (48 + 8 * file_keys.len()) + t.ids.len());
    out.extend_from_slice(&stamp.head(MAGIC));
    out.extend_from_slice(&(n as u64).to_le_bytes());
    out.extend_from_slice(&(t.ids.len() as u64).to_le_bytes());
    out.extend_from_slice(&(file_keys.len() as u32).to_le_bytes());
    put_texts(&mut out, file_keys.iter().map(String::as_str));
    put_texts(&mut out, t.labels.iter().copied());
    let mut customers: Vec<&'static str> = Vec::new();
    let concession: Vec<u8> = (0..n)
        .map(|i| {
            let c = t.lives.get(i).map_or("", |l| l.concession);
            if c.is_empty() {
                return 0;
            }
            let at = customers.iter().position(|x| *x == c).unwrap_or_else(|| {
                customers.push(c);
                customers.len() - 1
            });
            // More than 254 concession customers in one file: the rest read as none.
            u8::try_from(at + 1).unwrap_or(0)
        })
        .collect();
    put_texts(&mut out, customers.iter().copied());
    for &l in &t.line {
        out.extend_from_slice(&l.to_le_bytes());
    }
    for &e in &t.id_end {
        out.extend_from_slice(&e.to_le_bytes());
    }
    out.extend_from_slice(&t.ids);
    for d in &t.made {
        out.extend_from_slice(d.as_bytes());
    }
    out.extend_from_slice(&t.status);
    out.extend_from_slice(&t.revision);
    for i in 0..n {
        let u = t.mn_uncertainty.get(i).copied().unwrap_or(f64::NAN);
        out.extend_from_slice(&u.to_le_bytes());
    }
    for i in 0..n {
        match t.lives.get(i).and_then(|l| l.retested) {
            Some(d) => out.extend_from_slice(d.as_bytes()),
            None => out.extend_from_slice(&[0u8; 10]),
        }
    }
    out.extend_from_slice(&concession);
    for k in 0..file_keys.len() {
        for i in 0..n {
            out.extend_from_slice(&t.values[i * t.keys + k].to_le_bytes());
        }
    }
    out
}

/// Reads texts written by [`put_texts`] from `buf` at `*at`.
fn get_texts(buf: &[u8], at: &mut usize) -> Option<Vec<String>> {
    let count = u32::from_le_bytes(buf.get(*at..*at + 4)?.try_into().ok()?) as usize;
    *at += 4;
    let mut v = Vec::with_capacity(count.min(4096));
    for _ in 0..count {
        let len = u16::from_le_bytes(buf.get(*at..*at + 2)?.try_into().ok()?) as usize;
        *at += 2;
        v.push(String::from_utf8(buf.get(*at..*at + len)?.to_vec()).ok()?);
        *at += len;
    }
    Some(v)
}

/// Bytes read at a time: 1 MiB (a few odd bytes in unit tests, so that slices end inside an
/// element and the rounding below is exercised on small files).
const SLICE: usize = if cfg!(test) { 37 } else { 1 << 20 };

/// Reads `len` bytes at `offset` in slices of about [`SLICE`] bytes, each a whole number of
/// `unit`-byte elements, handing each to `take`.
fn read_section(
    file: &File,
    offset: u64,
    len: u64,
    unit: usize,
    mut take: impl FnMut(&[u8]),
) -> Option<()> {
    let slice = (SLICE / unit).max(1) * unit;
    let mut buf = vec![0u8; (len.min(slice as u64)) as usize];
    let mut done = 0u64;
    while done < len {
        let step = (len - done).min(buf.len() as u64) as usize;
        file.read_exact_at(&mut buf[..step], offset + done).ok()?;
        take(&buf[..step]);
        done += step as u64;
    }
    Some(())
}

fn read_u32s(file: &File, offset: u64, n: usize) -> Option<Vec<u32>> {
    let mut v = Vec::with_capacity(n);
    read_section(file, offset, 4 * n as u64, 4, |b| {
        v.extend(
            b.chunks_exact(4)
                .map(|c| u32::from_le_bytes(c.try_into().expect("4 bytes"))),
        )
    })?;
    Some(v)
}

fn read_f64s_into(
    file: &File,
    offset: u64,
    n: usize,
    mut put: impl FnMut(usize, f64),
) -> Option<()> {
    let mut i = 0;
    read_section(file, offset, 8 * n as u64, 8, |b| {
        for c in b.chunks_exact(8) {
            put(i, f64::from_le_bytes(c.try_into().expect("8 bytes")));
            i += 1;
        }
    })
}

fn read_days(file: &File, offset: u64, n: usize) -> Option<Vec<Day>> {
    let mut v = Vec::with_capacity(n);
    read_section(file, offset, 10 * n as u64, 10, |b| {
        v.extend(b.chunks_exact(10).map(Day::from_raw))
    })?;
    Some(v)
}

/// The table of `keys` from the cache file when it is current for `stamp`, was built for
/// these `file_keys` and is whole; None otherwise (the caller rebuilds it).
fn read(
    cache: &Path,
    stamp: &Stamp,
    file_keys: &[String],
    keys: &[String],
    with_mn_uncertainty: bool,
    with_life: bool,
) -> Option<LotTable> {
    let file = File::open(cache).ok()?;
    let file_len = file.metadata().ok()?.len();
    let want = stamp.head(MAGIC);
    let mut head = vec![0u8; (64 << 10).min(file_len as usize)];
    file.read_exact_at(&mut head, 0).ok()?;
    let mut at = want.len();
    if head.get(..at)? != want {
        return None;
    }
    let u64_at = |at: usize| -> Option<u64> {
        Some(u64::from_le_bytes(head.get(at..at + 8)?.try_into().ok()?))
    };
    let n = usize::try_from(u64_at(at)?).ok()?;
    let id_bytes = u64_at(at + 8)?;
    let k = u32::from_le_bytes(head.get(at + 16..at + 20)?.try_into().ok()?) as usize;
    at += 20;
    let cached_keys = get_texts(&head, &mut at)?;
    let labels = get_texts(&head, &mut at)?;
    let customers = get_texts(&head, &mut at)?;
    if cached_keys != file_keys || k != file_keys.len() || labels.len() > 255 {
        return None;
    }
    let n64 = n as u64;
    let line_at = at as u64;
    let end_at = line_at + 4 * n64;
    let ids_at = end_at + 4 * n64;
    let made_at = ids_at + id_bytes;
    let status_at = made_at + 10 * n64;
    let revision_at = status_at + n64;
    let mn_at = revision_at + n64;
    let retest_at = mn_at + 8 * n64;
    let concession_at = retest_at + 10 * n64;
    let values_at = concession_at + n64;
    if file_len != values_at + 8 * n64 * k as u64 {
        return None;
    }
    let line = read_u32s(&file, line_at, n)?;
    let id_end = read_u32s(&file, end_at, n)?;
    // Whole and consistent, so that no later index can go out of bounds.
    if id_end.last().map_or(0, |&e| u64::from(e)) != id_bytes
        || id_end.windows(2).any(|w| w[0] > w[1])
        || line.windows(2).any(|w| w[0] >= w[1])
    {
        return None;
    }
    let mut ids = Vec::with_capacity(id_bytes as usize);
    read_section(&file, ids_at, id_bytes, 1, |b| ids.extend_from_slice(b))?;
    let made = read_days(&file, made_at, n)?;
    if made.len() != n || id_end.len() != n || line.len() != n {
        return None;
    }
    let mut status = Vec::with_capacity(n);
    read_section(&file, status_at, n64, 1, |b| status.extend_from_slice(b))?;
    let mut revision = Vec::with_capacity(n);
    read_section(&file, revision_at, n64, 1, |b| {
        revision.extend_from_slice(b)
    })?;
    if status.len() != n || revision.len() != n {
        return None;
    }
    let mut mn_uncertainty = Vec::new();
    if with_mn_uncertainty {
        mn_uncertainty.resize(n, f64::NAN);
        read_f64s_into(&file, mn_at, n, |i, v| mn_uncertainty[i] = v)?;
    }
    let mut lives = Vec::new();
    if with_life {
        let retested = read_days(&file, retest_at, n)?;
        let names: Vec<&'static str> = customers
            .iter()
            .map(|c| crate::record::query::intern_label(c))
            .collect();
        let mut concession = Vec::with_capacity(n);
        read_section(&file, concession_at, n64, 1, |b| {
            concession.extend_from_slice(b)
        })?;
        lives = retested
            .into_iter()
            .zip(concession)
            .map(|(d, c)| Life {
                retested: (*d.as_bytes() != [0u8; 10]).then_some(d),
                concession: match c {
                    0 => "",
                    c => names.get(c as usize - 1).copied().unwrap_or(""),
                },
            })
            .collect();
    }
    let mut values = vec![f64::NAN; n * keys.len()];
    for (j, key) in keys.iter().enumerate() {
        let col = file_keys.iter().position(|f| f == key)?;
        let stride = keys.len();
        read_f64s_into(&file, values_at + 8 * n64 * col as u64, n, |i, v| {
            values[i * stride + j] = v
        })?;
    }
    Some(LotTable {
        keys: keys.len(),
        line,
        ids,
        id_end,
        made,
        status,
        revision,
        labels: labels
            .iter()
            .map(|l| crate::record::query::intern_label(l))
            .collect(),
        mn_uncertainty,
        values,
        lives,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::query::current_table_with_life;
    use crate::record::trend_file;

    /// Invented test lots: A1 retested, B2 under concession to "acme", C3 with empty cells.
    fn write(path: &Path, extra: &[&str]) {
        let keys = vec!["acid_value".to_string(), "mn".to_string()];
        let mut rows: Vec<Vec<(&str, String)>> = vec![
            vec![
                ("lot", "A1".into()),
                ("acid_value", "0.5".into()),
                ("mn", "2010".into()),
                ("manufactured", "2026-01-02".into()),
                ("status", "released".into()),
            ],
            vec![
                ("lot", "B2".into()),
                ("acid_value", "0.7".into()),
                ("manufactured", "2026-01-03".into()),
                ("status", "released".into()),
                ("disposition", "concession".into()),
                ("concession_customer", "acme".into()),
            ],
            vec![
                ("lot", "A1".into()),
                ("acid_value", "0.4".into()),
                ("mn", "2020".into()),
                ("manufactured", "2026-01-02".into()),
                ("status", "on_hold".into()),
                ("supersedes", "1".into()),
                ("tested_to", "2026-02-01T10:00:00Z".into()),
            ],
            vec![("lot", "C3".into()), ("manufactured", "2026-01-04".into())],
        ];
        for lot in extra {
            rows.push(vec![("lot", lot.to_string()), ("acid_value", "0.9".into())]);
        }
        trend_file::write_for_test(path, &keys, &rows);
    }

    fn answer(p: &Path, keys: &[&str]) -> (Vec<crate::record::query::LotRow>, Vec<Life>) {
        let keys: Vec<String> = keys.iter().map(|s| s.to_string()).collect();
        let (_, table) = current_table_with_life(p, &keys, true).unwrap();
        let lives = table.lives().to_vec();
        (table.into_rows(), lives)
    }

    /// Issue #20: the cache answers exactly as the scan does, for any subset of the keys, and
    /// a second query is answered from it.
    #[test]
    fn the_cache_answers_as_the_scan_does_issue_20() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write(&p, &[]);
        let cache = path_for(&p);
        assert!(!cache.exists());
        let scanned = crate::record::query::scanned_for_test(&p, &["mn", "acid_value"]);
        let first = answer(&p, &["mn", "acid_value"]);
        assert!(cache.is_file(), "the first query keeps the cache");
        let second = answer(&p, &["mn", "acid_value"]);
        assert_eq!(first, scanned);
        assert_eq!(second, scanned);
        let ids: Vec<&str> = second.0.iter().map(|r| &*r.lot).collect();
        assert_eq!(ids, ["B2", "A1", "C3"]);
        assert_eq!(second.0[1].values, [Some(2020.0), Some(0.4)]);
        assert_eq!(second.0[2].values, [None, None]);
        assert_eq!(second.0[1].status, "on_hold");
        assert_eq!(second.1[0].concession, "acme");
        assert_eq!(second.1[1].retested, Some(Day::from("2026-02-01")));
        // A subset of the keys, from the cache.
        let one = answer(&p, &["acid_value"]);
        assert_eq!(
            one,
            crate::record::query::scanned_for_test(&p, &["acid_value"])
        );
    }

    /// Issue #20: an append, a truncation, an edit that keeps the length, and a damaged cache
    /// each make the cache stale, and the answer is the scan's.
    #[test]
    fn a_stale_or_damaged_cache_is_rebuilt_issue_20() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write(&p, &[]);
        answer(&p, &["acid_value"]);
        write(&p, &["D4"]);
        let got = answer(&p, &["acid_value"]);
        assert_eq!(
            got,
            crate::record::query::scanned_for_test(&p, &["acid_value"])
        );
        assert!(got.0.iter().any(|r| &*r.lot == "D4"));
        let text = std::fs::read_to_string(&p).unwrap();
        std::fs::write(&p, text.replace(",0.9,", ",0.8,")).unwrap();
        let got = answer(&p, &["acid_value"]);
        assert_eq!(got.0.last().unwrap().values, [Some(0.8)]);
        let cut = text.trim_end().rfind('\n').unwrap() + 1;
        std::fs::write(&p, &text[..cut]).unwrap();
        let got = answer(&p, &["acid_value"]);
        assert!(!got.0.iter().any(|r| &*r.lot == "D4"));
        let cache = path_for(&p);
        let good = std::fs::read(&cache).unwrap();
        for damaged in [&good[..good.len() - 3], &b"not a cache"[..], &[][..]] {
            std::fs::write(&cache, damaged).unwrap();
            assert_eq!(
                answer(&p, &["acid_value"]),
                crate::record::query::scanned_for_test(&p, &["acid_value"])
            );
        }
    }

    /// Issue #20: a folder where the cache cannot be kept still answers.
    #[test]
    fn an_unwritable_cache_still_answers_issue_20() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write(&p, &[]);
        std::fs::create_dir(path_for(&p)).unwrap(); // blocks the rename
        let got = answer(&p, &["acid_value"]);
        assert_eq!(got.0.len(), 3);
    }

    #[test]
    fn cache_names_are_hidden_and_not_csv() {
        let c = path_for(Path::new("register/PD-2000.csv"));
        assert_eq!(c, Path::new("register/.PD-2000.lot-table"));
        assert!(crate::record::index::is_index_name(".PD-2000.lot-table"));
        assert!(crate::record::index::is_index_name(".PD-2000.lot-index"));
        assert!(!crate::record::index::is_index_name("PD-2000.csv"));
    }
}
