//! `resinlot disposition`: QA's decision on a lot after its first decision (issue #14):
//! release a held lot, release it under one customer's concession, send it to rework, or
//! reject it. A decision that rejects or holds a lot withdraws its current certificates.

use std::time::Duration;

use crate::cmd::args::{check_lot_id, Locking, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::lot::disposition::{self, Decision};
use crate::record::append::{self, Disposition};
use crate::record::certlog::{Log, Withdrawn};
use crate::record::lifecycle;
use crate::record::trend_file::Wait;
use crate::spec::customer::Customer;
use crate::spec::SpecSet;

/// clap value parser: a disposition decision.
fn decision(text: &str) -> Result<Decision, String> {
    Decision::parse(text).ok_or_else(|| {
        format!(
            "not a decision. Use one of: {}",
            Decision::ALL.map(Decision::as_str).join(", ")
        )
    })
}

/// Arguments of `resinlot disposition`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The lot id (any case).
    pub lot: String,
    /// QA's decision: released (a lot on hold or incomplete, for every customer), concession
    /// (a lot on hold or incomplete, for the one customer named by --customer, under their
    /// --concession-ref), rework (back to on hold until new results are recorded with
    /// `release --retest`), or rejected (any decided lot).
    #[arg(long, value_name = "DECISION", value_parser = decision)]
    pub decision: Decision,
    /// Why, recorded on the lot's new trend row (one line).
    #[arg(long, value_name = "TEXT")]
    pub reason: String,
    /// Name and role of the QA person deciding, recorded on the row.
    #[arg(long, value_name = "NAME")]
    pub approver: String,
    /// The customer's concession (deviation) number; required with --decision concession.
    #[arg(long, value_name = "REF")]
    pub concession_ref: Option<String>,
    /// The customer (file stem in SPECS/customers) a concession is for; required with
    /// --decision concession, and only then.
    #[arg(long, value_name = "NAME")]
    pub customer: Option<String>,
    /// The specs folder (`--specs`), for the concession's customer file.
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// Print {"lot","status","decision","previous_status","row","withdrawn"} as JSON.
    #[arg(long)]
    pub json: bool,
    /// How long to wait for a lock (`--lock-timeout`).
    #[command(flatten)]
    pub locking: Locking,
}

/// The lines telling whom to notify of `withdrawn` certificates.
pub fn notify_text(lot: &str, withdrawn: &[Withdrawn]) -> String {
    let mut out = String::new();
    let customers: Vec<&Withdrawn> = withdrawn
        .iter()
        .filter(|w| !w.customer.is_empty())
        .collect();
    if !customers.is_empty() {
        out.push_str(&format!(
            "NOTIFY these customers that their certificates for lot {lot} are withdrawn:\n"
        ));
        for w in &customers {
            out.push_str(&format!(
                "  {}  {}{}\n",
                w.number,
                w.customer_name,
                if w.po.is_empty() {
                    String::new()
                } else {
                    format!("  PO {}", w.po)
                }
            ));
        }
    }
    out
}

/// Checks the flags that depend on each other: a concession needs --customer and
/// --concession-ref, any other decision takes neither.
fn check_flags(args: &Args) -> anyhow::Result<()> {
    crate::support::text::check_line("--reason", "reason", &args.reason, 300)?;
    crate::support::text::check_line("--approver", "approver name", &args.approver, 80)?;
    if args.reason.trim().is_empty() {
        return Err(Error::invalid(
            "--reason",
            "the reason is empty",
            "Say why QA decides so, e.g. --reason \"customer deviation agreed, viscosity 4 % high\".",
        )
        .into());
    }
    if args.approver.trim().is_empty() {
        return Err(Error::invalid(
            "--approver",
            "the approver is empty",
            "Pass --approver \"Name, role\".",
        )
        .into());
    }
    let concession = args.decision == Decision::Concession;
    for (flag, value) in [
        ("--customer", &args.customer),
        ("--concession-ref", &args.concession_ref),
    ] {
        match (concession, value) {
            (true, None) => {
                return Err(Error::invalid(
                    flag,
                    "a concession needs the customer and the customer's concession number",
                    "Pass --customer NAME --concession-ref REF (the customer's deviation or concession number).",
                )
                .into())
            }
            (false, Some(_)) => {
                return Err(Error::invalid(
                    flag,
                    format!("{flag} applies only to --decision concession"),
                    "Leave it out, or use --decision concession.",
                )
                .into())
            }
            (true, Some(v)) => crate::support::text::check_line(flag, "value", v, 80)?,
            _ => {}
        }
    }
    Ok(())
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    check_flags(args)?;
    check_lot_id(&args.lot)?;
    let Some(found) = crate::record::query::find_lot(&args.register, &args.lot)? else {
        return Err(Error::Shortfall(format!(
            "lot '{}' is not in the record at {}",
            args.lot,
            args.register.display()
        ))
        .into());
    };
    let lot = found.cell(&found.rows[0], "lot").to_string();
    let product = found.cell(&found.rows[0], "product").to_string();
    let customer = match &args.customer {
        Some(c) => {
            let specs = SpecSet::load(&args.specs)?;
            let cu = Customer::load(&args.specs.join("customers"), c, &specs)?;
            cu.product(&product)?;
            Some(cu)
        }
        None => None,
    };
    let wait = Wait {
        timeout: Duration::from_secs(args.locking.lock_timeout),
    };
    let now = crate::support::clock::now()?.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    // The trend file stays locked until the withdrawals are logged, so a concurrent
    // `certify` either comes first (and its certificate is withdrawn) or sees the new row.
    let mut locked = crate::record::trend_file::lock(&found.path, &[], &[], wait)?;
    let d = Disposition {
        decision: args.decision,
        reason: &args.reason,
        approver: &args.approver,
        concession_ref: args.concession_ref.as_deref().unwrap_or(""),
        concession_customer: customer.as_ref().map_or("", |c| c.id.as_str()),
        now: &now,
    };
    if disposition::withdraws(args.decision.status()) {
        crate::record::certlog::check_withdrawable(&args.register, &[&lot])?;
    }
    let done = append::record_disposition(&mut locked, &lot, &d)?;
    let mut withdrawn = Vec::new();
    if disposition::withdraws(done.status) {
        let t = &locked.trend;
        let row = &t.rows[done.seq - 1];
        let cause = lifecycle::cause_of(t, row, &product);
        let mut log = Log::lock(&args.register, wait)?;
        for e in log.withdraw_lot(&lot, &cause, &[], &now)? {
            withdrawn.push(log.notice(&e));
        }
    }
    drop(locked);
    let text = if args.json {
        serde_json::to_string_pretty(&serde_json::json!({
            "lot": lot,
            "status": done.status.as_str(),
            "decision": args.decision.as_str(),
            "previous_status": done.previous.as_str(),
            "row": done.seq,
            "withdrawn": withdrawn,
        }))? + "\n"
    } else {
        let mut t = format!(
            "Lot {lot} ({product}) {}: {} -> {} (row {} of {}).\n",
            args.decision.words(),
            done.previous.as_str().replace('_', " "),
            done.status.as_str().replace('_', " "),
            done.seq,
            found.path.display()
        );
        if let Some(c) = &customer {
            t.push_str(&format!(
                "Concession {} for {} only: `certify` issues certificates for this customer alone, naming the concession.\n",
                d.concession_ref, c.name
            ));
        }
        t.push_str(&notify_text(&lot, &withdrawn));
        t
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}
