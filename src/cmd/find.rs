//! `resinlot find`: which lots fit given windows, or a customer's requirements, in one product
//! or across every product of the register.

use std::io::Write;

use chrono::NaiveDate;
use serde_json::{json, Map, Value};

use crate::cmd::args::{self, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::lot::evaluate::Status;
use crate::record::find::{self, CustomerCheck, LifeCheck, LotFilter, Precision};
use crate::record::query::{parse_window, LotRow, LotTable, Window};
use crate::spec::customer::Customer;
use crate::spec::SpecSet;

/// Arguments of `resinlot find`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Product code, e.g. PD-2000 (or give it with --product). Default: every product in the
    /// register (the customer's products with --customer).
    #[arg(value_name = "PRODUCT", value_parser = args::product_code)]
    pub product_given: Option<String>,
    /// Product code (or give it as the first argument).
    #[arg(
        long = "product",
        value_name = "CODE",
        value_parser = args::product_code,
        conflicts_with = "product_given"
    )]
    pub product_flag: Option<String>,
    /// A window a lot must meet, as key=lo..hi with either end open (mn=1900..2100,
    /// acid_value=..0.5); bounds are inclusive, on the value rounded as the spec reports it
    /// (ASTM E29, the spec's decimals), as certificates print it. Repeat for several
    /// properties.
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
    /// The customer part number to search: its product, under its customer's requirements.
    #[arg(long, value_name = "PN", conflicts_with_all = ["product_given", "product_flag"])]
    pub part_number: Option<String>,
    /// Compare and print the recorded full-precision values instead of the reported ones
    /// (for analysis; certificates print the reported values).
    #[arg(long)]
    pub full_precision: bool,
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

/// One product searched: its keys, the columns loaded, its matching lots and how they are
/// reported.
struct Searched {
    product: String,
    keys: Vec<String>,
    loaded: Vec<String>,
    /// Every lot's current row, column by column, with its life.
    table: LotTable,
    /// Indices into `table` of the matching lots.
    found: Vec<usize>,
    precision: Option<Precision>,
}

impl Searched {
    /// Customer (file stem) of lot `at` when it was released under concession.
    fn concession(&self, at: usize) -> Option<&'static str> {
        self.table
            .lives()
            .get(at)
            .map(|l| l.concession)
            .filter(|c| !c.is_empty())
    }
}

/// A lot found: the product search it came from and its index in that search's table. Its
/// row is built when it is written (issue #20: no row is kept per lot found).
struct Hit<'a> {
    from: &'a Searched,
    at: usize,
}

impl Hit<'_> {
    /// The lot's current row.
    fn row(&self) -> LotRow {
        self.from.table.row(self.at)
    }

    /// The value of `key` on `row` (this lot's) as printed: at the reporting precision, or
    /// full precision when the spec does not know the key or `--full-precision` was given;
    /// `None` when absent.
    fn value(&self, row: &LotRow, key: &str) -> Option<String> {
        let i = self.from.loaded.iter().position(|k| k == key)?;
        let v = row.values[i]?;
        Some(
            self.from
                .precision
                .as_ref()
                .and_then(|p| p.reported(row, i))
                .map_or_else(|| v.to_string(), |d| d.to_string()),
        )
    }
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let windows: Vec<Window> = args
        .windows
        .iter()
        .map(|w| parse_window(w))
        .collect::<Result<_, _>>()?;
    let given = args.product_given.as_ref().or(args.product_flag.as_ref());
    let unbounded = windows.is_empty()
        && args.customer.is_none()
        && args.part_number.is_none()
        && args.status.is_none()
        && args.from.is_none()
        && args.to.is_none();
    if given.is_none() && unbounded {
        // Every lot of every product is a dump, not a question (issue #12 asks for the product).
        return Err(Error::invalid(
            "find",
            "no product and nothing to look for",
            "Give the product (<PRODUCT> or --product CODE), or search every product with --where, --customer, --part-number, --status, --from or --to.",
        )
        .into());
    }
    let needs_specs = !args.full_precision || args.customer.is_some() || args.part_number.is_some();
    // Shelf life needs the retest period of each lot's revision; without a specs folder
    // nothing is judged expired (issue #14).
    let specs = if needs_specs || args.specs.is_dir() {
        Some(SpecSet::load(&args.specs)?)
    } else {
        None
    };
    let (customer, products) = scope(args, given, specs.as_ref())?;
    let status = find::status_or_default(args.status, customer.is_some());
    // The table needs only the windows and a few headline values; JSON, CSV and a customer's
    // check need every property.
    let every = args.json || args.csv || customer.is_some();
    let today = crate::support::clock::now()?.date_naive();
    let mut expired = 0;
    let mut searched = Vec::new();
    for product in &products {
        let path = crate::record::trend_file::path_for(&args.register, product);
        if given.is_some() && !path.is_file() {
            return Err(Error::invalid(
                format!("--product '{product}'"),
                format!("no trend file {} exists", path.display()),
                "Check the product code; lots appear once `resinlot release` has recorded them.",
            )
            .into());
        }
        if !path.is_file() {
            continue;
        }
        let keys = crate::record::query::trend_keys(&path)?;
        if given.is_some() || products.len() == 1 {
            find::check_window_keys(product, &keys, &windows)?;
        } else if find::check_window_keys(product, &keys, &windows).is_err() {
            continue; // a product without the property has no lot in the window
        }
        let loaded = find::keys_to_load(&keys, &windows, every);
        let (_, table) =
            crate::record::query::current_table_with_life(&path, &loaded, customer.is_some())?;
        if let (Some(specs), Some(_)) = (&specs, &customer) {
            // Issue #15: a customer's check works from the limits the lots were decided on.
            crate::record::frozen::refuse_changed(&path, product, specs, None)?;
        }
        // Words and censored results for the customer's check (issue #15).
        let special: Option<find::SpecialCells> = match (&specs, &customer) {
            (Some(specs), Some(_)) => {
                let revs = specs.products.get(product.as_str());
                let special_keys: Vec<String> = keys
                    .iter()
                    .filter(|k| {
                        revs.into_iter().flatten().any(|s| {
                            s.property(k)
                                .is_some_and(|p| p.is_text() || p.loq.is_some())
                        })
                    })
                    .cloned()
                    .collect();
                let lines: Vec<usize> = (0..table.len()).map(|i| table.line(i)).collect();
                let cells = crate::record::query::raw_cells(&path, &special_keys, &lines)?;
                Some((special_keys, cells))
            }
            _ => None,
        };
        let precision = match (&specs, args.full_precision) {
            (Some(s), false) => Some(Precision::of_revisions(
                s,
                product,
                table.revisions(),
                &loaded,
            )),
            _ => None,
        };
        let check = match (&specs, &customer) {
            (Some(specs), Some(cu)) => Some(CustomerCheck {
                customer: &cu.id,
                specs,
                requirements: cu.product(product)?,
                special: special.as_ref(),
            }),
            _ => None,
        };
        let filter = LotFilter {
            product,
            windows: &windows,
            status,
            from: args.from,
            to: args.to,
            customer: check,
            life: Some(LifeCheck {
                lives: table.lives(),
                specs: specs.as_ref(),
                today,
                include_expired: args.include_expired,
            }),
            precision: precision.as_ref(),
        };
        let (found, gone) = find::matching_in_table(&table, &loaded, &filter);
        expired += gone;
        searched.push(Searched {
            product: product.clone(),
            keys,
            loaded,
            table,
            found,
            precision,
        });
    }
    if searched.is_empty() && !windows.is_empty() && !products.is_empty() {
        return Err(Error::invalid(
            format!("--where '{}=...'", windows[0].key),
            format!(
                "no product in {} records this property",
                args.register.display()
            ),
            "Check the property key (`resinlot specs` lists each product's keys).",
        )
        .into());
    }
    let mut hits: Vec<Hit> = Vec::new();
    for s in &searched {
        hits.extend(s.found.iter().map(|&at| Hit { from: s, at }));
    }
    hits.sort_by(|a, b| {
        let (ta, tb) = (&a.from.table, &b.from.table);
        tb.made(b.at)
            .cmp(&ta.made(a.at))
            .then(a.from.product.cmp(&b.from.product))
            .then(tb.line(b.at).cmp(&ta.line(a.at)))
    });
    // Issue #20: the answer is written as it is made, not gathered first, so memory does
    // not grow with the number of lots found.
    let mut out = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
    if args.json {
        write_json(&mut out, &hits, expired)?;
    } else if args.csv {
        write_csv(&mut out, &searched, &hits)?;
    } else if hits.is_empty() {
        write!(out, "No lots match.\n{}", expired_text(expired))?;
    } else {
        let across = given.is_none() && args.part_number.is_none();
        write_table(&mut out, args, across, &windows, &hits, customer.as_ref())?;
        out.write_all(expired_text(expired).as_bytes())?;
    }
    out.flush()?;
    Ok(Outcome::AllGood)
}

/// The customer whose requirements apply (from --customer or the part number's owner) and
/// the products to search: the one given, the part number's, the customer's, or every
/// product in the register.
fn scope(
    args: &Args,
    given: Option<&String>,
    specs: Option<&SpecSet>,
) -> anyhow::Result<(Option<Customer>, Vec<String>)> {
    let dir = args.specs.join("customers");
    let customer = match (&args.customer, specs) {
        (Some(c), Some(s)) => Some(Customer::load(&dir, c, s)?),
        _ => None,
    };
    if let (Some(pn), Some(s)) = (&args.part_number, specs) {
        let all = match &customer {
            Some(c) => vec![c.clone()],
            None => crate::spec::customer::load_all(&dir, s)?,
        };
        let owners = find::part_number_owners(&all, pn);
        return match owners.as_slice() {
            [(c, product)] => Ok((Some((*c).clone()), vec![product.to_string()])),
            [] => Err(Error::invalid(
                format!("--part-number '{pn}'"),
                format!(
                    "no customer file in {} gives this part number",
                    dir.display()
                ),
                "Check the part number as the customer's order gives it (see the customer's file).",
            )
            .into()),
            many => Err(Error::invalid(
                format!("--part-number '{pn}'"),
                format!(
                    "several customers use this part number ({})",
                    many.iter()
                        .map(|(c, p)| format!("{}: {p}", c.id))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
                "Add --customer NAME to say whose part number it is.",
            )
            .into()),
        };
    }
    let products = match (given, &customer) {
        (Some(p), Some(c)) => {
            c.product(p)?;
            vec![p.clone()]
        }
        (Some(p), None) => vec![p.clone()],
        (None, Some(c)) => c.products.keys().cloned().collect(),
        (None, None) => crate::record::query::trend_files(&args.register)?
            .iter()
            .filter_map(|p| p.file_stem().map(|s| s.to_string_lossy().to_string()))
            .collect(),
    };
    Ok((customer, products))
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

/// One found lot as JSON: lot, product, manufactured, status, the concession's customer when
/// there is one, then every key of its product as reported (null when not recorded).
fn lot_json(h: &Hit) -> Value {
    let r = &h.row();
    let mut m = Map::new();
    m.insert("lot".into(), json!(r.lot));
    m.insert("product".into(), json!(h.from.product));
    m.insert("manufactured".into(), json!(r.manufactured));
    m.insert("status".into(), json!(r.status));
    if let Some(c) = h.from.concession(h.at) {
        m.insert("concession_customer".into(), json!(c));
    }
    for k in &h.from.keys {
        let v = h.value(r, k).and_then(|t| t.parse::<f64>().ok());
        m.insert(k.clone(), v.map_or(Value::Null, |v| json!(v)));
    }
    Value::Object(m)
}

/// Writes `{"expired_left_out": n, "lots": [...]}` pretty-printed, one lot at a time: the
/// same text as `serde_json::to_string_pretty` of the whole object (keys in sorted order, two
/// spaces per level), then a line feed.
fn write_json(out: &mut impl Write, hits: &[Hit], expired: usize) -> anyhow::Result<()> {
    write!(out, "{{\n  \"expired_left_out\": {expired},\n  \"lots\": [")?;
    for (i, h) in hits.iter().enumerate() {
        out.write_all(if i == 0 { b"\n" } else { b",\n" })?;
        let text = serde_json::to_string_pretty(&lot_json(h))?;
        for (j, line) in text.lines().enumerate() {
            if j > 0 {
                out.write_all(b"\n")?;
            }
            out.write_all(b"    ")?;
            out.write_all(line.as_bytes())?;
        }
    }
    if !hits.is_empty() {
        out.write_all(b"\n  ")?;
    }
    out.write_all(b"]\n}\n")?;
    Ok(())
}

/// A CSV writer's error as an I/O error where it is one (so a closed pipe stays a closed pipe).
fn csv_error(e: csv::Error) -> anyhow::Error {
    match e.into_kind() {
        csv::ErrorKind::Io(io) => io.into(),
        other => anyhow::anyhow!("writing CSV: {other:?}"),
    }
}

/// Writes the hits as CSV: lot, product, manufactured, status, then every product's keys in
/// the order they first appear (empty where a lot's product lacks the key).
fn write_csv(out: &mut impl Write, searched: &[Searched], hits: &[Hit]) -> anyhow::Result<()> {
    // Every product's keys, in the order they first appear.
    let mut keys: Vec<&str> = Vec::new();
    for s in searched {
        for k in &s.keys {
            if !keys.contains(&k.as_str()) {
                keys.push(k);
            }
        }
    }
    let mut w = csv::Writer::from_writer(out);
    let mut header = vec!["lot", "product", "manufactured", "status"];
    header.extend(keys.iter().copied());
    w.write_record(&header).map_err(csv_error)?;
    w.flush()?;
    let out = w
        .into_inner()
        .map_err(|e| anyhow::anyhow!("writing CSV: {e}"))?;
    // Issue #20: the lines are made on every core, a block of hits at a time, and written
    // in order as each block is done, so memory holds one block's text, not the answer's.
    use rayon::prelude::*;
    for block in hits.chunks(CSV_BLOCK) {
        let texts: Vec<anyhow::Result<Vec<u8>>> = block
            .par_chunks(CSV_BLOCK / 8)
            .map(|part| csv_lines(&keys, part))
            .collect();
        for t in texts {
            out.write_all(&t?)?;
        }
    }
    out.flush()?;
    Ok(())
}

/// Hits per block of [`write_csv`].
const CSV_BLOCK: usize = 8192;

/// The CSV lines of `hits` (no header), as [`write_csv`] writes them.
fn csv_lines(keys: &[&str], hits: &[Hit]) -> anyhow::Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::with_capacity(hits.len() * 96));
    let mut rec: Vec<String> = Vec::new();
    for h in hits {
        let row = h.row();
        rec.clear();
        rec.extend([
            row.lot.to_string(),
            h.from.product.clone(),
            row.manufactured.to_string(),
            row.status.to_string(),
        ]);
        rec.extend(keys.iter().map(|k| h.value(&row, k).unwrap_or_default()));
        w.write_record(&rec).map_err(csv_error)?;
    }
    w.into_inner()
        .map_err(|e| anyhow::anyhow!("writing CSV: {e}"))
}

/// Writes the hits as an aligned table (streamed: [`crate::support::table::write_streamed`])
/// and the line saying how many lots of which products match.
fn write_table(
    out: &mut impl Write,
    args: &Args,
    across: bool,
    windows: &[Window],
    hits: &[Hit],
    customer: Option<&Customer>,
) -> anyhow::Result<()> {
    let mut show: Vec<String> = windows.iter().map(|w| w.key.clone()).collect();
    for k in find::HEADLINE_KEYS {
        if hits.iter().any(|h| h.from.keys.iter().any(|x| x == k)) && !show.iter().any(|s| s == k) {
            show.push(k.to_string());
        }
    }
    let mut head = vec!["lot".to_string()];
    if across {
        head.push("product".into());
    }
    head.extend(["manufactured".to_string(), "status".into()]);
    head.extend(show.iter().cloned());
    crate::support::table::write_streamed(out, hits.len() + 1, |i, line| {
        let Some(h) = i.checked_sub(1).map(|i| &hits[i]) else {
            line.extend(head.iter().cloned());
            return;
        };
        let row = h.row();
        line.push(row.lot.to_string());
        if across {
            line.push(h.from.product.clone());
        }
        let status = match h.from.concession(h.at) {
            Some(c) => format!("{} (concession for {c})", row.status),
            None => row.status.to_string(),
        };
        line.extend([row.manufactured.to_string(), status]);
        for k in &show {
            let v = h.value(&row, k).unwrap_or_default();
            line.push(if args.full_precision {
                short_number(&v)
            } else {
                v
            });
        }
    })?;
    let products: Vec<&str> = {
        let mut p: Vec<&str> = hits.iter().map(|h| h.from.product.as_str()).collect();
        p.sort();
        p.dedup();
        p
    };
    writeln!(
        out,
        "{} lot{} of {} match{}.",
        hits.len(),
        if hits.len() == 1 { "" } else { "s" },
        if across {
            products.join(", ")
        } else {
            products.first().copied().unwrap_or_default().to_string()
        },
        customer
            .map(|c| format!(
                " {}'s requirements (tighter windows, product decision rule){}",
                c.name,
                args.part_number
                    .as_ref()
                    .map(|pn| format!(" for part number {pn}"))
                    .unwrap_or_default()
            ))
            .unwrap_or_default()
    )?;
    if !args.full_precision {
        out.write_all("Values as reported (rounded to the spec's decimals, ASTM E29); --full-precision shows the recorded values.\n".as_bytes())?;
    }
    Ok(())
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
