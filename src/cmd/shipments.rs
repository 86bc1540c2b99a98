//! `resinlot shipments`: the customer certificates issued, one per delivery, newest first.

use chrono::NaiveDate;

use crate::cmd::args::{self, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::record::shipments::{self, Query};
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
        shipments::known_customer(
            &format!("--customer '{c}'"),
            c,
            &customers,
            &args.specs.join("customers"),
        )?;
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
        shipments::csv_text(&found)?
    } else if found.is_empty() {
        "No certificates issued match.\n".to_string()
    } else {
        shipments::table_text(&found)
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}
