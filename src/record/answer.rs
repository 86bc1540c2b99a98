//! What the record says about one lot, in plain words: the answer of `resinlot lookup` and of
//! the web lot page (issue #21 moved it here from the command so both build the same answer).

use std::path::Path;

use serde::Serialize;
use serde_json::{json, Map, Value};

use chrono::NaiveDate;

use crate::error::Result;
use crate::record::certlog::{Entry, Standing};
use crate::record::trend_file::{Row, Trend};
use crate::spec::keys;
use crate::spec::{end_groups_words, limits_text, ProductSpec, SpecSet};

/// One lot's rows and certificates as the record holds them now.
#[derive(Debug, Clone)]
pub struct LotRecord {
    /// The lot's rows of its trend file (file order).
    pub trend: Trend,
    /// The certificate log's entries for the lot (log order), each with its standing now.
    pub certificates: Vec<(Entry, Standing)>,
}

impl LotRecord {
    /// The lot's rows, current (latest) first.
    pub fn rows_newest_first(&self) -> Vec<&Row> {
        self.trend.rows.iter().rev().collect()
    }

    /// The spec revision the lot's current row was decided under, when `specs` holds it.
    pub fn spec<'s>(&self, specs: Option<&'s SpecSet>) -> Option<&'s ProductSpec> {
        let t = &self.trend;
        let cur = t.rows.last()?;
        specs.and_then(|s| s.revision(t.cell(cur, "product"), t.cell(cur, "spec_revision")))
    }

    /// The lot's retest date under `spec` (manufacture date plus the spec's retest period,
    /// extended by a retest on or after it; `record::lifecycle::retest_date`).
    pub fn retest_date(&self, spec: Option<&ProductSpec>) -> Option<NaiveDate> {
        let rows = self.rows_newest_first();
        spec.and_then(|s| {
            crate::record::lifecycle::retest_date(&self.trend, &rows, rows[0], s.retest_months)
        })
    }
}

/// Reads one lot from the record (`record::query::find_lot` and the certificate log), or None
/// when no trend file holds it. Opens files for reading only.
pub fn load(register: &Path, lot: &str) -> Result<Option<LotRecord>> {
    let Some(trend) = crate::record::query::find_lot(register, lot)? else {
        return Ok(None);
    };
    // The id as recorded: any case finds the lot (issue #14).
    let recorded = trend
        .rows
        .last()
        .map(|r| trend.cell(r, "lot").to_string())
        .unwrap_or_default();
    let log = crate::record::certlog::read(register)?;
    let standings = log
        .as_ref()
        .map(crate::record::certlog::standings)
        .unwrap_or_default();
    let certificates = crate::record::certlog::entries(register)?
        .into_iter()
        .filter(|e| e.lot == recorded)
        .map(|e| {
            let standing = standings
                .get(&e.number)
                .cloned()
                .unwrap_or(Standing::Current);
            (e, standing)
        })
        .collect();
    Ok(Some(LotRecord {
        trend,
        certificates,
    }))
}

/// The sentence after "lot 'X' is not in the record": the near ids, or advice to check the label.
pub fn not_found_hint(near: &[String]) -> String {
    if near.is_empty() {
        "No similar lot ids are recorded either; check the id on the label.".to_string()
    } else {
        format!("Did you mean {}?", near.join(", "))
    }
}

/// One line of the property table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PropertyLine {
    /// The spec's label, or the key when the spec does not know it.
    pub label: String,
    /// The result as reported (rounded to the spec's decimals under its rounding rule).
    pub result: String,
    /// Unit (empty for a dimensionless property).
    pub unit: String,
    /// The limits in words ("1900 - 2100", "max 0.5"), empty without limits.
    pub limits: String,
    /// The verdict in words ("pass", "fail", ...), empty when none was recorded.
    pub verdict: String,
}

/// One certificate issued for the lot.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CertificateLine {
    /// Certificate number.
    pub number: String,
    /// Who it was issued to, in words ("internal (QC record)" for the lab's own).
    pub issued_to: String,
    /// When (RFC 3339, UTC).
    pub issued_at: String,
    /// The customer's purchase order, empty when none (internal certificates have none).
    pub po: String,
    /// The quantity shipped as written on the certificate, empty when none.
    pub quantity: String,
    /// True for a number logged as void (a file found without its log entry).
    pub void: bool,
    /// The number it supersedes, empty when none.
    pub supersedes: String,
    /// The reason for the reissue.
    pub reason: String,
    /// Its standing in words (`WITHDRAWN 2026-12-10T00:00:00Z: why`, `superseded by FW-000005`), empty
    /// while current.
    pub standing: String,
}

/// One superseded row of the lot.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HistoryLine {
    /// Row number in the trend file (`seq`).
    pub row: String,
    /// When it was recorded.
    pub recorded_at: String,
    /// Status in words.
    pub status: String,
    /// Measured values as `key value`.
    pub values: Vec<String>,
}

/// Everything `lookup` says about a lot, as structured parts: the text answer and the web page
/// are two renderings of it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LotAnswer {
    /// Lot id.
    pub lot: String,
    /// Product code.
    pub product: String,
    /// Product name from the spec, empty when the specs are not at hand.
    pub product_name: String,
    /// Status in words ("released", "on hold", ...).
    pub status: String,
    /// Status, dates and retest date as label-value pairs.
    pub facts: Vec<(String, String)>,
    /// Every recorded property.
    pub properties: Vec<PropertyLine>,
    /// How Mn, Xn and p were obtained, one sentence a line.
    pub derived: Vec<String>,
    /// The analyst's notes.
    pub notes: String,
    /// Certificates issued for the lot.
    pub certificates: Vec<CertificateLine>,
    /// QA's dispositions of the lot, oldest first, one line each (issue #14).
    pub dispositions: Vec<String>,
    /// Superseded rows, newest first.
    pub history: Vec<HistoryLine>,
    /// The reason given for the current row's retest, empty when none.
    pub retest_reason: String,
}

/// A recorded cell as reported: rounded to the property's decimals under the spec's rounding,
/// or as it stands when the spec does not know the key or the cell is no number.
pub fn reported(spec: Option<&ProductSpec>, key: &str, cell: &str) -> String {
    use crate::spec::decision::RecordedResult;
    if let Some(RecordedResult::Below(l)) = RecordedResult::parse(cell) {
        let decimals = spec.and_then(|s| s.property(key)).map_or(0, |p| p.decimals);
        return crate::spec::decision::censored_text(l, decimals);
    }
    let (Some(s), Some(d)) = (spec, crate::spec::decision::recorded_decimal(cell)) else {
        return cell.to_string();
    };
    match s.property(key) {
        Some(p) => crate::spec::decision::round(d, p.decimals, s.rounding).to_string(),
        None => cell.to_string(),
    }
}

/// Builds the answer for a lot from its record and the spec revision it was decided under;
/// `today` decides whether the lot is past its retest date.
pub fn answer(rec: &LotRecord, spec: Option<&ProductSpec>, today: NaiveDate) -> LotAnswer {
    let t = &rec.trend;
    let rows = rec.rows_newest_first();
    let cur = rows[0];
    let c = |n: &str| t.cell(cur, n);
    LotAnswer {
        lot: c("lot").to_string(),
        product: c("product").to_string(),
        product_name: spec.map(|s| s.name.clone()).unwrap_or_default(),
        status: c("status").replace('_', " "),
        facts: facts(&c, rec.retest_date(spec).map(|d| (d, today))),
        properties: property_lines(t, spec, &c),
        derived: derived(spec, &c),
        notes: c("notes").to_string(),
        certificates: rec
            .certificates
            .iter()
            .map(|(e, st)| certificate_line(e, st))
            .collect(),
        dispositions: dispositions(t, &rows),
        history: history(t, &rows, spec),
        retest_reason: if rows.len() > 1 && crate::record::lifecycle::is_retest_row(t, cur) {
            c("reason").to_string()
        } else {
            String::new()
        },
    }
}

/// The lot's status, dates, who tested and recorded it (issue #15) and retest date (with
/// `shelf` = (retest date, today): expired since the retest date once it has passed), as
/// label-value pairs: `lookup`'s facts and the web lot page's.
pub fn facts<'a>(
    c: &dyn Fn(&str) -> &'a str,
    shelf: Option<(NaiveDate, NaiveDate)>,
) -> Vec<(String, String)> {
    let concession = if c("disposition") == "concession" {
        format!(
            ", under concession {} for customer '{}' only",
            c("concession_ref"),
            c("concession_customer")
        )
    } else {
        String::new()
    };
    let mut facts = vec![
        (
            "Status".to_string(),
            format!(
                "{} (spec revision {}){concession}",
                c("status").replace('_', " "),
                c("spec_revision")
            ),
        ),
        ("Manufactured".to_string(), c("manufactured").to_string()),
        (
            "Decided".to_string(),
            format!(
                "{} by {}",
                Some(c("decided_at"))
                    .filter(|d| !d.is_empty())
                    .unwrap_or(c("recorded_at")),
                c("approver")
            ),
        ),
    ];
    facts.extend(audit_facts(c));
    if let Some((r, today)) = shelf {
        let text = if crate::lot::disposition::expired(r, today) {
            format!("{r}: expired since {r}; retest before use (`release --retest`)")
        } else {
            r.to_string()
        };
        facts.push(("Retest date".into(), text));
    }
    facts
}

/// Who tested and when, and who recorded the row when (issue #15); nothing for a row written
/// before these were kept.
fn audit_facts<'a>(c: &dyn Fn(&str) -> &'a str) -> Vec<(String, String)> {
    let mut facts = Vec::new();
    let (from, to) = (c("tested_from"), c("tested_to"));
    if !from.is_empty() {
        let dates = if from == to {
            from.to_string()
        } else {
            format!("{from} to {to}")
        };
        let analysts = c("analysts").replace(';', ", ");
        facts.push((
            "Tested".to_string(),
            if analysts.is_empty() {
                format!("{dates} (analyst not named in the results file)")
            } else {
                format!("{dates} by {analysts}")
            },
        ));
    }
    if !c("recorded_by").is_empty() {
        facts.push((
            "Recorded".to_string(),
            format!("{} by login {}", c("recorded_at"), c("recorded_by")),
        ));
    }
    facts
}

/// QA's dispositions of the lot, oldest first, in plain words (issue #14).
pub fn dispositions(t: &Trend, rows: &[&Row]) -> Vec<String> {
    let mut out = Vec::new();
    for r in rows.iter().rev() {
        let Some(d) = crate::record::lifecycle::disposition_of(t, r) else {
            continue;
        };
        out.push(format!(
            "row {}  {}  {} ({}){}: {}",
            t.cell(r, "seq"),
            t.cell(r, "recorded_at"),
            d.words(),
            t.cell(r, "approver"),
            if d == crate::lot::disposition::Decision::Concession {
                format!(
                    " (concession {} for customer '{}')",
                    t.cell(r, "concession_ref"),
                    t.cell(r, "concession_customer")
                )
            } else {
                String::new()
            },
            t.cell(r, "reason")
        ));
    }
    out
}

/// Every recorded property: result, unit, limits and verdict.
fn property_lines<'a>(
    t: &Trend,
    spec: Option<&ProductSpec>,
    c: &dyn Fn(&str) -> &'a str,
) -> Vec<PropertyLine> {
    let mut lines = Vec::new();
    for k in t.keys() {
        let cell = c(&k);
        if cell.is_empty() {
            continue;
        }
        let p = spec.and_then(|s| s.property(&k));
        lines.push(PropertyLine {
            label: p.map_or(k.clone(), |p| p.label.clone()),
            result: reported(spec, &k, cell),
            unit: p.map_or(String::new(), |p| {
                if p.unit == "1" {
                    String::new()
                } else {
                    p.unit.clone()
                }
            }),
            limits: p.map_or(String::new(), |p| {
                if p.has_limit() {
                    limits_text(p.min, p.max, p.decimals)
                } else {
                    String::new()
                }
            }),
            verdict: c(&format!("{k}_verdict")).replace('_', " "),
        });
    }
    lines
}

/// How Mn, Xn and the extent of reaction were obtained, when recorded.
fn derived<'a>(spec: Option<&ProductSpec>, c: &dyn Fn(&str) -> &'a str) -> Vec<String> {
    let mut out = Vec::new();
    if !c(keys::MN).is_empty() {
        let u = c("mn_uncertainty").parse::<f64>().ok();
        let f = spec.map_or(2.0, |s| s.functionality);
        out.push(format!(
            "Mn is {}{} g/mol: calculated from the acid value and hydroxyl value by end-group analysis, assuming {}.",
            reported(spec, keys::MN, c(keys::MN)),
            u.map(|u| format!(" ± {u:.0}")).unwrap_or_default(),
            end_groups_words(f)
        ));
        if u.is_some() {
            out.push("The ± figure is the expanded uncertainty (k = 2, about 95 % coverage) from those of the two titrations.".to_string());
        }
    }
    if !c(keys::XN).is_empty() || !c(keys::EXTENT_OF_REACTION).is_empty() {
        let shown = |k: &str| {
            if c(k).is_empty() {
                "-".to_string()
            } else {
                reported(spec, k, c(k))
            }
        };
        out.push(format!(
            "Xn {} and extent of reaction {}: from the batch recipe by the Carothers relations, allowing for the water of condensation.",
            shown(keys::XN),
            shown(keys::EXTENT_OF_REACTION),
        ));
    }
    out
}

/// One certificate of the log in words, with its standing.
fn certificate_line(e: &Entry, st: &Standing) -> CertificateLine {
    let void = crate::record::certfiles::is_void(e);
    CertificateLine {
        number: e.number.clone(),
        issued_to: if void {
            "VOID (a file found without its log entry; not a certificate)".to_string()
        } else if e.customer_name.is_empty() {
            "internal (QC record)".to_string()
        } else {
            e.customer_name.clone()
        },
        issued_at: e.issued_at.clone(),
        po: e.po.clone(),
        quantity: e.quantity.clone(),
        void,
        supersedes: e.supersedes.clone(),
        reason: e.reason.clone(),
        standing: match st {
            Standing::Withdrawn { at, reason, .. } if !void => format!("WITHDRAWN {at}: {reason}"),
            Standing::Superseded { by, .. } => format!("superseded by {by}"),
            _ => String::new(),
        },
    }
}

/// The lot's superseded rows, newest first.
fn history(t: &Trend, rows: &[&Row], spec: Option<&ProductSpec>) -> Vec<HistoryLine> {
    rows[1..]
        .iter()
        .map(|r| HistoryLine {
            row: t.cell(r, "seq").to_string(),
            recorded_at: t.cell(r, "recorded_at").to_string(),
            status: t.cell(r, "status").replace('_', " "),
            values: t
                .keys()
                .into_iter()
                .filter(|k| !spec.is_some_and(|s| s.property(k).is_some_and(|p| p.derived)))
                .filter(|k| !t.cell(r, k).is_empty())
                .map(|k| format!("{k} {}", t.cell(r, &k)))
                .collect(),
        })
        .collect()
}

impl LotAnswer {
    /// The text answer of `resinlot lookup`.
    pub fn text(&self) -> String {
        let mut out = format!(
            "Lot {}: {}{}\n",
            self.lot,
            self.product,
            if self.product_name.is_empty() {
                String::new()
            } else {
                format!(" {}", self.product_name)
            }
        );
        out.push_str(&crate::support::table::pairs(&self.facts));
        out.push('\n');
        let mut table = vec![vec![
            "Property".to_string(),
            "Result".into(),
            "Unit".into(),
            "Limits".into(),
            "Verdict".into(),
        ]];
        table.extend(self.properties.iter().map(|p| {
            vec![
                p.label.clone(),
                p.result.clone(),
                p.unit.clone(),
                p.limits.clone(),
                p.verdict.clone(),
            ]
        }));
        out.push_str(&crate::support::table::render(&table));
        if !self.derived.is_empty() {
            // The Mn sentences are set off by a blank line; the Xn line follows directly.
            let mn_first = self.derived[0].starts_with("Mn is");
            for (i, line) in self.derived.iter().enumerate() {
                if i == 0 && mn_first {
                    out.push('\n');
                }
                out.push_str(line);
                out.push('\n');
            }
        }
        if !self.notes.is_empty() {
            out.push_str(&format!("Notes: {}\n", self.notes));
        }
        out.push_str("\nCertificates issued:\n");
        if self.certificates.is_empty() {
            out.push_str("  none\n");
        }
        for e in &self.certificates {
            out.push_str(&format!(
                "  {}  {}  {}{}{}\n",
                e.number,
                e.issued_to,
                e.issued_at,
                if e.supersedes.is_empty() {
                    String::new()
                } else {
                    format!("  (supersedes {}: {})", e.supersedes, e.reason)
                },
                if e.standing.is_empty() {
                    String::new()
                } else {
                    format!("  {}", e.standing)
                }
            ));
        }
        if !self.dispositions.is_empty() {
            out.push_str("\nQA dispositions (oldest first):\n");
            for d in &self.dispositions {
                out.push_str(&format!("  {d}\n"));
            }
        }
        if !self.history.is_empty() {
            out.push_str("\nHistory (superseded results, newest first):\n");
            for h in &self.history {
                out.push_str(&format!(
                    "  row {}  {}  {}  {}\n",
                    h.row,
                    h.recorded_at,
                    h.status,
                    h.values.join(", ")
                ));
            }
            if !self.retest_reason.is_empty() {
                out.push_str(&format!("  Retest reason: {}\n", self.retest_reason));
            }
        }
        out
    }
}

/// The recorded values of a row by key: numbers as numbers, words and censored results
/// (`<0.01`) as recorded, empty cells as null.
pub fn values(t: &Trend, row: &Row) -> Map<String, Value> {
    let mut m = Map::new();
    for k in t.keys() {
        let cell = t.cell(row, &k);
        // Words and censored results ("<0.01") as recorded (issue #15).
        let v = cell.parse::<f64>().map_or_else(
            |_| {
                if cell.is_empty() {
                    Value::Null
                } else {
                    json!(cell)
                }
            },
            |x| json!(x),
        );
        m.insert(k, v);
    }
    m
}

/// One trend row as `lookup --json` gives it.
pub fn row_json(t: &Trend, row: &Row) -> Value {
    let verdicts: Map<String, Value> = t
        .keys()
        .into_iter()
        .filter_map(|k| {
            let v = t.cell(row, &format!("{k}_verdict"));
            (!v.is_empty()).then(|| (k, json!(v)))
        })
        .collect();
    json!({
        "row": t.cell(row, "seq").parse::<u64>().ok(),
        "recorded_at": t.cell(row, "recorded_at"),
        "status": t.cell(row, "status"),
        "spec_revision": t.cell(row, "spec_revision"),
        "approver": t.cell(row, "approver"),
        "supersedes": t.cell(row, "supersedes").parse::<u64>().ok(),
        "reason": t.cell(row, "reason"),
        "values": values(t, row),
        "verdicts": verdicts,
        "notes": t.cell(row, "notes"),
        "analysts": t.cell(row, "analysts"),
        "tested_from": t.cell(row, "tested_from"),
        "tested_to": t.cell(row, "tested_to"),
        "decided_at": t.cell(row, "decided_at"),
        "recorded_by": t.cell(row, "recorded_by"),
        "spec_sha256": t.cell(row, "spec_sha256"),
        "disposition": non_empty(t.cell(row, "disposition")),
        "concession_ref": non_empty(t.cell(row, "concession_ref")),
        "concession_customer": non_empty(t.cell(row, "concession_customer")),
    })
}

fn non_empty(s: &str) -> Value {
    if s.is_empty() {
        Value::Null
    } else {
        json!(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A lot with one retest (invented values), written through the test writer.
    fn retested(dir: &Path) -> LotRecord {
        let p = dir.join("TP-1.csv");
        let keys = vec![keys::ACID_VALUE.to_string(), keys::MN.to_string()];
        let row = |status: &str, av: &str, mn: &str, reason: &str| {
            vec![
                ("lot", "L1".to_string()),
                (
                    "supersedes",
                    if reason.is_empty() { "" } else { "1" }.to_string(),
                ),
                ("product", "TP-1".into()),
                ("status", status.into()),
                ("acid_value", av.into()),
                ("mn", mn.into()),
                ("reason", reason.into()),
            ]
        };
        crate::record::trend_file::write_for_test(
            &p,
            &keys,
            &[
                row("on_hold", "0.9", "1990.5", ""),
                row("released", "0.5", "2001.25", "new burette"),
            ],
        );
        load(dir, "L1").unwrap().unwrap()
    }

    #[test]
    fn the_answer_puts_the_current_row_first_and_keeps_the_history() {
        let dir = tempfile::tempdir().unwrap();
        let rec = retested(dir.path());
        let a = answer(&rec, None, NaiveDate::from_ymd_opt(2026, 12, 1).unwrap());
        assert_eq!(a.status, "released");
        assert_eq!(a.properties[0].result, "0.5");
        assert_eq!(a.history.len(), 1);
        assert_eq!(a.history[0].status, "on hold");
        assert_eq!(a.retest_reason, "new burette");
        // Without a spec Mn is shown as recorded, with no ± (no uncertainty recorded).
        assert!(
            a.derived[0].starts_with("Mn is 2001.25 g/mol"),
            "{:?}",
            a.derived
        );
        let text = a.text();
        assert!(text.contains("Lot L1: TP-1\n"), "{text}");
        assert!(text.contains("Retest reason: new burette"), "{text}");
        assert!(text.contains("Certificates issued:\n  none\n"), "{text}");
    }

    #[test]
    fn an_unknown_lot_is_none_and_the_hint_lists_near_ids() {
        let dir = tempfile::tempdir().unwrap();
        retested(dir.path());
        assert!(load(dir.path(), "L2").unwrap().is_none());
        assert_eq!(not_found_hint(&["L1".into()]), "Did you mean L1?");
        assert!(not_found_hint(&[]).contains("check the id on the label"));
    }
}
