//! `resinlot shipments`: the customer certificates issued, one per delivery, newest first.

use chrono::NaiveDate;

use crate::cmd::args::{self, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::record::certlog::Certificate;
use crate::record::shipments::{self, Query};
use crate::spec::customer::Customer;
use crate::spec::SpecSet;

/// Arguments of `resinlot shipments`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Only certificates for this customer (file stem in SPECS/customers, or the legal name).
    #[arg(long, value_name = "NAME")]
    pub customer: Option<String>,
    /// Only certificates that cover this lot.
    #[arg(long, value_name = "LOT")]
    pub lot: Option<String>,
    /// Only certificates for this purchase order.
    #[arg(long, value_name = "PO")]
    pub po: Option<String>,
    /// Only certificates for the product that has this part number in the customer's file.
    #[arg(long, value_name = "PN")]
    pub part_number: Option<String>,
    /// Only certificates issued on or after this day (YYYY-MM-DD, UTC).
    #[arg(long, value_name = "DATE", value_parser = args::date)]
    pub since: Option<NaiveDate>,
    /// Only certificates issued on or before this day (YYYY-MM-DD, UTC).
    #[arg(long, value_name = "DATE", value_parser = args::date)]
    pub until: Option<NaiveDate>,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The specs folder (`--specs`), for customers' names and part numbers.
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
    if let (Some(s), Some(u)) = (args.since, args.until) {
        if s > u {
            return Err(Error::invalid(
                format!("--since {s} --until {u}"),
                "the period ends before it starts",
                "Give --since on or before --until.",
            )
            .into());
        }
    }
    let customers = if args.part_number.is_some() || args.customer.is_some() {
        let specs = SpecSet::load(&args.specs)?;
        crate::spec::customer::load_all(&args.specs.join("customers"), &specs)?
    } else {
        Vec::new()
    };
    if let Some(c) = &args.customer {
        known_customer(c, &customers, &args.specs)?;
    }
    let certs = crate::record::certlog::all_certificates(&args.register)?;
    let q = Query {
        customer: args.customer.as_deref(),
        lot: args.lot.as_deref(),
        po: args.po.as_deref(),
        part_number: args.part_number.as_deref(),
        since: args.since,
        until: args.until,
    };
    let found = shipments::shipments(&certs, &q, &customers);
    let text = if args.json {
        serde_json::to_string_pretty(&serde_json::json!({ "shipments": found }))? + "\n"
    } else if args.csv {
        csv_text(&found)?
    } else if found.is_empty() {
        "No certificates issued match.\n".to_string()
    } else {
        table_text(&found)
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

/// Refuses a customer that no customer file names (a typo would otherwise list nothing).
fn known_customer(
    name: &str,
    customers: &[Customer],
    specs: &std::path::Path,
) -> anyhow::Result<()> {
    if customers
        .iter()
        .any(|c| c.id.eq_ignore_ascii_case(name) || c.name.eq_ignore_ascii_case(name))
    {
        return Ok(());
    }
    Err(Error::invalid(
        format!("--customer '{name}'"),
        format!(
            "no customer file in {} has this file name or legal name",
            specs.join("customers").display()
        ),
        format!(
            "Known customers: {}.",
            customers
                .iter()
                .map(|c| c.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    )
    .into())
}

const COLUMNS: [&str; 9] = [
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

fn cells(c: &Certificate) -> [String; 9] {
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

fn csv_text(found: &[Certificate]) -> anyhow::Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(COLUMNS)?;
    for c in found {
        w.write_record(cells(c))?;
    }
    Ok(String::from_utf8(w.into_inner()?)?)
}

fn table_text(found: &[Certificate]) -> String {
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
        .filter(|c| c.status == crate::record::certlog::CertStatus::Current)
        .count();
    t.push_str(&format!(
        "{} certificate{} ({current} current).\n",
        found.len(),
        if found.len() == 1 { "" } else { "s" }
    ));
    t
}
