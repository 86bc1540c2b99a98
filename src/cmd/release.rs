//! `resinlot release`: decide every lot of a results file and append it to the trend files.

use std::collections::BTreeMap;
use std::io::IsTerminal;
use std::path::PathBuf;
use std::time::Duration;

use anyhow::Context;
use serde::Serialize;

use crate::certificate::build::{self, LotRecord};
use crate::certificate::issue::{Issuer, Pending};
use crate::certificate::model::Supersedes;
use crate::cmd::Outcome;
use crate::error::Error;
use crate::lot::evaluate::{evaluate, LotDecision, Status};
use crate::lot::intake::{self, LotResults};
use crate::record::certlog::Log;
use crate::record::trend_file::{self, Locked, Wait};
use crate::spec::SpecSet;

/// Arguments of `resinlot release`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Lab results CSV: wide (one row per lot) or long (one row per test result), comma or
    /// semicolon separated, UTF-8 with or without BOM.
    pub results: PathBuf,
    /// Folder holding the product spec files. Default: specs.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "specs",
        value_name = "DIR"
    )]
    pub specs: PathBuf,
    /// Folder holding the trend files, one CSV per product (created when missing).
    /// Default: register.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "register",
        value_name = "DIR"
    )]
    pub register: PathBuf,
    /// Name and role of the person releasing, recorded on every row and certificate.
    /// Default: the RESINLOT_APPROVER environment variable, else the login name.
    #[arg(long, value_name = "NAME")]
    pub approver: Option<String>,
    /// Numbers in the results file use a decimal comma (the file must then use ';' between
    /// columns). Default: decimal point.
    #[arg(long)]
    pub decimal_comma: bool,
    /// Record lots already in the trend file with new results as a retest: a new row that
    /// supersedes the old one (the old row stays). Needs --reason.
    #[arg(long, requires = "reason")]
    pub retest: bool,
    /// Why the lot is retested; recorded on the new row.
    #[arg(long, value_name = "TEXT")]
    pub reason: Option<String>,
    /// Decide and print, but write nothing.
    #[arg(long)]
    pub dry_run: bool,
    /// Print JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Seconds to wait for another process writing the same trend file. Default: 30.
    #[arg(
        hide_default_value = true,
        long,
        default_value_t = 30,
        value_name = "SECONDS"
    )]
    pub lock_timeout: u64,
    /// Do not write the internal certificate of each newly decided lot (for importing
    /// history). Default: certificates are written.
    #[arg(long)]
    pub no_certificates: bool,
    /// Folder the internal certificates are written to. Default: certificates.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "certificates",
        value_name = "DIR"
    )]
    pub out: PathBuf,
    /// Folder holding certificate.html.tera, certificate.css and site.toml. Default: templates.
    #[arg(
        hide_default_value = true,
        long,
        default_value = "templates",
        value_name = "DIR"
    )]
    pub templates: PathBuf,
    /// Largest results file accepted, in bytes. Default: 67108864 (64 MiB).
    #[arg(hide_default_value = true, long, default_value_t = 64 << 20, value_name = "BYTES")]
    pub max_bytes: u64,
}

/// What happened to one lot in the trend file.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Recorded {
    /// Appended as row `seq`.
    New(usize),
    /// Appended as row `seq`, superseding row `old`.
    Retest {
        /// New row.
        seq: usize,
        /// Superseded row.
        supersedes: usize,
    },
    /// Already recorded with identical results as row `seq`; nothing written.
    Unchanged(usize),
    /// Not written (dry run).
    NotWritten,
}

#[derive(Serialize)]
struct JsonLot<'a> {
    #[serde(flatten)]
    decision: &'a LotDecision,
    recorded: &'a Recorded,
}

/// Resolves the approver from the flag or the environment.
pub fn approver(flag: Option<&str>) -> anyhow::Result<String> {
    let name = flag
        .map(str::to_string)
        .or_else(|| std::env::var("RESINLOT_APPROVER").ok())
        .or_else(|| std::env::var("USER").ok())
        .unwrap_or_default();
    let name = name.trim().to_string();
    if name.is_empty() || name.chars().count() > 80 || name.chars().any(char::is_control) {
        return Err(Error::invalid(
            "--approver",
            "no usable approver name (1 to 80 printable characters)",
            "Pass --approver \"Name, role\" or set RESINLOT_APPROVER.",
        )
        .into());
    }
    Ok(name)
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let approver = approver(args.approver.as_deref())?;
    if let Some(r) = &args.reason {
        if r.trim().is_empty() || r.chars().any(char::is_control) || r.chars().count() > 300 {
            return Err(Error::invalid(
                "--reason",
                "the reason must be 1 to 300 printable characters",
                "State briefly why the lot is retested.",
            )
            .into());
        }
    }
    let specs = SpecSet::load(&args.specs).context("cannot load the product specs")?;
    let opts = intake::Options {
        decimal_comma: args.decimal_comma,
        limits: intake::Limits {
            max_bytes: args.max_bytes,
            ..intake::Limits::default()
        },
    };
    let lots = intake::read_file(&args.results, opts)?;
    let file = args.results.display().to_string();
    let bar = progress(lots.len());
    let mut decisions = Vec::with_capacity(lots.len());
    let today = crate::support::clock::now()?.date_naive();
    for lot in &lots {
        if lot.manufactured > today {
            return Err(Error::invalid(
                format!("{file}:{}, lot '{}'", lot.line, lot.lot),
                format!(
                    "manufacture date {} is in the future (today is {today})",
                    lot.manufactured
                ),
                "Check the manufacture date.",
            )
            .into());
        }
        let spec = specs
            .for_date(&lot.product, lot.manufactured)
            .map_err(|e| match e {
                Error::Invalid {
                    place,
                    problem,
                    fix,
                } => Error::invalid(format!("{file}:{}: {place}", lot.line), problem, fix),
                other => other,
            })?;
        decisions.push(evaluate(spec, lot, &file)?);
        bar.inc(1);
    }
    bar.finish_and_clear();
    let now = crate::support::clock::now()?;
    let now_text = now.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let with_certs = !args.dry_run && !args.no_certificates;
    let issuer = if with_certs {
        Some(Issuer::new(&args.templates, &args.out)?)
    } else {
        None
    };
    let mut log: Option<Log> = None;
    let mut pending: Vec<Pending> = Vec::new();
    let mut rendered = Vec::new();
    let recorded = if args.dry_run {
        vec![Recorded::NotWritten; decisions.len()]
    } else {
        record(
            args,
            &specs,
            &lots,
            &decisions,
            &approver,
            &now_text,
            &mut |plan| {
                let Some(issuer) = &issuer else {
                    return Ok(());
                };
                // Locked only once every trend-file check has passed, so a refused release
                // leaves the certificate log untouched too.
                let log = log.insert(Log::lock(
                    &args.register,
                    Wait {
                        timeout: Duration::from_secs(args.lock_timeout),
                    },
                )?);
                let entries = log.entries();
                for (i, d) in decisions.iter().enumerate() {
                    if plan[i] == Some(usize::MAX) {
                        continue;
                    }
                    let spec = specs.for_date(&d.product, d.manufactured)?;
                    let rec = LotRecord::from_decision(d, &approver, &now_text);
                    let supersedes = entries
                        .iter()
                        .rev()
                        .find(|e| e.lot == d.lot && e.customer.is_empty())
                        .map(|e| Supersedes {
                            number: e.number.clone(),
                            reason: args.reason.clone().unwrap_or_else(|| "retest".into()),
                        });
                    let number = log.number_after(&issuer.site.certificate_prefix, pending.len());
                    let certificate = build::build(
                        &issuer.site,
                        spec,
                        &rec,
                        None,
                        &number,
                        now.date_naive(),
                        supersedes,
                    )?;
                    pending.push(Pending {
                        certificate,
                        customer: String::new(),
                        reason: args.reason.clone().unwrap_or_default(),
                    });
                }
                rendered = issuer.render(&pending)?;
                issuer.check_targets(&pending)?;
                Ok(())
            },
        )?
    };
    let issued = match (&issuer, &mut log) {
        (Some(issuer), Some(log)) => issuer.file(log, &pending, &rendered, false, &now_text)?,
        _ => Vec::new(),
    };
    let text = if args.json {
        let lots: Vec<JsonLot> = decisions
            .iter()
            .zip(&recorded)
            .map(|(decision, recorded)| JsonLot { decision, recorded })
            .collect();
        serde_json::to_string_pretty(&serde_json::json!({ "lots": lots, "certificates": issued }))?
            + "\n"
    } else {
        let mut t = render(&specs, &decisions, &recorded, &args.register, args.dry_run);
        if !issued.is_empty() {
            t.push_str(&format!(
                "{} internal certificate{} written to {} ({} to {}).\n",
                issued.len(),
                if issued.len() == 1 { "" } else { "s" },
                args.out.display(),
                issued[0].certificate_number,
                issued[issued.len() - 1].certificate_number
            ));
        }
        t
    };
    crate::support::output::print(&text)?;
    Ok(if decisions.iter().all(|d| d.status == Status::Released) {
        Outcome::AllGood
    } else {
        Outcome::FellShort
    })
}

fn progress(n: usize) -> indicatif::ProgressBar {
    if n > 20 && std::io::stderr().is_terminal() {
        let bar = indicatif::ProgressBar::new(n as u64);
        bar.set_style(
            indicatif::ProgressStyle::with_template("deciding lots {bar:40} {pos}/{len}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        bar
    } else {
        indicatif::ProgressBar::hidden()
    }
}

/// Appends every decision, under one exclusive lock per trend file. Every check runs before
/// the first byte is written, so an error leaves every file as it was.
fn record(
    args: &Args,
    specs: &SpecSet,
    lots: &[LotResults],
    decisions: &[LotDecision],
    approver: &str,
    now: &str,
    before_write: &mut dyn FnMut(&[Option<usize>]) -> anyhow::Result<()>,
) -> anyhow::Result<Vec<Recorded>> {
    let mut by_product: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
    for (i, d) in decisions.iter().enumerate() {
        by_product.entry(&d.product).or_default().push(i);
    }
    let wait = Wait {
        timeout: Duration::from_secs(args.lock_timeout),
    };
    let mut locks: BTreeMap<&str, Locked> = BTreeMap::new();
    for (&product, idx) in &by_product {
        let keys = specs.all_keys(product);
        let mut needed: Vec<String> = Vec::new();
        for &i in idx {
            for p in &decisions[i].properties {
                if !needed.contains(&p.property) {
                    needed.push(p.property.clone());
                }
            }
        }
        let path = trend_file::path_for(&args.register, product);
        locks.insert(product, trend_file::lock(&path, &keys, &needed, wait)?);
    }
    // A lot id names one lot plant-wide: refuse one already recorded under another product.
    let mut elsewhere: std::collections::HashMap<String, String> = std::collections::HashMap::new();
    let ours: std::collections::HashSet<&str> = decisions.iter().map(|d| d.lot.as_str()).collect();
    if args.register.is_dir() {
        for path in crate::record::query::trend_files(&args.register)? {
            let product = path
                .file_stem()
                .map(|s| s.to_string_lossy().to_string())
                .unwrap_or_default();
            if by_product.contains_key(product.as_str()) {
                continue;
            }
            trend_file::scan(&path, &["lot"], |_, c| {
                if ours.contains(c[0]) {
                    elsewhere.insert(c[0].to_string(), product.clone());
                }
            })?;
        }
    }
    for (i, d) in decisions.iter().enumerate() {
        if let Some(other) = elsewhere.get(&d.lot) {
            return Err(Error::invalid(
                format!(
                    "{}:{}, lot '{}'",
                    args.results.display(),
                    lots[i].line,
                    d.lot
                ),
                format!("this lot id is already recorded for product {other}"),
                "Lot ids must be unique across products; check the lot id and the product code.",
            )
            .into());
        }
    }
    // Plan: decide what each lot needs, refusing conflicts before writing anything.
    let mut plan: Vec<Option<usize>> = Vec::with_capacity(decisions.len());
    let mut out = vec![Recorded::NotWritten; decisions.len()];
    for (i, d) in decisions.iter().enumerate() {
        let locked = &locks[d.product.as_str()];
        let t = &locked.trend;
        match t.lot_rows(&d.lot).first() {
            None => plan.push(None),
            Some(row) => {
                let seq: usize = t.cell(row, "seq").parse().unwrap_or(0);
                let same = t.cell(row, "manufactured") == d.manufactured.to_string()
                    && d.properties.iter().all(|p| {
                        let spec_p = specs
                            .for_date(&d.product, d.manufactured)
                            .ok()
                            .and_then(|s| s.property(&p.property).cloned());
                        let entered_col = if p.property == "hydroxyl_value" {
                            "hydroxyl_value_entered"
                        } else {
                            p.property.as_str()
                        };
                        spec_p.is_none_or(|sp| sp.derived)
                            || same_number(
                                t.cell(row, entered_col),
                                p.entered.as_deref().unwrap_or(""),
                            )
                    });
                if same {
                    out[i] = Recorded::Unchanged(seq);
                    plan.push(Some(usize::MAX));
                } else if args.retest {
                    plan.push(Some(seq));
                } else {
                    return Err(Error::invalid(
                        format!("{}:{}, lot '{}'", args.results.display(), lots[i].line, d.lot),
                        format!(
                            "the lot is already recorded in {} (row {seq}) with different results",
                            t.path.display()
                        ),
                        "If this is a retest, run again with --retest --reason \"...\"; the old row stays as history.",
                    )
                    .into());
                }
            }
        }
    }
    before_write(&plan)?;
    for (i, d) in decisions.iter().enumerate() {
        if plan[i] == Some(usize::MAX) {
            continue;
        }
        let locked = locks.get_mut(d.product.as_str()).expect("locked above");
        let mut cells: Vec<(&str, String)> = vec![
            ("recorded_at", now.to_string()),
            ("lot", d.lot.clone()),
            ("product", d.product.clone()),
            ("manufactured", d.manufactured.to_string()),
            ("spec_revision", d.spec_revision.clone()),
            ("status", d.status.as_str().to_string()),
            ("approver", approver.to_string()),
            ("notes", d.notes.join("; ")),
        ];
        let mut verdict_names: Vec<String> = Vec::new();
        for p in &d.properties {
            verdict_names.push(format!("{}_verdict", p.property));
        }
        for (p, vname) in d.properties.iter().zip(&verdict_names) {
            let value = p
                .exact
                .clone()
                .or_else(|| p.value.map(|v| v.to_string()))
                .unwrap_or_default();
            cells.push((p.property.as_str(), value));
            cells.push((
                vname.as_str(),
                p.verdict
                    .map(|v| v.as_str().to_string())
                    .unwrap_or_default(),
            ));
            if p.property == "hydroxyl_value" {
                cells.push((
                    "hydroxyl_value_entered",
                    p.entered.clone().unwrap_or_default(),
                ));
            }
            if p.property == "mn" {
                cells.push((
                    "mn_uncertainty",
                    p.uncertainty.map(|u| u.to_string()).unwrap_or_default(),
                ));
            }
        }
        if let Some(old) = plan[i] {
            cells.push(("supersedes", old.to_string()));
            cells.push(("reason", args.reason.clone().unwrap_or_default()));
        }
        let seq = locked.append(&cells)?;
        out[i] = match plan[i] {
            Some(old) => Recorded::Retest {
                seq,
                supersedes: old,
            },
            None => Recorded::New(seq),
        };
    }
    for locked in locks.values_mut() {
        locked.sync()?;
    }
    Ok(out)
}

fn short(v: Option<crate::spec::decision::Verdict>) -> &'static str {
    use crate::spec::decision::Verdict::*;
    match v {
        Some(Pass) | None => "",
        Some(ConditionalPass) => " (cond. pass)",
        Some(ConditionalFail) => " (cond. fail)",
        Some(Fail) => " (FAIL)",
    }
}

fn render(
    specs: &SpecSet,
    decisions: &[LotDecision],
    recorded: &[Recorded],
    register: &std::path::Path,
    dry_run: bool,
) -> String {
    let mut out = String::new();
    let mut products: Vec<&str> = decisions.iter().map(|d| d.product.as_str()).collect();
    products.sort_unstable();
    products.dedup();
    for product in products {
        let idx: Vec<usize> = (0..decisions.len())
            .filter(|&i| decisions[i].product == product)
            .collect();
        let name = specs.latest(product).map_or("", |s| s.name.as_str());
        out.push_str(&format!("{product}  {name}\n"));
        let keys: Vec<&str> = decisions[idx[0]]
            .properties
            .iter()
            .map(|p| p.property.as_str())
            .collect();
        let mut rows = vec![{
            let mut h = vec!["lot".to_string(), "rev".into(), "status".into()];
            h.extend(keys.iter().map(|k| k.to_string()));
            h.push("record".into());
            h
        }];
        for &i in &idx {
            let d = &decisions[i];
            let mut r = vec![
                d.lot.clone(),
                d.spec_revision.clone(),
                d.status.as_str().to_string(),
            ];
            for k in &keys {
                r.push(d.get(k).map_or("-".to_string(), |p| {
                    format!(
                        "{}{}",
                        p.reported.as_deref().unwrap_or("missing"),
                        short(p.verdict)
                    )
                }));
            }
            r.push(match &recorded[i] {
                Recorded::New(s) => format!("row {s}"),
                Recorded::Retest { seq, supersedes } => {
                    format!("row {seq} (retest of {supersedes})")
                }
                Recorded::Unchanged(s) => format!("unchanged (row {s})"),
                Recorded::NotWritten => "not written".into(),
            });
            rows.push(r);
        }
        out.push_str(&crate::support::table::render(&rows));
        for &i in &idx {
            let d = &decisions[i];
            if d.status != Status::Released && !d.notes.is_empty() {
                out.push_str(&format!(
                    "  {} {}: {}\n",
                    d.lot,
                    d.status.as_str(),
                    d.notes.join("; ")
                ));
            }
        }
        out.push('\n');
    }
    let count = |s: Status| decisions.iter().filter(|d| d.status == s).count();
    out.push_str(&format!(
        "{} lots: {} released, {} on hold, {} rejected, {} incomplete. {}\n",
        decisions.len(),
        count(Status::Released),
        count(Status::OnHold),
        count(Status::Rejected),
        count(Status::Incomplete),
        if dry_run {
            "Dry run: nothing was written.".to_string()
        } else {
            let unchanged = recorded
                .iter()
                .filter(|r| matches!(r, Recorded::Unchanged(_)))
                .count();
            format!(
                "Recorded in {}{}.",
                register.display(),
                if unchanged > 0 {
                    format!(" ({unchanged} already recorded, unchanged)")
                } else {
                    String::new()
                }
            )
        }
    ));
    out
}

/// True when two recorded values are the same number ("0.98" and "0.980" are), or both empty.
fn same_number(a: &str, b: &str) -> bool {
    match (
        a.parse::<rust_decimal::Decimal>(),
        b.parse::<rust_decimal::Decimal>(),
    ) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}
