//! Finding lots in a product's trend file: status, manufacture dates, windows on recorded
//! values and a customer's requirements (read-only; the rules come from `spec`).

use std::path::Path;

use chrono::NaiveDate;
use rust_decimal::Decimal;

use crate::error::{Error, Result};
use crate::lot::evaluate::Status;
use crate::record::query::{Day, Life, LotRow, LotTable, Window};
use crate::spec::customer::{customer_fit, Customer, CustomerProduct};
use crate::spec::decision::{decimal_from_f64, round_recorded, Rounding};
use crate::spec::keys;
use crate::spec::{ProductSpec, SpecSet};

/// Properties the table of found lots shows after the windows' own keys.
pub const HEADLINE_KEYS: [&str; 3] = [keys::MN, keys::ACID_VALUE, keys::HYDROXYL_VALUE];

/// A customer's requirements for the product searched, with the specs they tighten.
#[derive(Debug, Clone, Copy)]
pub struct CustomerCheck<'a> {
    /// The customer's file stem (a lot released under concession goes to that customer only).
    pub customer: &'a str,
    /// Every spec revision (a lot is judged under the revision it was released under).
    pub specs: &'a SpecSet,
    /// The customer's requirements for the product.
    pub requirements: &'a CustomerProduct,
    /// Words and censored results, which [`LotRow::values`] cannot hold (issue #15).
    pub special: Option<&'a SpecialCells>,
}

/// Words and censored results of a product's lots: the keys, and each row's cells of those
/// keys by line number ([`crate::record::query::raw_cells`]).
pub type SpecialCells = (Vec<String>, std::collections::HashMap<usize, Vec<String>>);

/// What a lot must meet to be found.
#[derive(Debug, Clone)]
pub struct LotFilter<'a> {
    /// Product code.
    pub product: &'a str,
    /// Windows on recorded full-precision values (inclusive bounds).
    pub windows: &'a [Window],
    /// Only lots with this status.
    pub status: Option<Status>,
    /// Only lots manufactured on or after this date.
    pub from: Option<NaiveDate>,
    /// Only lots manufactured on or before this date.
    pub to: Option<NaiveDate>,
    /// Only lots that can be certified for this customer.
    pub customer: Option<CustomerCheck<'a>>,
    /// Each lot's life (parallel to the lots), for shelf life and concessions (issue #14).
    pub life: Option<LifeCheck<'a>>,
    /// How values are reported: windows then compare the reported value (issue #16). `None`
    /// compares the recorded full-precision value.
    pub precision: Option<&'a Precision>,
}

/// Decimals and rounding of each loaded key under one revision.
type KeyPrecision = Vec<Option<(u32, Rounding)>>;

/// Decimals and rounding of each loaded key, by the spec revision each lot was released
/// under (the product's latest revision for a revision no longer in the specs): the reporting
/// precision of certificates and `lookup`, so `find` compares and prints what a certificate
/// prints (ASTM E29 through [`round_recorded`]; issue #16).
#[derive(Debug, Clone, Default)]
pub struct Precision {
    /// A handful of revisions per product: a list searched in order beats hashing per lot.
    by_revision: Vec<(&'static str, KeyPrecision)>,
}

impl Precision {
    /// The precision of `loaded` keys for each of `revisions` of `product` (repeats allowed).
    pub fn of_revisions(
        specs: &SpecSet,
        product: &str,
        revisions: impl IntoIterator<Item = &'static str>,
        loaded: &[String],
    ) -> Precision {
        let of = |spec: Option<&ProductSpec>| -> Vec<Option<(u32, Rounding)>> {
            loaded
                .iter()
                .map(|k| spec.and_then(|s| s.property(k).map(|p| (p.decimals, s.rounding))))
                .collect()
        };
        let mut by_revision: Vec<(&'static str, KeyPrecision)> = Vec::new();
        for rev in revisions {
            if !by_revision.iter().any(|(r, _)| *r == rev) {
                let spec = specs
                    .revision(product, rev)
                    .or_else(|| specs.latest(product));
                by_revision.push((rev, of(spec)));
            }
        }
        Precision { by_revision }
    }

    /// Decimals and rounding of loaded key `i` for `row`; `None` when no spec knows the key.
    pub fn of(&self, row: &LotRow, i: usize) -> Option<(u32, Rounding)> {
        let (_, v) = self
            .by_revision
            .iter()
            .find(|(r, _)| std::ptr::eq(*r, row.revision) || *r == row.revision)?;
        *v.get(i)?
    }

    /// The value of loaded key `i` as reported: rounded to the spec's decimals, or `None`
    /// when the spec does not know the key or the lot has no value.
    pub fn reported(&self, row: &LotRow, i: usize) -> Option<Decimal> {
        let (d, m) = self.of(row, i)?;
        round_recorded(row.values[i]?, d, m)
    }

    /// [`Precision::reported`] as the text `find` prints.
    pub fn reported_text(&self, row: &LotRow, i: usize) -> Option<String> {
        let (d, m) = self.of(row, i)?;
        crate::spec::decision::round_recorded_text(row.values[i]?, d, m)
    }
}

/// Shelf life and concessions in a search (issue #14).
#[derive(Debug, Clone, Copy)]
pub struct LifeCheck<'a> {
    /// Each lot's [`Life`], parallel to the lots searched.
    pub lives: &'a [Life],
    /// The specs (the retest period of the lot's revision); without them nothing expires.
    pub specs: Option<&'a SpecSet>,
    /// Today, against which the retest date is judged.
    pub today: NaiveDate,
    /// Keep lots past their retest date (they are counted, not listed, otherwise).
    pub include_expired: bool,
}

/// True when the lot of `row` (with `life`) is past its retest date on `today` under its
/// spec revision's `retest_months` ([`crate::lot::disposition::retest_date`]); a lot whose
/// revision is not in `specs` is not judged.
pub fn is_expired(
    product: &str,
    row: &LotRow,
    life: &Life,
    specs: &SpecSet,
    today: NaiveDate,
) -> bool {
    let Some(spec) = specs.revision(product, row.revision) else {
        return false;
    };
    let date = |d: &str| crate::support::clock::iso_date(d);
    let Some(made) = date(&row.manufactured) else {
        return false;
    };
    let retested = life.retested.and_then(|d| date(&d));
    crate::lot::disposition::retest_date(made, spec.retest_months, retested)
        .is_some_and(|until| crate::lot::disposition::expired(until, today))
}

/// The customers' products that carry part number `pn` (exact match), as (customer, product
/// code) pairs: `find --part-number` and `shipments --part-number` start from these.
pub fn part_number_owners<'c>(customers: &'c [Customer], pn: &str) -> Vec<(&'c Customer, &'c str)> {
    customers
        .iter()
        .flat_map(|c| {
            c.products
                .iter()
                .filter(|(_, p)| p.part_number.as_deref() == Some(pn))
                .map(move |(code, _)| (c, code.as_str()))
        })
        .collect()
}

/// The status asked for, or by default: any status, but only released lots for a customer
/// (only a released lot can be certified).
pub fn status_or_default(asked: Option<Status>, for_customer: bool) -> Option<Status> {
    asked.or(for_customer.then_some(Status::Released))
}

/// Checks that every window names a property of the trend file (`keys`, from its header).
pub fn check_window_keys(product: &str, keys: &[String], windows: &[Window]) -> Result<()> {
    for w in windows {
        if !keys.contains(&w.key) {
            return Err(Error::invalid(
                format!("--where '{}=...'", w.key),
                format!("{product} has no property '{}'", w.key),
                format!("Use one of: {}.", keys.join(", ")),
            ));
        }
    }
    Ok(())
}

/// The columns to load: every key when `every` (JSON, CSV, a customer's check), otherwise only
/// the windows' keys and the [`HEADLINE_KEYS`], in header order.
pub fn keys_to_load(keys: &[String], windows: &[Window], every: bool) -> Vec<String> {
    if every {
        return keys.to_vec();
    }
    keys.iter()
        .filter(|k| windows.iter().any(|w| w.key == **k) || HEADLINE_KEYS.contains(&k.as_str()))
        .cloned()
        .collect()
}

/// The lots of `table` (loaded with the columns `loaded`; its lives, when the filter has them,
/// are the table's) that meet `filter`, as indices into the table, newest first (then latest
/// record line first), and how many lots that met every other condition were left out as
/// past their retest date (issue #14). Each lot is looked at through one reused row, so no
/// record is built per lot (issue #20).
pub fn matching_in_table(
    table: &LotTable,
    loaded: &[String],
    filter: &LotFilter,
) -> (Vec<usize>, usize) {
    let life_of = |i: usize| -> Life {
        filter
            .life
            .and_then(|l| l.lives.get(i).copied())
            .unwrap_or_default()
    };
    let mut expired = 0usize;
    // Dates compare as their bytes (YYYY-MM-DD): no parsing or text per lot.
    let (from_day, to_day) = (filter.from.map(Day::from), filter.to.map(Day::from));
    let at = |k: &str| loaded.iter().position(|x| x == k).expect("key checked");
    let win_idx: Vec<usize> = filter.windows.iter().map(|w| at(&w.key)).collect();
    let bounds: Vec<(Option<Decimal>, Option<Decimal>)> = filter
        .windows
        .iter()
        .map(|w| {
            (
                w.lo.and_then(decimal_from_f64),
                w.hi.and_then(decimal_from_f64),
            )
        })
        .collect();
    let mut row = LotRow {
        line: 0,
        lot: "".into(),
        manufactured: Day::default(),
        status: "",
        revision: "",
        mn_uncertainty: None,
        values: Vec::new(),
    };
    let mut hits: Vec<usize> = Vec::new();
    for i in 0..table.len() {
        table.row_into(i, &mut row);
        let row = &row;
        if filter.status.is_some_and(|s| s.as_str() != row.status) {
            continue;
        }
        let made = row.manufactured;
        if !(from_day.is_none_or(|f| made >= f) && to_day.is_none_or(|t| made <= t)) {
            continue;
        }
        let in_windows = filter
            .windows
            .iter()
            .zip(&win_idx)
            .zip(&bounds)
            .all(|((w, &k), b)| in_window(row, k, w, *b, filter.precision));
        if !in_windows {
            continue;
        }
        let fits = filter.customer.is_none_or(|c| {
            let life = life_of(i);
            if life.concession.is_empty() {
                fits_customer(filter.product, row, loaded, c)
            } else {
                // Under concession: for its customer, as conceded; for no one else.
                life.concession == c.customer
            }
        });
        if !fits {
            continue;
        }
        if let Some(l) = filter.life {
            let gone = l
                .specs
                .is_some_and(|s| is_expired(filter.product, row, &life_of(i), s, l.today));
            if gone && !l.include_expired {
                expired += 1;
                continue;
            }
        }
        hits.push(i);
    }
    hits.sort_by_key(|&i| std::cmp::Reverse((table.made(i), table.line(i))));
    (hits, expired)
}

/// A search of one product's lots, as `find` and the web find page take it.
#[derive(Debug, Clone)]
pub struct Search<'a> {
    /// Product code.
    pub product: &'a str,
    /// The product's trend file.
    pub trend_file: &'a Path,
    /// Windows on reported values (recorded full-precision values with `full_precision`).
    pub windows: &'a [Window],
    /// The status asked for (None: any; see [`status_or_default`] for a customer).
    pub status: Option<Status>,
    /// Only lots manufactured on or after this date.
    pub from: Option<NaiveDate>,
    /// Only lots manufactured on or before this date.
    pub to: Option<NaiveDate>,
    /// A customer's file stem in `specs/customers`, whose windows apply.
    pub customer: Option<&'a str>,
    /// The specs folder (reporting precision, shelf life, a customer's check).
    pub specs: &'a Path,
    /// Compare and show the recorded full-precision values instead of the reported ones
    /// (`find --full-precision`, issue #16).
    pub full_precision: bool,
    /// Load every property (JSON, CSV), not only the windows' and the headline keys.
    pub every: bool,
    /// List lots past their retest date too (otherwise they are counted, not listed).
    pub include_expired: bool,
    /// Today, against which retest dates are judged.
    pub today: NaiveDate,
}

/// What a [`Search`] found.
#[derive(Debug, Clone)]
pub struct Found {
    /// The property keys of the trend file (header order).
    pub keys: Vec<String>,
    /// The keys loaded into each [`LotRow`]'s values.
    pub loaded: Vec<String>,
    /// The current rows of the matching lots, newest first (issue #20: only the matches are
    /// kept as rows).
    pub lots: Vec<LotRow>,
    /// Each lot's life (retest, concession), parallel to `lots`.
    pub lives: Vec<Life>,
    /// Indices into `lots` of the matches, newest first (every index, in order).
    pub hits: Vec<usize>,
    /// Lots that met every other condition but are past their retest date and were left out.
    pub expired: usize,
    /// The customer's legal name, when a customer's windows applied.
    pub customer_name: Option<String>,
    /// How values are reported (issue #16); `None` with `full_precision`.
    pub precision: Option<Precision>,
}

impl Found {
    /// The value of `key` for the lot `row` as `find` prints it: at the reporting precision,
    /// or at full precision when the spec does not know the key or `full_precision` was
    /// asked; `None` when not loaded or not recorded.
    pub fn value(&self, row: &LotRow, key: &str) -> Option<String> {
        let i = self.loaded.iter().position(|k| k == key)?;
        let v = row.values[i]?;
        Some(
            self.precision
                .as_ref()
                .and_then(|p| p.reported_text(row, i))
                .unwrap_or_else(|| v.to_string()),
        )
    }

    /// The matching lots, newest first.
    pub fn hit_rows(&self) -> Vec<&LotRow> {
        self.hits.iter().map(|&i| &self.lots[i]).collect()
    }

    /// The customer a lot (index into `lots`) was released to under concession, if any.
    pub fn concession(&self, i: usize) -> Option<&'static str> {
        self.lives
            .get(i)
            .map(|l| l.concession)
            .filter(|c| !c.is_empty())
    }

    /// The status of a found lot as the table shows it: "released (concession for X)" for a
    /// lot released under concession.
    pub fn status_text(&self, i: usize) -> String {
        let r = &self.lots[i];
        match self.concession(i) {
            Some(c) => format!("{} (concession for {c})", r.status),
            None => r.status.to_string(),
        }
    }

    /// The line saying how many lots were left out as past their retest date (issue #14),
    /// empty when none.
    pub fn expired_text(&self) -> String {
        match self.expired {
            0 => String::new(),
            n => format!(
                "{n} more lot{} matched but {} past {} retest date and left out (--include-expired lists {}).\n",
                if n == 1 { "" } else { "s" },
                if n == 1 { "is" } else { "are" },
                if n == 1 { "its" } else { "their" },
                if n == 1 { "it" } else { "them" },
            ),
        }
    }
}

/// Runs a search over the record as it stands: checks the windows against the trend file's
/// header, loads the customer and the specs when one is named, scans the file once
/// ([`crate::record::query::current_table_with_life`]) and keeps the lots that meet every condition.
pub fn search(s: &Search) -> Result<Found> {
    let status = status_or_default(s.status, s.customer.is_some());
    let keys = crate::record::query::trend_keys(s.trend_file)?;
    check_window_keys(s.product, &keys, s.windows)?;
    // The reporting precision and a customer's check need the specs; shelf life uses them
    // when there (without a specs folder nothing is judged expired).
    let specs = if !s.full_precision || s.customer.is_some() || s.specs.is_dir() {
        Some(SpecSet::load(s.specs)?)
    } else {
        None
    };
    let customer = match (s.customer, &specs) {
        (Some(c), Some(specs)) => {
            let cu = Customer::load(&s.specs.join("customers"), c, specs)?;
            cu.product(s.product)?;
            Some(cu)
        }
        _ => None,
    };
    // A customer's check needs every property.
    let loaded = keys_to_load(&keys, s.windows, s.every || customer.is_some());
    let (_, table) =
        crate::record::query::current_table_with_life(s.trend_file, &loaded, customer.is_some())?;
    // Issue #15: a customer's check works from the limits the lots were decided on, and
    // reads the words and censored results of the customer's special properties.
    let special: Option<SpecialCells> = match (&specs, &customer) {
        (Some(specs), Some(_)) => {
            crate::record::frozen::refuse_changed(s.trend_file, s.product, specs, None)?;
            let revs = specs.products.get(s.product);
            let special_keys: Vec<String> = keys
                .iter()
                .filter(|k| {
                    revs.into_iter().flatten().any(|r| {
                        r.property(k)
                            .is_some_and(|p| p.is_text() || p.loq.is_some())
                    })
                })
                .cloned()
                .collect();
            let lines: Vec<usize> = (0..table.len()).map(|i| table.line(i)).collect();
            let cells = crate::record::query::raw_cells(s.trend_file, &special_keys, &lines)?;
            Some((special_keys, cells))
        }
        _ => None,
    };
    let customer_check = match (&specs, &customer) {
        (Some(specs), Some(cu)) => Some(CustomerCheck {
            customer: &cu.id,
            specs,
            requirements: cu.product(s.product)?,
            special: special.as_ref(),
        }),
        _ => None,
    };
    let precision = match (&specs, s.full_precision) {
        (Some(sp), false) => Some(Precision::of_revisions(
            sp,
            s.product,
            table.revisions(),
            &loaded,
        )),
        _ => None,
    };
    let filter = LotFilter {
        product: s.product,
        windows: s.windows,
        status,
        from: s.from,
        to: s.to,
        customer: customer_check,
        life: Some(LifeCheck {
            lives: table.lives(),
            specs: specs.as_ref(),
            today: s.today,
            include_expired: s.include_expired,
        }),
        precision: precision.as_ref(),
    };
    let (found, expired) = matching_in_table(&table, &loaded, &filter);
    // Rows for the matches only (issue #20): memory follows the hits, not the lots.
    let lots: Vec<LotRow> = found.iter().map(|&i| table.row(i)).collect();
    let lives: Vec<Life> = found
        .iter()
        .map(|&i| table.lives().get(i).copied().unwrap_or_default())
        .collect();
    let hits: Vec<usize> = (0..lots.len()).collect();
    let customer_name = customer.map(|c| c.name);
    Ok(Found {
        keys,
        loaded,
        lots,
        lives,
        hits,
        expired,
        customer_name,
        precision,
    })
}

/// The found lots as CSV (`find --csv` and the web page's download): lot, product,
/// manufactured, status, then every property as reported ([`Found::value`]). `found` must
/// have loaded every key (`Search::every`).
pub fn csv_text(product: &str, found: &Found) -> Result<String> {
    let bad =
        |e: &dyn std::fmt::Display| Error::invalid("CSV", e.to_string(), "Report this as a bug.");
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut header = vec!["lot", "product", "manufactured", "status"];
    header.extend(found.loaded.iter().map(String::as_str));
    w.write_record(&header).map_err(|e| bad(&e))?;
    for r in found.hit_rows() {
        let mut rec = vec![
            r.lot.to_string(),
            product.to_string(),
            r.manufactured.to_string(),
            r.status.to_string(),
        ];
        rec.extend(
            found
                .loaded
                .iter()
                .map(|k| found.value(r, k).unwrap_or_default()),
        );
        w.write_record(&rec).map_err(|e| bad(&e))?;
    }
    let bytes = w.into_inner().map_err(|e| bad(&e))?;
    String::from_utf8(bytes).map_err(|e| bad(&e))
}

/// The found lots as JSON (`find --json`): `{"lots": [...], "expired_left_out": n}` with
/// every property as reported ([`Found::value`]; null when not recorded).
pub fn json_value(product: &str, found: &Found) -> serde_json::Value {
    use serde_json::{json, Map, Value};
    let lots: Vec<Value> = found
        .hits
        .iter()
        .map(|&i| {
            let r = &found.lots[i];
            let mut m = Map::new();
            m.insert("lot".into(), json!(r.lot));
            m.insert("product".into(), json!(product));
            m.insert("manufactured".into(), json!(r.manufactured));
            m.insert("status".into(), json!(r.status));
            if let Some(c) = found.concession(i) {
                m.insert("concession_customer".into(), json!(c));
            }
            for k in &found.loaded {
                let v = found.value(r, k).and_then(|t| t.parse::<f64>().ok());
                m.insert(k.clone(), v.map_or(Value::Null, |v| json!(v)));
            }
            Value::Object(m)
        })
        .collect();
    json!({ "lots": lots, "expired_left_out": found.expired })
}

/// The columns the table of found lots shows: the windows' keys, then the
/// [`HEADLINE_KEYS`] the product has.
pub fn shown_keys(keys: &[String], windows: &[Window]) -> Vec<String> {
    let mut show: Vec<String> = windows.iter().map(|w| w.key.clone()).collect();
    for k in HEADLINE_KEYS {
        if keys.iter().any(|x| x == k) && !show.iter().any(|s| s == k) {
            show.push(k.to_string());
        }
    }
    show
}

/// Shortens a full-precision number for a table (four significant decimals at most).
pub fn short_number(cell: &str) -> String {
    match cell.parse::<f64>() {
        Ok(v) if cell.len() > 8 => {
            let digits = if v.abs() >= 100.0 {
                0
            } else if v.abs() >= 10.0 {
                2
            } else {
                4
            };
            format!("{v:.digits$}")
        }
        _ => cell.to_string(),
    }
}

/// A value of the table of found lots: as reported, or shortened at full precision
/// ([`short_number`]); empty when not recorded.
pub fn table_cell(found: &Found, row: &LotRow, key: &str) -> String {
    let v = found.value(row, key).unwrap_or_default();
    match found.precision {
        Some(_) => v,
        None => short_number(&v),
    }
}

/// True when loaded value `i` of `row` lies in window `w`: its reported value against the
/// bounds `b` (exact decimals) when the precision is known, its recorded value otherwise.
fn in_window(
    row: &LotRow,
    i: usize,
    w: &Window,
    b: (Option<Decimal>, Option<Decimal>),
    precision: Option<&Precision>,
) -> bool {
    match precision.and_then(|p| p.of(row, i)) {
        Some((d, m)) => row.values[i]
            .and_then(|v| round_recorded(v, d, m))
            .is_some_and(|x| b.0.is_none_or(|lo| x >= lo) && b.1.is_none_or(|hi| x <= hi)),
        None => row.values[i].is_some_and(|v| w.contains(v)),
    }
}

/// True when every property of the lot's spec revision fits the customer's requirements
/// ([`customer_fit`]); a lot whose revision is not in the specs does not fit.
pub fn fits_customer(product: &str, row: &LotRow, loaded: &[String], c: CustomerCheck) -> bool {
    let Some(spec) = c.specs.revision(product, row.revision) else {
        return false;
    };
    spec.properties.iter().all(|p| {
        let value = loaded
            .iter()
            .position(|k| *k == p.key)
            .and_then(|i| row.values[i])
            .and_then(decimal_from_f64);
        let special = match value {
            None => special_cell(c, row, &p.key),
            Some(_) => None,
        };
        if let Some(recorded) = special {
            return crate::spec::customer::special_fit(
                spec,
                p,
                &recorded,
                c.requirements.limits.get(&p.key),
            ) == Some(crate::spec::decision::Verdict::Pass);
        }
        customer_fit(
            spec,
            p,
            value,
            row.mn_uncertainty,
            c.requirements.limits.get(&p.key),
        )
        .passes()
    })
}

/// The word or censored result recorded for `key` on `row`, when the check holds one.
fn special_cell(
    c: CustomerCheck,
    row: &LotRow,
    key: &str,
) -> Option<crate::spec::decision::RecordedResult> {
    let (keys, cells) = c.special?;
    let i = keys.iter().position(|k| k == key)?;
    crate::spec::decision::RecordedResult::parse(cells.get(&row.line)?.get(i)?)
        .filter(|r| !matches!(r, crate::spec::decision::RecordedResult::Number(_)))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The lots of `lots` that meet `filter`, newest first, through the table.
    fn matching_lots_counted<'r>(
        lots: &'r [LotRow],
        loaded: &[String],
        filter: &LotFilter,
    ) -> (Vec<&'r LotRow>, usize) {
        let (hits, expired) = matching_in_table(&LotTable::from_rows(lots), loaded, filter);
        (hits.into_iter().map(|i| &lots[i]).collect(), expired)
    }

    fn matching_lots<'r>(
        lots: &'r [LotRow],
        loaded: &[String],
        filter: &LotFilter,
    ) -> Vec<&'r LotRow> {
        matching_lots_counted(lots, loaded, filter).0
    }

    fn window(key: &str, lo: Option<f64>, hi: Option<f64>) -> Window {
        Window {
            key: key.into(),
            lo,
            hi,
        }
    }

    /// Issue #14: a lot past its retest date is left out and counted unless asked for; a
    /// retest on or after the date extends it; a concession lot fits its customer only.
    /// Invented lots and a fixture spec.
    #[test]
    fn expired_lots_are_counted_and_concessions_fit_their_customer_issue_14() {
        let spec = crate::spec::ProductSpec::parse(
            std::path::Path::new("s.toml"),
            "code = \"P\"\nname = \"Test polyol\"\nrevision = \"A\"\neffective = 2025-01-01\nfunctionality = 2.0\ndecision_rule = \"simple\"\nretest_months = 12\n[properties.acid_value]\nlabel = \"Acid value\"\nunit = \"mg KOH/g\"\nmax = 1.0\ndecimals = 2\n",
        )
        .unwrap();
        let mut specs = SpecSet::default();
        specs.products.insert("P".into(), vec![spec]);
        let lot = |id: &str, made: &str, line: usize| LotRow {
            line,
            lot: id.into(),
            manufactured: made.into(),
            status: "released",
            revision: "A",
            mn_uncertainty: None,
            values: vec![Some(0.5)],
        };
        let lots = vec![
            lot("OLD", "2025-11-01", 2),
            lot("RETESTED", "2025-11-01", 3),
            lot("NEW", "2026-06-01", 4),
            lot("CONCEDED", "2026-06-01", 5),
        ];
        let lives = vec![
            Life::default(),
            Life {
                retested: Some("2026-11-20".into()),
                concession: "",
            },
            Life::default(),
            Life {
                retested: None,
                concession: "acme",
            },
        ];
        let today = NaiveDate::from_ymd_opt(2026, 12, 10).unwrap();
        let loaded = vec!["acid_value".to_string()];
        let mut filter = LotFilter {
            product: "P",
            windows: &[],
            status: None,
            from: None,
            to: None,
            customer: None,
            life: Some(LifeCheck {
                lives: &lives,
                specs: Some(&specs),
                today,
                include_expired: false,
            }),
            precision: None,
        };
        let ids = |hits: &[&LotRow]| hits.iter().map(|r| r.lot.to_string()).collect::<Vec<_>>();
        let (hits, expired) = matching_lots_counted(&lots, &loaded, &filter);
        assert_eq!(ids(&hits), ["CONCEDED", "NEW", "RETESTED"]);
        assert_eq!(expired, 1);
        filter.life = Some(LifeCheck {
            include_expired: true,
            ..filter.life.unwrap()
        });
        assert_eq!(matching_lots_counted(&lots, &loaded, &filter).1, 0);
        assert_eq!(matching_lots(&lots, &loaded, &filter).len(), 4);
        let requirements = crate::spec::customer::CustomerProduct {
            part_number: None,
            report: None,
            statements: Vec::new(),
            limits: Default::default(),
            units: Default::default(),
        };
        for (who, listed) in [("acme", true), ("other", false)] {
            filter.customer = Some(CustomerCheck {
                customer: who,
                specs: &specs,
                requirements: &requirements,
                special: None,
            });
            let hits = matching_lots(&lots, &loaded, &filter);
            assert_eq!(
                ids(&hits).contains(&"CONCEDED".to_string()),
                listed,
                "{who}"
            );
        }
    }

    #[test]
    fn table_loads_only_windows_and_headline_keys() {
        let keys: Vec<String> = ["acid_value", "hydroxyl_value", "viscosity", "mn", "colour"]
            .map(String::from)
            .to_vec();
        let w = [window("colour", None, Some(2.0))];
        assert_eq!(
            keys_to_load(&keys, &w, false),
            ["acid_value", "hydroxyl_value", "mn", "colour"]
        );
        assert_eq!(keys_to_load(&keys, &w, true), keys);
        assert!(check_window_keys("PD-2000", &keys, &w).is_ok());
        assert_eq!(status_or_default(None, true), Some(Status::Released));
        assert_eq!(status_or_default(None, false), None);
        assert_eq!(
            status_or_default(Some(Status::OnHold), true),
            Some(Status::OnHold)
        );
        let e = check_window_keys("PD-2000", &keys, &[window("tg", None, None)])
            .unwrap_err()
            .to_string();
        assert!(e.contains("PD-2000 has no property 'tg'"), "{e}");
    }
}
