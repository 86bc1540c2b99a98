//! Builds certificates of analysis from the record: a lot's decided values, its spec and,
//! for a shipment, the customer's overlay (tighter windows, report order, units).

use std::collections::HashMap;

use chrono::NaiveDate;
use rust_decimal::Decimal;

use crate::certificate::model::{
    self as cert, Authorisation, CalculatedNote, Certificate, Conformity, LotCell, ResultRow, Site,
    Supersedes,
};
use crate::error::{Error, Result};
use crate::lot::evaluate::{LotDecision, Status};
use crate::lot::note::LotNote;
use crate::record::trend_file::{Row, Trend};
use crate::spec::customer::{
    combined, customer_fit, recorded_uncertainty, special_fit, Customer, CustomerProduct, Fit,
    InspectionDocument,
};
use crate::spec::decision::{
    censored_text, decimal_from_f64, round, DecisionRule, RecordedResult, Verdict,
};
use crate::spec::keys::{MN, XN};
use crate::spec::units::unit_factor;
use crate::spec::{end_groups_words, limits_text, ProductSpec, Property};

/// What the record holds about a lot, as needed for a certificate.
#[derive(Debug, Clone, PartialEq)]
pub struct LotRecord {
    /// Lot id.
    pub lot: String,
    /// Product code.
    pub product: String,
    /// Manufacture date.
    pub manufactured: NaiveDate,
    /// Release status.
    pub status: Status,
    /// Spec revision applied.
    pub revision: String,
    /// Values by key, full precision text.
    pub values: HashMap<String, String>,
    /// Recorded verdicts by key.
    pub verdicts: HashMap<String, String>,
    /// Expanded uncertainty of Mn.
    pub mn_uncertainty: Option<f64>,
    /// Who released it.
    pub approver: String,
    /// When it was decided (RFC 3339).
    pub decided_at: String,
    /// Notes recorded with the decision (corrections, replicates, conditional results), typed.
    pub notes: Vec<LotNote>,
    /// SHA-256 of the spec revision file the lot was decided on (empty on rows written
    /// before it was recorded).
    pub spec_sha256: String,
    /// The concession the lot was released under, when QA released it for one customer
    /// (issue #14).
    pub concession: Option<Concession>,
    /// Test date of the lot's latest retest, which may extend its retest date (issue #14);
    /// set by the caller that reads every row of the lot.
    pub latest_retest: Option<NaiveDate>,
    /// First and last day of testing, when the record holds them.
    pub tested: (Option<NaiveDate>, Option<NaiveDate>),
}

/// A concession (deviation permit) granted by one customer for one lot (ISO 9001:2015 §8.7).
#[derive(Debug, Clone, PartialEq)]
pub struct Concession {
    /// The customer's concession (deviation) number.
    pub reference: String,
    /// The customer's file stem.
    pub customer: String,
}

impl LotRecord {
    /// From a trend-file row.
    pub fn from_row(t: &Trend, row: &Row) -> Result<LotRecord> {
        let c = |n: &str| t.cell(row, n).to_string();
        let bad = |what: &str| {
            Error::invalid(
                format!("{}:{}", t.path.display(), row.line),
                format!("the row's {what} cannot be read"),
                "Check the record with `resinlot verify`.",
            )
        };
        let mut values = HashMap::new();
        let mut verdicts = HashMap::new();
        for k in t.keys() {
            values.insert(k.clone(), c(&k));
            verdicts.insert(k.clone(), c(&format!("{k}_verdict")));
        }
        Ok(LotRecord {
            lot: c("lot"),
            product: c("product"),
            manufactured: NaiveDate::parse_from_str(&c("manufactured"), "%Y-%m-%d")
                .map_err(|_| bad("manufacture date"))?,
            status: Status::parse(&c("status")).ok_or_else(|| bad("status"))?,
            revision: c("spec_revision"),
            values,
            verdicts,
            mn_uncertainty: c("mn_uncertainty").parse().ok(),
            approver: c("approver"),
            // A history import records when the lot was decided; an empty cell means the row
            // was decided when it was recorded.
            decided_at: Some(c("decided_at"))
                .filter(|d| !d.is_empty())
                .unwrap_or_else(|| c("recorded_at")),
            notes: LotNote::parse_cell(&c("notes")),
            spec_sha256: c("spec_sha256"),
            concession: (c("disposition") == "concession").then(|| Concession {
                reference: c("concession_ref"),
                customer: c("concession_customer"),
            }),
            latest_retest: None,
            // Empty in rows recorded before layout v3 (and in files without the columns):
            // the certificate then says "not recorded".
            tested: (date(&c("tested_from")), date(&c("tested_to"))),
        })
    }

    /// From a decision about to be recorded.
    pub fn from_decision(d: &LotDecision, approver: &str, now: &str) -> LotRecord {
        let mut values = HashMap::new();
        let mut verdicts = HashMap::new();
        let mut mn_u = None;
        for p in &d.properties {
            let v = p
                .exact
                .as_deref()
                .map(str::to_string)
                .or_else(|| p.value.map(|v| v.to_string()))
                .unwrap_or_default();
            values.insert(p.property.to_string(), v);
            verdicts.insert(
                p.property.to_string(),
                p.verdict
                    .map(|v| v.as_str().to_string())
                    .unwrap_or_default(),
            );
            if p.property == MN {
                mn_u = p.uncertainty;
            }
        }
        LotRecord {
            lot: d.lot.to_string(),
            product: d.product.to_string(),
            manufactured: d.manufactured,
            status: d.status,
            revision: d.spec_revision.to_string(),
            values,
            verdicts,
            mn_uncertainty: mn_u,
            approver: approver.to_string(),
            decided_at: now.to_string(),
            notes: d.notes.clone(),
            spec_sha256: d.spec_sha256.to_string(),
            concession: None,
            latest_retest: None,
            // As the row records them (issue #15): the results file's test times, else the
            // manufacture date; `release` sets a retest's own.
            tested: (
                d.tested_from
                    .as_deref()
                    .and_then(date)
                    .or(Some(d.manufactured)),
                d.tested_to
                    .as_deref()
                    .and_then(date)
                    .or(Some(d.manufactured)),
            ),
        }
    }

    fn value(&self, key: &str) -> Option<Decimal> {
        crate::spec::decision::recorded_decimal(self.values.get(key)?)
    }

    /// The recorded result of `key` when it is a word or a censored result (issue #15).
    fn special(&self, key: &str) -> Option<RecordedResult> {
        RecordedResult::parse(self.values.get(key)?)
            .filter(|r| !matches!(r, RecordedResult::Number(_)))
    }
}

/// A recorded date cell (`YYYY-MM-DD`, or the date part of an RFC 3339 time); None when
/// empty or unreadable.
fn date(cell: &str) -> Option<NaiveDate> {
    NaiveDate::parse_from_str(cell.get(..10)?, "%Y-%m-%d").ok()
}

/// A shipment to a customer.
#[derive(Debug, Clone, Copy)]
pub struct Shipment<'a> {
    /// The customer.
    pub customer: &'a Customer,
    /// Their requirements for this product.
    pub product: &'a CustomerProduct,
    /// Purchase order.
    pub purchase_order: Option<&'a str>,
    /// Quantity shipped, as written.
    pub quantity: Option<&'a str>,
}

fn verdict_words(v: &str) -> String {
    match Verdict::parse(v) {
        Some(v) => {
            let w = v.words();
            let mut c = w.chars();
            c.next().map_or(String::new(), |f| {
                f.to_uppercase().collect::<String>() + c.as_str()
            })
        }
        None if v.is_empty() => "—".into(),
        None => v.to_string(),
    }
}

/// Number of decimals after converting by `factor` (a power of ten).
fn decimals_after(decimals: u32, factor: Decimal) -> u32 {
    let mut d = decimals as i64;
    let mut f = factor;
    while f < Decimal::ONE && f > Decimal::ZERO {
        f *= Decimal::TEN;
        d += 1;
    }
    while f >= Decimal::TEN {
        f /= Decimal::TEN;
        d -= 1;
    }
    d.max(0) as u32
}

/// Checks that released lots meet a customer's windows under the product's decision rule
/// ([`customer_fit`]); the error names every lot and property that falls short, with both
/// windows (issue #16: a delivery of several lots is certified only when every lot fits).
pub fn check_customer(spec: &ProductSpec, recs: &[LotRecord], ship: &Shipment) -> Result<()> {
    let mut failed = Vec::new();
    for rec in recs {
        let f = customer_shortfalls(spec, rec, ship)?;
        if !f.is_empty() {
            failed.push(format!(
                "lot {} cannot be certified for {}: {}",
                rec.lot,
                ship.customer.name,
                f.join("; ")
            ));
        }
    }
    if failed.is_empty() {
        Ok(())
    } else {
        Err(Error::Shortfall(format!(
            "{}{}",
            failed.join("\n"),
            if recs.len() > 1 {
                "\nNothing was issued: every lot of a delivery must fit."
            } else {
                ""
            }
        )))
    }
}

/// What a lot released under concession deviates in (issue #14): every property whose
/// recorded verdict against the product spec is not a pass, then every property outside the
/// customer's window (as [`check_customer`] judges it); one plain phrase each.
pub fn concession_deviations(
    spec: &ProductSpec,
    rec: &LotRecord,
    ship: &Shipment,
) -> Result<Vec<String>> {
    let mut out: Vec<String> = spec
        .properties
        .iter()
        .filter_map(|p| {
            let verdict = rec.verdicts.get(&p.key)?;
            if verdict.is_empty() || verdict == "pass" {
                return None;
            }
            let value = match (rec.special(&p.key), rec.value(&p.key)) {
                (Some(sp), _) => special_text(&sp, p, Decimal::ONE),
                (None, Some(v)) => round(v, p.decimals, spec.rounding).to_string(),
                (None, None) => "missing".into(),
            };
            Some(format!(
                "{} {} {} is {} against the product spec {} revision {} ({})",
                p.label,
                value,
                p.unit,
                verdict.replace('_', " "),
                spec.code,
                spec.revision,
                limits_text(p.min, p.max, p.decimals)
            ))
        })
        .collect();
    out.extend(customer_shortfalls(spec, rec, ship)?);
    Ok(out)
}

/// Every property of `rec` that falls short of the customer's windows, in words naming both
/// windows; a missing required result is named too.
fn customer_shortfalls(
    spec: &ProductSpec,
    rec: &LotRecord,
    ship: &Shipment,
) -> Result<Vec<String>> {
    let mut failures = Vec::new();
    for p in &spec.properties {
        let window = ship.product.limits.get(&p.key);
        if window.is_none()
            && !(p.is_text()
                && ship
                    .product
                    .report
                    .as_ref()
                    .is_none_or(|r| r.contains(&p.key)))
        {
            continue;
        }
        if let Some(special) = rec.special(&p.key) {
            let v = special_fit(spec, p, &special, window).unwrap_or(Verdict::Fail);
            if v != Verdict::Pass {
                failures.push(format!(
                    "{} {} is {} against {}",
                    p.label,
                    special_text(&special, p, Decimal::ONE),
                    v.words(),
                    if p.is_text() {
                        "the spec's conforming words".to_string()
                    } else {
                        format!(
                            "the customer's window {} (product spec {} revision {}: {})",
                            {
                                let lim = combined(p.min, p.max, window);
                                limits_text(lim.min, lim.max, p.decimals)
                            },
                            spec.code,
                            spec.revision,
                            limits_text(p.min, p.max, p.decimals)
                        )
                    }
                ));
            }
            continue;
        }
        if window.is_none() {
            continue;
        }
        let fit = customer_fit(spec, p, rec.value(&p.key), rec.mn_uncertainty, window);
        match fit {
            Fit::Missing => failures.push(format!(
                "it has no {} result, which {} requires",
                p.label, ship.customer.name
            )),
            Fit::Decided {
                verdict,
                reported,
                window: w,
                uncertainty: u,
            } if verdict != Verdict::Pass => failures.push(format!(
                "{} {} {} is {} against the customer's window {} (product spec {} revision {}: {}){}",
                p.label,
                reported,
                p.unit,
                verdict.words(),
                limits_text(w.min, w.max, p.decimals),
                spec.code,
                spec.revision,
                limits_text(p.min, p.max, p.decimals),
                if spec.decision_rule == DecisionRule::Guarded {
                    format!(
                        ", guard band U = {}",
                        u.map_or("0".to_string(), |u| round(u, p.decimals, spec.rounding).to_string())
                    )
                } else {
                    String::new()
                }
            )),
            _ => {}
        }
    }
    Ok(failures)
}

/// Builds the certificate for `rec`; with a shipment, the customer's view of it.
pub fn build(
    site: &Site,
    spec: &ProductSpec,
    rec: &LotRecord,
    ship: Option<&Shipment>,
    number: &str,
    issue_date: NaiveDate,
    supersedes: Option<Supersedes>,
) -> Result<Certificate> {
    let keys = reported_keys(spec, ship);
    let calculated = calculated_notes(spec, rec, &keys);
    let rows = keys
        .iter()
        .filter_map(|key| spec.property(key))
        .map(|p| {
            let mut row = result_row(spec, p, rec, ship);
            row.note = calculated
                .iter()
                .position(|n| n.key == p.key)
                .map(|i| i + 1);
            row
        })
        .collect();
    let inspection_document = ship
        .and_then(|s| s.customer.inspection_document)
        .map(|kind| inspection_document(kind, site))
        .transpose()?;
    let (name, role) = approver(rec);
    let decided = rec
        .decided_at
        .get(..10)
        .and_then(|d| NaiveDate::parse_from_str(d, "%Y-%m-%d").ok())
        .unwrap_or(issue_date);
    Ok(Certificate {
        title: if ship.is_some() {
            "Certificate of Analysis".into()
        } else {
            "Certificate of Analysis (internal record)".into()
        },
        issuer: site.clone(),
        number: number.to_string(),
        issue_date,
        product: cert::Product {
            code: spec.code.clone(),
            name: spec.name.clone(),
        },
        spec: cert::SpecRef {
            code: spec.code.clone(),
            revision: spec.revision.clone(),
        },
        lot: lot_of(spec, rec),
        customer: ship.map(|s| cert::Customer {
            name: s.customer.name.clone(),
            address: s.customer.address.clone(),
            part_number: s.product.part_number.clone(),
            purchase_order: s.purchase_order.map(str::to_string),
            quantity: s.quantity.map(bind_numbers),
        }),
        show_uncertainty: spec.decision_rule == DecisionRule::Guarded
            && ship.is_none_or(|s| s.customer.show_uncertainty),
        rows,
        calculated,
        conformity: conformity(spec, rec, ship),
        scope_statement: cert::SCOPE_STATEMENT.to_string(),
        statements: statements(rec, ship),
        inspection_document,
        authorisation: Authorisation {
            name,
            role,
            date: decided,
        },
        released: rec.status == Status::Released,
        supersedes,
        lots: Vec::new(),
        lot_blocks: false,
    }
    .with_lots(spec, std::slice::from_ref(rec), ship))
}

/// Builds a customer's certificate for a delivery of one or more lots of one product
/// (issue #16): the first lot's certificate ([`build`]) with every lot's results in
/// [`ResultRow::lots`], all lots listed, the calculated values, the decision's notes and the
/// conformity statement covering each lot, and the latest release authorisation.
#[allow(clippy::too_many_arguments)]
pub fn build_delivery(
    site: &Site,
    spec: &ProductSpec,
    recs: &[LotRecord],
    ship: &Shipment,
    number: &str,
    issue_date: NaiveDate,
    supersedes: Option<Supersedes>,
) -> Result<Certificate> {
    let first = recs.first().ok_or_else(|| {
        Error::invalid(
            "certify",
            "no lot was given",
            "Name one or more lots of the delivery.",
        )
    })?;
    let mut c = build(
        site,
        spec,
        first,
        Some(ship),
        number,
        issue_date,
        supersedes,
    )?;
    if recs.len() == 1 {
        return Ok(c);
    }
    c = c.with_lots(spec, recs, Some(ship));
    let keys = reported_keys(spec, Some(ship));
    for note in &mut c.calculated {
        note.value = recs
            .iter()
            .filter_map(|r| {
                let (v, p) = reported_value(spec, r, &keys, &note.key)?;
                Some(format!(
                    "{} (lot {})",
                    round(v, p.decimals, spec.rounding),
                    r.lot
                ))
            })
            .collect::<Vec<_>>()
            .join(", ");
        // One U per lot would crowd the note; each lot's U is on its own record.
        if recs
            .iter()
            .any(|r| r.mn_uncertainty != first.mn_uncertainty)
        {
            note.expanded_uncertainty = None;
            note.coverage_factor = None;
        }
    }
    let mut statements: Vec<String> = recs
        .iter()
        .flat_map(|r| {
            r.notes
                .iter()
                .filter(|n| n.kind.on_certificate())
                .map(move |n| format!("Lot {}: {}", r.lot, n.text))
        })
        .collect();
    statements.extend(ship.product.statements.clone());
    c.statements = statements;
    c.conformity.statement = format!(
        "Each of the lots {} conforms to specification {} revision {} and to the requirements of {} under the decision rule stated.",
        recs.iter().map(|r| r.lot.as_str()).collect::<Vec<_>>().join(", "),
        spec.code,
        spec.revision,
        ship.customer.name
    );
    let mut names: Vec<String> = Vec::new();
    for r in recs {
        let (n, _) = approver(r);
        if !names.contains(&n) {
            names.push(n);
        }
    }
    c.authorisation.name = names.join(" / ");
    c.authorisation.date = recs
        .iter()
        .filter_map(|r| {
            r.decided_at
                .get(..10)
                .and_then(|d| NaiveDate::parse_from_str(d, "%Y-%m-%d").ok())
        })
        .max()
        .unwrap_or(c.authorisation.date);
    c.released = recs.iter().all(|r| r.status == Status::Released);
    Ok(c)
}

impl Certificate {
    /// Lists `recs` as the certificate's lots and puts each lot's result and verdict in every
    /// row (the same rounding, units and customer windows as the row itself).
    fn with_lots(
        mut self,
        spec: &ProductSpec,
        recs: &[LotRecord],
        ship: Option<&Shipment>,
    ) -> Self {
        self.lots = recs.iter().map(|r| lot_of(spec, r)).collect();
        self.lot_blocks = recs.len() > cert::LOT_COLUMNS;
        for row in &mut self.rows {
            let Some(p) = spec.property(&row.key) else {
                continue;
            };
            row.lots = recs
                .iter()
                .map(|r| {
                    let one = result_row(spec, p, r, ship);
                    LotCell {
                        lot: r.lot.clone(),
                        result: one.result,
                        verdict: one.verdict,
                        exact: one.exact,
                        uncertainty: one.uncertainty,
                    }
                })
                .collect();
        }
        self
    }
}

/// A lot as printed: id, manufacture and retest dates.
fn lot_of(spec: &ProductSpec, rec: &LotRecord) -> cert::Lot {
    cert::Lot {
        id: rec.lot.clone(),
        manufactured: rec.manufactured,
        retest: crate::lot::disposition::retest_date(
            rec.manufactured,
            spec.retest_months,
            rec.latest_retest,
        )
        .unwrap_or(rec.manufactured),
        tested_from: rec.tested.0,
        tested_to: rec.tested.1,
    }
}

/// The properties reported, in order: the customer's list, or the spec's measured properties,
/// the limited derived ones and Xn.
fn reported_keys(spec: &ProductSpec, ship: Option<&Shipment>) -> Vec<String> {
    match ship.and_then(|s| s.product.report.clone()) {
        Some(r) => r,
        None => spec
            .properties
            .iter()
            .filter(|p| !p.derived || p.has_limit() || p.key == XN)
            .map(|p| p.key.clone())
            .collect(),
    }
}

/// One row of the results table: in the customer's unit and window with a shipment, with the
/// recorded verdict otherwise.
fn result_row(
    spec: &ProductSpec,
    p: &Property,
    rec: &LotRecord,
    ship: Option<&Shipment>,
) -> ResultRow {
    let key = &p.key;
    let factor = ship
        .and_then(|s| s.product.units.get(key))
        .and_then(|u| unit_factor(&p.unit, u).map(|f| (u.clone(), f)));
    let (unit, f) = factor.unwrap_or((p.unit.clone(), Decimal::ONE));
    let dec = decimals_after(p.decimals, f);
    let window = match ship {
        Some(s) => combined(p.min, p.max, s.product.limits.get(key)),
        None => combined(p.min, p.max, None),
    };
    let conv = |d: Option<Decimal>| d.map(|d| d * f);
    let special = rec.special(key);
    let result = match (&special, rec.value(key)) {
        (Some(sp), _) => special_text(sp, p, f),
        (None, Some(v)) => {
            let mut r = round(v, p.decimals, spec.rounding) * f;
            r.rescale(dec);
            r.to_string()
        }
        (None, None) => "not measured".to_string(),
    };
    let decided = match ship {
        Some(s) if special.is_some() => special
            .as_ref()
            .and_then(|sp| special_fit(spec, p, sp, s.product.limits.get(key))),
        Some(s) => customer_fit(
            spec,
            p,
            rec.value(key),
            rec.mn_uncertainty,
            s.product.limits.get(key),
        )
        .verdict(),
        None => rec.verdicts.get(key).and_then(|v| Verdict::parse(v)),
    };
    let verdict = match (ship, decided) {
        (_, Some(v)) => verdict_words(v.as_str()),
        (Some(_), None) => "—".to_string(),
        (None, None) => verdict_words(rec.verdicts.get(key).map_or("", String::as_str)),
    };
    let uncertainty = recorded_uncertainty(spec, p, rec.mn_uncertainty).map(|u| {
        let mut u = round(u, p.decimals, spec.rounding) * f;
        u.rescale(dec);
        u.to_string()
    });
    let label = match p.temperature_c {
        // A no-break space keeps the number with its unit (issue #17).
        Some(t) => format!("{} at {t}\u{a0}°C", p.label),
        None => p.label.clone(),
    };
    ResultRow {
        key: key.clone(),
        label,
        method: match (&p.method, p.derived) {
            (Some(m), _) => m.clone(),
            (None, true) => "calculated".into(),
            (None, false) => "—".into(),
        },
        unit: if unit == "1" { String::new() } else { unit },
        limits: if let Some(words) = crate::spec::conforming_text(p) {
            words
        } else if window.min.is_some() || window.max.is_some() {
            limits_text(conv(window.min), conv(window.max), dec)
        } else {
            "report".into()
        },
        result,
        exact: rec.values.get(key).cloned().unwrap_or_default(),
        uncertainty,
        flagged: decided.is_some_and(|v| v != Verdict::Pass),
        verdict,
        lots: Vec::new(),
        note: None,
    }
}

/// How a certificate prints a word (as written in the spec) or a censored result
/// ("< 0.01", converted by `factor` to the reporting unit), issue #15.
fn special_text(r: &RecordedResult, p: &Property, factor: Decimal) -> String {
    match r {
        RecordedResult::Word(w) => w.clone(),
        RecordedResult::Below(l) => censored_text((*l * factor).normalize(), p.decimals),
        RecordedResult::Number(n) => n.to_string(),
    }
}

/// The recorded value of the calculated property `key` and its spec entry, when the lot has
/// the value, its spec revision defines the property and `keys` reports it.
fn reported_value<'s>(
    spec: &'s ProductSpec,
    rec: &LotRecord,
    keys: &[String],
    key: &str,
) -> Option<(Decimal, &'s Property)> {
    if !keys.iter().any(|k| k == key) {
        return None;
    }
    Some((rec.value(key)?, spec.property(key)?))
}

/// How the calculated values (Mn, Xn) were obtained, for those reported.
fn calculated_notes(spec: &ProductSpec, rec: &LotRecord, keys: &[String]) -> Vec<CalculatedNote> {
    let mut calculated = Vec::new();
    if let Some((mn, p)) = reported_value(spec, rec, keys, MN) {
        calculated.push(CalculatedNote {
            mark: String::new(),
            key: MN.into(),
            label: "Number-average molar mass Mn".into(),
            value: round(mn, p.decimals, spec.rounding).to_string(),
            unit: "g/mol".into(),
            expanded_uncertainty: rec
                .mn_uncertainty
                .and_then(decimal_from_f64)
                .map(|u| round(u, p.decimals, spec.rounding).to_string()),
            coverage_factor: rec.mn_uncertainty.map(|_| "2".to_string()),
            basis: format!(
                "calculated by end-group analysis from the acid value and hydroxyl value, Mn = 56100 · f / (AV + OHV), assuming {}; the uncertainty is propagated from those of the two titrations",
                end_groups_words(spec.functionality)
            ),
        });
    }
    if let Some((xn, p)) = reported_value(spec, rec, keys, XN) {
        calculated.push(CalculatedNote {
            mark: String::new(),
            key: XN.into(),
            label: "Degree of polymerisation Xn".into(),
            value: round(xn, p.decimals, spec.rounding).to_string(),
            unit: String::new(),
            expanded_uncertainty: None,
            coverage_factor: None,
            basis: "calculated from the batch recipe by the Carothers equation, with the extent of reaction from the acid value and the water of condensation".into(),
        });
    }
    for (i, n) in calculated.iter_mut().enumerate() {
        n.mark = footnote_mark(i + 1);
    }
    calculated
}

/// The footnote mark of note `n` (1-based): superscript digits, `¹`, `²`, ... `¹⁰`.
pub fn footnote_mark(n: usize) -> String {
    const SUP: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    n.to_string()
        .chars()
        .map(|c| SUP[c.to_digit(10).unwrap_or(0) as usize])
        .collect()
}

/// Replaces the space after a number by a no-break space when a unit or word follows
/// (`20 t`, `30 °C`, `12 months`), so a line never ends between a number and its unit
/// (common typographic practice, e.g. the SI Brochure, 9th ed. 2019, §5.4.3: the numerical
/// value and the unit symbol are separated by a space and stay on one line).
pub fn bind_numbers(text: &str) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len() + 4);
    for (i, &c) in chars.iter().enumerate() {
        let after_digit = i > 0 && chars[i - 1].is_ascii_digit();
        let before_unit = chars
            .get(i + 1)
            .is_some_and(|n| n.is_alphabetic() || matches!(n, '°' | '%' | '‰' | 'µ'));
        if c == ' ' && after_digit && before_unit {
            out.push('\u{a0}');
        } else {
            out.push(c);
        }
    }
    out
}

/// The EN 10204:2004 statement of the document type a customer orders to (wording ours; the
/// definitions of types 2.2 and 3.1 are those of the standard's clauses 4.1 and 4.2, as
/// recalled from memory). A 3.1 certificate needs the site's authorised inspection
/// representative.
fn inspection_document(kind: InspectionDocument, site: &Site) -> Result<cert::InspectionDocument> {
    let statement = match kind {
        InspectionDocument::TestReport22 => "Test report type 2.2 according to EN 10204:2004. \
            The manufacturer declares that the product supplied complies with the requirements \
            of the order and reports the test results above."
            .to_string(),
        InspectionDocument::Certificate31 => {
            let r = site.inspection_representative.as_ref().ok_or_else(|| {
                Error::invalid(
                    format!("templates/{}: inspection_representative", cert::SITE_FILE),
                    "the customer orders EN 10204 type 3.1 certificates, which the site's authorised inspection representative validates, and the site file names none",
                    "Add inspection_representative = { name = \"...\", role = \"...\" } to the site file (a person independent of manufacturing).",
                )
            })?;
            format!(
                "Inspection certificate type 3.1 according to EN 10204:2004. The results above \
                 were obtained by tests on the lot supplied. This certificate is validated by {}, \
                 {}, the manufacturer's authorised inspection representative, who is independent \
                 of the manufacturing department.",
                r.name, r.role
            )
        }
    };
    Ok(cert::InspectionDocument {
        kind: kind.as_str().to_string(),
        statement,
    })
}

/// The decision rule, guard band and statement of conformity (none for a lot not released).
fn conformity(spec: &ProductSpec, rec: &LotRecord, ship: Option<&Shipment>) -> Conformity {
    let statement = if let (Status::Released, Some(c)) = (rec.status, &rec.concession) {
        let deviations = ship
            .and_then(|s| concession_deviations(spec, rec, s).ok())
            .unwrap_or_default();
        format!(
            "RELEASED UNDER CONCESSION {}{}: the lot does not conform in every respect to specification {} revision {}{}. It is supplied under this concession only.",
            c.reference,
            ship.map(|s| format!(" agreed with {}", s.customer.name))
                .unwrap_or_default(),
            spec.code,
            spec.revision,
            if deviations.is_empty() {
                String::new()
            } else {
                format!("; deviations: {}", deviations.join("; "))
            }
        )
    } else if rec.status == Status::Released {
        format!(
            "The lot conforms to specification {} revision {}{} under the decision rule stated.",
            spec.code,
            spec.revision,
            ship.map(|s| format!(" and to the requirements of {}", s.customer.name))
                .unwrap_or_default()
        )
    } else {
        format!(
            "NOT RELEASED: the lot's status is {}. No statement of conformity is made; this certificate is an internal quality record only.",
            rec.status.as_str().replace('_', " ")
        )
    };
    Conformity {
        decision_rule: spec.decision_rule.statement().to_string(),
        guard_band: match spec.decision_rule {
            DecisionRule::Guarded => {
                "w = U, the expanded uncertainty (k = 2) of each result".into()
            }
            DecisionRule::Simple => "w = 0".into(),
        },
        statement,
    }
}

/// Name and role of whoever decided: "name, role" as recorded, or the name with a role from
/// the status.
fn approver(rec: &LotRecord) -> (String, String) {
    match rec.approver.split_once(',') {
        Some((n, r)) => (n.trim().to_string(), r.trim().to_string()),
        None => (
            rec.approver.clone(),
            if rec.status == Status::Released {
                "Authorised for release"
            } else {
                "Recorded the decision"
            }
            .to_string(),
        ),
    }
}

/// The certificate's extra statements: the decision's notes a certificate repeats (a result
/// corrected to the spec temperature says so), then the customer's statements.
fn statements(rec: &LotRecord, ship: Option<&Shipment>) -> Vec<String> {
    let mut st: Vec<String> = rec
        .notes
        .iter()
        .filter(|n| n.kind.on_certificate())
        .map(|n| n.text.clone())
        .collect();
    st.extend(
        ship.map(|s| s.product.statements.clone())
            .unwrap_or_default(),
    );
    st.iter().map(|t| bind_numbers(t)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_stay_with_their_units() {
        assert_eq!(bind_numbers("20 t"), "20\u{a0}t");
        assert_eq!(
            bind_numbers("stored below 30 °C for 12 months"),
            "stored below 30\u{a0}°C for 12\u{a0}months"
        );
        assert_eq!(
            bind_numbers("5 % max, 80 drums"),
            "5\u{a0}% max, 80\u{a0}drums"
        );
        // A space before a number, or between two numbers, stays breakable.
        assert_eq!(bind_numbers("issue 6, rev 7"), "issue 6, rev 7");
    }

    #[test]
    fn test_dates_are_read_from_their_cells_issue_17() {
        let day = NaiveDate::from_ymd_opt(2026, 11, 27);
        assert_eq!(date("2026-11-27"), day);
        assert_eq!(date("2026-11-27T08:00:00Z"), day);
        assert_eq!(date(""), None, "a row recorded before layout v3");
        assert_eq!(date("27/11/2026"), None);
    }

    #[test]
    fn footnote_marks_are_superscript_numbers() {
        assert_eq!(footnote_mark(1), "¹");
        assert_eq!(footnote_mark(2), "²");
        assert_eq!(footnote_mark(10), "¹⁰");
    }

    #[test]
    fn decimals_follow_the_unit_factor() {
        assert_eq!(decimals_after(0, Decimal::new(1, 3)), 3); // mPa·s → Pa·s
        assert_eq!(decimals_after(3, Decimal::from(1000)), 0); // Pa·s → mPa·s
        assert_eq!(decimals_after(1, Decimal::ONE), 1);
    }
}
