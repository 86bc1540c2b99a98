//! The injected clock: honours `SOURCE_DATE_EPOCH` so records and certificates are reproducible.

use chrono::{DateTime, Utc};

use crate::error::{Error, Result};

/// Returns "now": `SOURCE_DATE_EPOCH` (seconds since 1970-01-01 UTC) when set, else the system clock.
///
/// Convention: reproducible-builds.org `SOURCE_DATE_EPOCH` specification.
pub fn now() -> Result<DateTime<Utc>> {
    from_env(std::env::var("SOURCE_DATE_EPOCH").ok().as_deref())
}

/// Parses an optional `SOURCE_DATE_EPOCH` value; `None` gives the system clock.
pub fn from_env(value: Option<&str>) -> Result<DateTime<Utc>> {
    match value {
        None | Some("") => Ok(Utc::now()),
        Some(text) => {
            let secs: i64 = text.trim().parse().map_err(|_| {
                Error::invalid(
                    "environment variable SOURCE_DATE_EPOCH",
                    format!("'{text}' is not a whole number of seconds"),
                    "Set it to seconds since 1970-01-01 UTC (e.g. 1767225600) or unset it.",
                )
            })?;
            DateTime::from_timestamp(secs, 0)
                .filter(|t| (0..=LAST_SECOND).contains(&t.timestamp()))
                .ok_or_else(|| {
                    Error::invalid(
                        "environment variable SOURCE_DATE_EPOCH",
                        format!("{secs} is outside the supported date range"),
                        "Use a timestamp between year 1970 and 9999.",
                    )
                })
        }
    }
}

/// 9999-12-31T23:59:59Z in seconds since 1970 (the last instant a four-digit year can write).
const LAST_SECOND: i64 = 253_402_300_799;

/// A date as `NaiveDate::parse_from_str(d, "%Y-%m-%d")` reads it, with the form the record
/// keeps (`YYYY-MM-DD`, ten bytes) read without the format parser: a search may judge a
/// million lots (issue #20) and a results file may hold a million (issue #13, item 11).
pub fn iso_date(d: &str) -> Option<chrono::NaiveDate> {
    let b = d.as_bytes();
    let num = |r: std::ops::Range<usize>| -> Option<u32> {
        b[r].iter().try_fold(0u32, |n, &c| {
            c.is_ascii_digit().then(|| n * 10 + u32::from(c - b'0'))
        })
    };
    if b.len() == 10 && b[4] == b'-' && b[7] == b'-' {
        if let (Some(y), Some(m), Some(day)) = (num(0..4), num(5..7), num(8..10)) {
            return chrono::NaiveDate::from_ymd_opt(y as i32, m, day);
        }
    }
    chrono::NaiveDate::parse_from_str(d, "%Y-%m-%d").ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue #20: the quick date reader agrees with chrono's `%Y-%m-%d` parser.
    #[test]
    fn iso_date_reads_as_chrono_does() {
        for d in [
            "2026-03-01",
            "2024-02-29",
            "2025-02-29",
            "2026-13-01",
            "2026-00-10",
            "0000-01-01",
            "2026-1-01",
            "2026/03/01",
            "",
            "2026-03-0x",
            "9999-12-31",
        ] {
            assert_eq!(
                iso_date(d),
                chrono::NaiveDate::parse_from_str(d, "%Y-%m-%d").ok(),
                "{d}"
            );
        }
    }

    #[test]
    fn epoch_is_honoured() {
        // 1767225600 s = 2026-01-01T00:00:00Z (date arithmetic, common practice).
        let t = from_env(Some("1767225600")).unwrap();
        assert_eq!(t.to_rfc3339(), "2026-01-01T00:00:00+00:00");
    }

    /// Issue #13 item 15: a negative epoch or one past year 9999 is refused.
    #[test]
    fn epoch_outside_1970_to_9999_is_refused_issue_13() {
        assert!(from_env(Some("-1")).is_err());
        assert!(from_env(Some("253402300800")).is_err());
        let last = from_env(Some("253402300799")).unwrap();
        assert_eq!(last.to_rfc3339(), "9999-12-31T23:59:59+00:00");
        assert!(from_env(Some("0")).is_ok());
    }

    #[test]
    fn garbage_epoch_is_refused() {
        assert!(from_env(Some("yesterday")).is_err());
    }
}
