//! Shipments: the customer certificates the log records, one per delivery (issue #16).
//!
//! A delivery is a customer, a purchase order and one or more lots of one product; its
//! certificate's log rows (one per lot, one number) are gathered by
//! [`crate::record::certlog::certificates`]. This module holds the rules `certify` applies
//! before issuing (a new purchase order is a new certificate; the same lot, customer and
//! purchase order again is a reissue) and the query behind `resinlot shipments`.

use chrono::NaiveDate;

use crate::error::{Error, Result};
use crate::record::certlog::{CertStatus, Certificate};
use crate::spec::customer::Customer;

/// One delivery about to be certified.
#[derive(Debug, Clone, Copy)]
pub struct Delivery<'a> {
    /// Customer file stem.
    pub customer: &'a str,
    /// Purchase order (empty when none was given).
    pub po: &'a str,
    /// The lots shipped.
    pub lots: &'a [&'a str],
}

/// Refuses a lot named twice on one certificate.
pub fn check_distinct(lots: &[String]) -> Result<()> {
    for (i, lot) in lots.iter().enumerate() {
        if lots[..i].contains(lot) {
            return Err(Error::invalid(
                format!("lot {lot}"),
                "the lot is named twice",
                "Name each lot of the delivery once.",
            ));
        }
    }
    Ok(())
}

/// The one spec revision the lots were released under (a certificate names one); refuses lots
/// released under different revisions, naming each lot's.
pub fn one_revision<'a>(lots: impl Iterator<Item = (&'a str, &'a str)>) -> Result<&'a str> {
    let lots: Vec<(&str, &str)> = lots.collect();
    let first = lots.first().map_or("", |l| l.1);
    if lots.iter().all(|l| l.1 == first) {
        return Ok(first);
    }
    Err(Error::invalid(
        "certify",
        format!(
            "the lots were released under different spec revisions ({}), and a certificate names one",
            lots.iter()
                .map(|(lot, rev)| format!("{lot}: {rev}"))
                .collect::<Vec<_>>()
                .join(", ")
        ),
        "Certify the lots of each revision on their own certificate.",
    ))
}

/// The current certificate a new certificate for `d` would reissue: one already issued to the
/// same customer on the same purchase order for any of its lots. `None` when there is none (a
/// new purchase order is a new delivery); refuses when the lots are on several such
/// certificates, which one reissue cannot replace.
pub fn reissue_of(certs: &[Certificate], d: &Delivery) -> Result<Option<Certificate>> {
    let mut hits: Vec<Certificate> = certs
        .iter()
        .filter(|c| {
            c.status == CertStatus::Current
                && c.customer == d.customer
                && c.po == d.po
                && c.lots.iter().any(|l| d.lots.contains(&l.as_str()))
        })
        .cloned()
        .collect();
    match hits.len() {
        0 | 1 => Ok(hits.pop()),
        _ => Err(Error::invalid(
            format!("lots {}", d.lots.join(", ")),
            format!(
                "these lots are on {} current certificates for this customer and purchase order ({}), and one reissue replaces one certificate",
                hits.len(),
                hits.iter()
                    .map(|c| c.number.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            "Reissue each of those certificates with its own lots and --reason.",
        )),
    }
}

/// What `resinlot shipments` asks; every filter is optional.
#[derive(Debug, Clone, Default)]
pub struct Query<'a> {
    /// Customer file stem or legal name (case-insensitive).
    pub customer: Option<&'a str>,
    /// A lot the certificate covers.
    pub lot: Option<&'a str>,
    /// Purchase order.
    pub po: Option<&'a str>,
    /// The customer's part number (looked up in their customer file).
    pub part_number: Option<&'a str>,
    /// Issued on or after this day (UTC).
    pub since: Option<NaiveDate>,
    /// Issued on or before this day (UTC).
    pub until: Option<NaiveDate>,
}

/// The customer's part number for `product`, from their file among `customers`.
pub fn part_number<'c>(
    customers: &'c [Customer],
    customer: &str,
    product: &str,
) -> Option<&'c str> {
    customers
        .iter()
        .find(|c| c.id == customer)?
        .products
        .get(product)?
        .part_number
        .as_deref()
}

/// The customer certificates among `certs` that meet `q`, newest first (internal certificates
/// are not shipments). Part numbers are read from `customers`.
pub fn shipments(certs: &[Certificate], q: &Query, customers: &[Customer]) -> Vec<Certificate> {
    let since = q.since.map(|d| d.to_string());
    let until = q.until.map(|d| d.to_string());
    let mut out: Vec<Certificate> = certs
        .iter()
        .filter(|c| !c.customer.is_empty())
        .filter(|c| {
            q.customer.is_none_or(|n| {
                c.customer.eq_ignore_ascii_case(n) || c.customer_name.eq_ignore_ascii_case(n)
            })
        })
        .filter(|c| q.lot.is_none_or(|l| c.lots.iter().any(|x| x == l)))
        .filter(|c| q.po.is_none_or(|p| c.po == p))
        .filter(|c| {
            q.part_number
                .is_none_or(|pn| part_number(customers, &c.customer, &c.product) == Some(pn))
        })
        .filter(|c| {
            let day = c.issued_at.get(..10).unwrap_or("");
            since.as_deref().is_none_or(|s| day >= s) && until.as_deref().is_none_or(|u| day <= u)
        })
        .cloned()
        .collect();
    out.reverse();
    out.sort_by(|a, b| b.issued_at.cmp(&a.issued_at));
    out
}

/// Refuses a customer that no customer file in `dir` names by file stem or legal name (a typo
/// would otherwise list nothing), naming the known ones; `place` is where it was given
/// (`--customer 'X'`).
pub fn known_customer(
    place: &str,
    name: &str,
    customers: &[Customer],
    dir: &std::path::Path,
) -> Result<()> {
    if customers
        .iter()
        .any(|c| c.id.eq_ignore_ascii_case(name) || c.name.eq_ignore_ascii_case(name))
    {
        return Ok(());
    }
    Err(Error::invalid(
        place,
        format!(
            "no customer file in {} has this file name or legal name",
            dir.display()
        ),
        format!(
            "Known customers: {}.",
            customers
                .iter()
                .map(|c| c.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    ))
}

/// The columns of `shipments --csv` (and of the web page's CSV download), in order.
pub const COLUMNS: [&str; 9] = [
    "number",
    "issued",
    "customer",
    "po",
    "quantity",
    "lots",
    "product",
    "status",
    "supersedes",
];

/// One certificate's cells under [`COLUMNS`] (lots separated by spaces, the issue time in full).
pub fn cells(c: &Certificate) -> [String; 9] {
    [
        c.number.clone(),
        c.issued_at.clone(),
        c.customer_name.clone(),
        c.po.clone(),
        c.quantity.clone(),
        c.lots.join(" "),
        c.product.clone(),
        c.status.as_str().to_string(),
        c.supersedes.clone(),
    ]
}

/// `found` as CSV: a header of [`COLUMNS`] and one line per certificate.
pub fn csv_text(found: &[Certificate]) -> Result<String> {
    let fail = |e: &dyn std::fmt::Display| {
        Error::invalid(
            "shipments",
            format!("cannot write the CSV: {e}"),
            "Report this as a bug in resinlot.",
        )
    };
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(COLUMNS).map_err(|e| fail(&e))?;
    for c in found {
        w.write_record(cells(c)).map_err(|e| fail(&e))?;
    }
    let bytes = w.into_inner().map_err(|e| fail(&e))?;
    String::from_utf8(bytes).map_err(|e| fail(&e))
}

/// `found` as the plain table `resinlot shipments` prints (issue day only, no supersedes
/// column), with a count line.
pub fn table_text(found: &[Certificate]) -> String {
    let mut rows = vec![COLUMNS[..8]
        .iter()
        .map(|s| s.to_string())
        .collect::<Vec<_>>()];
    for c in found {
        let mut r = cells(c).to_vec();
        r.truncate(8);
        r[1] = c.issued_at.get(..10).unwrap_or(&c.issued_at).to_string();
        rows.push(r);
    }
    let mut t = crate::support::table::render(&rows);
    let current = found
        .iter()
        .filter(|c| c.status == CertStatus::Current)
        .count();
    t.push_str(&format!(
        "{} certificate{} ({current} current).\n",
        found.len(),
        if found.len() == 1 { "" } else { "s" }
    ));
    t
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::certlog::{certificates, Entry};

    /// Invented log rows.
    fn row(number: &str, lot: &str, customer: &str, po: &str, at: &str) -> Entry {
        Entry {
            number: number.into(),
            issued_at: at.into(),
            lot: lot.into(),
            product: "P".into(),
            customer: customer.into(),
            customer_name: customer.to_uppercase(),
            po: po.into(),
            ..Default::default()
        }
    }

    fn log() -> Vec<Certificate> {
        let rows = vec![
            row("FW-000001", "L1", "", "", "2026-10-01T08:00:00Z"),
            row("FW-000002", "L1", "acme", "4711", "2026-10-02T08:00:00Z"),
            row("FW-000002", "L2", "acme", "4711", "2026-10-02T08:00:00Z"),
            row("FW-000003", "L1", "acme", "4712", "2026-10-03T08:00:00Z"),
            row("FW-000004", "L3", "brix", "9", "2026-10-03T08:00:00Z"),
        ];
        certificates(&rows, &Default::default())
    }

    #[test]
    fn a_new_po_is_a_new_delivery_and_the_same_po_a_reissue_issue_16() {
        let entries = log();
        let new_po = Delivery {
            customer: "acme",
            po: "4713",
            lots: &["L1"],
        };
        assert_eq!(reissue_of(&entries, &new_po).unwrap(), None);
        let again = Delivery {
            po: "4711",
            lots: &["L2"],
            ..new_po
        };
        assert_eq!(
            reissue_of(&entries, &again).unwrap().unwrap().number,
            "FW-000002"
        );
        // L1 is on FW-000002 (PO 4711) and FW-000003 (PO 4712): only the same PO counts.
        let one = Delivery {
            po: "4712",
            lots: &["L1", "L2"],
            ..new_po
        };
        assert_eq!(
            reissue_of(&entries, &one).unwrap().unwrap().number,
            "FW-000003"
        );
        let mut two = entries.clone();
        two.extend(certificates(
            &[row(
                "FW-000005",
                "L9",
                "acme",
                "4712",
                "2026-10-04T08:00:00Z",
            )],
            &Default::default(),
        ));
        let e = reissue_of(
            &two,
            &Delivery {
                lots: &["L1", "L9"],
                ..one
            },
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("FW-000003, FW-000005"), "{e}");
    }

    #[test]
    fn shipments_filter_and_come_newest_first_issue_16() {
        let entries = log();
        let all = shipments(&entries, &Query::default(), &[]);
        let numbers: Vec<&str> = all.iter().map(|c| c.number.as_str()).collect();
        assert_eq!(numbers, ["FW-000004", "FW-000003", "FW-000002"]);
        assert_eq!(all[2].lots, ["L1", "L2"]);
        let q = Query {
            customer: Some("ACME"),
            lot: Some("L2"),
            ..Default::default()
        };
        let hits = shipments(&entries, &q, &[]);
        assert_eq!(hits.len(), 1);
        assert_eq!(hits[0].po, "4711");
        let q = Query {
            since: NaiveDate::from_ymd_opt(2026, 10, 3),
            until: NaiveDate::from_ymd_opt(2026, 10, 3),
            po: Some("9"),
            ..Default::default()
        };
        assert_eq!(shipments(&entries, &q, &[])[0].number, "FW-000004");
        let q = Query {
            part_number: Some("X-1"),
            ..Default::default()
        };
        assert!(shipments(&entries, &q, &[]).is_empty());
    }

    #[test]
    fn lots_are_distinct_and_of_one_revision() {
        assert!(check_distinct(&["A".into(), "B".into()]).is_ok());
        let e = check_distinct(&["A".into(), "A".into()])
            .unwrap_err()
            .to_string();
        assert!(e.contains("named twice"), "{e}");
        assert_eq!(
            one_revision([("A", "C"), ("B", "C")].into_iter()).unwrap(),
            "C"
        );
        let e = one_revision([("A", "B"), ("B", "C")].into_iter())
            .unwrap_err()
            .to_string();
        assert!(e.contains("A: B, B: C"), "{e}");
    }
}
