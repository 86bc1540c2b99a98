//! Finding lots in a product's trend file: status, manufacture dates, windows on recorded
//! values and a customer's requirements (read-only; the rules come from `spec`).

use std::path::Path;

use chrono::NaiveDate;

use crate::error::{Error, Result};
use crate::lot::evaluate::Status;
use crate::record::query::{LotRow, Window};
use crate::spec::customer::{customer_fit, Customer, CustomerProduct};
use crate::spec::decision::decimal_from_f64;
use crate::spec::keys;
use crate::spec::SpecSet;

/// Properties the table of found lots shows after the windows' own keys.
pub const HEADLINE_KEYS: [&str; 3] = [keys::MN, keys::ACID_VALUE, keys::HYDROXYL_VALUE];

/// A customer's requirements for the product searched, with the specs they tighten.
#[derive(Debug, Clone, Copy)]
pub struct CustomerCheck<'a> {
    /// Every spec revision (a lot is judged under the revision it was released under).
    pub specs: &'a SpecSet,
    /// The customer's requirements for the product.
    pub requirements: &'a CustomerProduct,
}

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

/// The lots (`lots`, loaded with the columns `loaded`) that meet `filter`, newest first (then
/// latest record line first).
pub fn matching_lots<'r>(
    lots: &'r [LotRow],
    loaded: &[String],
    filter: &LotFilter,
) -> Vec<&'r LotRow> {
    matching_indices(lots, loaded, filter)
        .into_iter()
        .map(|i| &lots[i])
        .collect()
}

/// The indices in `lots` of the lots that meet `filter`, in the order of [`matching_lots`].
pub fn matching_indices(lots: &[LotRow], loaded: &[String], filter: &LotFilter) -> Vec<usize> {
    // Dates are YYYY-MM-DD, so text order is date order: no parsing per row.
    let from = filter.from.map(|d| d.to_string());
    let to = filter.to.map(|d| d.to_string());
    let at = |k: &str| loaded.iter().position(|x| x == k).expect("key checked");
    let win_idx: Vec<usize> = filter.windows.iter().map(|w| at(&w.key)).collect();
    let mut hits: Vec<usize> = lots
        .iter()
        .enumerate()
        .filter(|(_, row)| filter.status.is_none_or(|s| s.as_str() == row.status))
        .filter(|(_, row)| {
            let made: &str = &row.manufactured;
            from.as_deref().is_none_or(|f| made >= f) && to.as_deref().is_none_or(|t| made <= t)
        })
        .filter(|(_, row)| {
            filter
                .windows
                .iter()
                .zip(&win_idx)
                .all(|(w, &i)| row.values[i].is_some_and(|v| w.contains(v)))
        })
        .filter(|(_, row)| {
            filter
                .customer
                .is_none_or(|c| fits_customer(filter.product, row, loaded, c))
        })
        .map(|(i, _)| i)
        .collect();
    hits.sort_by(|&a, &b| {
        let (a, b) = (&lots[a], &lots[b]);
        b.manufactured
            .cmp(&a.manufactured)
            .then(b.line.cmp(&a.line))
    });
    hits
}

/// A search of one product's lots, as `find` and the web find page take it.
#[derive(Debug, Clone)]
pub struct Search<'a> {
    /// Product code.
    pub product: &'a str,
    /// The product's trend file.
    pub trend_file: &'a Path,
    /// Windows on recorded full-precision values.
    pub windows: &'a [Window],
    /// The status asked for (None: any; see [`status_or_default`] for a customer).
    pub status: Option<Status>,
    /// Only lots manufactured on or after this date.
    pub from: Option<NaiveDate>,
    /// Only lots manufactured on or before this date.
    pub to: Option<NaiveDate>,
    /// A customer's file stem in `specs/customers`, whose windows apply.
    pub customer: Option<&'a str>,
    /// The specs folder (read only for a customer's check).
    pub specs: &'a Path,
    /// Load every property (JSON, CSV), not only the windows' and the headline keys.
    pub every: bool,
}

/// What a [`Search`] found.
#[derive(Debug, Clone)]
pub struct Found {
    /// The property keys of the trend file (header order).
    pub keys: Vec<String>,
    /// The keys loaded into each [`LotRow`]'s values.
    pub loaded: Vec<String>,
    /// Every lot's current row.
    pub lots: Vec<LotRow>,
    /// Indices into `lots` of the matches, newest first.
    pub hits: Vec<usize>,
    /// The customer's legal name, when a customer's windows applied.
    pub customer_name: Option<String>,
}

impl Found {
    /// The matching lots, newest first.
    pub fn hit_rows(&self) -> Vec<&LotRow> {
        self.hits.iter().map(|&i| &self.lots[i]).collect()
    }
}

/// Runs a search over the record as it stands: checks the windows against the trend file's
/// header, loads the customer and the specs when one is named, scans the file once
/// ([`crate::record::query::current_lots`]) and keeps the lots that meet every condition.
pub fn search(s: &Search) -> Result<Found> {
    let status = status_or_default(s.status, s.customer.is_some());
    let keys = crate::record::query::trend_keys(s.trend_file)?;
    check_window_keys(s.product, &keys, s.windows)?;
    let (specs, customer) = match s.customer {
        Some(c) => {
            let specs = SpecSet::load(s.specs)?;
            let cu = Customer::load(&s.specs.join("customers"), c, &specs)?;
            cu.product(s.product)?;
            (Some(specs), Some(cu))
        }
        None => (None, None),
    };
    let customer_check = match (&specs, &customer) {
        (Some(specs), Some(cu)) => Some(CustomerCheck {
            specs,
            requirements: cu.product(s.product)?,
        }),
        _ => None,
    };
    // A customer's check needs every property.
    let loaded = keys_to_load(&keys, s.windows, s.every || customer.is_some());
    let (_, lots) = crate::record::query::current_lots(s.trend_file, &loaded, customer.is_some())?;
    let filter = LotFilter {
        product: s.product,
        windows: s.windows,
        status,
        from: s.from,
        to: s.to,
        customer: customer_check,
    };
    let hits = matching_indices(&lots, &loaded, &filter);
    Ok(Found {
        keys,
        loaded,
        lots,
        hits,
        customer_name: customer.map(|c| c.name),
    })
}

fn cell(v: Option<f64>) -> String {
    v.map(|x| x.to_string()).unwrap_or_default()
}

/// The found lots as CSV (`find --csv` and the web page's download): lot, product,
/// manufactured, status, then every property at full precision. `found` must have loaded
/// every key (`Search::every`).
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
        rec.extend(r.values.iter().map(|v| cell(*v)));
        w.write_record(&rec).map_err(|e| bad(&e))?;
    }
    let bytes = w.into_inner().map_err(|e| bad(&e))?;
    String::from_utf8(bytes).map_err(|e| bad(&e))
}

/// The found lots as JSON (`find --json`): `{"lots": [...]}` with every property at full
/// precision (null when not recorded).
pub fn json_value(product: &str, found: &Found) -> serde_json::Value {
    use serde_json::{json, Map, Value};
    let lots: Vec<Value> = found
        .hit_rows()
        .iter()
        .map(|r| {
            let mut m = Map::new();
            m.insert("lot".into(), json!(r.lot));
            m.insert("product".into(), json!(product));
            m.insert("manufactured".into(), json!(r.manufactured));
            m.insert("status".into(), json!(r.status));
            for (k, v) in found.loaded.iter().zip(&r.values) {
                m.insert(k.clone(), v.map_or(Value::Null, |v| json!(v)));
            }
            Value::Object(m)
        })
        .collect();
    json!({ "lots": lots })
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

/// A value of the table of found lots: `key`'s value shortened, empty when not recorded.
pub fn table_cell(found: &Found, row: &LotRow, key: &str) -> String {
    found
        .loaded
        .iter()
        .position(|k| k == key)
        .map(|i| short_number(&cell(row.values[i])))
        .unwrap_or_default()
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

#[cfg(test)]
mod tests {
    use super::*;

    fn window(key: &str, lo: Option<f64>, hi: Option<f64>) -> Window {
        Window {
            key: key.into(),
            lo,
            hi,
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
