//! `resinlot certify`: a customer's certificate of analysis for one released lot.

use std::time::Duration;

use crate::certificate::build::{self, LotRecord, Shipment};
use crate::certificate::issue::{Issuer, Pending};
use crate::certificate::model::Supersedes;
use crate::cmd::args::{
    check_lot_id, CertificatesFolder, Locking, RegisterFolder, SpecsFolder, TemplatesFolder,
};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::lot::evaluate::Status;
use crate::record::certlog::{Certificate as LogCertificate, Log};
use crate::record::shipments::Delivery;
use crate::record::trend_file::{Locked, Wait};
use crate::spec::customer::Customer;
use crate::spec::SpecSet;

/// Arguments of `resinlot certify`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The lot id, or several lot ids of one product for a delivery made of several lots (one
    /// certificate, a results column per lot).
    #[arg(required = true, num_args = 1.., value_name = "LOT")]
    pub lots: Vec<String>,
    /// Customer file stem in SPECS/customers (e.g. brantwick for brantwick.toml).
    #[arg(long, value_name = "NAME")]
    pub customer: String,
    /// The customer's purchase order number, printed on the certificate. A new purchase order
    /// is a new delivery and gets a new certificate.
    #[arg(long, value_name = "PO")]
    pub po: Option<String>,
    /// Quantity shipped, as it should be printed (e.g. "20 t", "80 drums").
    #[arg(long, value_name = "TEXT")]
    pub quantity: Option<String>,
    /// Why a certificate is issued again for the same lot, customer and purchase order;
    /// required for such a reissue, which supersedes the previous certificate (the old file
    /// stays).
    #[arg(long, value_name = "TEXT")]
    pub reason: Option<String>,
    /// The specs folder (`--specs`).
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The templates folder (`--templates`).
    #[command(flatten)]
    pub templates: TemplatesFolder,
    /// The certificates folder (`--certificates`).
    #[command(flatten)]
    pub certificates: CertificatesFolder,
    /// Also write the certificate's HTML beside the PDF (for e-mail bodies).
    #[arg(long)]
    pub html: bool,
    /// Print {"certificate_number","path","sha256","json_path","json_sha256","lots"} as JSON
    /// (the JSON companion's path and SHA-256 when it was written).
    #[arg(long)]
    pub json: bool,
    /// How long to wait for a lock (`--lock-timeout`).
    #[command(flatten)]
    pub locking: Locking,
}

fn text_arg(flag: &str, v: &Option<String>) -> anyhow::Result<()> {
    if let Some(t) = v {
        crate::support::text::check_line(
            flag,
            &flag.trim_start_matches('-').replace('-', " "),
            t,
            120,
        )?;
    }
    Ok(())
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    text_arg("--po", &args.po)?;
    text_arg("--quantity", &args.quantity)?;
    text_arg("--reason", &args.reason)?;
    for lot in &args.lots {
        check_lot_id(lot)?;
    }
    crate::record::shipments::check_distinct(&args.lots)?;
    let specs = SpecSet::load(&args.specs)?;
    let customer = Customer::load(&args.specs.join("customers"), &args.customer, &specs)?;
    let wait = Wait {
        timeout: Duration::from_secs(args.locking.lock_timeout),
    };
    // The lots' status is read and decided under the trend file's lock, the one `release`
    // holds while appending, and the lock is kept until the certificate is logged: a retest
    // that rejects a lot either lands before (and is seen) or waits (issue #13, item 2).
    let (trend_lock, recs) = recorded_lots(args, wait)?;
    let rec = &recs[0];
    let revision = crate::record::shipments::one_revision(
        recs.iter().map(|r| (r.lot.as_str(), r.revision.as_str())),
    )?;
    let spec = specs.revision(&rec.product, revision).ok_or_else(|| {
        Error::invalid(
            format!("lot {}", rec.lot),
            format!(
                "spec {} revision {} is not in {}",
                rec.product,
                revision,
                args.specs.display()
            ),
            "Keep every revision a lot was released under in the specs folder.",
        )
    })?;
    // Limits frozen into the record (issue #15): never certify from a revision edited after
    // the lot was decided on it.
    if let Some(rec) = recs
        .iter()
        .find(|r| !r.spec_sha256.is_empty() && *r.spec_sha256 != *spec.sha256)
    {
        crate::record::frozen::refuse_changed(
            &trend_lock.trend.path,
            &rec.product,
            &specs,
            Some(&rec.revision),
        )?;
        return Err(Error::Shortfall(format!(
            "{} revision {} was changed after lot {} was decided on it: make a new revision instead, and restore this one from backup",
            rec.product, rec.revision, rec.lot
        ))
        .into());
    }
    let cp = customer.product(&rec.product)?;
    let unreleased: Vec<String> = recs
        .iter()
        .filter(|r| r.status != Status::Released)
        .map(|r| format!("lot {} is {}", r.lot, r.status.as_str().replace('_', " ")))
        .collect();
    if !unreleased.is_empty() {
        return Err(Error::Shortfall(format!(
            "{}: a customer certificate is issued only for released lots",
            unreleased.join("; ")
        ))
        .into());
    }
    let ship = Shipment {
        customer: &customer,
        product: cp,
        purchase_order: args.po.as_deref(),
        quantity: args.quantity.as_deref(),
    };
    let today = crate::support::clock::now()?.date_naive();
    for rec in &recs {
        check_shelf_life(rec, spec.retest_months, today)?;
    }
    // A lot released under concession goes to its customer alone, deviations and all; for
    // everyone else it is not released (issue #14). Each other lot meets the windows.
    let mut deviations: Vec<String> = Vec::new();
    let mut plain: Vec<LotRecord> = Vec::new();
    for rec in &recs {
        match &rec.concession {
            Some(c) if c.customer != customer.id => {
                return Err(Error::Shortfall(format!(
                    "lot {} is released under concession {} for customer '{}' only: it cannot be certified for {}",
                    rec.lot, c.reference, c.customer, customer.name
                ))
                .into())
            }
            Some(_) => deviations.extend(
                build::concession_deviations(spec, rec, &ship)?
                    .into_iter()
                    .map(|d| if recs.len() > 1 { format!("lot {}: {d}", rec.lot) } else { d }),
            ),
            None => plain.push(rec.clone()),
        }
    }
    build::check_customer(spec, &plain, &ship)?;
    let concessions: Vec<&str> = recs
        .iter()
        .filter_map(|r| r.concession.as_ref().map(|c| c.reference.as_str()))
        .collect();
    let issuer = Issuer::new(&args.templates, &args.certificates)?;
    if let Some(note) = issuer.notice() {
        eprintln!("{note}");
    }
    let mut log = Log::lock(&args.register, wait)?;
    let lots: Vec<&str> = recs.iter().map(|r| r.lot.as_str()).collect();
    let delivery = Delivery {
        customer: &customer.id,
        po: args.po.as_deref().unwrap_or(""),
        lots: &lots,
    };
    let certs = crate::record::certlog::certificates(&log.entries(), &log.standings());
    let previous = crate::record::shipments::reissue_of(&certs, &delivery)?;
    let supersedes = supersedes(previous.as_ref(), args, &delivery, &customer)?;
    let superseded = supersedes.clone();
    let now = crate::support::clock::now()?;
    let number = issuer.numbering(&log)?.nth(0);
    let certificate = build::build_delivery(
        &issuer.site,
        spec,
        &recs,
        &ship,
        &number,
        now.date_naive(),
        supersedes,
    )?;
    let pending = vec![Pending {
        certificate,
        customer: customer.id.clone(),
        reason: args.reason.clone().unwrap_or_default(),
        po: args.po.clone().unwrap_or_default(),
        quantity: args.quantity.clone().unwrap_or_default(),
    }];
    let rendered = issuer.render(&pending)?;
    issuer.check_targets(&pending)?;
    let issued_at = now.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let issued = issuer.file(&mut log, &pending, &rendered, args.html, &issued_at)?;
    let i = &issued[0];
    if let Some(old) = &superseded {
        // The reissue row names what it supersedes; the event row says so in the old
        // certificate's own terms (issue #14). Either alone makes the old one superseded.
        log.supersede(&old.number, &i.certificate_number, &old.reason, &issued_at)?;
    }
    let text = if args.json {
        let mut v = serde_json::to_value(i)?;
        v["lots"] = serde_json::json!(lots);
        v["po"] = serde_json::json!(args.po);
        v["quantity"] = serde_json::json!(args.quantity);
        v["supersedes"] = serde_json::json!(previous.as_ref().map(|p| &p.number));
        if !concessions.is_empty() {
            v["concession"] =
                serde_json::json!({"reference": concessions.join(", "), "deviations": deviations});
        }
        serde_json::to_string_pretty(&v)? + "\n"
    } else {
        let mut t = format!(
            "Certificate {} for lot{} {} ({}) issued to {}{}{}\n  {}\n  SHA-256 {}\n{}",
            i.certificate_number,
            if lots.len() == 1 { "" } else { "s" },
            lots.join(", "),
            rec.product,
            customer.name,
            args.po
                .as_ref()
                .map(|p| format!(", PO {p}"))
                .unwrap_or_default(),
            previous
                .map(|p| format!(", superseding {}", p.number))
                .unwrap_or_default(),
            i.path.display(),
            i.sha256,
            match (&i.json_path, &i.json_sha256) {
                (Some(p), Some(sha)) => format!("  {}\n  SHA-256 {sha}\n", p.display()),
                _ => "  (no JSON data companion: the certificate log predates it; run `resinlot upgrade`)\n".to_string(),
            }
        );
        if !concessions.is_empty() {
            t.push_str(&format!(
                "  Released under concession {} agreed with {}; outside the windows:\n",
                concessions.join(", "),
                customer.name
            ));
            if deviations.is_empty() {
                t.push_str("    none recorded\n");
            }
            for d in &deviations {
                t.push_str(&format!("    {d}\n"));
            }
        }
        t
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

/// The lots' latest records, read from their product's intact trend file under that file's
/// lock (taken and returned here, so the caller holds it until the certificate is filed).
/// Lots of different products cannot share a certificate (exit 2).
fn recorded_lots(args: &Args, wait: Wait) -> anyhow::Result<(Locked, Vec<LotRecord>)> {
    let not_recorded = |lot: &str| {
        Error::Shortfall(format!(
            "lot '{}' is not in the record at {}",
            lot,
            args.register.display()
        ))
    };
    let mut path: Option<(std::path::PathBuf, String)> = None;
    for lot in &args.lots {
        let Some(found) = crate::record::query::find_lot(&args.register, lot)? else {
            return Err(not_recorded(lot).into());
        };
        match &path {
            None => path = Some((found.path, lot.clone())),
            Some((p, first)) if *p != found.path => {
                return Err(Error::invalid(
                    format!("certify {first} {lot}"),
                    format!(
                    "lot {first} is in {} and lot {lot} in {}: one certificate covers one product",
                    p.display(),
                    found.path.display()
                ),
                    "Certify the lots of each product on their own certificate.",
                )
                .into())
            }
            Some(_) => {}
        }
    }
    let (path, _) = path.expect("at least one lot (clap requires it)");
    // Locking reads the whole file and checks its chain: a certificate is issued only from an
    // intact record, and from the rows that are latest while the lock is held.
    let locked = crate::record::trend_file::lock(&path, &[], &[], wait)?;
    let trend = &locked.trend;
    let mut recs = Vec::new();
    for lot in &args.lots {
        // The id as recorded: any case finds the lot (issue #14).
        let found = crate::record::query::find_lot(&args.register, lot)?
            .ok_or_else(|| not_recorded(lot))?;
        let id = found.cell(&found.rows[0], "lot");
        let rows = trend.lot_rows(id);
        let row = *rows.first().ok_or_else(|| not_recorded(lot))?;
        let mut rec = LotRecord::from_row(trend, row)?;
        rec.latest_retest = crate::record::lifecycle::latest_retest(trend, &rows);
        recs.push(rec);
    }
    Ok((locked, recs))
}

/// Refuses (exit 1) a lot whose retest date has passed, naming the date (issue #14); the
/// retest date is extended by a retest on or after it ([`crate::lot::disposition`]).
fn check_shelf_life(rec: &LotRecord, months: u32, today: chrono::NaiveDate) -> anyhow::Result<()> {
    let Some(until) =
        crate::lot::disposition::retest_date(rec.manufactured, months, rec.latest_retest)
    else {
        return Ok(());
    };
    if crate::lot::disposition::expired(until, today) {
        return Err(Error::Shortfall(format!(
            "lot {} passed its retest date {until} (manufactured {}, retest every {months} months{}): it cannot be certified until a retest extends it; record one with `release --retest --reason \"shelf-life retest\"`",
            rec.lot,
            rec.manufactured,
            rec.latest_retest
                .map(|d| format!(", last retest {d}"))
                .unwrap_or_default()
        ))
        .into());
    }
    Ok(())
}

/// What a reissue supersedes: a certificate already issued for one of the lots to the same
/// customer on the same purchase order needs --reason (a new purchase order is a new
/// certificate and needs none).
fn supersedes(
    previous: Option<&LogCertificate>,
    args: &Args,
    delivery: &Delivery,
    customer: &Customer,
) -> anyhow::Result<Option<Supersedes>> {
    match (previous, &args.reason) {
        (Some(p), Some(r)) => Ok(Some(Supersedes { number: p.number.clone(), reason: r.clone() })),
        (Some(p), None) => Err(Error::invalid(
            format!(
                "lot {} for {}{}",
                delivery.lots.join(", "),
                customer.name,
                if delivery.po.is_empty() {
                    " (no purchase order)".to_string()
                } else {
                    format!(" on PO {}", delivery.po)
                }
            ),
            format!("certificate {} was already issued on {} for this lot, customer and purchase order", p.number, p.issued_at),
            "To issue a new revision that supersedes it, add --reason \"...\"; the old certificate stays on record. A new delivery on another purchase order takes --po with that order's number.",
        )
        .into()),
        (None, _) => Ok(None),
    }
}
