//! The certificate issue log: every certificate issued, hash-chained like the trend files.

use std::path::{Path, PathBuf};

use crate::error::Result;
use crate::record::trend_file::{self, Locked, Trend, Wait};

/// Columns of the issue log.
pub const COLUMNS: [&str; 12] = [
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

fn header_ok(cols: &[String]) -> bool {
    cols == COLUMNS
}

/// One issued certificate.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
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
    }
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
    Ok(t.rows.iter().map(|r| entry(&t, r)).collect())
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
}

impl Log {
    /// Locks the log (creating it when missing).
    pub fn lock(register: &Path, wait: Wait) -> Result<Log> {
        let header = COLUMNS.join(",");
        Ok(Log {
            locked: trend_file::lock_with(&path(register), &header, &[], wait, &header_ok)?,
        })
    }

    /// Entries as read under the lock.
    pub fn entries(&self) -> Vec<Entry> {
        let t = &self.locked.trend;
        t.rows.iter().map(|r| entry(t, r)).collect()
    }

    /// The next certificate number: `prefix` followed by the six-digit sequence.
    pub fn next_number(&self, prefix: &str) -> String {
        self.number_after(prefix, 0)
    }

    /// The number `k` places after the next one (for numbering a batch before appending it).
    pub fn number_after(&self, prefix: &str, k: usize) -> String {
        format!("{prefix}{:06}", self.locked.trend.rows.len() + 1 + k)
    }

    /// Appends an entry and syncs it to disk.
    pub fn append(&mut self, e: &Entry) -> Result<()> {
        self.locked.append(&[
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
        ])?;
        self.locked.sync()
    }
}

impl Log {
    /// The log's path.
    pub fn path(&self) -> &Path {
        &self.locked.trend.path
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
            .fold(t.rows.len() as u64, u64::max)
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
        log.append(&Entry {
            number: "FW-000007".into(),
            issued_at: "2026-10-01T10:00:00Z".into(),
            lot: "L1".into(),
            product: "P".into(),
            customer: String::new(),
            customer_name: String::new(),
            file: "L1_FW-000007.pdf".into(),
            sha256: "ab".into(),
            supersedes: String::new(),
            reason: String::new(),
        })
        .unwrap();
        assert!(!log.is_new());
        assert_eq!(log.highest_number("FW-"), 7);
        assert_eq!(log.highest_number("XY-"), 1);
        drop(log);
        assert!(!Log::lock(dir.path(), wait).unwrap().is_new());
        assert_eq!(number_seq("FW-000012", "FW-"), Some(12));
        assert_eq!(number_seq("FW-", "FW-"), None);
        assert_eq!(number_seq("FW-12a", "FW-"), None);
    }
}
