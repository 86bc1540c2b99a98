//! A lot's life after its first decision, as the record holds it (issue #14): disposition
//! rows and retests read from a lot's trend rows, its shelf life, and the withdrawals the
//! certificate log owes.
//!
//! **Order of writing a withdrawal.** The trend row that rejects or holds the lot (a retest
//! or a disposition) is appended and synced first, then one `withdrawn` row per current
//! customer certificate of the lot goes to the certificate log, naming that trend row in `cause`,
//! `trend_row` and `trend_chain`. A kill between the two leaves certificates issued before
//! a withholding row still current: [`owed_withdrawals`] finds exactly those (`verify`
//! reports them) and [`complete_withdrawals`] appends the missing rows (`verify
//! --quarantine`), with the reason the command would have written.

use std::collections::BTreeMap;
use std::path::Path;

use chrono::NaiveDate;

use crate::error::Result;
use crate::lot::disposition::{self, Decision, Standing as LotStanding};
use crate::lot::evaluate::Status;
use crate::record::certlog::{self, Cause, Entry, Log, Standing};
use crate::record::trend_file::{self, Row, Trend, Wait};

/// The disposition a trend row records, when it is a disposition row.
pub fn disposition_of(t: &Trend, row: &Row) -> Option<Decision> {
    Decision::parse(t.cell(row, "disposition"))
}

/// Where the lot of `row` (its latest row) stands, for the disposition rules; `None` when
/// the status cell cannot be read.
pub fn standing_of(t: &Trend, row: &Row) -> Option<LotStanding> {
    Some(LotStanding {
        status: Status::parse(t.cell(row, "status"))?,
        disposition: disposition_of(t, row),
    })
}

/// True for a retest row: it supersedes an earlier row with new results (a disposition row
/// also supersedes, but carries the results it copied).
pub fn is_retest_row(t: &Trend, row: &Row) -> bool {
    !t.cell(row, "supersedes").is_empty() && t.cell(row, "disposition").is_empty()
}

/// The date a row's results were obtained: its `tested_to` date when recorded, else the day
/// it was recorded.
pub fn test_date(t: &Trend, row: &Row) -> Option<NaiveDate> {
    let tested = t.cell(row, "tested_to");
    let text = if tested.len() >= 10 {
        tested
    } else {
        t.cell(row, "recorded_at")
    };
    NaiveDate::parse_from_str(text.get(..10)?, "%Y-%m-%d").ok()
}

/// The test date of the lot's latest retest among `rows` (any order), if any.
pub fn latest_retest(t: &Trend, rows: &[&Row]) -> Option<NaiveDate> {
    rows.iter()
        .filter(|r| is_retest_row(t, r))
        .filter_map(|r| test_date(t, r))
        .max()
}

/// The lot's retest date from its rows ([`disposition::retest_date`]): manufacture date of
/// `latest` + `months`, extended by a retest on or after that date.
pub fn retest_date(t: &Trend, rows: &[&Row], latest: &Row, months: u32) -> Option<NaiveDate> {
    let made = NaiveDate::parse_from_str(t.cell(latest, "manufactured"), "%Y-%m-%d").ok()?;
    disposition::retest_date(made, months, latest_retest(t, rows))
}

/// Why a row withholds the lot, as the withdrawal rows record it: "lot rejected by retest
/// (row 9): re-titrated", "lot on hold by QA disposition (rework, row 12): agitator failure".
pub fn withholding_reason(t: &Trend, row: &Row) -> String {
    let by = match disposition_of(t, row) {
        Some(d) => format!(
            "QA disposition ({}, row {})",
            d.as_str(),
            t.cell(row, "seq")
        ),
        None if is_retest_row(t, row) => format!("retest (row {})", t.cell(row, "seq")),
        None => format!("decision (row {})", t.cell(row, "seq")),
    };
    let reason = t.cell(row, "reason");
    format!(
        "lot {} by {by}{}",
        t.cell(row, "status").replace('_', " "),
        if reason.is_empty() {
            String::new()
        } else {
            format!(": {reason}")
        }
    )
}

/// The cause of a withdrawal: row `row` of `t` (the trend file of `product`).
pub fn cause_of(t: &Trend, row: &Row, product: &str) -> Cause {
    Cause {
        product: product.to_string(),
        row: t.cell(row, "seq").parse().unwrap_or(0),
        chain: row.cells.last().cloned().unwrap_or_default(),
        reason: withholding_reason(t, row),
    }
}

/// A withdrawal the log owes: certificate `entry` is still current although trend row
/// `cause` (later than the row it certifies) made its lot rejected or on hold.
#[derive(Debug, Clone, PartialEq)]
pub struct Owed {
    /// The certificate.
    pub entry: Entry,
    /// Line of its issue row in the log.
    pub line: usize,
    /// The withholding row.
    pub cause: Cause,
}

/// The withdrawals `log` owes (see the module's note on order): only a log in the current
/// layout can record withdrawals, so an earlier one owes none. Trend files that cannot be
/// read intact are skipped (`verify` reports them on their own).
pub fn owed_withdrawals(register: &Path, log: &Trend) -> Result<Vec<Owed>> {
    if log.col("event").is_none() {
        return Ok(Vec::new());
    }
    let standing = certlog::standings(log);
    let mut trends: BTreeMap<String, Option<Trend>> = BTreeMap::new();
    let mut out = Vec::new();
    for r in log.rows.iter().filter(|r| certlog::is_issue_row(log, r)) {
        let number = log.cell(r, "number");
        // Only customer certificates are withdrawn (see `Log::withdraw_lot`).
        if log.cell(r, "customer").is_empty() || standing.get(number) != Some(&Standing::Current) {
            continue;
        }
        let Ok(anchor) = log.cell(r, "trend_row").parse::<usize>() else {
            continue;
        };
        let product = log.cell(r, "product").to_string();
        let lot = log.cell(r, "lot");
        let trend = trends.entry(product.clone()).or_insert_with(|| {
            let p = trend_file::path_for(register, &product);
            trend_file::read(&p).ok()
        });
        let Some(t) = trend.as_ref() else {
            continue;
        };
        let mut rows = t.lot_rows(lot);
        rows.reverse();
        let withholding = rows.into_iter().find(|row| {
            t.cell(row, "seq")
                .parse::<usize>()
                .is_ok_and(|s| s > anchor)
                && Status::parse(t.cell(row, "status")).is_some_and(disposition::withdraws)
        });
        if let Some(row) = withholding {
            out.push(Owed {
                entry: certlog::entry_of(log, r),
                line: r.line,
                cause: cause_of(t, row, &product),
            });
        }
    }
    Ok(out)
}

/// Appends, under the log's lock, the withdrawal rows the log owes ([`owed_withdrawals`],
/// found again under the lock), and records each in `quarantine.log`. Returns one line per
/// certificate withdrawn.
pub fn complete_withdrawals(register: &Path, now: &str, wait: Wait) -> Result<Vec<String>> {
    let Some(t) = certlog::read(register)? else {
        return Ok(Vec::new());
    };
    if owed_withdrawals(register, &t)?.is_empty() {
        return Ok(Vec::new());
    }
    let mut log = Log::lock(register, wait)?;
    let owed = owed_withdrawals(register, log.trend())?;
    let events: Vec<certlog::Event> = owed
        .iter()
        .map(|o| certlog::Event::withdrawal(&o.entry, &o.cause, now))
        .collect();
    log.append_events(&events)?;
    let mut lines = Vec::new();
    let mut text = String::new();
    for o in &owed {
        let line = format!(
            "{}: recorded the withdrawal of certificate {} of lot {}{}, owed since {} ({})",
            log.path().display(),
            o.entry.number,
            o.entry.lot,
            if o.entry.customer_name.is_empty() {
                String::new()
            } else {
                format!(" (customer {})", o.entry.customer_name)
            },
            o.cause.cell(),
            o.cause.reason
        );
        text.push_str(&format!("{now}\t{line}\n"));
        lines.push(line);
    }
    crate::record::integrity::append_quarantine_log(register, &text)?;
    Ok(lines)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn trend(rows: &[Vec<(&str, String)>]) -> (tempfile::TempDir, Trend) {
        let dir = tempfile::tempdir().unwrap();
        let p = trend_file::path_for(dir.path(), "P");
        let keys = vec!["acid_value".to_string()];
        trend_file::write_for_test(&p, &keys, rows);
        let t = trend_file::read(&p).unwrap();
        (dir, t)
    }

    fn row(lot: &str, status: &str, at: &str) -> Vec<(&'static str, String)> {
        vec![
            ("lot", lot.to_string()),
            ("status", status.to_string()),
            ("manufactured", "2025-11-20".to_string()),
            ("recorded_at", at.to_string()),
        ]
    }

    /// Invented rows: a release, a retest, a disposition; the retest extends shelf life
    /// only when done on or after the retest date (issue #14).
    #[test]
    fn retests_and_dispositions_are_told_apart() {
        let mut retest = row("L1", "released", "2026-11-25T08:00:00Z");
        retest.push(("supersedes", "1".into()));
        retest.push(("reason", "shelf-life retest".into()));
        let mut disp = row("L1", "rejected", "2026-11-26T08:00:00Z");
        disp.push(("supersedes", "2".into()));
        disp.push(("disposition", "rejected".into()));
        disp.push(("reason", "customer complaint".into()));
        let (_d, t) = trend(&[row("L1", "released", "2025-11-21T08:00:00Z"), retest, disp]);
        let rows: Vec<&Row> = t.rows.iter().collect();
        assert!(!is_retest_row(&t, rows[0]));
        assert!(is_retest_row(&t, rows[1]));
        assert!(!is_retest_row(&t, rows[2]));
        assert_eq!(disposition_of(&t, rows[2]), Some(Decision::Rejected));
        let d = |y, m, day| NaiveDate::from_ymd_opt(y, m, day).unwrap();
        assert_eq!(latest_retest(&t, &rows), Some(d(2026, 11, 25)));
        // Made 2025-11-20 + 12 months = 2026-11-20; the retest on 2026-11-25 extends it.
        assert_eq!(retest_date(&t, &rows, rows[2], 12), Some(d(2027, 11, 25)));
        assert_eq!(
            withholding_reason(&t, rows[2]),
            "lot rejected by QA disposition (rejected, row 3): customer complaint"
        );
        let s = standing_of(&t, rows[2]).unwrap();
        assert_eq!(s.status, Status::Rejected);
        let c = cause_of(&t, rows[2], "P");
        assert_eq!((c.row, c.cell()), (3, "P.csv row 3".to_string()));
        assert_eq!(&c.chain, rows[2].cells.last().unwrap());
    }
}
