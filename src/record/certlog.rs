//! The certificate issue log: every certificate issued, hash-chained like the trend files.
//!
//! Each row also records the trend-file row it certifies (`trend_row`, `trend_chain`: the
//! lot's latest row when the certificate was issued), an anchor outside the trend file that
//! `verify` checks (issue #13, item 4). A log written before those columns existed
//! ([`COLUMNS_V1`]) is read and appended to as it is until `resinlot upgrade` writes the current
//! layout beside it: the upgraded log starts with a *layout row* (empty `number`) naming the
//! predecessor's file, SHA-256, row count (`trend_row`) and last chain value (`trend_chain`),
//! followed by the predecessor's rows carried over unchanged (with empty anchors).

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use crate::error::Result;
use crate::record::trend_file::{self, Locked, Trend, Wait};

/// Columns of the issue log (layout v3: [`COLUMNS_V2`] with [`crate::record::layout::LOG_EXTENSION`] before
/// `chain`).
pub const COLUMNS: [&str; 19] = [
    "seq",
    "issued_at",
    "number",
    "lot",
    "product",
    "customer",
    "customer_name",
    "file",
    "sha256",
    "supersedes",
    "reason",
    "trend_row",
    "trend_chain",
    "event",
    "po",
    "quantity",
    "json_sha256",
    "cause",
    "chain",
];

/// Columns of the issue log as written between issues #13 and #14 (anchors, no extension);
/// read as they are, and widened by `resinlot upgrade`.
pub const COLUMNS_V2: [&str; 14] = [
    "seq",
    "issued_at",
    "number",
    "lot",
    "product",
    "customer",
    "customer_name",
    "file",
    "sha256",
    "supersedes",
    "reason",
    "trend_row",
    "trend_chain",
    "chain",
];

/// Columns of the issue log as written before issue #13 (read and appended to as they are).
pub const COLUMNS_V1: [&str; 12] = [
    "seq",
    "issued_at",
    "number",
    "lot",
    "product",
    "customer",
    "customer_name",
    "file",
    "sha256",
    "supersedes",
    "reason",
    "chain",
];

/// The log's path inside a register folder.
pub fn path(register: &Path) -> PathBuf {
    register.join("certificates.csv")
}

/// True when `cols` is the log's header, in the current or the earlier layout.
pub fn header_ok(cols: &[String]) -> bool {
    cols == COLUMNS || cols == COLUMNS_V2 || cols == COLUMNS_V1
}

/// The layout of a certificate log.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Layout {
    /// Written before issue #13: no trend anchors ([`COLUMNS_V1`]).
    V1,
    /// The current layout ([`COLUMNS`]); anything else is also reported here and left to
    /// `verify`, which names a header it does not know.
    Current,
}

/// The layout of the register's log, `None` when there is none (or it is still empty).
pub fn layout(register: &Path) -> Result<Option<Layout>> {
    let p = path(register);
    let bytes = match std::fs::read(&p) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(crate::error::Error::io(&p, "reading", e)),
    };
    let first = bytes.split(|&b| b == b'\n').next().unwrap_or_default();
    if first.is_empty() {
        return Ok(None);
    }
    let cols = trend_file::split_line(&String::from_utf8_lossy(first));
    Ok(Some(if cols == COLUMNS_V1 {
        Layout::V1
    } else {
        Layout::Current
    }))
}

/// True for a layout row of an upgraded log (it names the predecessor, not a certificate).
pub fn is_layout_row(t: &Trend, row: &trend_file::Row) -> bool {
    t.cell(row, "number").is_empty()
}

/// True for an event row (a withdrawal or supersession of a certificate already issued,
/// issue #14): its `event` cell is set. An empty `event` is an issue.
pub fn is_event_row(t: &Trend, row: &trend_file::Row) -> bool {
    !t.cell(row, "event").is_empty()
}

/// True for a row that issues a certificate (neither a layout row nor an event row).
pub fn is_issue_row(t: &Trend, row: &trend_file::Row) -> bool {
    !is_layout_row(t, row) && !is_event_row(t, row)
}

/// A certificate's anchor in its trend file, as the log records it.
#[derive(Debug, Clone, PartialEq)]
pub struct Anchor {
    /// Line of the log row.
    pub line: usize,
    /// Certificate number.
    pub number: String,
    /// Lot id.
    pub lot: String,
    /// Product code (the trend file is `<product>.csv`).
    pub product: String,
    /// Row number (`seq`) of the certified row in the trend file.
    pub row: usize,
    /// Chain value of that row.
    pub chain: String,
}

/// The anchors of a parsed log: every certificate row that records one (rows from before
/// issue #13 and layout rows record none).
pub fn anchors(t: &Trend) -> Vec<Anchor> {
    t.rows
        .iter()
        .filter(|r| !is_layout_row(t, r))
        .filter_map(|r| {
            Some(Anchor {
                line: r.line,
                number: t.cell(r, "number").to_string(),
                lot: t.cell(r, "lot").to_string(),
                product: t.cell(r, "product").to_string(),
                row: t.cell(r, "trend_row").parse().ok()?,
                chain: t.cell(r, "trend_chain").to_string(),
            })
        })
        .collect()
}

/// One issue row: a certificate issued for one lot (a certificate for several lots has a row
/// per lot, all with its number; issue #16).
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize)]
pub struct Entry {
    /// Certificate number.
    pub number: String,
    /// When it was issued (RFC 3339, UTC).
    pub issued_at: String,
    /// Lot id.
    pub lot: String,
    /// Product code.
    pub product: String,
    /// Customer file stem; empty for an internal certificate.
    pub customer: String,
    /// Customer's legal name.
    pub customer_name: String,
    /// File name of the PDF (in the certificates folder).
    pub file: String,
    /// SHA-256 of the PDF bytes.
    pub sha256: String,
    /// Number of the certificate this one supersedes.
    pub supersedes: String,
    /// Reason for a reissue.
    pub reason: String,
    /// SHA-256 of the certificate's JSON data companion (layout v3; empty when none was
    /// written, e.g. in a log in an earlier layout).
    pub json_sha256: String,
    /// The customer's purchase order (layout v3; empty when none was given).
    pub po: String,
    /// Quantity shipped, as written on the certificate (layout v3).
    pub quantity: String,
}

/// The entry an issue row of a parsed log records.
pub fn entry_of(t: &Trend, row: &trend_file::Row) -> Entry {
    entry(t, row)
}

fn entry(t: &Trend, row: &trend_file::Row) -> Entry {
    let c = |n: &str| t.cell(row, n).to_string();
    Entry {
        number: c("number"),
        issued_at: c("issued_at"),
        lot: c("lot"),
        product: c("product"),
        customer: c("customer"),
        customer_name: c("customer_name"),
        file: c("file"),
        sha256: c("sha256"),
        supersedes: c("supersedes"),
        reason: c("reason"),
        json_sha256: c("json_sha256"),
        po: c("po"),
        quantity: c("quantity"),
    }
}

/// What an event row records about a certificate already issued (issue #14).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum EventKind {
    /// The lot became rejected or on hold after the certificate was issued.
    Withdrawn,
    /// A reissue replaced it.
    Superseded,
}

impl EventKind {
    /// The `event` cell.
    pub fn as_str(self) -> &'static str {
        match self {
            EventKind::Withdrawn => "withdrawn",
            EventKind::Superseded => "superseded",
        }
    }

    /// Reads an `event` cell.
    pub fn parse(text: &str) -> Option<EventKind> {
        [EventKind::Withdrawn, EventKind::Superseded]
            .into_iter()
            .find(|k| k.as_str() == text)
    }
}

/// The trend row that causes a withdrawal: `<product>.csv` row `row` with its chain value,
/// and the reason recorded on it.
#[derive(Debug, Clone, PartialEq)]
pub struct Cause {
    /// Product code (the trend file is `<product>.csv`).
    pub product: String,
    /// Row number (`seq`).
    pub row: usize,
    /// The row's chain value.
    pub chain: String,
    /// Why (the row's reason, or a description of the decision).
    pub reason: String,
}

impl Cause {
    /// The `cause` cell: "`<product>.csv row N`".
    pub fn cell(&self) -> String {
        format!("{}.csv row {}", self.product, self.row)
    }
}

/// One event row of the log.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Event {
    /// Withdrawn or superseded.
    pub kind: EventKind,
    /// The certificate concerned.
    pub number: String,
    /// When (RFC 3339, UTC; the `issued_at` column).
    pub at: String,
    /// Lot id.
    pub lot: String,
    /// Product code.
    pub product: String,
    /// Customer file stem; empty for an internal certificate.
    pub customer: String,
    /// Customer's legal name.
    pub customer_name: String,
    /// Why.
    pub reason: String,
    /// What caused it: the trend row ("PD-2000.csv row 63") or the new certificate's number.
    pub cause: String,
    /// The causing trend row's `seq` (empty for a supersession).
    pub trend_row: String,
    /// The causing trend row's chain value (empty for a supersession).
    pub trend_chain: String,
}

impl Event {
    /// The withdrawal of certificate `e` because of `cause`, at `at`.
    pub fn withdrawal(e: &Entry, cause: &Cause, at: &str) -> Event {
        Event {
            kind: EventKind::Withdrawn,
            number: e.number.clone(),
            at: at.to_string(),
            lot: e.lot.clone(),
            product: e.product.clone(),
            customer: e.customer.clone(),
            customer_name: e.customer_name.clone(),
            reason: cause.reason.clone(),
            cause: cause.cell(),
            trend_row: cause.row.to_string(),
            trend_chain: cause.chain.clone(),
        }
    }
}

/// A withdrawn certificate, as the customer-service desk needs it to notify the customer.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Withdrawn {
    /// Certificate number.
    pub number: String,
    /// Customer file stem; empty for an internal certificate.
    pub customer: String,
    /// Customer's legal name.
    pub customer_name: String,
    /// Purchase order the certificate went with, when the log records one.
    pub po: String,
}

/// Where a certificate stands now.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "standing", rename_all = "snake_case")]
pub enum Standing {
    /// Neither superseded nor withdrawn.
    Current,
    /// Replaced by a reissue.
    Superseded {
        /// The certificate that replaces it.
        by: String,
        /// When.
        at: String,
        /// The reissue's reason.
        reason: String,
    },
    /// Withdrawn (the lot was rejected or put on hold), or logged as void.
    Withdrawn {
        /// When.
        at: String,
        /// Why.
        reason: String,
        /// The trend row that caused it ("PD-2000.csv row 63"), empty for a void file.
        cause: String,
    },
}

/// The standing of every certificate number in a parsed log, in log order: a reissue row
/// (its `supersedes` cell) or a `superseded` event supersedes, a `withdrawn` event or a VOID
/// issue withdraws; the first such row decides (a withdrawn certificate later reissued stays
/// withdrawn). Pure.
pub fn standings(t: &Trend) -> HashMap<String, Standing> {
    let mut out: HashMap<String, Standing> = HashMap::new();
    for r in t.rows.iter().filter(|r| !is_layout_row(t, r)) {
        let c = |n: &str| t.cell(r, n).to_string();
        let number = c("number");
        if is_event_row(t, r) {
            let next = match EventKind::parse(&c("event")) {
                Some(EventKind::Withdrawn) => Standing::Withdrawn {
                    at: c("issued_at"),
                    reason: c("reason"),
                    cause: c("cause"),
                },
                Some(EventKind::Superseded) => Standing::Superseded {
                    by: c("cause"),
                    at: c("issued_at"),
                    reason: c("reason"),
                },
                None => continue,
            };
            if out.get(&number) == Some(&Standing::Current) {
                out.insert(number, next);
            }
            continue;
        }
        let reason = c("reason");
        let own = if reason.starts_with(crate::record::certfiles::VOID_MARK) {
            Standing::Withdrawn {
                at: c("issued_at"),
                reason,
                cause: String::new(),
            }
        } else {
            Standing::Current
        };
        let old = c("supersedes");
        if !old.is_empty() && out.get(&old) == Some(&Standing::Current) {
            out.insert(
                old,
                Standing::Superseded {
                    by: number.clone(),
                    at: c("issued_at"),
                    reason: c("reason"),
                },
            );
        }
        out.entry(number).or_insert(own);
    }
    out
}

/// Where a certificate stands, in one word (issue #16: `shipments`, `lookup NUMBER`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CertStatus {
    /// Neither superseded nor withdrawn.
    Current,
    /// Replaced by a reissue.
    Superseded,
    /// Withdrawn, or logged as void.
    Withdrawn,
}

impl CertStatus {
    /// The word of a certificate's [`Standing`] (decided by [`standings`], the one place).
    pub fn of(s: Option<&Standing>) -> CertStatus {
        match s {
            None | Some(Standing::Current) => CertStatus::Current,
            Some(Standing::Superseded { .. }) => CertStatus::Superseded,
            Some(Standing::Withdrawn { .. }) => CertStatus::Withdrawn,
        }
    }

    /// The word used in tables, JSON and CSV.
    pub fn as_str(self) -> &'static str {
        match self {
            CertStatus::Current => "current",
            CertStatus::Superseded => "superseded",
            CertStatus::Withdrawn => "withdrawn",
        }
    }
}

/// One certificate as the log records it: its issue rows (one per lot) gathered by number.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Certificate {
    /// Certificate number.
    pub number: String,
    /// When it was issued (RFC 3339, UTC).
    pub issued_at: String,
    /// Product code.
    pub product: String,
    /// Customer file stem; empty for an internal certificate.
    pub customer: String,
    /// Customer's legal name.
    pub customer_name: String,
    /// Purchase order (empty when none was given).
    pub po: String,
    /// Quantity as written.
    pub quantity: String,
    /// The lots it certifies, in the order they were logged.
    pub lots: Vec<String>,
    /// File name of the PDF.
    pub file: String,
    /// SHA-256 of the PDF.
    pub sha256: String,
    /// Number of the certificate it supersedes.
    pub supersedes: String,
    /// Reason for a reissue.
    pub reason: String,
    /// Current, superseded or withdrawn ([`CertStatus::of`] its [`Standing`]).
    pub status: CertStatus,
}

/// The certificates of issue rows `entries`, in log order, each with all its lots and its
/// status from `standing` ([`standings`] or [`Log::standings`]).
pub fn certificates(entries: &[Entry], standing: &HashMap<String, Standing>) -> Vec<Certificate> {
    let mut out: Vec<Certificate> = Vec::new();
    let mut at: HashMap<&str, usize> = HashMap::new();
    for e in entries {
        if let Some(&i) = at.get(e.number.as_str()) {
            if !out[i].lots.contains(&e.lot) {
                out[i].lots.push(e.lot.clone());
            }
            continue;
        }
        at.insert(&e.number, out.len());
        out.push(Certificate {
            number: e.number.clone(),
            issued_at: e.issued_at.clone(),
            product: e.product.clone(),
            customer: e.customer.clone(),
            customer_name: e.customer_name.clone(),
            po: e.po.clone(),
            quantity: e.quantity.clone(),
            lots: vec![e.lot.clone()],
            file: e.file.clone(),
            sha256: e.sha256.clone(),
            supersedes: e.supersedes.clone(),
            reason: e.reason.clone(),
            status: CertStatus::of(standing.get(&e.number)),
        });
    }
    out
}

/// Every certificate of the register's log, with its lots and status (none without a log).
pub fn all_certificates(register: &Path) -> Result<Vec<Certificate>> {
    let Some(t) = read(register)? else {
        return Ok(vec![]);
    };
    let entries: Vec<Entry> = t
        .rows
        .iter()
        .filter(|r| is_issue_row(&t, r))
        .map(|r| entry(&t, r))
        .collect();
    Ok(certificates(&entries, &standings(&t)))
}

/// Every entry of the log (none when it does not exist yet); the chain is verified.
pub fn entries(register: &Path) -> Result<Vec<Entry>> {
    let p = path(register);
    if !p.exists() {
        return Ok(vec![]);
    }
    let text = crate::spec::read_text(&p)?;
    let (t, damage) = trend_file::parse_chained(&p, &text, true, &header_ok);
    if let Some(d) = damage {
        return Err(trend_file::damage_error(&p, &d));
    }
    Ok(t.rows
        .iter()
        .filter(|r| is_issue_row(&t, r))
        .map(|r| entry(&t, r))
        .collect())
}

/// The log read and chain-checked (damage is an error), `None` when there is none yet.
pub fn read(register: &Path) -> Result<Option<Trend>> {
    let p = path(register);
    if !p.exists() {
        return Ok(None);
    }
    let text = crate::spec::read_text(&p)?;
    let (t, damage) = trend_file::parse_chained(&p, &text, true, &header_ok);
    if let Some(d) = damage {
        return Err(trend_file::damage_error(&p, &d));
    }
    Ok(Some(t))
}

/// Refuses (exit 2, naming `resinlot upgrade`) to go on when any of `lots` has a current
/// certificate that would have to be withdrawn but the log, in an earlier layout, has no
/// `event` column to record it: called before anything is written, so no decision lands
/// without its withdrawals.
pub fn check_withdrawable(register: &Path, lots: &[&str]) -> Result<()> {
    if lots.is_empty() {
        return Ok(());
    }
    let Some(t) = read(register)? else {
        return Ok(());
    };
    if t.col("event").is_some() {
        return Ok(());
    }
    let standing = standings(&t);
    let certified = t.rows.iter().any(|r| {
        is_issue_row(&t, r)
            && !t.cell(r, "customer").is_empty()
            && lots
                .iter()
                .any(|l| t.cell(r, "lot").eq_ignore_ascii_case(l))
            && standing.get(t.cell(r, "number")) == Some(&Standing::Current)
    });
    if certified {
        return Err(trend_file::needs_upgrade(&t.path, "event"));
    }
    Ok(())
}

/// Checks the log's structure and chain; returns the damage if any.
pub fn check(register: &Path) -> Result<Option<trend_file::Damage>> {
    let p = path(register);
    if !p.exists() {
        return Ok(None);
    }
    let text = crate::spec::read_text(&p)?;
    Ok(trend_file::parse_chained(&p, &text, true, &header_ok).1)
}

/// The locked log, open for appending.
pub struct Log {
    locked: Locked,
    /// Where each product's lots were found in its trend file (for the anchors).
    anchors: std::collections::HashMap<String, crate::record::heads::ReverseIndex>,
}

impl Log {
    /// Locks the log (creating it when missing, in the earlier layout only in a register
    /// written before issue #13 that has not been upgraded).
    pub fn lock(register: &Path, wait: Wait) -> Result<Log> {
        let header = new_header(register)?;
        Ok(Log {
            locked: trend_file::lock_with(&path(register), &header, &[], wait, &header_ok)?,
            anchors: Default::default(),
        })
    }

    /// Entries as read under the lock (issues only, not events).
    pub fn entries(&self) -> Vec<Entry> {
        let t = &self.locked.trend;
        t.rows
            .iter()
            .filter(|r| is_issue_row(t, r))
            .map(|r| entry(t, r))
            .collect()
    }

    /// The log as read under the lock (with what was appended since).
    pub fn trend(&self) -> &Trend {
        &self.locked.trend
    }

    /// The standing of every certificate, as the log says under the lock ([`standings`]).
    pub fn standings(&self) -> HashMap<String, Standing> {
        standings(&self.locked.trend)
    }

    /// The lot's certificates that are current (neither superseded nor withdrawn), oldest
    /// first, leaving out the numbers in `except` (certificates of the run that withdraws).
    pub fn current_of_lot(&self, lot: &str, except: &[String]) -> Vec<Entry> {
        let standing = self.standings();
        self.entries()
            .into_iter()
            .filter(|e| e.lot == lot && !except.contains(&e.number))
            .filter(|e| matches!(standing.get(&e.number), Some(Standing::Current)))
            .collect()
    }

    /// Appends event rows (withdrawals, supersessions) and syncs once. A log in an earlier
    /// layout has no `event` column: refused, writing nothing, naming `resinlot upgrade`.
    pub fn append_events(&mut self, events: &[Event]) -> Result<()> {
        if events.is_empty() {
            return Ok(());
        }
        if self.locked.trend.col("event").is_none() {
            return Err(trend_file::needs_upgrade(&self.locked.trend.path, "event"));
        }
        for e in events {
            self.locked.append(&[
                ("issued_at", e.at.clone()),
                ("number", e.number.clone()),
                ("lot", e.lot.clone()),
                ("product", e.product.clone()),
                ("customer", e.customer.clone()),
                ("customer_name", e.customer_name.clone()),
                ("reason", e.reason.clone()),
                ("trend_row", e.trend_row.clone()),
                ("trend_chain", e.trend_chain.clone()),
                ("event", e.kind.as_str().to_string()),
                ("cause", e.cause.clone()),
            ])?;
        }
        self.locked.sync()
    }

    /// Withdraws every current customer certificate of `lot` but those in `except`, because
    /// of trend row `cause` (the row that made the lot rejected or on hold): one `withdrawn`
    /// row each, synced. Returns the certificates withdrawn (their customers must be told).
    /// Internal certificates are QC records of the row they were issued for and stay as they
    /// are (a retest's new internal certificate supersedes the old one).
    pub fn withdraw_lot(
        &mut self,
        lot: &str,
        cause: &Cause,
        except: &[String],
        at: &str,
    ) -> Result<Vec<Entry>> {
        let mut gone = self.current_of_lot(lot, except);
        gone.retain(|e| !e.customer.is_empty());
        let events: Vec<Event> = gone
            .iter()
            .map(|e| Event::withdrawal(e, cause, at))
            .collect();
        self.append_events(&events)?;
        Ok(gone)
    }

    /// What the customer-service desk needs about withdrawn certificate `e`: number,
    /// customer and the purchase order it went with (the log's `po` cell, when it has one).
    pub fn notice(&self, e: &Entry) -> Withdrawn {
        let t = &self.locked.trend;
        let po = t
            .rows
            .iter()
            .find(|r| is_issue_row(t, r) && t.cell(r, "number") == e.number)
            .map(|r| t.cell(r, "po").to_string())
            .unwrap_or_default();
        Withdrawn {
            number: e.number.clone(),
            customer: e.customer.clone(),
            customer_name: e.customer_name.clone(),
            po,
        }
    }

    /// Marks `old` superseded by certificate `new_number` (a reissue), when it is still
    /// current; nothing when it was already superseded or withdrawn.
    pub fn supersede(&mut self, old: &str, new_number: &str, reason: &str, at: &str) -> Result<()> {
        let t = &self.locked.trend;
        let has_event = t
            .rows
            .iter()
            .any(|r| is_event_row(t, r) && t.cell(r, "number") == old);
        // The reissue row itself already names `old`: that supersession is the one recorded.
        let due = match self.standings().get(old) {
            Some(Standing::Current) => true,
            Some(Standing::Superseded { by, .. }) => by == new_number && !has_event,
            _ => false,
        };
        if !due {
            return Ok(());
        }
        let Some(e) = self.entries().into_iter().find(|e| e.number == old) else {
            return Ok(());
        };
        if self.locked.trend.col("event").is_none() {
            // An earlier layout keeps the supersession in the new row's `supersedes` cell.
            return Ok(());
        }
        self.append_events(&[Event {
            kind: EventKind::Superseded,
            number: e.number,
            at: at.to_string(),
            lot: e.lot,
            product: e.product,
            customer: e.customer,
            customer_name: e.customer_name,
            reason: reason.to_string(),
            cause: new_number.to_string(),
            trend_row: String::new(),
            trend_chain: String::new(),
        }])
    }

    /// The next certificate number: `prefix` followed by the six-digit sequence.
    pub fn next_number(&self, prefix: &str) -> String {
        self.number_after(prefix, 0)
    }

    /// The number `k` places after the next one (for numbering a batch before appending it).
    pub fn number_after(&self, prefix: &str, k: usize) -> String {
        format!("{prefix}{:06}", self.certificate_rows() + 1 + k)
    }

    /// Certificates in the log (not layout rows, not event rows), counted as distinct
    /// numbers: a certificate for several lots has a row per lot (issue #16).
    fn certificate_rows(&self) -> usize {
        let t = &self.locked.trend;
        let mut numbers: Vec<&str> = t
            .rows
            .iter()
            .filter(|r| is_issue_row(t, r))
            .map(|r| t.cell(r, "number"))
            .collect();
        numbers.sort_unstable();
        numbers.dedup();
        numbers.len()
    }

    /// Appends an entry and syncs it to disk; the lot's latest row in its trend file is
    /// recorded as the certificate's anchor (a log in the earlier layout has no column for it).
    pub fn append(&mut self, e: &Entry) -> Result<()> {
        self.append_all(std::slice::from_ref(e))
    }

    /// Appends the rows of one certificate (one per lot, the same number) in a single write
    /// and syncs them: every row is encoded (and a value the log's layout has no column for
    /// refused) before anything is written, so a refusal writes no row (issue #16).
    pub fn append_all(&mut self, rows: &[Entry]) -> Result<()> {
        let mut cells = Vec::with_capacity(rows.len());
        for e in rows {
            cells.push(self.cells(e)?);
        }
        self.locked.append_rows(&cells)?;
        self.locked.sync()
    }

    /// Checks, writing nothing, that each of `rows` could be appended: a value for a column
    /// the log's layout lacks is refused naming `resinlot upgrade`, a cell that would not read
    /// back is refused naming its column.
    pub fn check_rows(&mut self, rows: &[Entry]) -> Result<()> {
        for e in rows {
            let cells = self.cells(e)?;
            trend_file::encode_row(&self.locked.trend, &cells)?;
        }
        Ok(())
    }

    /// The cells of `e`'s row, its anchor included.
    fn cells(&mut self, e: &Entry) -> Result<Vec<(&'static str, String)>> {
        let (trend_row, trend_chain) = self.anchor(&e.product, &e.lot)?;
        Ok(vec![
            ("trend_row", trend_row),
            ("trend_chain", trend_chain),
            ("issued_at", e.issued_at.clone()),
            ("number", e.number.clone()),
            ("lot", e.lot.clone()),
            ("product", e.product.clone()),
            ("customer", e.customer.clone()),
            ("customer_name", e.customer_name.clone()),
            ("file", e.file.clone()),
            ("sha256", e.sha256.clone()),
            ("supersedes", e.supersedes.clone()),
            ("reason", e.reason.clone()),
            ("json_sha256", e.json_sha256.clone()),
            ("po", e.po.clone()),
            ("quantity", e.quantity.clone()),
        ])
    }

    /// The row number and chain value of the latest row of `lot` in `product`'s trend file
    /// beside the log (empty when it is not recorded there).
    fn anchor(&mut self, product: &str, lot: &str) -> Result<(String, String)> {
        if self.locked.trend.col("trend_row").is_none() {
            return Ok((String::new(), String::new()));
        }
        let register = self.locked.trend.path.parent().unwrap_or(Path::new("."));
        let trend = trend_file::path_for(register, product);
        let index = self
            .anchors
            .entry(product.to_string())
            .or_insert_with(|| crate::record::heads::ReverseIndex::new(&trend));
        Ok(match index.find(lot)? {
            Some((row, chain)) => (row.to_string(), chain),
            None => (String::new(), String::new()),
        })
    }
}

/// The header a new log gets: the current layout, or the earlier one in a register written
/// before issue #13 that has not been upgraded (so that it stays in one layout).
fn new_header(register: &Path) -> Result<String> {
    Ok(
        if crate::record::heads::state(register)? == crate::record::heads::State::Legacy {
            COLUMNS_V1.join(",")
        } else {
            COLUMNS.join(",")
        },
    )
}

impl Log {
    /// The log's path.
    pub fn path(&self) -> &Path {
        &self.locked.trend.path
    }

    /// True when the log has the column `name` (the layout-v3 columns are missing from a log
    /// in an earlier layout until `resinlot upgrade`).
    pub fn has_column(&self, name: &str) -> bool {
        self.locked.trend.col(name).is_some()
    }

    /// True when the log did not exist (or was empty) when it was locked and nothing has been
    /// logged since: numbering from it alone would start again at 000001 (issue #13, item 9).
    pub fn is_new(&self) -> bool {
        self.locked.is_fresh()
    }

    /// The highest certificate sequence number the log has used: its row count, or a larger
    /// number written with `prefix` in its `number` column (issue #13, item 8).
    pub fn highest_number(&self, prefix: &str) -> u64 {
        let t = &self.locked.trend;
        t.rows
            .iter()
            .filter_map(|r| number_seq(t.cell(r, "number"), prefix))
            .fold(self.certificate_rows() as u64, u64::max)
    }
}

/// The sequence number of certificate number `number` written with `prefix` ("FW-000012" with
/// "FW-" is 12); `None` for another prefix or a number without digits after the prefix.
pub fn number_seq(number: &str, prefix: &str) -> Option<u64> {
    let digits = number.strip_prefix(prefix)?;
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    digits.parse().ok()
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::Duration;

    #[test]
    fn numbers_are_sequential_and_entries_round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let mut log = Log::lock(dir.path(), wait).unwrap();
        assert_eq!(log.next_number("FW-"), "FW-000001");
        let e = Entry {
            number: "FW-000001".into(),
            issued_at: "2026-10-01T10:00:00Z".into(),
            lot: "L1".into(),
            product: "P".into(),
            customer: "acme".into(),
            customer_name: "A, B & \"C\"".into(),
            file: "L1_FW-000001.pdf".into(),
            sha256: "ab".into(),
            supersedes: String::new(),
            reason: String::new(),
            po: "PO 1".into(),
            quantity: "20 t".into(),
            json_sha256: "cd".into(),
        };
        log.append(&e).unwrap();
        assert_eq!(log.next_number("FW-"), "FW-000002");
        drop(log);
        assert_eq!(entries(dir.path()).unwrap(), vec![e]);
    }

    /// Issue #13 items 8 and 9: a new log is known as such, and the highest number counts a
    /// number beyond the row count.
    #[test]
    fn highest_number_and_a_new_log_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let mut log = Log::lock(dir.path(), wait).unwrap();
        assert!(log.is_new());
        assert_eq!(log.highest_number("FW-"), 0);
        log.append(&entry("FW-000007")).unwrap();
        assert!(!log.is_new());
        assert_eq!(log.highest_number("FW-"), 7);
        assert_eq!(log.highest_number("XY-"), 1);
        drop(log);
        assert!(!Log::lock(dir.path(), wait).unwrap().is_new());
        assert_eq!(number_seq("FW-000012", "FW-"), Some(12));
        assert_eq!(number_seq("FW-", "FW-"), None);
        assert_eq!(number_seq("FW-12a", "FW-"), None);
    }

    fn entry(number: &str) -> Entry {
        Entry {
            number: number.into(),
            issued_at: "2026-10-01T10:00:00Z".into(),
            lot: "L1".into(),
            product: "P".into(),
            customer: String::new(),
            customer_name: String::new(),
            file: format!("L1_{number}.pdf"),
            sha256: "ab".into(),
            supersedes: String::new(),
            reason: String::new(),
            ..Default::default()
        }
    }

    fn customer_entry(number: &str, supersedes: &str) -> Entry {
        Entry {
            customer: "acme".into(),
            customer_name: "Acme Foams".into(),
            supersedes: supersedes.into(),
            reason: if supersedes.is_empty() {
                String::new()
            } else {
                "PO corrected".into()
            },
            ..entry(number)
        }
    }

    /// Issue #14: event rows are not certificates (not entries, not numbered); a reissue row
    /// or a `superseded` event supersedes, a `withdrawn` event withdraws, the first decides;
    /// withdrawals take customer certificates only.
    #[test]
    fn events_give_each_certificate_its_standing_issue_14() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let mut log = Log::lock(dir.path(), wait).unwrap();
        log.append(&entry("FW-000001")).unwrap(); // internal, L1
        log.append(&customer_entry("FW-000002", "")).unwrap();
        log.append(&customer_entry("FW-000003", "FW-000002"))
            .unwrap();
        log.supersede(
            "FW-000002",
            "FW-000003",
            "PO corrected",
            "2026-10-02T00:00:00Z",
        )
        .unwrap();
        // Only once: the event is there now.
        log.supersede(
            "FW-000002",
            "FW-000003",
            "PO corrected",
            "2026-10-02T00:00:00Z",
        )
        .unwrap();
        assert_eq!(log.next_number("FW-"), "FW-000004");
        let cause = Cause {
            product: "P".into(),
            row: 7,
            chain: "abc".into(),
            reason: "lot rejected by retest (row 7)".into(),
        };
        let gone = log
            .withdraw_lot("L1", &cause, &[], "2026-10-03T00:00:00Z")
            .unwrap();
        assert_eq!(
            gone.iter().map(|e| e.number.as_str()).collect::<Vec<_>>(),
            ["FW-000003"],
            "the current customer certificate only"
        );
        assert_eq!(log.notice(&gone[0]).customer_name, "Acme Foams");
        assert_eq!(log.next_number("FW-"), "FW-000004", "events take no number");
        // Withdrawn again: nothing is current any more.
        assert!(log
            .withdraw_lot("L1", &cause, &[], "2026-10-04T00:00:00Z")
            .unwrap()
            .is_empty());
        drop(log);
        assert_eq!(entries(dir.path()).unwrap().len(), 3);
        let t = read(dir.path()).unwrap().unwrap();
        let st = standings(&t);
        assert_eq!(st["FW-000001"], Standing::Current);
        assert_eq!(
            st["FW-000002"],
            Standing::Superseded {
                by: "FW-000003".into(),
                at: "2026-10-01T10:00:00Z".into(),
                reason: "PO corrected".into()
            }
        );
        assert_eq!(
            st["FW-000003"],
            Standing::Withdrawn {
                at: "2026-10-03T00:00:00Z".into(),
                reason: "lot rejected by retest (row 7)".into(),
                cause: "P.csv row 7".into()
            }
        );
        let events: Vec<&str> = t
            .rows
            .iter()
            .filter(|r| is_event_row(&t, r))
            .map(|r| t.cell(r, "event"))
            .collect();
        assert_eq!(events, ["superseded", "withdrawn"]);
        // The withdrawal anchors the causing row.
        let a = anchors(&t);
        assert!(a
            .iter()
            .any(|a| a.row == 7 && a.chain == "abc" && a.number == "FW-000003"));
    }

    /// Issue #14: a log in an earlier layout cannot record a withdrawal: refused before
    /// anything is written, naming `resinlot upgrade`, when the lot has a customer certificate.
    #[test]
    fn an_earlier_log_refuses_withdrawals_issue_14() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        std::fs::write(path(dir.path()), format!("{}\n", COLUMNS_V2.join(","))).unwrap();
        let mut log = Log::lock(dir.path(), wait).unwrap();
        log.append(&entry("FW-000001")).unwrap();
        drop(log);
        assert!(
            check_withdrawable(dir.path(), &["L1"]).is_ok(),
            "internal only"
        );
        let mut log = Log::lock(dir.path(), wait).unwrap();
        log.append(&customer_entry("FW-000002", "")).unwrap();
        drop(log);
        let e = check_withdrawable(dir.path(), &["l1"])
            .unwrap_err()
            .to_string();
        assert!(e.contains("resinlot upgrade"), "{e}");
        assert!(check_withdrawable(dir.path(), &["L2"]).is_ok());
    }

    /// Issue #13: a log in the earlier layout is appended to as it is, without anchors.
    #[test]
    fn a_log_in_the_earlier_layout_stays_in_it_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        std::fs::write(path(dir.path()), format!("{}\n", COLUMNS_V1.join(","))).unwrap();
        assert_eq!(layout(dir.path()).unwrap(), Some(Layout::V1));
        let mut log = Log::lock(dir.path(), wait).unwrap();
        log.append(&entry("FW-000001")).unwrap();
        drop(log);
        let text = std::fs::read_to_string(path(dir.path())).unwrap();
        assert!(
            text.starts_with(&format!("{}\n1,", COLUMNS_V1.join(","))),
            "{text}"
        );
        assert_eq!(entries(dir.path()).unwrap(), vec![entry("FW-000001")]);
    }

    /// Issue #13: a layout row is not a certificate: not an entry, not counted in numbering;
    /// a certificate row records the lot's latest trend row as its anchor.
    #[test]
    fn layout_rows_are_not_certificates_and_entries_are_anchored_issue_13() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let keys = vec!["acid_value".to_string()];
        let trend = trend_file::path_for(dir.path(), "P");
        let chain = trend_file::write_for_test(&trend, &keys, &[vec![("lot", "L1".into())]]);
        // Trend rows and no heads file: a register from before issue #13, whose new log
        // would take the earlier layout; with a heads file it takes the current one.
        assert_eq!(new_header(dir.path()).unwrap(), COLUMNS_V1.join(","));
        let heads = crate::record::heads::path(dir.path());
        std::fs::write(
            heads,
            format!("{}\n", crate::record::heads::COLUMNS.join(",")),
        )
        .unwrap();
        let mut log = Log::lock(dir.path(), wait).unwrap();
        log.append(&entry("")).unwrap();
        assert_eq!(log.next_number("FW-"), "FW-000001");
        log.append(&entry("FW-000001")).unwrap();
        assert_eq!(log.next_number("FW-"), "FW-000002");
        assert_eq!(log.entries(), vec![entry("FW-000001")]);
        drop(log);
        let text = std::fs::read_to_string(path(dir.path())).unwrap();
        let t = trend_file::parse_chained(&path(dir.path()), &text, true, &header_ok).0;
        let a = anchors(&t);
        assert_eq!(a.len(), 1);
        assert_eq!(
            (a[0].row, a[0].chain.as_str(), a[0].line),
            (1, chain.as_str(), 3)
        );
    }

    /// Issue #16: the rows of a several-lot certificate gather under one number and count as
    /// one certificate; a reissue supersedes; a refused row writes none of the batch.
    #[test]
    fn certificates_gather_lots_and_read_their_status_issue_16() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Wait {
            timeout: Duration::from_secs(5),
        };
        let row = |number: &str, lot: &str, supersedes: &str| Entry {
            lot: lot.into(),
            po: "4711".into(),
            ..customer_entry(number, supersedes)
        };
        let mut log = Log::lock(dir.path(), wait).unwrap();
        log.append_all(&[row("FW-000001", "L1", ""), row("FW-000001", "L2", "")])
            .unwrap();
        assert_eq!(log.next_number("FW-"), "FW-000002");
        log.append_all(&[row("FW-000002", "L3", "")]).unwrap();
        log.append_all(&[row("FW-000003", "L1", "FW-000001")])
            .unwrap();
        let c = certificates(&log.entries(), &log.standings());
        assert_eq!(c.len(), 3);
        assert_eq!(c[0].lots, ["L1", "L2"]);
        assert_eq!(c[0].status, CertStatus::Superseded);
        assert_eq!(c[1].status, CertStatus::Current);
        assert_eq!(c[2].po, "4711");
        drop(log);
        assert_eq!(all_certificates(dir.path()).unwrap(), c);

        let old = tempfile::tempdir().unwrap();
        std::fs::write(path(old.path()), format!("{}\n", COLUMNS_V2.join(","))).unwrap();
        let mut log = Log::lock(old.path(), wait).unwrap();
        let before = std::fs::read(path(old.path())).unwrap();
        let e = log
            .append_all(&[entry("FW-000001"), row("FW-000001", "L2", "")])
            .unwrap_err()
            .to_string();
        assert!(e.contains("resinlot upgrade"), "{e}");
        assert!(log.check_rows(&[row("FW-000001", "L2", "")]).is_err());
        assert_eq!(std::fs::read(path(old.path())).unwrap(), before);
    }
}
