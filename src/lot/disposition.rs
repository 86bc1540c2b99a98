//! QA disposition of a lot after its first decision, and its shelf life (issue #14).
//!
//! The decisions are those ISO 9001:2015 §8.7 ("Control of nonconforming outputs") names for
//! a product that did not plainly conform: release (after QA's review of a held lot), release
//! under *concession* to one customer, *rework*, and *reject*. The rules here are pure: which
//! decision is allowed from which status, what status it leaves, and whether the certificates
//! already issued must be withdrawn. The shelf-life rule gives a lot's retest date.

use chrono::NaiveDate;

use crate::lot::evaluate::Status;

/// A QA disposition.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Decision {
    /// QA releases a held (or incomplete) lot for every customer.
    Released,
    /// QA rejects the lot (any decided lot).
    Rejected,
    /// The lot goes back to the reactor or blender: on hold until new results are recorded.
    Rework,
    /// QA releases a held (or incomplete) lot for one named customer only, under that
    /// customer's concession (deviation) number.
    Concession,
}

impl Decision {
    /// Every decision, in the order the help lists them.
    pub const ALL: [Decision; 4] = [
        Decision::Released,
        Decision::Rejected,
        Decision::Rework,
        Decision::Concession,
    ];

    /// The name used on the command line and in the trend file's `disposition` column.
    pub fn as_str(self) -> &'static str {
        match self {
            Decision::Released => "released",
            Decision::Rejected => "rejected",
            Decision::Rework => "rework",
            Decision::Concession => "concession",
        }
    }

    /// Parses a name written by [`Decision::as_str`].
    pub fn parse(text: &str) -> Option<Decision> {
        Decision::ALL.into_iter().find(|d| d.as_str() == text)
    }

    /// The lot's status after the decision: a concession releases the lot (for its customer
    /// only, which the trend row's `concession_customer` records); rework holds it.
    pub fn status(self) -> Status {
        match self {
            Decision::Released | Decision::Concession => Status::Released,
            Decision::Rejected => Status::Rejected,
            Decision::Rework => Status::OnHold,
        }
    }

    /// Plain words for lookup's history ("released under concession", ...).
    pub fn words(self) -> &'static str {
        match self {
            Decision::Released => "released by QA",
            Decision::Rejected => "rejected by QA",
            Decision::Rework => "sent to rework (on hold until new results)",
            Decision::Concession => "released under concession",
        }
    }
}

/// Where a lot stands before a disposition, as its latest trend row says.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Standing {
    /// The latest row's status.
    pub status: Status,
    /// The latest row's own disposition, when it is a disposition row.
    pub disposition: Option<Decision>,
}

/// Checks `decision` against the lot's `standing` (common practice of QA release under
/// ISO 9001 §8.7; the rules are the issue's):
/// - `released` and `concession` only for a lot `on_hold` or `incomplete`, and not while it
///   awaits new results after a rework (retest it first);
/// - `rejected` for any decided lot not already rejected;
/// - `rework` for any lot not already awaiting rework results.
///
/// Returns the status the lot will have, or why the decision is refused. Pure.
pub fn check(standing: Standing, decision: Decision) -> Result<Status, String> {
    let status = standing.status;
    let awaiting_rework = standing.disposition == Some(Decision::Rework);
    match decision {
        Decision::Released | Decision::Concession => {
            if !matches!(status, Status::OnHold | Status::Incomplete) {
                return Err(format!(
                    "the lot is {}: only a lot on hold or incomplete can be {}",
                    status.as_str().replace('_', " "),
                    if decision == Decision::Released {
                        "released by disposition"
                    } else {
                        "released under concession"
                    }
                ));
            }
            if awaiting_rework {
                return Err("the lot was sent to rework and awaits new results: record them with `release --retest` first".into());
            }
        }
        Decision::Rejected => {
            if status == Status::Rejected {
                return Err("the lot is already rejected".into());
            }
        }
        Decision::Rework => {
            if awaiting_rework {
                return Err("the lot was already sent to rework and awaits new results".into());
            }
        }
    }
    Ok(decision.status())
}

/// True when a lot whose new row (a retest or a disposition) gives it status `after` must have
/// the certificates issued before that row withdrawn: it is now rejected or on hold. Pure.
pub fn withdraws(after: Status) -> bool {
    matches!(after, Status::Rejected | Status::OnHold)
}

/// The lot's retest date (end of shelf life): manufacture date + `months`; a retest whose
/// test date `latest_retest` is on or after that date extends it to the retest's test date +
/// `months` (the latest retest counts). `None` when the date overflows the calendar.
///
/// Common practice for resins sold with a retest period (the retest date is printed on the
/// certificate; a lot past it is retested before it ships); the extension rule is the issue's.
pub fn retest_date(
    manufactured: NaiveDate,
    months: u32,
    latest_retest: Option<NaiveDate>,
) -> Option<NaiveDate> {
    let first = crate::spec::retest_date(manufactured, months)?;
    match latest_retest {
        Some(t) if t >= first => crate::spec::retest_date(t, months),
        _ => Some(first),
    }
}

/// True when the retest date `until` has passed on `today` (the retest date itself is still
/// within shelf life).
pub fn expired(until: NaiveDate, today: NaiveDate) -> bool {
    today > until
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(y: i32, m: u32, day: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(y, m, day).unwrap()
    }

    fn at(status: Status) -> Standing {
        Standing {
            status,
            disposition: None,
        }
    }

    #[test]
    fn only_held_or_incomplete_lots_are_released_by_disposition() {
        for decision in [Decision::Released, Decision::Concession] {
            assert_eq!(check(at(Status::OnHold), decision), Ok(Status::Released));
            assert_eq!(
                check(at(Status::Incomplete), decision),
                Ok(Status::Released)
            );
            let e = check(at(Status::Rejected), decision).unwrap_err();
            assert!(e.contains("the lot is rejected: only a lot on hold"), "{e}");
            assert!(check(at(Status::Released), decision).is_err());
        }
    }

    #[test]
    fn any_decided_lot_can_be_rejected_once() {
        for s in [Status::Released, Status::OnHold, Status::Incomplete] {
            assert_eq!(check(at(s), Decision::Rejected), Ok(Status::Rejected));
        }
        assert_eq!(
            check(at(Status::Rejected), Decision::Rejected),
            Err("the lot is already rejected".into())
        );
    }

    #[test]
    fn rework_holds_the_lot_until_new_results() {
        for s in [
            Status::Released,
            Status::OnHold,
            Status::Rejected,
            Status::Incomplete,
        ] {
            assert_eq!(check(at(s), Decision::Rework), Ok(Status::OnHold));
        }
        let reworked = Standing {
            status: Status::OnHold,
            disposition: Some(Decision::Rework),
        };
        assert!(check(reworked, Decision::Released)
            .unwrap_err()
            .contains("release --retest"));
        assert!(check(reworked, Decision::Concession).is_err());
        assert!(check(reworked, Decision::Rework).is_err());
        assert_eq!(check(reworked, Decision::Rejected), Ok(Status::Rejected));
    }

    #[test]
    fn withdrawal_follows_rejection_or_hold() {
        assert!(withdraws(Status::Rejected));
        assert!(withdraws(Status::OnHold));
        assert!(!withdraws(Status::Released));
        assert!(!withdraws(Status::Incomplete));
    }

    #[test]
    fn names_round_trip() {
        for d in Decision::ALL {
            assert_eq!(Decision::parse(d.as_str()), Some(d));
        }
        assert_eq!(Decision::parse("hold"), None);
    }

    /// Retest dates by calendar months (the spec's `retest_months`); the extension rule of
    /// issue #14 on invented dates.
    #[test]
    fn a_retest_on_or_after_the_retest_date_extends_it() {
        let made = d(2025, 11, 20);
        assert_eq!(retest_date(made, 12, None), Some(d(2026, 11, 20)));
        // A retest before the retest date does not move it.
        assert_eq!(
            retest_date(made, 12, Some(d(2026, 6, 1))),
            Some(d(2026, 11, 20))
        );
        // On the date, or after it, it starts a new period from the test date.
        assert_eq!(
            retest_date(made, 12, Some(d(2026, 11, 20))),
            Some(d(2027, 11, 20))
        );
        assert_eq!(
            retest_date(made, 6, Some(d(2026, 12, 5))),
            Some(d(2027, 6, 5))
        );
        assert!(!expired(d(2026, 11, 20), d(2026, 11, 20)));
        assert!(expired(d(2026, 11, 20), d(2026, 11, 21)));
    }
}
