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
use crate::record::certlog::{Entry, Log};
use crate::record::trend_file::{Locked, Wait};
use crate::spec::customer::Customer;
use crate::spec::SpecSet;

/// Arguments of `resinlot certify`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The lot id.
    pub lot: String,
    /// Customer file stem in SPECS/customers (e.g. brantwick for brantwick.toml).
    #[arg(long, value_name = "NAME")]
    pub customer: String,
    /// The customer's purchase order number, printed on the certificate.
    #[arg(long, value_name = "PO")]
    pub po: Option<String>,
    /// Quantity shipped, as it should be printed (e.g. "20 t", "80 drums").
    #[arg(long, value_name = "TEXT")]
    pub quantity: Option<String>,
    /// Why a certificate is issued again for the same lot and customer; required for a
    /// reissue, which supersedes the previous certificate (the old file stays).
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
    /// Print {"certificate_number","path","sha256","json_path","json_sha256"} as JSON (the last
    /// two when the JSON data companion was written).
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
    check_lot_id(&args.lot)?;
    let specs = SpecSet::load(&args.specs)?;
    let customer = Customer::load(&args.specs.join("customers"), &args.customer, &specs)?;
    let wait = Wait {
        timeout: Duration::from_secs(args.locking.lock_timeout),
    };
    // The lot's status is read and decided under the trend file's lock, the one `release`
    // holds while appending, and the lock is kept until the certificate is logged: a retest
    // that rejects the lot either lands before (and is seen) or waits (issue #13, item 2).
    let (_trend_lock, rec) = recorded_lot(args, wait)?;
    let spec = specs.revision(&rec.product, &rec.revision).ok_or_else(|| {
        Error::invalid(
            format!("lot {}", rec.lot),
            format!(
                "spec {} revision {} is not in {}",
                rec.product,
                rec.revision,
                args.specs.display()
            ),
            "Keep every revision a lot was released under in the specs folder.",
        )
    })?;
    let cp = customer.product(&rec.product)?;
    if rec.status != Status::Released {
        return Err(Error::Shortfall(format!(
            "lot {} is {}: a customer certificate is issued only for released lots",
            rec.lot,
            rec.status.as_str().replace('_', " ")
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
    check_shelf_life(&rec, spec.retest_months, today)?;
    // A lot released under concession goes to its customer alone, deviations and all; for
    // everyone else it is not released (issue #14).
    let deviations = match &rec.concession {
        Some(c) if c.customer != customer.id => {
            return Err(Error::Shortfall(format!(
                "lot {} is released under concession {} for customer '{}' only: it cannot be certified for {}",
                rec.lot, c.reference, c.customer, customer.name
            ))
            .into())
        }
        Some(_) => build::concession_deviations(spec, &rec, &ship)?,
        None => {
            build::check_customer(spec, &rec, &ship)?;
            Vec::new()
        }
    };
    let issuer = Issuer::new(&args.templates, &args.certificates)?;
    if let Some(note) = issuer.notice() {
        eprintln!("{note}");
    }
    let mut log = Log::lock(&args.register, wait)?;
    let previous = log
        .entries()
        .into_iter()
        .rev()
        .find(|e| e.lot == rec.lot && e.customer == customer.id);
    let supersedes = supersedes(previous.as_ref(), args, &rec, &customer)?;
    let superseded = supersedes.clone();
    let now = crate::support::clock::now()?;
    let number = issuer.numbering(&log)?.nth(0);
    let certificate = build::build(
        &issuer.site,
        spec,
        &rec,
        Some(&ship),
        &number,
        now.date_naive(),
        supersedes,
    )?;
    let pending = vec![Pending {
        certificate,
        customer: customer.id.clone(),
        reason: args.reason.clone().unwrap_or_default(),
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
        if let (Some(o), Some(c)) = (v.as_object_mut(), &rec.concession) {
            o.insert(
                "concession".into(),
                serde_json::json!({"reference": c.reference, "deviations": deviations}),
            );
        }
        serde_json::to_string_pretty(&v)? + "\n"
    } else {
        let mut t = format!(
            "Certificate {} for lot {} ({}) issued to {}{}\n  {}\n  SHA-256 {}\n{}",
            i.certificate_number,
            rec.lot,
            rec.product,
            customer.name,
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
        if let Some(c) = &rec.concession {
            t.push_str(&format!(
                "  Released under concession {} agreed with {}; outside the windows:\n",
                c.reference, customer.name
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

/// The lot's latest record, read from its intact trend file under that file's lock (taken
/// and returned here, so the caller holds it until the certificate is filed).
fn recorded_lot(args: &Args, wait: Wait) -> anyhow::Result<(Locked, LotRecord)> {
    let not_recorded = || {
        Error::Shortfall(format!(
            "lot '{}' is not in the record at {}",
            args.lot,
            args.register.display()
        ))
    };
    let Some(found) = crate::record::query::find_lot(&args.register, &args.lot)? else {
        return Err(not_recorded().into());
    };
    // Locking reads the whole file and checks its chain: a certificate is issued only from an
    // intact record, and from the row that is latest while the lock is held.
    let locked = crate::record::trend_file::lock(&found.path, &[], &[], wait)?;
    let trend = &locked.trend;
    // The id as recorded: any case finds the lot (issue #14).
    let lot = found.cell(&found.rows[0], "lot");
    let rows = trend.lot_rows(lot);
    let row = *rows.first().ok_or_else(not_recorded)?;
    let mut rec = LotRecord::from_row(trend, row)?;
    rec.latest_retest = crate::record::lifecycle::latest_retest(trend, &rows);
    Ok((locked, rec))
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

/// What a reissue supersedes; a second certificate for the same lot and customer needs
/// --reason.
fn supersedes(
    previous: Option<&Entry>,
    args: &Args,
    rec: &LotRecord,
    customer: &Customer,
) -> anyhow::Result<Option<Supersedes>> {
    match (previous, &args.reason) {
        (Some(p), Some(r)) => Ok(Some(Supersedes { number: p.number.clone(), reason: r.clone() })),
        (Some(p), None) => Err(Error::invalid(
            format!("lot {} for {}", rec.lot, customer.name),
            format!("certificate {} was already issued on {}", p.number, p.issued_at),
            "To issue a new revision that supersedes it, add --reason \"...\"; the old certificate stays on record.",
        )
        .into()),
        (None, _) => Ok(None),
    }
}
