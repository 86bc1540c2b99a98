//! The lot index: a derived, rebuildable file beside each trend file that says on which lines
//! each lot's rows are, so `lookup` and `certify` find a lot without reading the whole file.
//!
//! It is never part of the record: the trend file stays the single source of truth, and the
//! index is named `.<product>.lot-index` (hidden, not `.csv`), so `verify`, `upgrade`, the
//! demo manifest and [`crate::record::query::trend_files`] pass it by. Before use it is
//! checked against the trend file as it stands: length, the chain value of the last row, and
//! the file's identity and change times (inode, mtime, ctime), so an append, a truncation, a
//! replacement or a hand edit (even one that keeps the length) makes it stale. A stale,
//! missing or unreadable index is rebuilt silently (one parallel scan); when the folder is
//! not writable the rebuilt index is used once and not kept. Every row the index points to
//! is read from the trend file and its lot id compared, so a hash collision never mixes lots.
//!
//! Layout (little-endian): `RLOTIX01`, then the trend file's length, inode, mtime and ctime
//! (seconds and nanoseconds), the last chain value (64 ASCII bytes, zeros when none), the
//! bucket bits `b`, the entry count `n`; `2^b + 1` bucket starts (u32, entries whose hash's
//! top `b` bits are below the bucket); then `n` entries sorted by (hash, line): lot hash
//! ([`scan::lot_hash`]), byte offset and line number (u64 each).

use std::fs::File;
use std::os::unix::fs::{FileExt, MetadataExt};
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::record::scan;
use crate::record::trend_file::{self, Row, Trend};

const MAGIC: &[u8; 8] = b"RLOTIX01";
/// Bytes before the bucket table.
const HEAD: usize = 8 + 8 * 6 + 64 + 4 + 8;
const ENTRY: usize = 24;

/// The name endings of the derived files kept beside a trend file: this lot index and the
/// lot table cache ([`crate::record::table_cache`]).
const DERIVED: [&str; 2] = [".lot-index", ".lot-table"];

/// The derived file `.<stem><ending>` beside the trend file `trend` (`ending` one of
/// [`DERIVED`]).
pub(crate) fn derived_path(trend: &Path, ending: &str) -> PathBuf {
    debug_assert!(DERIVED.contains(&ending));
    let stem = trend
        .file_stem()
        .map_or_else(String::new, |s| s.to_string_lossy().into_owned());
    trend.with_file_name(format!(".{stem}{ending}"))
}

/// The index file of a trend file: `.<stem>.lot-index` in the same folder.
pub fn path_for(trend: &Path) -> PathBuf {
    derived_path(trend, DERIVED[0])
}

/// True for a file name the lot index or the lot table cache uses: derived files, so folder
/// walks leave them out.
pub fn is_index_name(name: &str) -> bool {
    name.starts_with('.') && DERIVED.iter().any(|e| name.ends_with(e))
}

/// What the index records about the trend file it was built from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Stamp {
    len: u64,
    ino: u64,
    mtime: (i64, i64),
    ctime: (i64, i64),
    /// Chain value of the last row (64 hex digits), or 64 zeros.
    last_chain: [u8; 64],
}

impl Stamp {
    /// The stamp of the open trend file as it stands now.
    pub(crate) fn of(file: &File, path: &Path) -> Result<Stamp> {
        let m = file.metadata().map_err(|e| Error::io(path, "reading", e))?;
        Ok(Stamp {
            len: m.len(),
            ino: m.ino(),
            mtime: (m.mtime(), m.mtime_nsec()),
            ctime: (m.ctime(), m.ctime_nsec()),
            last_chain: last_chain(file, path, m.len())?,
        })
    }

    /// A derived file's head: its `magic` followed by the stamp's fields (the lot index and
    /// the lot table cache each start so).
    pub(crate) fn head(&self, magic: &[u8; 8]) -> Vec<u8> {
        let mut v = Vec::with_capacity(HEAD);
        v.extend_from_slice(magic);
        for x in [
            self.len,
            self.ino,
            self.mtime.0 as u64,
            self.mtime.1 as u64,
            self.ctime.0 as u64,
            self.ctime.1 as u64,
        ] {
            v.extend_from_slice(&x.to_le_bytes());
        }
        v.extend_from_slice(&self.last_chain);
        v
    }
}

/// The last cell of the last line of the file (its chain value), as 64 bytes; zeros when the
/// file has no row or the cell is not 64 bytes long.
fn last_chain(file: &File, path: &Path, len: u64) -> Result<[u8; 64]> {
    let take = len.min(4096);
    let mut buf = vec![0u8; take as usize];
    file.read_exact_at(&mut buf, len - take)
        .map_err(|e| Error::io(path, "reading", e))?;
    let body = buf.strip_suffix(b"\n").unwrap_or(&buf);
    let line = memchr::memrchr(b'\n', body).map_or(body, |i| &body[i + 1..]);
    let cell = memchr::memrchr(b',', line).map_or(line, |i| &line[i + 1..]);
    let mut out = [0u8; 64];
    if cell.len() == 64 {
        out.copy_from_slice(cell);
    }
    Ok(out)
}

fn u64_at(b: &[u8], at: usize) -> u64 {
    u64::from_le_bytes(b[at..at + 8].try_into().expect("8 bytes"))
}

fn u32_at(b: &[u8], at: usize) -> u32 {
    u32::from_le_bytes(b[at..at + 4].try_into().expect("4 bytes"))
}

/// Bucket bits for `n` entries: about 8 entries a bucket, between 2^4 and 2^20 buckets.
fn bucket_bits(n: usize) -> u32 {
    let mut b = 4;
    while b < 20 && (n >> (b + 3)) > 0 {
        b += 1;
    }
    b
}

fn bucket_of(hash: u64, bits: u32) -> usize {
    (hash >> (64 - bits)) as usize
}

/// Builds the index bytes of the trend file at `path` (stamped with `stamp`) by one scan.
fn build(path: &Path, stamp: &Stamp) -> Result<Vec<u8>> {
    let lot_col = read_lot_column(path)?;
    let parts = scan::parallel_body(
        path,
        |_| (Vec::<(u64, u64, u64)>::new(), Vec::<(usize, usize)>::new()),
        |(entries, spans), n, offset, line| {
            if line.is_empty() {
                return Ok(());
            }
            crate::record::query::split_spans(line, lot_col, spans);
            if spans.len() <= lot_col {
                return Err(scan::LineFault {
                    local_line: n,
                    problem: "the row has fewer fields than the header".into(),
                });
            }
            let (a, b) = spans[lot_col];
            entries.push((scan::lot_hash(&line[a..b]), offset, n as u64));
            Ok(())
        },
    )?;
    let mut entries: Vec<(u64, u64, u64)> = Vec::new();
    let mut line_base = 1u64;
    for p in parts {
        entries.extend(p.state.0.into_iter().map(|(h, o, l)| (h, o, l + line_base)));
        line_base += p.lines as u64;
    }
    {
        use rayon::slice::ParallelSliceMut;
        entries.par_sort_unstable();
    }
    let bits = bucket_bits(entries.len());
    let mut out = stamp.head(MAGIC);
    out.extend_from_slice(&bits.to_le_bytes());
    out.extend_from_slice(&(entries.len() as u64).to_le_bytes());
    let mut at = 0usize;
    for bucket in 0..=(1usize << bits) {
        while at < entries.len() && bucket_of(entries[at].0, bits) < bucket {
            at += 1;
        }
        out.extend_from_slice(&(at as u32).to_le_bytes());
    }
    for (h, o, l) in entries {
        out.extend_from_slice(&h.to_le_bytes());
        out.extend_from_slice(&o.to_le_bytes());
        out.extend_from_slice(&l.to_le_bytes());
    }
    Ok(out)
}

/// The position of the `lot` column in the trend file's (checked) header.
fn read_lot_column(path: &Path) -> Result<usize> {
    let columns = crate::record::query::header_columns(path)?;
    Ok(columns.iter().position(|c| c == "lot").unwrap_or(2))
}

/// Where the index says rows of `hash` are: (offset, line) pairs in file order.
trait Entries {
    fn candidates(&self, hash: u64) -> Result<Vec<(u64, u64)>>;
}

/// An index file on disk, read by positioned reads (a few hundred bytes a lookup).
struct OnDisk {
    file: File,
    path: PathBuf,
    bits: u32,
    n: u64,
}

impl Entries for OnDisk {
    fn candidates(&self, hash: u64) -> Result<Vec<(u64, u64)>> {
        let b = bucket_of(hash, self.bits);
        let mut pair = [0u8; 8];
        self.file
            .read_exact_at(&mut pair, (HEAD + 4 * b) as u64)
            .map_err(|e| Error::io(&self.path, "reading", e))?;
        let (from, to) = (u32_at(&pair, 0) as u64, u32_at(&pair, 4) as u64);
        if from > to || to > self.n {
            return Err(Error::invalid(
                self.path.display().to_string(),
                "the lot index is damaged",
                "Delete the file; it is rebuilt from the trend file.",
            ));
        }
        let table = HEAD as u64 + 4 * ((1u64 << self.bits) + 1);
        let mut buf = vec![0u8; ((to - from) as usize) * ENTRY];
        self.file
            .read_exact_at(&mut buf, table + from * ENTRY as u64)
            .map_err(|e| Error::io(&self.path, "reading", e))?;
        Ok(matching(&buf, hash))
    }
}

/// (offset, line) of the entries in `buf` whose hash is `hash`.
fn matching(buf: &[u8], hash: u64) -> Vec<(u64, u64)> {
    buf.chunks_exact(ENTRY)
        .filter(|e| u64_at(e, 0) == hash)
        .map(|e| (u64_at(e, 8), u64_at(e, 16)))
        .collect()
}

/// Index bytes held in memory (a fresh build that could not be kept).
struct InMemory(Vec<u8>);

impl Entries for InMemory {
    fn candidates(&self, hash: u64) -> Result<Vec<(u64, u64)>> {
        let bits = u32_at(&self.0, HEAD - 12);
        let b = bucket_of(hash, bits);
        let (from, to) = (
            u32_at(&self.0, HEAD + 4 * b) as usize,
            u32_at(&self.0, HEAD + 4 * (b + 1)) as usize,
        );
        let table = HEAD + 4 * ((1usize << bits) + 1);
        Ok(matching(
            &self.0[table + from * ENTRY..table + to * ENTRY],
            hash,
        ))
    }
}

/// Opens the index of `trend` when it is current for `stamp`; None when it is missing,
/// unreadable or stale.
fn open_current(index: &Path, stamp: &Stamp) -> Option<OnDisk> {
    let file = File::open(index).ok()?;
    let len = file.metadata().ok()?.len();
    let mut head = vec![0u8; HEAD];
    file.read_exact_at(&mut head, 0).ok()?;
    if head[..HEAD - 12] != stamp.head(MAGIC)[..] {
        return None;
    }
    let bits = u32_at(&head, HEAD - 12);
    let n = u64_at(&head, HEAD - 8);
    if !(4..=20).contains(&bits) || len != HEAD as u64 + 4 * ((1u64 << bits) + 1) + n * ENTRY as u64
    {
        return None;
    }
    Some(OnDisk {
        file,
        path: index.to_path_buf(),
        bits,
        n,
    })
}

/// The rows of `lot` in the trend file at `path` (file order), found through its lot index
/// (rebuilt first when stale or missing); None when the lot has no row there. The answer is
/// the same as a full scan's: every row of the lot, with its line number.
pub fn lot_rows(path: &Path, lot: &str) -> Result<Option<Trend>> {
    let file = File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let columns = crate::record::query::header_columns(path)?;
    let stamp = Stamp::of(&file, path)?;
    let index = path_for(path);
    let hash = scan::lot_hash(lot.as_bytes());
    // An index that is missing, stale or damaged anywhere it is read is rebuilt.
    let candidates = match open_current(&index, &stamp).and_then(|d| d.candidates(hash).ok()) {
        Some(found) => found,
        None => {
            let built = InMemory(build(path, &stamp)?);
            let found = built.candidates(hash)?;
            // Kept for the next lookup; a folder that cannot be written to only costs the scan.
            let _ = crate::support::output::write_atomic(&index, &built.0, true);
            found
        }
    };
    let mut rows = Vec::new();
    for (offset, line) in candidates {
        let text = read_line_at(&file, path, offset)?;
        let cells = trend_file::split_line(&String::from_utf8_lossy(&text));
        if cells.get(2).map(String::as_str) == Some(lot) && cells.len() == columns.len() {
            rows.push(Row {
                line: line as usize,
                cells,
            });
        }
    }
    rows.sort_by_key(|r| r.line);
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

/// The line that starts at `offset` (without its line feed).
fn read_line_at(file: &File, path: &Path, offset: u64) -> Result<Vec<u8>> {
    let mut out = Vec::new();
    let mut buf = vec![0u8; 2048];
    let mut at = offset;
    loop {
        let n = file
            .read_at(&mut buf, at)
            .map_err(|e| Error::io(path, "reading", e))?;
        if n == 0 {
            return Ok(out);
        }
        if let Some(i) = memchr::memchr(b'\n', &buf[..n]) {
            out.extend_from_slice(&buf[..i]);
            return Ok(out);
        }
        out.extend_from_slice(&buf[..n]);
        at += n as u64;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::query::lot_rows_scanned;

    /// Invented test lots: A1 retested twice, B2 once, lots spread over more than one bucket.
    fn write(path: &Path, lots: &[&str]) {
        let keys = vec!["acid_value".to_string()];
        let rows: Vec<_> = lots
            .iter()
            .map(|lot| vec![("lot", lot.to_string()), ("acid_value", "0.5".into())])
            .collect();
        trend_file::write_for_test(path, &keys, &rows);
    }

    fn lines(t: Option<Trend>) -> Vec<usize> {
        t.map(|t| t.rows.iter().map(|r| r.line).collect())
            .unwrap_or_default()
    }

    fn ids(n: usize) -> Vec<String> {
        (0..n).map(|i| format!("L{i:05}")).collect()
    }

    /// Issue #20: the index gives exactly the rows a full scan finds, and lives beside the
    /// trend file under a name the register's folder walks leave out.
    #[test]
    fn the_index_answers_as_the_scan_does_issue_20() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        let mut lots: Vec<String> = ids(300);
        lots.extend(["L00007", "L00100", "L00007"].map(String::from));
        write(&p, &lots.iter().map(String::as_str).collect::<Vec<_>>());
        for lot in ["L00007", "L00100", "L00299", "L00000", "nope", "L0000"] {
            let via_index = lot_rows(&p, lot).unwrap();
            let scanned = lot_rows_scanned(&p, lot).unwrap();
            assert_eq!(
                via_index.as_ref().map(|t| (&t.rows, &t.columns, &t.head)),
                scanned.as_ref().map(|t| (&t.rows, &t.columns, &t.head)),
                "{lot}"
            );
        }
        assert_eq!(lines(lot_rows(&p, "L00007").unwrap()), [9, 302, 304]);
        let index = path_for(&p);
        assert_eq!(index.file_name().unwrap(), ".P.lot-index");
        assert!(index.is_file());
        assert!(is_index_name(".P.lot-index"));
        assert_eq!(
            crate::record::query::trend_files(dir.path()).unwrap(),
            std::slice::from_ref(&p)
        );
    }

    /// Issue #20: an append, a truncation, a hand edit that keeps the length, and a damaged
    /// index file each make the index stale; it is rebuilt and the answer stays right.
    #[test]
    fn a_stale_index_is_rebuilt_after_append_truncation_and_edit_issue_20() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write(&p, &["A1", "B2", "C3"]);
        assert_eq!(lines(lot_rows(&p, "C3").unwrap()), [4]);
        let built = std::fs::read(path_for(&p)).unwrap();

        // Append: the new row is found.
        write(&p, &["D4", "A1"]);
        assert_eq!(lines(lot_rows(&p, "A1").unwrap()), [2, 6]);
        assert_eq!(lines(lot_rows(&p, "D4").unwrap()), [5]);
        assert_ne!(std::fs::read(path_for(&p)).unwrap(), built);

        // Truncation (the last row cut off by hand): its lot's last row is gone.
        let text = std::fs::read_to_string(&p).unwrap();
        let cut = text[..text.len() - 1].rfind('\n').unwrap() + 1;
        std::fs::write(&p, &text[..cut]).unwrap();
        assert_eq!(lines(lot_rows(&p, "A1").unwrap()), [2]);

        // A hand edit in place that keeps the length (B2 becomes Q2). File times have the
        // kernel's clock-tick granularity, so let one tick pass before the edit.
        std::thread::sleep(std::time::Duration::from_millis(30));
        let edited = std::fs::read_to_string(&p).unwrap().replace(",B2,", ",Q2,");
        let mut f = std::fs::OpenOptions::new().write(true).open(&p).unwrap();
        std::io::Write::write_all(&mut f, edited.as_bytes()).unwrap();
        drop(f);
        assert_eq!(lines(lot_rows(&p, "Q2").unwrap()), [3]);
        assert!(lot_rows(&p, "B2").unwrap().is_none());

        // A damaged index (cut short, then garbage) is rebuilt.
        let index = path_for(&p);
        let good = std::fs::read(&index).unwrap();
        std::fs::write(&index, &good[..good.len() - 5]).unwrap();
        assert_eq!(lines(lot_rows(&p, "C3").unwrap()), [4]);
        assert_eq!(std::fs::read(&index).unwrap(), good);
        std::fs::write(&index, b"not an index").unwrap();
        assert_eq!(lines(lot_rows(&p, "D4").unwrap()), [5]);
    }

    /// Issue #20: a register folder that cannot be written to still answers (the rebuilt index
    /// is used once and not kept).
    #[test]
    fn an_unwritable_folder_still_answers_issue_20() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("P.csv");
        write(&p, &["A1", "B2"]);
        std::fs::create_dir(dir.path().join(".P.lot-index")).unwrap(); // blocks the rename
        assert_eq!(lines(lot_rows(&p, "B2").unwrap()), [3]);
        assert!(path_for(&p).is_dir());
    }

    #[test]
    fn bucket_bits_grow_with_the_entries() {
        assert_eq!(bucket_bits(0), 4);
        assert_eq!(bucket_bits(60), 4);
        assert_eq!(bucket_bits(1_000_000), 17);
        assert_eq!(bucket_bits(usize::MAX), 20);
    }
}
