//! `resinlot find`: which lots of a product fit given windows, or a customer's requirements.

use chrono::NaiveDate;
use serde_json::{json, Map, Value};

use crate::cmd::args::{self, ProductArg, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::lot::evaluate::Status;
use std::collections::HashMap;

use crate::record::find::{self, CustomerCheck, LifeCheck, LotFilter};
use crate::record::query::{parse_window, LotRow, Window};
use crate::spec::customer::Customer;
use crate::spec::SpecSet;

/// Arguments of `resinlot find`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The product, as the first argument or `--product`.
    #[command(flatten)]
    pub product: ProductArg,
    /// A window a lot must meet, as key=lo..hi with either end open (mn=1900..2100,
    /// acid_value=..0.5); bounds are inclusive, on the recorded full-precision value. Repeat
    /// for several properties.
    #[arg(long = "where", value_name = "KEY=LO..HI")]
    pub windows: Vec<String>,
    /// Only lots with this status: released, on_hold, rejected or incomplete. Default: any
    /// status (released only with --customer).
    #[arg(long, value_name = "STATUS", value_parser = args::status)]
    pub status: Option<Status>,
    /// Only lots manufactured on or after this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE", value_parser = args::date)]
    pub from: Option<NaiveDate>,
    /// Only lots manufactured on or before this date (YYYY-MM-DD).
    #[arg(long, value_name = "DATE", value_parser = args::date)]
    pub to: Option<NaiveDate>,
    /// Apply this customer's windows (file stem in SPECS/customers) under the product's
    /// decision rule, as `certify` would: lists the lots that can be certified for them.
    #[arg(long, value_name = "NAME")]
    pub customer: Option<String>,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The specs folder (`--specs`).
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// Print JSON instead of the table.
    #[arg(long, conflicts_with = "csv")]
    pub json: bool,
    /// Print CSV (for a spreadsheet) instead of the table.
    #[arg(long)]
    pub csv: bool,
    /// Also list lots past their retest date (manufacture date + the spec's retest_months,
    /// extended by a retest on or after it). Default: they are left out and counted.
    #[arg(long)]
    pub include_expired: bool,
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let windows: Vec<Window> = args
        .windows
        .iter()
        .map(|w| parse_window(w))
        .collect::<Result<_, _>>()?;
    let status = find::status_or_default(args.status, args.customer.is_some());
    let (from, to) = (args.from, args.to);
    let path = args.product.trend_file(&args.register, "--product")?;
    let keys = crate::record::query::trend_keys(&path)?;
    find::check_window_keys(args.product.code(), &keys, &windows)?;
    let (specs, customer) = match &args.customer {
        Some(c) => {
            let specs = SpecSet::load(&args.specs)?;
            let cu = Customer::load(&args.specs.join("customers"), c, &specs)?;
            cu.product(args.product.code())?;
            (Some(specs), Some(cu))
        }
        // Shelf life needs the retest period of each lot's revision; without a specs folder
        // nothing is judged expired.
        None if args.specs.is_dir() => (Some(SpecSet::load(&args.specs)?), None),
        None => (None, None),
    };
    let customer_check = match (&specs, &customer) {
        (Some(specs), Some(cu)) => Some(CustomerCheck {
            customer: &cu.id,
            specs,
            requirements: cu.product(args.product.code())?,
        }),
        _ => None,
    };
    // The table needs only the windows and a few headline values; JSON, CSV and a customer's
    // check need every property.
    let every = args.json || args.csv || customer.is_some();
    let loaded = find::keys_to_load(&keys, &windows, every);
    let (_, lots, lives) =
        crate::record::query::current_lots_with_life(&path, &loaded, customer.is_some())?;
    let filter = LotFilter {
        product: args.product.code(),
        windows: &windows,
        status,
        from,
        to,
        customer: customer_check,
        life: Some(LifeCheck {
            lives: &lives,
            specs: specs.as_ref(),
            today: crate::support::clock::now()?.date_naive(),
            include_expired: args.include_expired,
        }),
    };
    let (hits, expired) = find::matching_lots_counted(&lots, &loaded, &filter);
    let concessions: HashMap<usize, &str> = lots
        .iter()
        .zip(&lives)
        .filter(|(_, l)| !l.concession.is_empty())
        .map(|(r, l)| (r.line, l.concession))
        .collect();
    let text = if args.json {
        json_text(args.product.code(), &keys, &hits, expired, &concessions)?
    } else if args.csv {
        csv_text(args.product.code(), &keys, &hits)?
    } else if hits.is_empty() {
        format!("No lots match.\n{}", expired_text(expired))
    } else {
        table_text(
            args,
            &keys,
            &loaded,
            &windows,
            &hits,
            customer.as_ref(),
            &concessions,
        ) + &expired_text(expired)
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

fn fmt(v: Option<f64>) -> String {
    v.map(|x| x.to_string()).unwrap_or_default()
}

/// The line saying how many lots were left out as past their retest date (issue #14).
fn expired_text(expired: usize) -> String {
    match expired {
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

fn json_text(
    product: &str,
    keys: &[String],
    hits: &[&LotRow],
    expired: usize,
    concessions: &HashMap<usize, &str>,
) -> anyhow::Result<String> {
    let lots: Vec<Value> = hits
        .iter()
        .map(|r| {
            let mut m = Map::new();
            m.insert("lot".into(), json!(r.lot));
            m.insert("product".into(), json!(product));
            m.insert("manufactured".into(), json!(r.manufactured));
            m.insert("status".into(), json!(r.status));
            if let Some(c) = concessions.get(&r.line) {
                m.insert("concession_customer".into(), json!(c));
            }
            for (k, v) in keys.iter().zip(&r.values) {
                m.insert(k.clone(), v.map_or(Value::Null, |v| json!(v)));
            }
            Value::Object(m)
        })
        .collect();
    Ok(serde_json::to_string_pretty(&json!({ "lots": lots, "expired_left_out": expired }))? + "\n")
}

fn csv_text(product: &str, keys: &[String], hits: &[&LotRow]) -> anyhow::Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut header = vec!["lot", "product", "manufactured", "status"];
    header.extend(keys.iter().map(String::as_str));
    w.write_record(&header)?;
    for r in hits {
        let mut rec = vec![
            r.lot.to_string(),
            product.to_string(),
            r.manufactured.to_string(),
            r.status.to_string(),
        ];
        rec.extend(r.values.iter().map(|v| fmt(*v)));
        w.write_record(&rec)?;
    }
    Ok(String::from_utf8(w.into_inner()?)?)
}

fn table_text(
    args: &Args,
    keys: &[String],
    loaded: &[String],
    windows: &[Window],
    hits: &[&LotRow],
    customer: Option<&Customer>,
    concessions: &HashMap<usize, &str>,
) -> String {
    let at = |k: &str| loaded.iter().position(|x| x == k).expect("key checked");
    let mut show: Vec<String> = windows.iter().map(|w| w.key.clone()).collect();
    for k in find::HEADLINE_KEYS {
        if keys.iter().any(|x| x == k) && !show.iter().any(|s| s == k) {
            show.push(k.to_string());
        }
    }
    let mut rows = vec![{
        let mut h = vec!["lot".to_string(), "manufactured".into(), "status".into()];
        h.extend(show.iter().cloned());
        h
    }];
    for r in hits {
        let status = match concessions.get(&r.line) {
            Some(c) => format!("{} (concession for {c})", r.status),
            None => r.status.to_string(),
        };
        let mut line = vec![r.lot.to_string(), r.manufactured.to_string(), status];
        for k in &show {
            line.push(short_number(&fmt(r.values[at(k)])));
        }
        rows.push(line);
    }
    let mut t = crate::support::table::render(&rows);
    t.push_str(&format!(
        "{} lot{} of {} match{}.\n",
        hits.len(),
        if hits.len() == 1 { "" } else { "s" },
        args.product.code(),
        customer
            .map(|c| format!(
                " {}'s requirements (tighter windows, product decision rule)",
                c.name
            ))
            .unwrap_or_default()
    ));
    t
}

/// Shortens a full-precision number for the table (four significant decimals at most).
fn short_number(cell: &str) -> String {
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
