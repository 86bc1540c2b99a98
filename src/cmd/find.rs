//! `resinlot find`: which lots of a product fit given windows, or a customer's requirements.

use chrono::NaiveDate;
use serde_json::{json, Map, Value};

use crate::cmd::args::{self, ProductArg, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::lot::evaluate::Status;
use crate::record::find::{self, CustomerCheck, LotFilter};
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
        None => (None, None),
    };
    if let Some(specs) = &specs {
        // Issue #15: a customer's check works from the limits the lots were decided on.
        crate::record::frozen::refuse_changed(&path, args.product.code(), specs, None)?;
    }
    let customer_check = match (&specs, &customer) {
        (Some(specs), Some(cu)) => Some(CustomerCheck {
            specs,
            requirements: cu.product(args.product.code())?,
        }),
        _ => None,
    };
    // The table needs only the windows and a few headline values; JSON, CSV and a customer's
    // check need every property.
    let every = args.json || args.csv || customer.is_some();
    let loaded = find::keys_to_load(&keys, &windows, every);
    let (_, lots) = crate::record::query::current_lots(&path, &loaded, customer.is_some())?;
    let filter = LotFilter {
        product: args.product.code(),
        windows: &windows,
        status,
        from,
        to,
        customer: customer_check,
    };
    let hits = find::matching_lots(&lots, &loaded, &filter);
    let text = if args.json {
        json_text(args.product.code(), &keys, &hits)?
    } else if args.csv {
        csv_text(args.product.code(), &keys, &hits)?
    } else if hits.is_empty() {
        "No lots match.\n".to_string()
    } else {
        table_text(args, &keys, &loaded, &windows, &hits, customer.as_ref())
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

fn fmt(v: Option<f64>) -> String {
    v.map(|x| x.to_string()).unwrap_or_default()
}

fn json_text(product: &str, keys: &[String], hits: &[&LotRow]) -> anyhow::Result<String> {
    let lots: Vec<Value> = hits
        .iter()
        .map(|r| {
            let mut m = Map::new();
            m.insert("lot".into(), json!(r.lot));
            m.insert("product".into(), json!(product));
            m.insert("manufactured".into(), json!(r.manufactured));
            m.insert("status".into(), json!(r.status));
            for (k, v) in keys.iter().zip(&r.values) {
                m.insert(k.clone(), v.map_or(Value::Null, |v| json!(v)));
            }
            Value::Object(m)
        })
        .collect();
    Ok(serde_json::to_string_pretty(&json!({ "lots": lots }))? + "\n")
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
        let mut line = vec![
            r.lot.to_string(),
            r.manufactured.to_string(),
            r.status.to_string(),
        ];
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
