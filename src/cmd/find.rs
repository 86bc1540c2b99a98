//! `resinlot find`: which lots of a product fit given windows, or a customer's requirements.

use crate::cmd::args::{self, ProductArg, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::lot::evaluate::Status;
use crate::record::find::{self, Found, Search};
use crate::record::query::{parse_window, Window};
use chrono::NaiveDate;

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
    let path = args.product.trend_file(&args.register, "--product")?;
    let product = args.product.code();
    // The table needs only the windows and a few headline values; JSON and CSV need every
    // property.
    let found = find::search(&Search {
        product,
        trend_file: &path,
        windows: &windows,
        status: args.status,
        from: args.from,
        to: args.to,
        customer: args.customer.as_deref(),
        specs: &args.specs,
        every: args.json || args.csv,
        include_expired: args.include_expired,
        today: crate::support::clock::now()?.date_naive(),
    })?;
    let text = if args.json {
        serde_json::to_string_pretty(&find::json_value(product, &found))? + "\n"
    } else if args.csv {
        find::csv_text(product, &found)?
    } else if found.hits.is_empty() {
        format!("No lots match.\n{}", found.expired_text())
    } else {
        table_text(product, &windows, &found) + &found.expired_text()
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

fn table_text(product: &str, windows: &[Window], found: &Found) -> String {
    let show = find::shown_keys(&found.keys, windows);
    let mut rows = vec![{
        let mut h = vec!["lot".to_string(), "manufactured".into(), "status".into()];
        h.extend(show.iter().cloned());
        h
    }];
    for &i in &found.hits {
        let r = &found.lots[i];
        let mut line = vec![
            r.lot.to_string(),
            r.manufactured.to_string(),
            found.status_text(i),
        ];
        for k in &show {
            line.push(find::table_cell(found, r, k));
        }
        rows.push(line);
    }
    let n = found.hits.len();
    let mut t = crate::support::table::render(&rows);
    t.push_str(&format!(
        "{n} lot{} of {product} match{}.\n",
        if n == 1 { "" } else { "s" },
        found
            .customer_name
            .as_ref()
            .map(|c| format!(" {c}'s requirements (tighter windows, product decision rule)"))
            .unwrap_or_default()
    ));
    t
}
