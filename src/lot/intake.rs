//! Lab results intake: wide or long CSV, comma or semicolon, decimal point or comma, with BOM.

use std::collections::{BTreeSet, HashMap};
use std::path::Path;
use std::str::FromStr;

use chrono::{NaiveDate, NaiveDateTime};
use indexmap::IndexMap;
use rust_decimal::Decimal;

use crate::error::{Error, Result};
use crate::spec::keys;
use crate::support::ids::is_safe_id;
use crate::support::text::Text;

/// Limits that keep a hostile or mistaken file from exhausting the machine.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Largest file accepted, bytes.
    pub max_bytes: u64,
    /// Most columns accepted.
    pub max_columns: usize,
    /// Longest cell accepted, characters.
    pub max_cell_chars: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_bytes: 64 << 20,
            max_columns: 200,
            max_cell_chars: 200,
        }
    }
}

/// How a result was entered (issue #15).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Form {
    /// A number; the reading's `value` is it.
    Number,
    /// Below a stated limit, entered as `<0.01` or `< 0.01`; `value` is the limit.
    Below,
    /// `nd` (not detected): below the spec's limit of quantification, applied when the lot is
    /// evaluated; `value` is zero until then.
    NotDetected,
    /// A word, in a column or row of a text property; `value` is zero.
    Word(String),
}

/// One entered result (a replicate), as read.
#[derive(Debug, Clone, PartialEq)]
pub struct Reading {
    /// The value exactly as entered, as a decimal (see `form` for `<`, `nd` and words).
    pub value: Decimal,
    /// How the result was entered.
    pub form: Form,
    /// Unit given in the file, if any.
    pub unit: Option<String>,
    /// Measurement temperature given in the file (°C), if any.
    pub temperature_c: Option<f64>,
    /// Line in the results file.
    pub line: u64,
}

/// The replicates of one property of a lot, in file order; one is kept inline (a wide file
/// gives one per property), so reading a lot does not allocate for each property (issue #13,
/// item 11).
pub type ReplicateList = smallvec::SmallVec<[Reading; 1]>;

/// Property key -> its replicates, in file order. Keys are short texts kept inline and hashed
/// with [`KeyHasher`].
pub type ReadingMap = IndexMap<Text, ReplicateList, std::hash::BuildHasherDefault<KeyHasher>>;

/// FNV-1a (Fowler, Noll and Vo; the 64-bit offset basis and prime of the published
/// parameters) for the few property keys of one lot: the standard library's SipHash guards
/// against adversarial keys, which a lot's handful of spec keys are not, at several times
/// the cost (issue #13, item 11).
#[derive(Clone, Copy)]
pub struct KeyHasher(u64);

impl Default for KeyHasher {
    fn default() -> Self {
        KeyHasher(0xcbf2_9ce4_8422_2325)
    }
}

impl std::hash::Hasher for KeyHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = (self.0 ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3);
        }
    }
}

/// All results of one lot.
#[derive(Debug, Clone, PartialEq)]
pub struct LotResults {
    /// Lot id (safe characters only).
    pub lot: Text,
    /// Product code.
    pub product: Text,
    /// Manufacture date.
    pub manufactured: NaiveDate,
    /// Property key to its replicates, in file order.
    pub readings: ReadingMap,
    /// Analysts named in the file.
    pub analysts: Vec<String>,
    /// Line of the lot's first row.
    pub line: u64,
    /// Earliest `tested_at` of the lot's results, when the file gives one.
    pub tested_from: Option<LabTime>,
    /// Latest `tested_at` of the lot's results, when the file gives one.
    pub tested_to: Option<LabTime>,
    /// Lab notes (`notes` column), distinct, in file order.
    pub notes: Vec<String>,
    /// Approver named for the lot in the file (history imports), if any.
    pub approver: Option<String>,
    /// Decision time given for the lot in the file (history imports), if any.
    pub decided_at: Option<LabTime>,
}

impl LotResults {
    /// A lot read from `line` with these readings and nothing yet from the file's who-and-when
    /// columns (analysts, test times, notes, approver, decision time).
    fn new(
        lot: Text,
        product: Text,
        manufactured: NaiveDate,
        readings: ReadingMap,
        line: u64,
    ) -> LotResults {
        LotResults {
            lot,
            product,
            manufactured,
            readings,
            analysts: vec![],
            line,
            tested_from: None,
            tested_to: None,
            notes: vec![],
            approver: None,
            decided_at: None,
        }
    }
}

/// A date or time as a lab file gives it (`tested_at`, `decided_at`): a date `YYYY-MM-DD`,
/// a time with a zone (RFC 3339, kept in UTC) or a local time `YYYY-MM-DD HH:MM[:SS]`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LabTime {
    /// As recorded: `YYYY-MM-DD`, `YYYY-MM-DDTHH:MM:SSZ` or `YYYY-MM-DDTHH:MM:SS` (local).
    pub text: String,
    /// For ordering: the start of the day for a date, UTC for a zoned time.
    pub at: NaiveDateTime,
}

impl LabTime {
    /// Parses one of the accepted forms; `None` for anything else.
    pub fn parse(v: &str) -> Option<LabTime> {
        let v = v.trim();
        if let Ok(d) = NaiveDate::parse_from_str(v, "%Y-%m-%d") {
            return Some(LabTime {
                text: d.to_string(),
                at: d.and_hms_opt(0, 0, 0)?,
            });
        }
        if let Ok(t) = chrono::DateTime::parse_from_rfc3339(v) {
            let utc = t.with_timezone(&chrono::Utc);
            return Some(LabTime {
                text: utc.to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
                at: utc.naive_utc(),
            });
        }
        for f in [
            "%Y-%m-%dT%H:%M:%S",
            "%Y-%m-%dT%H:%M",
            "%Y-%m-%d %H:%M:%S",
            "%Y-%m-%d %H:%M",
        ] {
            if let Ok(t) = NaiveDateTime::parse_from_str(v, f) {
                return Some(LabTime {
                    text: t.format("%Y-%m-%dT%H:%M:%S").to_string(),
                    at: t,
                });
            }
        }
        None
    }

    /// The calendar date.
    pub fn date(&self) -> NaiveDate {
        self.at.date()
    }

    /// The earliest UTC instant it can stand for: itself when zoned; a local time or date
    /// may be as far as UTC+14:00 ahead (the largest offset in use, IANA tz database).
    pub fn earliest_utc(&self) -> NaiveDateTime {
        if self.text.ends_with('Z') {
            self.at
        } else {
            self.at - chrono::Duration::hours(14)
        }
    }
}

/// A results file as read: its lots, and the columns it had that nothing reads.
#[derive(Debug, Clone, PartialEq)]
pub struct Parsed {
    /// The lots, in file order.
    pub lots: Vec<LotResults>,
    /// Columns that are neither a known column nor a value column (long files), named so
    /// that nothing in the file disappears silently.
    pub ignored: Vec<String>,
    /// Value columns of a wide file that hold no value on any row (ignored unless the spec
    /// has the property, which is then missing).
    pub empty: Vec<String>,
}

/// Columns with a meaning of their own besides the values (both shapes).
const META_COLUMNS: [&str; 6] = [
    "analyst",
    "tested_at",
    "notes",
    "approver",
    "decided_at",
    "manufactured",
];

/// Options for reading a results file.
#[derive(Debug, Clone, Default)]
pub struct Options {
    /// Numbers use a decimal comma (then the delimiter must be ';').
    pub decimal_comma: bool,
    /// Size bounds.
    pub limits: Limits,
    /// Property keys whose results are words (`kind = "text"` in some spec): their cells are
    /// read as words, every other value cell as a number, `<L` or `nd`.
    pub text_keys: BTreeSet<String>,
}

/// Reads and validates a results file; `name` is used in messages.
pub fn read_file(path: &Path, opts: Options) -> Result<Vec<LotResults>> {
    read_file_report(path, opts).map(|p| p.lots)
}

/// Reads and validates a results file, also naming the columns nothing reads.
pub fn read_file_report(path: &Path, opts: Options) -> Result<Parsed> {
    let bytes = read_bytes(path, &opts)?;
    parse_report(&path.display().to_string(), &bytes, opts)
}

/// The bytes of a results file, refused when over `opts.limits.max_bytes` (checked on the
/// size first, then counted while reading).
pub fn read_bytes(path: &Path, opts: &Options) -> Result<Vec<u8>> {
    let name = path.display().to_string();
    let meta = std::fs::metadata(path).map_err(|e| Error::io(path, "reading", e))?;
    if meta.len() > opts.limits.max_bytes {
        return Err(Error::invalid(
            &name,
            format!(
                "the file is {} bytes, over the limit of {} bytes",
                meta.len(),
                opts.limits.max_bytes
            ),
            "Split the file, or raise the limit with --max-bytes if it is genuine.",
        ));
    }
    // Counted while reading: /dev/zero, a FIFO or a growing file has no size up front, so at
    // most one byte over the limit is read (issue #13, item 12).
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, "reading", e))?;
    let mut bytes = Vec::with_capacity(meta.len().min(opts.limits.max_bytes) as usize + 1);
    std::io::Read::read_to_end(
        &mut std::io::Read::take(file, opts.limits.max_bytes.saturating_add(1)),
        &mut bytes,
    )
    .map_err(|e| Error::io(path, "reading", e))?;
    if bytes.len() as u64 > opts.limits.max_bytes {
        return Err(Error::invalid(
            &name,
            format!(
                "the file is more than {} bytes, over the limit of {} bytes",
                opts.limits.max_bytes, opts.limits.max_bytes
            ),
            "Split the file, or raise the limit with --max-bytes if it is genuine.",
        ));
    }
    Ok(bytes)
}

/// Parses results from bytes.
pub fn parse(name: &str, bytes: &[u8], opts: Options) -> Result<Vec<LotResults>> {
    parse_report(name, bytes, opts).map(|p| p.lots)
}

/// The checks every results file passes before its rows are read: not UTF-16, valid UTF-8
/// (a BOM is dropped), every quote closed, a header within the column limit and without a
/// repeated column. Returns the text after any BOM, the delimiter and the lower-cased header.
fn prepare<'b>(name: &str, bytes: &'b [u8], opts: &Options) -> Result<(&'b str, u8, Vec<String>)> {
    if let Some(why) = utf16_sign(bytes) {
        return Err(Error::invalid(
            format!("{name}:1"),
            format!("the file is not valid UTF-8 text: it looks like UTF-16 ({why})"),
            "Save the results as UTF-8 CSV (in a spreadsheet: Save As, \"CSV UTF-8\"), then run again.",
        ));
    }
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let text = std::str::from_utf8(bytes).map_err(|e| {
        let (line, _) = crate::support::tomlfile::line_column(
            &String::from_utf8_lossy(&bytes[..e.valid_up_to()]),
            e.valid_up_to(),
        );
        Error::invalid(
            format!("{name}:{line}"),
            "the file is not valid UTF-8",
            "Export the results as UTF-8 CSV.",
        )
    })?;
    if let Some(line) = unterminated_quote(text) {
        return Err(Error::invalid(
            format!("{name}:{line}"),
            "a quoted cell opened on this line is never closed (truncated file?)",
            "Check the end of the file and close the quote, or export the file again.",
        ));
    }
    let header_line = text.lines().next().unwrap_or("");
    if header_line.trim().is_empty() {
        return Err(Error::invalid(
            name,
            "the file is empty or its first line is blank",
            "The first line must be the header, e.g. lot,product,manufactured,acid_value,...",
        ));
    }
    let delimiter = if header_line.matches(';').count() > header_line.matches(',').count() {
        b';'
    } else {
        b','
    };
    if opts.decimal_comma && delimiter == b',' {
        return Err(Error::invalid(
            format!("{name}:1"),
            "--decimal-comma was given but the columns are separated by commas",
            "Files with decimal commas must separate columns with ';'.",
        ));
    }
    if header_line.split(delimiter as char).count() > opts.limits.max_columns {
        return Err(Error::invalid(
            format!("{name}:1"),
            format!(
                "the header has more than {} columns",
                opts.limits.max_columns
            ),
            "Check that this is a results file; it has far more columns than any spec.",
        ));
    }
    let mut reader = csv_reader(text, delimiter, true);
    let headers: Vec<String> = reader
        .headers()
        .map_err(|e| crate::support::csv_input::error(name, &e))?
        .iter()
        .map(|h| h.trim().to_ascii_lowercase())
        .collect();
    for (i, h) in headers.iter().enumerate() {
        if headers[..i].contains(h) {
            return Err(Error::invalid(
                format!("{name}:1"),
                format!("column '{h}' appears twice"),
                "Remove or rename the duplicate column.",
            ));
        }
    }
    Ok((text, delimiter, headers))
}

/// A CSV reader over `text` with the results files' settings.
fn csv_reader(text: &str, delimiter: u8, has_headers: bool) -> csv::Reader<&[u8]> {
    csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(has_headers)
        .trim(csv::Trim::All)
        .from_reader(text.as_bytes())
}

/// The fields of `raw` trimmed into `out`, which keeps its buffers from row to row: what
/// csv's `Trim::All` gives a `StringRecord` (every field without leading and trailing
/// Unicode whitespace, the position kept), without the two new records csv builds for each
/// row to trim it (issue #13, item 11).
fn trim_into(raw: &csv::StringRecord, out: &mut csv::StringRecord) {
    out.clear();
    for field in raw {
        out.push_field(field.trim());
    }
    out.set_position(raw.position().cloned());
}

/// The rows of a results file after its header, one at a time, each trimmed as
/// [`csv_reader`]'s reader trims it ([`trim_into`]) into one record kept from row to row: the
/// streaming reads of a wide file (issue #13, item 11).
struct TrimmedRows<'t> {
    name: &'t str,
    reader: csv::Reader<&'t [u8]>,
    raw: csv::StringRecord,
    row: csv::StringRecord,
}

impl<'t> TrimmedRows<'t> {
    /// The rows of `text` (named `name` in refusals), its header read and checked.
    fn new(name: &'t str, text: &'t str, delimiter: u8) -> Result<TrimmedRows<'t>> {
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .has_headers(true)
            .from_reader(text.as_bytes());
        reader
            .headers()
            .map_err(|e| crate::support::csv_input::error(name, &e))?;
        Ok(TrimmedRows {
            name,
            reader,
            raw: csv::StringRecord::new(),
            row: csv::StringRecord::new(),
        })
    }

    /// The next row, trimmed, or `None` after the last.
    fn next_row(&mut self) -> Result<Option<&csv::StringRecord>> {
        match self.reader.read_record(&mut self.raw) {
            Ok(true) => {
                trim_into(&self.raw, &mut self.row);
                Ok(Some(&self.row))
            }
            Ok(false) => Ok(None),
            Err(e) => Err(crate::support::csv_input::error(self.name, &e)),
        }
    }
}

/// Parses results from bytes, also naming the columns nothing reads.
pub fn parse_report(name: &str, bytes: &[u8], opts: Options) -> Result<Parsed> {
    let (text, delimiter, headers) = prepare(name, bytes, &opts)?;
    let mut reader = csv_reader(text, delimiter, true);
    reader
        .headers()
        .map_err(|e| crate::support::csv_input::error(name, &e))?;
    let ctx = Ctx {
        name,
        headers: &headers,
        opts,
    };
    let (lots, ignored, empty) = if headers.iter().any(|h| h == "property") {
        (ctx.long(&mut reader)?, ctx.ignored_long(), Vec::new())
    } else {
        let (lots, empty) = ctx.wide(&mut reader)?;
        (lots, Vec::new(), empty)
    };
    for lot in &lots {
        ctx.check_times(lot)?;
    }
    if lots.is_empty() {
        return Err(Error::invalid(
            name,
            "the file has a header but no results",
            "Add one row per lot (wide) or per test result (long).",
        ));
    }
    Ok(Parsed {
        lots,
        ignored,
        empty,
    })
}

/// An earlier lot of a file whose id equals a later lot's without regard to case.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Twin {
    /// Its id as written.
    pub lot: String,
    /// The line of its row.
    pub line: u64,
}

/// Hashes a map key that is itself a 32-bit hash: spreads it over 64 bits by multiplying by
/// 2^64/φ (Fibonacci hashing, Knuth, TAOCP vol. 3 §6.4), as the table takes its buckets from
/// the low bits and its tags from the top ones.
#[derive(Default)]
struct PassThrough(u64);

impl std::hash::Hasher for PassThrough {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = self.0.rotate_left(8) ^ u64::from(b);
        }
    }
    fn write_u32(&mut self, n: u32) {
        self.0 = u64::from(n).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    }
}

/// 32-bit hash of a lot id without regard to ASCII case (the upper half of SipHash-1-3 with
/// fixed keys, the standard library's `DefaultHasher`): it only groups ids, which are
/// compared whenever two hashes agree. 32 bits keep the table at 8 bytes a lot; a million
/// lots share about a hundred hashes, which go to the overflow map (issue #13, item 11).
fn upper_hash(id: &str) -> u32 {
    use std::hash::Hasher;
    let mut h = std::collections::hash_map::DefaultHasher::new();
    let mut buf = [0u8; 64];
    for chunk in id.as_bytes().chunks(64) {
        let part = &mut buf[..chunk.len()];
        part.copy_from_slice(chunk);
        part.make_ascii_uppercase();
        h.write(part);
    }
    h.write_usize(id.len());
    (h.finish() >> 32) as u32
}

/// A wide results file read one lot at a time (issue #13, item 11): every row is checked as
/// [`parse_report`] checks it, but only its place is kept, with a hash of its lot id, so
/// memory holds the file's bytes and about 35 bytes per lot instead of every lot's results.
/// The lots are read again with [`WideScan::for_each`].
pub struct WideScan<'a> {
    name: &'a str,
    text: &'a str,
    delimiter: u8,
    headers: Vec<String>,
    opts: Options,
    layout: WideLayout,
    /// Byte offset (in `text`) and line of each lot's row, in file order.
    rows: Vec<(u64, u64)>,
    /// [`upper_hash`] of a lot id -> the first lot with that hash.
    by_hash: HashMap<u32, u32, std::hash::BuildHasherDefault<PassThrough>>,
    /// Lots whose hash an earlier lot with another id took: id -> lot.
    overflow: HashMap<String, u32>,
    /// Lines of the rows skipped as exact repeats of an earlier row, ascending.
    repeats: Vec<u64>,
    /// Value columns that hold no value on any row (as [`Parsed::empty`]).
    pub empty: Vec<String>,
    /// One reader that seeks to a lot's row to read it again: building a CSV reader costs
    /// more than reading a row (issue #13, item 11).
    seeker: std::cell::RefCell<csv::Reader<std::io::Cursor<&'a [u8]>>>,
}

/// Reads a wide results file one lot at a time, refusing exactly what [`parse_report`]
/// refuses, with the same message: `visit` sees each lot in file order (a row that repeats
/// an earlier one exactly is skipped, as there), with the earlier lot whose id differs only
/// in case, if any. `Ok(None)` for a long file, which is read whole by [`parse_report`].
///
/// Refusals of one row come as that row is read; a test or decision time before the
/// manufacture date, which [`parse_report`] checks once every row is read, comes after the
/// last row, for the first such lot.
pub fn scan_wide<'a>(
    name: &'a str,
    bytes: &'a [u8],
    opts: Options,
    visit: &mut dyn FnMut(LotResults, Option<Twin>),
) -> Result<Option<WideScan<'a>>> {
    let (text, delimiter, headers) = prepare(name, bytes, &opts)?;
    if headers.iter().any(|h| h == "property") {
        return Ok(None);
    }
    let layout = Ctx {
        name,
        headers: &headers,
        opts: opts.clone(),
    }
    .wide_layout()?;
    // Sized once from the line count (an upper bound on the rows), so that neither table
    // is copied to grow while the file is read: growing them held old and new copies at once
    // and set the peak memory of a million lots (issue #13, item 11). A row holds at least a
    // lot id, a product code and a 10-character date with two separators (14 bytes), so a
    // file of blank lines does not reserve a table for each.
    let lines = memchr::memchr_iter(b'\n', text.as_bytes()).count() + 1;
    let most = lines.min(text.len() / 14 + 1);
    let mut scan = WideScan {
        name,
        text,
        delimiter,
        headers,
        opts,
        layout,
        rows: Vec::with_capacity(most),
        by_hash: HashMap::with_capacity_and_hasher(most, Default::default()),
        overflow: HashMap::new(),
        repeats: Vec::new(),
        empty: Vec::new(),
        seeker: std::cell::RefCell::new(
            csv::ReaderBuilder::new()
                .delimiter(delimiter)
                .has_headers(false)
                .trim(csv::Trim::All)
                .buffer_capacity(1024)
                .from_reader(std::io::Cursor::new(text.as_bytes())),
        ),
    };
    let mut filled = vec![false; scan.headers.len()];
    let mut late: Option<Error> = None;
    let mut rows = TrimmedRows::new(name, text, delimiter)?;
    while let Some(rec) = rows.next_row()? {
        let (byte, line) = rec.position().map_or((0, 0), |p| (p.byte(), p.line()));
        let ctx = scan.ctx();
        let new = ctx.wide_row(&scan.layout, rec, line, &mut filled)?;
        let hash = upper_hash(&new.lot);
        let n = scan.rows.len() as u32;
        let mut twin = None;
        match scan.by_hash.get(&hash).copied() {
            None => {
                scan.by_hash.insert(hash, n);
            }
            Some(first) => {
                let same = if scan.id_of(first)? == new.lot {
                    Some(first)
                } else {
                    scan.overflow.get(new.lot.as_str()).copied()
                };
                if let Some(j) = same {
                    let old = scan.lot(j)?;
                    if let Some(e) = scan.ctx().repeated_row(&old, &new, line) {
                        return Err(e);
                    }
                    scan.repeats.push(line);
                    continue;
                }
                twin = scan.first_twin(&new.lot)?;
                scan.overflow.insert(new.lot.to_string(), n);
            }
        }
        if late.is_none() {
            late = scan.ctx().check_times(&new).err();
        }
        visit(new, twin);
        scan.rows.push((byte, line));
    }
    if let Some(e) = late {
        return Err(e);
    }
    if scan.rows.is_empty() {
        return Err(Error::invalid(
            name,
            "the file has a header but no results",
            "Add one row per lot (wide) or per test result (long).",
        ));
    }
    scan.empty = scan.ctx().empty_columns(&scan.layout, &filled);
    Ok(Some(scan))
}

impl WideScan<'_> {
    fn ctx(&self) -> Ctx<'_> {
        Ctx {
            name: self.name,
            headers: &self.headers,
            opts: self.opts.clone(),
        }
    }

    /// Number of lots.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// True when the file has no lot (never, once scanned).
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// The row of lot `j`, read again.
    fn record(&self, j: u32) -> Result<(csv::StringRecord, u64)> {
        let (byte, line) = self.rows[j as usize];
        let mut reader = self.seeker.borrow_mut();
        let mut at = csv::Position::new();
        at.set_byte(byte).set_line(line).set_record(u64::from(j));
        let mut rec = csv::StringRecord::new();
        reader
            .seek(at)
            .and_then(|()| reader.read_record(&mut rec))
            .map_err(|e| crate::support::csv_input::error(self.name, &e))?;
        Ok((rec, line))
    }

    /// The id of lot `j`.
    fn id_of(&self, j: u32) -> Result<String> {
        let (rec, _) = self.record(j)?;
        Ok(rec.get(self.layout.idx[0]).unwrap_or("").to_string())
    }

    /// Lot `j`, read again.
    fn lot(&self, j: u32) -> Result<LotResults> {
        let (rec, line) = self.record(j)?;
        let mut filled = vec![false; self.headers.len()];
        self.ctx().wide_row(&self.layout, &rec, line, &mut filled)
    }

    /// The first lot whose id equals `id` without regard to case, if any.
    fn first_twin(&self, id: &str) -> Result<Option<Twin>> {
        Ok(match self.position_of(id)? {
            Some(j) => Some(Twin {
                lot: self.id_of(j as u32)?,
                line: self.rows[j].1,
            }),
            None => None,
        })
    }

    /// The position (in file order) of the first lot whose id equals `id` without regard to
    /// case, if the file has one.
    pub fn position_of(&self, id: &str) -> Result<Option<usize>> {
        let hash = upper_hash(id);
        if !self.by_hash.contains_key(&hash) {
            return Ok(None);
        }
        let mut found: Option<u32> = None;
        if let Some(&j) = self.by_hash.get(&hash) {
            if self.id_of(j)?.eq_ignore_ascii_case(id) {
                found = Some(j);
            }
        }
        for (other, &j) in &self.overflow {
            if other.eq_ignore_ascii_case(id) && found.is_none_or(|f| j < f) {
                found = Some(j);
            }
        }
        Ok(found.map(|j| j as usize))
    }

    /// The id and line of the lot at `position` (in file order).
    pub fn lot_at(&self, position: usize) -> Result<(String, u64)> {
        Ok((self.id_of(position as u32)?, self.rows[position].1))
    }

    /// Reads the lots at `positions` (in file order, ascending) again and hands each to
    /// `visit`, reading only their rows.
    pub fn for_each_at<E: From<Error>>(
        &self,
        positions: &[u32],
        visit: &mut dyn FnMut(LotResults) -> std::result::Result<(), E>,
    ) -> std::result::Result<(), E> {
        for &j in positions {
            visit(self.lot(j)?)?;
        }
        Ok(())
    }

    /// Reads every lot again, in file order (repeated rows skipped), and hands it to `visit`;
    /// with `product`, only the lots of that product. The rows were checked by
    /// [`scan_wide`], so this refuses nothing new.
    pub fn for_each<E: From<Error>>(
        &self,
        product: Option<&str>,
        visit: &mut dyn FnMut(LotResults) -> std::result::Result<(), E>,
    ) -> std::result::Result<(), E> {
        let ctx = self.ctx();
        let mut filled = vec![false; self.headers.len()];
        let mut repeats = self.repeats.iter().peekable();
        let mut rows = TrimmedRows::new(self.name, self.text, self.delimiter)?;
        while let Some(rec) = rows.next_row()? {
            let line = rec.position().map_or(0, |p| p.line());
            if repeats.peek() == Some(&&line) {
                repeats.next();
                continue;
            }
            if product.is_some_and(|p| rec.get(self.layout.idx[1]) != Some(p)) {
                continue;
            }
            visit(ctx.wide_row(&self.layout, rec, line, &mut filled)?)?;
        }
        Ok(())
    }
}

/// Why `bytes` look like UTF-16 rather than UTF-8 text, if they do: a UTF-16 byte-order mark
/// (FF FE or FE FF, Unicode Standard §23.8), or a NUL byte among the first 1024, which UTF-16
/// gives every ASCII character and no CSV export in UTF-8 contains (issue #13, item 22).
fn utf16_sign(bytes: &[u8]) -> Option<&'static str> {
    if bytes.starts_with(b"\xFF\xFE") || bytes.starts_with(b"\xFE\xFF") {
        Some("it starts with a UTF-16 byte-order mark")
    } else if bytes[..bytes.len().min(1024)].contains(&0) {
        Some("it holds NUL bytes, as UTF-16 does between ASCII characters")
    } else {
        None
    }
}

/// True when `text` is a plain decimal number: an optional minus sign, one or more ASCII
/// digits, and optionally a point followed by one or more digits ("0.52", "1530", "-1.5").
/// Underscores ("0_5", which `rust_decimal` reads as 5), exponents ("1E2"), signs other than a
/// leading minus, spaces and lone points are not (common practice for lab data entry; issue
/// #13, item 10). A decimal comma is turned into a point before this check.
fn is_plain_decimal(text: &str) -> bool {
    let digits = |s: &str| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit());
    let unsigned = text.strip_prefix('-').unwrap_or(text);
    match unsigned.split_once('.') {
        Some((int, frac)) => digits(int) && digits(frac),
        None => digits(unsigned),
    }
}

/// The line where a quote opens that is never closed, if any ("" inside quotes is an escape).
fn unterminated_quote(text: &str) -> Option<usize> {
    let (mut open, mut line, mut opened_at) = (false, 1, 0);
    for c in text.chars() {
        match c {
            '"' => {
                open = !open;
                if open {
                    opened_at = line;
                }
            }
            '\n' => line += 1,
            _ => {}
        }
    }
    open.then_some(opened_at)
}

/// Numbered replicates seen in a long file: (lot, key, replicate) -> (value, form, line).
type Replicates = HashMap<(String, String, String), (Decimal, Form, u64)>;

/// The lot-level columns of one row: who tested when, notes, and a history import's
/// approver and decision time.
#[derive(Debug, Default)]
struct RowMeta {
    analyst: Option<String>,
    tested: Option<LabTime>,
    note: Option<String>,
    approver: Option<String>,
    decided_at: Option<LabTime>,
}

/// Where a wide file keeps its columns.
#[derive(Debug, Clone)]
struct WideLayout {
    /// The lot, product and manufactured columns.
    idx: Vec<usize>,
    /// The viscosity_temperature_c column, if any.
    vt: Option<usize>,
    /// The value columns.
    value_cols: Vec<usize>,
}

struct Ctx<'a> {
    name: &'a str,
    headers: &'a [String],
    opts: Options,
}

impl Ctx<'_> {
    fn col(&self, key: &str) -> Option<usize> {
        self.headers.iter().position(|h| h == key)
    }

    fn require(&self, keys: &[&str], shape: &str) -> Result<Vec<usize>> {
        let missing: Vec<&str> = keys
            .iter()
            .copied()
            .filter(|k| self.col(k).is_none())
            .collect();
        if !missing.is_empty() {
            return Err(Error::invalid(
                format!("{}:1", self.name),
                format!("the {shape} header lacks column(s): {}", missing.join(", ")),
                "Wide files need lot,product,manufactured and one column per property; long files need lot,product,property,value.",
            ));
        }
        Ok(keys.iter().map(|k| self.col(k).unwrap()).collect())
    }

    fn cell<'r>(&self, rec: &'r csv::StringRecord, i: usize, line: u64) -> Result<&'r str> {
        let v = rec.get(i).unwrap_or("");
        // A cell of no more bytes than the limit has no more characters either.
        if v.len() > self.opts.limits.max_cell_chars
            && v.chars().count() > self.opts.limits.max_cell_chars
        {
            return Err(Error::invalid(
                format!("{}:{line}, column '{}'", self.name, self.headers[i]),
                format!(
                    "the cell is longer than {} characters",
                    self.opts.limits.max_cell_chars
                ),
                "Shorten it; results cells hold numbers, ids and short names.",
            ));
        }
        // The one check for free text (issue #13, item 6): control characters and
        // bidirectional overrides such as U+202E are refused.
        if let Some(problem) = crate::support::text::unprintable(v) {
            return Err(Error::invalid(
                format!("{}:{line}, column '{}'", self.name, self.headers[i]),
                format!("the cell cannot be used: {problem}"),
                "Remove tabs, line breaks, direction overrides and other control characters from the cell.",
            ));
        }
        Ok(v)
    }

    /// The lot id of a row: a safe id, as it names files and trend-file rows.
    fn lot_id(&self, v: &str, line: u64) -> Result<Text> {
        self.safe_id(v, line, "lot", "lot id", "Lot ids are 1 to 40 letters, digits, '-', '_' or '.', starting with a letter or digit.")
    }

    /// The product code of a row: a safe id, as it names the product's trend file.
    fn product(&self, v: &str, line: u64) -> Result<Text> {
        self.safe_id(
            v,
            line,
            "product",
            "product code",
            "Enter the product code as in the spec file, e.g. PD-2000.",
        )
    }

    /// `v` when it is a safe id ([`is_safe_id`]); else a refusal naming the line and `column`.
    fn safe_id(&self, v: &str, line: u64, column: &str, what: &str, fix: &str) -> Result<Text> {
        if !is_safe_id(v) {
            return Err(Error::invalid(
                format!("{}:{line}, column '{column}'", self.name),
                format!("'{v}' is not a usable {what}"),
                fix,
            ));
        }
        Ok(Text::from(v))
    }

    fn date(&self, v: &str, line: u64) -> Result<NaiveDate> {
        crate::support::clock::iso_date(v).ok_or_else(|| {
            Error::invalid(
                format!("{}:{line}, column 'manufactured'", self.name),
                format!("'{v}' is not a date"),
                "Write manufacture dates as YYYY-MM-DD.",
            )
        })
    }

    fn number(&self, v: &str, line: u64, column: &str) -> Result<Decimal> {
        let place = || format!("{}:{line}, column '{column}'", self.name);
        let text: std::borrow::Cow<str> = if self.opts.decimal_comma {
            v.replace(',', ".").into()
        } else {
            v.into()
        };
        if self.opts.decimal_comma && v.contains('.') {
            return Err(Error::invalid(
                place(),
                format!("'{v}' has a point in a file read with --decimal-comma"),
                "Write decimals with a comma only and no thousands separators (e.g. 1530 or 0,52).",
            ));
        }
        if !self.opts.decimal_comma && v.contains(',') {
            return Err(Error::invalid(
                place(),
                format!("'{v}' has a decimal comma"),
                "Use a decimal point, or pass --decimal-comma for ';'-separated files.",
            ));
        }
        let not_a_number = || {
            Error::invalid(
                place(),
                format!("'{v}' is not a number"),
                "Enter the result as a plain decimal number, e.g. 55.2 (digits and one decimal separator; no units, formulas, exponents or underscores).",
            )
        };
        if !is_plain_decimal(&text) {
            return Err(not_a_number());
        }
        let d = Decimal::from_str(&text).map_err(|_| not_a_number())?;
        if d.is_sign_negative() {
            return Err(Error::invalid(
                place(),
                format!("{v} is negative"),
                "Results are zero or more; check the sign.",
            ));
        }
        if d > Decimal::from(1_000_000_000u64) {
            return Err(Error::invalid(
                place(),
                format!("{v} is implausibly large"),
                "Check the value and its unit.",
            ));
        }
        Ok(d)
    }

    /// A result cell of property `key`: a word for a text key; else a number, `<L` (with or
    /// without a space) or `nd`.
    fn result(&self, v: &str, line: u64, key: &str) -> Result<(Decimal, Form)> {
        if self.opts.text_keys.contains(key) {
            return Ok((Decimal::ZERO, Form::Word(v.to_string())));
        }
        if let Some(limit) = v.strip_prefix('<') {
            return Ok((self.number(limit.trim(), line, key)?, Form::Below));
        }
        if v.eq_ignore_ascii_case("nd") {
            return Ok((Decimal::ZERO, Form::NotDetected));
        }
        Ok((self.number(v, line, key)?, Form::Number))
    }

    /// The lot-level columns of a row (empty cells are absent).
    fn row_meta(&self, rec: &csv::StringRecord, line: u64) -> Result<RowMeta> {
        let text = |column: &str| -> Result<Option<String>> {
            match self.col(column) {
                Some(i) => Ok(Some(self.cell(rec, i, line)?.to_string()).filter(|v| !v.is_empty())),
                None => Ok(None),
            }
        };
        let time = |column: &str| -> Result<Option<LabTime>> {
            let Some(v) = text(column)? else {
                return Ok(None);
            };
            LabTime::parse(&v).map(Some).ok_or_else(|| {
                Error::invalid(
                    format!("{}:{line}, column '{column}'", self.name),
                    format!("'{v}' is not a date or time"),
                    "Write YYYY-MM-DD, YYYY-MM-DD HH:MM, or an RFC 3339 time such as 2026-11-03T14:20:00Z.",
                )
            })
        };
        let approver = text("approver")?;
        if let Some(a) = &approver {
            crate::support::text::check_line(
                &format!("{}:{line}, column 'approver'", self.name),
                "approver name",
                a,
                80,
            )?;
        }
        Ok(RowMeta {
            analyst: text("analyst")?,
            tested: time("tested_at")?,
            note: text("notes")?,
            approver,
            decided_at: time("decided_at")?,
        })
    }

    /// Adds a row's lot-level columns to its lot; a lot has one approver and one decision
    /// time, so a row that gives another is refused.
    fn merge_meta(&self, lot: &mut LotResults, m: RowMeta, line: u64) -> Result<()> {
        // "AB;CD" names two analysts (the record joins analysts with ';').
        for a in m.analyst.iter().flat_map(|a| a.split(';')) {
            let a = a.trim().to_string();
            if !a.is_empty() && !lot.analysts.contains(&a) {
                lot.analysts.push(a);
            }
        }
        if let Some(t) = m.tested {
            if lot.tested_from.as_ref().is_none_or(|f| t.at < f.at) {
                lot.tested_from = Some(t.clone());
            }
            if lot.tested_to.as_ref().is_none_or(|f| t.at > f.at) {
                lot.tested_to = Some(t);
            }
        }
        if let Some(n) = m.note {
            if !lot.notes.contains(&n) {
                lot.notes.push(n);
            }
        }
        let conflict = |column: &str, old: &str, new: &str| {
            Error::invalid(
                format!("{}:{line}, lot '{}', column '{column}'", self.name, lot.lot),
                format!("'{new}' differs from '{old}' given earlier for the lot"),
                format!("Give one {column} per lot."),
            )
        };
        if let Some(a) = m.approver {
            match &lot.approver {
                Some(old) if *old != a => return Err(conflict("approver", old, &a)),
                _ => lot.approver = Some(a),
            }
        }
        if let Some(d) = m.decided_at {
            match &lot.decided_at {
                Some(old) if *old != d => return Err(conflict("decided_at", &old.text, &d.text)),
                _ => lot.decided_at = Some(d),
            }
        }
        Ok(())
    }

    /// A lot is tested and decided on or after its manufacture date.
    fn check_times(&self, lot: &LotResults) -> Result<()> {
        for (column, t) in [
            ("tested_at", &lot.tested_from),
            ("decided_at", &lot.decided_at),
        ] {
            if let Some(t) = t.as_ref().filter(|t| t.date() < lot.manufactured) {
                return Err(Error::invalid(
                    format!(
                        "{}:{}, lot '{}', column '{column}'",
                        self.name, lot.line, lot.lot
                    ),
                    format!(
                        "{} is before the manufacture date {}",
                        t.text, lot.manufactured
                    ),
                    "Check the date; a lot is tested and decided after it is made.",
                ));
            }
        }
        Ok(())
    }

    /// The columns of a long file that nothing reads, in header order.
    fn ignored_long(&self) -> Vec<String> {
        const LONG: [&str; 7] = [
            "lot",
            "product",
            "property",
            "value",
            "unit",
            "replicate",
            "temperature_c",
        ];
        self.headers
            .iter()
            .filter(|h| !LONG.contains(&h.as_str()) && !META_COLUMNS.contains(&h.as_str()))
            .cloned()
            .collect()
    }

    fn temperature(&self, v: &str, line: u64, column: &str) -> Result<Option<f64>> {
        if v.is_empty() {
            return Ok(None);
        }
        let t = self.number(v, line, column)?;
        let t: f64 = t.to_string().parse().unwrap_or(f64::NAN);
        if !(0.0..=400.0).contains(&t) {
            return Err(Error::invalid(
                format!("{}:{line}, column '{column}'", self.name),
                format!("{v} °C is outside 0 to 400 °C"),
                "Give the measurement temperature in °C.",
            ));
        }
        Ok(Some(t))
    }

    /// The columns of a wide file, checked once from its header.
    fn wide_layout(&self) -> Result<WideLayout> {
        let idx = self.require(&["lot", "product", "manufactured"], "wide")?;
        let vt = self.col("viscosity_temperature_c");
        let value_cols: Vec<usize> = (0..self.headers.len())
            .filter(|i| {
                !idx.contains(i)
                    && Some(*i) != vt
                    && !META_COLUMNS.contains(&self.headers[*i].as_str())
            })
            .collect();
        for &i in &value_cols {
            let h = &self.headers[i];
            let ok = h.chars().next().is_some_and(|c| c.is_ascii_lowercase())
                && h.chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_');
            if !ok {
                return Err(Error::invalid(
                    format!("{}:1", self.name),
                    format!("column '{h}' is not a property key"),
                    "Name value columns by the spec's property keys, e.g. acid_value.",
                ));
            }
        }
        Ok(WideLayout {
            idx,
            vt,
            value_cols,
        })
    }

    /// One row of a wide file as a lot; marks in `filled` the value columns it gives.
    fn wide_row(
        &self,
        layout: &WideLayout,
        rec: &csv::StringRecord,
        line: u64,
        filled: &mut [bool],
    ) -> Result<LotResults> {
        let idx = &layout.idx;
        let lot = self.lot_id(self.cell(rec, idx[0], line)?, line)?;
        let product = self.product(self.cell(rec, idx[1], line)?, line)?;
        let manufactured = self.date(self.cell(rec, idx[2], line)?, line)?;
        let temperature_c = match layout.vt {
            Some(i) => {
                self.temperature(self.cell(rec, i, line)?, line, "viscosity_temperature_c")?
            }
            None => None,
        };
        let mut readings =
            ReadingMap::with_capacity_and_hasher(layout.value_cols.len(), Default::default());
        for &i in &layout.value_cols {
            let v = self.cell(rec, i, line)?;
            if v.is_empty() {
                continue;
            }
            filled[i] = true;
            let key = Text::from(self.headers[i].as_str());
            let (value, form) = self.result(v, line, &key)?;
            let t = if key == keys::VISCOSITY {
                temperature_c
            } else {
                None
            };
            readings.insert(
                key,
                smallvec::smallvec![Reading {
                    value,
                    form,
                    unit: None,
                    temperature_c: t,
                    line,
                }],
            );
        }
        let meta = self.row_meta(rec, line)?;
        let mut new = LotResults::new(lot, product, manufactured, readings, line);
        self.merge_meta(&mut new, meta, line)?;
        Ok(new)
    }

    /// The refusal of `new`, a second wide row of lot `old` on `line`, unless it repeats it
    /// exactly (`None`: the row is skipped).
    fn repeated_row(&self, old: &LotResults, new: &LotResults, line: u64) -> Option<Error> {
        let what = duplicate_difference(old, new)?;
        Some(Error::invalid(
            format!("{}:{line}, lot '{}'", self.name, new.lot),
            format!("the lot already appears on line {} with {what}", old.line),
            "Keep one row per lot: delete the duplicate or make both rows agree; enter a retest as a separate release with --retest.",
        ))
    }

    /// The value columns of a wide file that no row fills.
    fn empty_columns(&self, layout: &WideLayout, filled: &[bool]) -> Vec<String> {
        layout
            .value_cols
            .iter()
            .filter(|&&i| !filled[i])
            .map(|&i| self.headers[i].clone())
            .collect()
    }

    fn wide(&self, reader: &mut csv::Reader<&[u8]>) -> Result<(Vec<LotResults>, Vec<String>)> {
        let layout = self.wide_layout()?;
        let mut filled = vec![false; self.headers.len()];
        let mut lots: Vec<LotResults> = Vec::new();
        // Lot id -> index in `lots`, so a repeated row is found in O(1), not by a scan
        // (a scan per row made intake quadratic in the number of lots, issue #13 item 11).
        let mut index: HashMap<String, usize> = HashMap::new();
        for rec in reader.records() {
            let rec = rec.map_err(|e| crate::support::csv_input::error(self.name, &e))?;
            let line = rec.position().map_or(0, |p| p.line());
            let new = self.wide_row(&layout, &rec, line, &mut filled)?;
            if let Some(old) = index.get(new.lot.as_str()).map(|&i| &lots[i]) {
                match self.repeated_row(old, &new, line) {
                    Some(e) => return Err(e),
                    None => continue,
                }
            }
            index.insert(new.lot.to_string(), lots.len());
            lots.push(new);
        }
        Ok((lots, self.empty_columns(&layout, &filled)))
    }

    /// The property key of a long-format row, lower-cased; refuses anything but a key.
    fn property_key(&self, v: &str, line: u64) -> Result<String> {
        let key = v.to_ascii_lowercase();
        let ok = key.chars().next().is_some_and(|c| c.is_ascii_lowercase())
            && key
                .chars()
                .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_');
        if !ok {
            return Err(Error::invalid(
                format!("{}:{line}, column 'property'", self.name),
                format!("'{key}' is not a property key"),
                "Use the spec's property keys, e.g. acid_value.",
            ));
        }
        Ok(key)
    }

    /// The value of a long-format row; refuses an empty one.
    fn long_value(&self, raw: &str, line: u64, key: &str) -> Result<(Decimal, Form)> {
        if raw.is_empty() {
            return Err(Error::invalid(
                format!("{}:{line}, column 'value'", self.name),
                "the value is empty",
                "Enter the result, or leave the row out if the test was not done.",
            ));
        }
        if self.opts.text_keys.contains(key) {
            return self.result(raw, line, key);
        }
        self.result(raw, line, "value")
    }

    /// True when `row` (lot, key, replicate, value, line) repeats a numbered replicate already
    /// seen with the same value (the row is then skipped); refuses one with another value.
    /// Otherwise remembers it and returns false.
    ///
    /// `seen` maps (lot, key, replicate) to (value, line), found in O(1) rather than by a scan
    /// of every earlier row (issue #13 item 11).
    fn repeated_replicate(
        &self,
        seen: &mut Replicates,
        row: (String, String, String, (Decimal, Form), u64),
    ) -> Result<bool> {
        let (lot, key, r, value, line) = &row;
        if r.is_empty() {
            return Ok(false);
        }
        if let Some((prev_value, prev_form, prev_line)) =
            seen.get(&(lot.clone(), key.clone(), r.clone()))
        {
            if (prev_value, prev_form) != (&value.0, &value.1) {
                return Err(Error::invalid(
                    format!("{}:{line}, lot '{lot}'", self.name),
                    format!(
                        "replicate {r} of {key} already appears on line {prev_line} with value {}",
                        entered_text(*prev_value, prev_form)
                    ),
                    "Remove the conflicting row or number the replicates distinctly.",
                ));
            }
            return Ok(true);
        }
        let (lot, key, r, (value, form), line) = row;
        seen.insert((lot, key, r), (value, form, line));
        Ok(false)
    }

    /// Index of `lot` in `lots`, adding it (with an unknown date in `dates`) on its first row;
    /// refuses a lot given under two products. `index` maps lot id to that index, so a lot is
    /// found in O(1) rather than by a scan (issue #13 item 11).
    fn lot_slot(
        &self,
        lots: &mut Vec<LotResults>,
        dates: &mut Vec<Option<NaiveDate>>,
        index: &mut HashMap<String, usize>,
        lot: &str,
        product: Text,
        line: u64,
    ) -> Result<usize> {
        if let Some(&p) = index.get(lot) {
            if lots[p].product != product {
                return Err(Error::invalid(
                    format!("{}:{line}, lot '{lot}'", self.name),
                    format!(
                        "product '{product}' differs from '{}' on line {}",
                        lots[p].product, lots[p].line
                    ),
                    "A lot belongs to one product; correct the product code.",
                ));
            }
            return Ok(p);
        }
        lots.push(LotResults::new(
            Text::from(lot),
            product,
            NaiveDate::MIN,
            ReadingMap::default(),
            line,
        ));
        dates.push(None);
        index.insert(lot.to_string(), lots.len() - 1);
        Ok(lots.len() - 1)
    }

    fn long(&self, reader: &mut csv::Reader<&[u8]>) -> Result<Vec<LotResults>> {
        let idx = self.require(&["lot", "product", "property", "value"], "long")?;
        let unit = self.col("unit");
        let temp = self.col("temperature_c");
        let made = self.col("manufactured");
        let replicate = self.col("replicate");
        let mut lots: Vec<LotResults> = Vec::new();
        let mut dates: Vec<Option<NaiveDate>> = Vec::new();
        let mut seen_replicates = Replicates::new();
        let mut index: HashMap<String, usize> = HashMap::new();
        for rec in reader.records() {
            let rec = rec.map_err(|e| crate::support::csv_input::error(self.name, &e))?;
            let line = rec.position().map_or(0, |p| p.line());
            let lot = self.lot_id(self.cell(&rec, idx[0], line)?, line)?;
            let product = self.product(self.cell(&rec, idx[1], line)?, line)?;
            let key = self.property_key(self.cell(&rec, idx[2], line)?, line)?;
            let value = self.long_value(self.cell(&rec, idx[3], line)?, line, &key)?;
            let unit_v = match unit {
                Some(i) => Some(self.cell(&rec, i, line)?.to_string()).filter(|u| !u.is_empty()),
                None => None,
            };
            let t = match temp {
                Some(i) => self.temperature(self.cell(&rec, i, line)?, line, "temperature_c")?,
                None => None,
            };
            let date = match made {
                Some(i) => {
                    let v = self.cell(&rec, i, line)?;
                    if v.is_empty() {
                        None
                    } else {
                        Some(self.date(v, line)?)
                    }
                }
                None => None,
            };
            if let Some(i) = replicate {
                let r = self.cell(&rec, i, line)?.to_string();
                let row = (lot.to_string(), key.clone(), r, value.clone(), line);
                if self.repeated_replicate(&mut seen_replicates, row)? {
                    continue;
                }
            }
            let pos = self.lot_slot(&mut lots, &mut dates, &mut index, &lot, product, line)?;
            if let Some(d) = date {
                match dates[pos] {
                    Some(old) if old != d => {
                        return Err(Error::invalid(
                            format!("{}:{line}, lot '{lot}'", self.name),
                            format!("manufacture date {d} differs from {old} given earlier"),
                            "Give one manufacture date per lot.",
                        ))
                    }
                    _ => dates[pos] = Some(d),
                }
            }
            let meta = self.row_meta(&rec, line)?;
            self.merge_meta(&mut lots[pos], meta, line)?;
            let (value, form) = value;
            lots[pos]
                .readings
                .entry(key.into())
                .or_default()
                .push(Reading {
                    value,
                    form,
                    unit: unit_v,
                    temperature_c: t,
                    line,
                });
        }
        for (lot, date) in lots.iter_mut().zip(dates) {
            lot.manufactured = date.ok_or_else(|| {
                Error::invalid(
                    format!("{}:{}, lot '{}'", self.name, lot.line, lot.lot),
                    "no manufacture date is given for this lot",
                    "Add a 'manufactured' column (YYYY-MM-DD) on at least one row of the lot.",
                )
            })?;
        }
        Ok(lots)
    }
}

/// How a second wide row of a lot differs from the first, or `None` when it repeats it
/// exactly (and may be skipped): its results, a measurement temperature, or its analyst
/// (issue #13, item 22: only an exact repeat is merged).
fn duplicate_difference(a: &LotResults, b: &LotResults) -> Option<String> {
    if !same_results(a, b) {
        return Some("different results".into());
    }
    let temperatures = |l: &LotResults| -> Vec<Option<f64>> {
        l.readings
            .values()
            .flatten()
            .map(|r| r.temperature_c)
            .collect()
    };
    if temperatures(a) != temperatures(b) {
        return Some("a different measurement temperature".into());
    }
    if a.analysts != b.analysts {
        let name = |l: &LotResults| l.analysts.first().cloned().unwrap_or_default();
        return Some(format!(
            "a different analyst ('{}' there, '{}' here)",
            name(a),
            name(b)
        ));
    }
    if (&a.tested_from, &a.notes, &a.approver, &a.decided_at)
        != (&b.tested_from, &b.notes, &b.approver, &b.decided_at)
    {
        return Some("a different test date, note, approver or decision time".into());
    }
    None
}

/// A reading as it was entered, for messages: `0.5`, `<0.01`, `nd` or the word.
pub fn entered_text(value: Decimal, form: &Form) -> String {
    match form {
        Form::Number => value.to_string(),
        Form::Below => format!("<{value}"),
        Form::NotDetected => "nd".into(),
        Form::Word(w) => w.clone(),
    }
}

fn same_results(a: &LotResults, b: &LotResults) -> bool {
    a.product == b.product
        && a.manufactured == b.manufactured
        && a.readings.len() == b.readings.len()
        && a.readings.iter().all(|(k, v)| {
            b.readings.get(k).is_some_and(|w| {
                v.len() == w.len()
                    && v.iter()
                        .zip(w)
                        .all(|(x, y)| x.value == y.value && x.form == y.form && x.unit == y.unit)
            })
        })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue #13 item 11: rows trimmed by `trim_into` equal what csv's own `Trim::All` reader
    /// gives (the reference), fields and positions, for ASCII and Unicode whitespace, quoted
    /// fields and empty fields.
    #[test]
    fn trim_into_is_csvs_own_trim_issue_13() {
        let text = "lot,product,acid_value\n  R1 ,PD-2000,\t0.52\u{a0}\n\"  R2\u{2003}\", PD-2000 ,\n,,\n\u{3000}R4\u{b},x, 1 \n";
        let mut trimmed = csv_reader(text, b',', true);
        let mut raw_reader = csv::ReaderBuilder::new()
            .has_headers(true)
            .from_reader(text.as_bytes());
        let mut raw = csv::StringRecord::new();
        let mut out = csv::StringRecord::new();
        let mut want = csv::StringRecord::new();
        let mut rows = 0;
        while raw_reader.read_record(&mut raw).unwrap() {
            assert!(trimmed.read_record(&mut want).unwrap());
            trim_into(&raw, &mut out);
            assert_eq!(out, want);
            assert_eq!(out.position(), want.position());
            rows += 1;
        }
        assert_eq!(rows, 4);
    }

    fn p(text: &str) -> Result<Vec<LotResults>> {
        parse("r.csv", text.as_bytes(), Options::default())
    }

    #[test]
    fn wide_with_bom_and_semicolons() {
        let lots = parse(
            "r.csv",
            "\u{feff}lot;product;manufactured;acid_value;hydroxyl_value\nL1;PD-2000;2026-10-01;0,52;55,1\n"
                .as_bytes(),
            Options { decimal_comma: true, ..Options::default() },
        )
        .unwrap();
        assert_eq!(lots[0].readings["acid_value"][0].value.to_string(), "0.52");
    }

    #[test]
    fn long_replicates_are_grouped() {
        let lots = p("lot,product,property,value,replicate,manufactured\n\
                      L1,PD-2000,acid_value,0.50,1,2026-10-01\n\
                      L1,PD-2000,acid_value,0.54,2,\n\
                      L1,PD-2000,hydroxyl_value,55.0,1,\n")
        .unwrap();
        assert_eq!(lots.len(), 1);
        assert_eq!(lots[0].readings["acid_value"].len(), 2);
    }

    #[test]
    fn bad_cells_name_line_and_column() {
        let e = p("lot,product,manufactured,acid_value\nL1,PD-2000,2026-10-01,abc\n").unwrap_err();
        assert!(
            e.to_string().starts_with("r.csv:2, column 'acid_value'"),
            "{e}"
        );
        let e =
            p("lot,product,manufactured,acid_value\nL1,PD-2000,2026-10-01,=SUM(A1)\n").unwrap_err();
        assert!(e.to_string().contains("not a number"), "{e}");
        let e = p("lot,product,manufactured,acid_value\n../x,PD-2000,2026-10-01,1\n").unwrap_err();
        assert!(e.to_string().contains("not a usable lot id"), "{e}");
        let e = p("lot,product,manufactured,acid_value\nL1,PD-2000,2026-10-01,NaN\n").unwrap_err();
        assert!(e.to_string().contains("not a number"), "{e}");
    }

    #[test]
    fn conflicting_duplicates_are_refused_identical_accepted() {
        let ok = p("lot,product,manufactured,acid_value\nL1,P,2026-10-01,1\nL1,P,2026-10-01,1\n")
            .unwrap();
        assert_eq!(ok.len(), 1);
        let e = p("lot,product,manufactured,acid_value\nL1,P,2026-10-01,1\nL1,P,2026-10-01,2\n")
            .unwrap_err();
        assert!(e.to_string().contains("different results"), "{e}");
    }

    #[test]
    fn empty_and_headless_files_are_refused() {
        assert!(p("").is_err());
        assert!(p("lot,product,manufactured,acid_value\n").is_err());
        assert!(p("lot,acid_value\nL1,1\n")
            .unwrap_err()
            .to_string()
            .contains("lacks column"));
    }

    /// Issue #13 item 10: plain decimals only.
    #[test]
    fn only_plain_decimals_are_numbers_issue_13() {
        for ok in ["0.52", "1530", "0", "-1.5", "55.20"] {
            assert!(is_plain_decimal(ok), "{ok}");
        }
        for bad in [
            "0.5_0", "5_30", "0_5", "1E2", "1e2", "+1", ".5", "5.", "1.2.3", "", "-", " 1", "١",
        ] {
            assert!(!is_plain_decimal(bad), "{bad}");
        }
        let e = p("lot,product,manufactured,acid_value\nL1,P,2026-10-01,0_5\n").unwrap_err();
        assert!(e.to_string().contains("'0_5' is not a number"), "{e}");
        let comma = Options {
            decimal_comma: true,
            ..Options::default()
        };
        let lots = parse(
            "r.csv",
            b"lot;product;manufactured;acid_value\nL1;P;2026-10-01;0,52\n",
            comma.clone(),
        )
        .unwrap();
        assert_eq!(lots[0].readings["acid_value"][0].value.to_string(), "0.52");
        assert!(parse(
            "r.csv",
            b"lot;product;manufactured;acid_value\nL1;P;2026-10-01;0,5_2\n",
            comma
        )
        .is_err());
    }

    /// Issue #13 item 22: UTF-16, with or without a byte-order mark, is named as such.
    #[test]
    fn utf16_is_recognised_issue_13() {
        let utf16: Vec<u8> = "lot,product\n"
            .encode_utf16()
            .flat_map(u16::to_le_bytes)
            .collect();
        assert!(utf16_sign(&utf16).unwrap().contains("NUL"));
        assert!(utf16_sign(b"\xFF\xFEl\0")
            .unwrap()
            .contains("byte-order mark"));
        assert_eq!(utf16_sign("lot,product\nL1,Süd\n".as_bytes()), None);
        let e = parse("r.csv", &utf16, Options::default()).unwrap_err();
        assert!(e.to_string().contains("looks like UTF-16"), "{e}");
    }

    /// Issue #13 item 22: duplicate wide rows merge only when they repeat exactly.
    #[test]
    fn duplicates_differing_in_temperature_or_analyst_are_refused_issue_13() {
        let head = "lot,product,manufactured,viscosity,viscosity_temperature_c,analyst\n";
        let e = p(&format!(
            "{head}L1,P,2026-10-01,540,60,AB\nL1,P,2026-10-01,540,25,AB\n"
        ))
        .unwrap_err();
        assert!(
            e.to_string()
                .contains("line 2 with a different measurement temperature"),
            "{e}"
        );
        let e = p(&format!(
            "{head}L1,P,2026-10-01,540,60,AB\nL1,P,2026-10-01,540,60,CD\n"
        ))
        .unwrap_err();
        assert!(
            e.to_string()
                .contains("a different analyst ('AB' there, 'CD' here)"),
            "{e}"
        );
        let same = p(&format!(
            "{head}L1,P,2026-10-01,540,60,AB\nL1,P,2026-10-01,540,60,AB\n"
        ));
        assert_eq!(same.unwrap().len(), 1);
    }

    /// Issue #15: results below a limit, nd and words are read as such; times are normalised.
    #[test]
    fn censored_words_and_times_are_read_issue_15() {
        let opts = Options {
            text_keys: ["appearance".to_string()].into_iter().collect(),
            ..Options::default()
        };
        let parsed = parse_report(
            "r.csv",
            b"lot,product,property,value,tested_at,analyst,manufactured,sample_id\n\
              L1,P,water,<0.01,2026-10-02,AB;CD,2026-10-01,S1\n\
              L1,P,colour,nd,2026-10-03T10:00:00+02:00,EF,,S1\n\
              L1,P,appearance,Clear,2026-10-02 09:30,AB,,S1\n",
            opts,
        )
        .unwrap();
        assert_eq!(parsed.ignored, vec!["sample_id".to_string()]);
        let l = &parsed.lots[0];
        let water = &l.readings["water"][0];
        assert_eq!(
            (water.value.to_string(), &water.form),
            ("0.01".into(), &Form::Below)
        );
        assert_eq!(l.readings["colour"][0].form, Form::NotDetected);
        assert_eq!(
            l.readings["appearance"][0].form,
            Form::Word("Clear".to_string())
        );
        assert_eq!(l.analysts, vec!["AB", "CD", "EF"]);
        assert_eq!(l.tested_from.as_ref().unwrap().text, "2026-10-02");
        // 10:00 at UTC+02:00 is 08:00 UTC (RFC 3339 offsets).
        assert_eq!(l.tested_to.as_ref().unwrap().text, "2026-10-03T08:00:00Z");
        // A word in a numeric column is still refused where it is read.
        let e = p("lot,product,manufactured,acid_value\nL1,P,2026-10-01,clear\n").unwrap_err();
        assert!(e.to_string().contains("'clear' is not a number"), "{e}");
        // An empty wide column is reported for the caller to judge.
        let wide = parse_report(
            "r.csv",
            b"lot,product,manufactured,acid_value,remark\nL1,P,2026-10-01,0.5,\n",
            Options::default(),
        )
        .unwrap();
        assert_eq!(wide.empty, vec!["remark".to_string()]);
    }

    #[test]
    fn lab_times_parse_in_the_documented_forms_issue_15() {
        assert_eq!(LabTime::parse("2026-10-02").unwrap().text, "2026-10-02");
        assert_eq!(
            LabTime::parse("2026-10-02 09:30").unwrap().text,
            "2026-10-02T09:30:00"
        );
        assert_eq!(
            LabTime::parse("2026-10-02T09:30:00Z").unwrap().text,
            "2026-10-02T09:30:00Z"
        );
        assert!(LabTime::parse("02/10/2026").is_none());
        // A local time may stand for an instant up to 14 hours earlier in UTC (UTC+14:00).
        let local = LabTime::parse("2026-10-02 14:00").unwrap();
        assert_eq!(
            local.earliest_utc(),
            LabTime::parse("2026-10-02T00:00:00Z").unwrap().at
        );
    }

    proptest::proptest! {
        #[test]
        fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(proptest::num::u8::ANY, 0..400)) {
            let _ = parse("x.csv", &bytes, Options::default());
        }
    }
}
