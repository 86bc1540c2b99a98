//! `resinlot lookup`: everything the record holds about one lot, in plain words.

use serde_json::{json, Value};

use crate::cmd::args::{check_lot_id, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::record::answer::reported;
use crate::record::certlog::{Entry, Standing};
use crate::record::trend_file::{Row, Trend};

/// A certificate of the lot with its standing in the log.
type Cert = (Entry, Standing);
use crate::spec::keys;
use crate::spec::{end_groups_words, limits_text, ProductSpec, SpecSet};

/// Arguments of `resinlot lookup`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The lot id, as on the drum label or certificate.
    pub lot: String,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The specs folder (`--specs`).
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// Print JSON (values at full precision) instead of the text answer.
    #[arg(long)]
    pub json: bool,
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    check_lot_id(&args.lot)?;
    let all = crate::record::certlog::all_certificates(&args.register)?;
    // A certificate number answers for the certificate and each of its lots (issue #16).
    if let Some(cert) = crate::record::query::certificate(&all, &args.lot) {
        let mut text = certificate_text(&cert);
        let mut lots = Vec::new();
        for lot in &cert.lots {
            let (t, v) = lot_answer(args, lot)?;
            text.push('\n');
            text.push_str(&t);
            lots.push(v);
        }
        let text = if args.json {
            serde_json::to_string_pretty(&json!({ "certificate": cert, "lots": lots }))? + "\n"
        } else {
            text
        };
        crate::support::output::print(&text)?;
        return Ok(Outcome::AllGood);
    }
    let (text, v) = lot_answer(args, &args.lot)?;
    let text = if args.json {
        serde_json::to_string_pretty(&v)? + "\n"
    } else {
        text
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

/// What a certificate number stands for: the delivery it certified and where it stands.
fn certificate_text(c: &crate::record::certlog::Certificate) -> String {
    let mut facts = vec![
        ("Issued".to_string(), c.issued_at.clone()),
        (
            "To".to_string(),
            if c.customer_name.is_empty() {
                "internal (QC record)".to_string()
            } else {
                c.customer_name.clone()
            },
        ),
    ];
    if !c.po.is_empty() {
        facts.push(("Purchase order".into(), c.po.clone()));
    }
    if !c.quantity.is_empty() {
        facts.push(("Quantity".into(), c.quantity.clone()));
    }
    facts.push(("Lots".into(), c.lots.join(", ")));
    facts.push(("Status".into(), c.status.as_str().to_string()));
    if !c.supersedes.is_empty() {
        facts.push((
            "Supersedes".into(),
            format!("{} ({})", c.supersedes, c.reason),
        ));
    }
    facts.push(("File".into(), c.file.clone()));
    format!(
        "Certificate {} ({}):\n{}",
        c.number,
        c.product,
        crate::support::table::pairs(&facts)
    )
}

/// The text and JSON answers about one lot; refused (exit 1, with near ids) when the record
/// does not hold it.
fn lot_answer(args: &Args, lot: &str) -> anyhow::Result<(String, Value)> {
    let Some(trend) = crate::record::query::find_lot(&args.register, lot)? else {
        let near = crate::record::query::suggestions(&args.register, lot, 3)?;
        let hint = if near.is_empty() {
            "No similar lot ids or certificate numbers are recorded either; check the id on the label.".to_string()
        } else {
            format!("Did you mean {}?", near.join(", "))
        };
        return Err(Error::Shortfall(format!(
            "lot '{}' is not in the record at {}. {hint}",
            lot,
            args.register.display()
        ))
        .into());
    };
    let specs = if args.specs.is_dir() {
        Some(SpecSet::load(&args.specs)?)
    } else {
        None
    };
    let rows: Vec<&Row> = trend.rows.iter().rev().collect();
    let current = rows[0];
    let product = trend.cell(current, "product").to_string();
    let spec = specs
        .as_ref()
        .and_then(|s| s.revision(&product, trend.cell(current, "spec_revision")));
    // The id as recorded: any case finds the lot (issue #14).
    let lot = trend.cell(current, "lot").to_string();
    let log = crate::record::certlog::read(&args.register)?;
    let standings = log
        .as_ref()
        .map(crate::record::certlog::standings)
        .unwrap_or_default();
    let certs: Vec<Cert> = crate::record::certlog::entries(&args.register)?
        .into_iter()
        .filter(|e| e.lot == lot)
        .map(|e| {
            let standing = standings
                .get(&e.number)
                .cloned()
                .unwrap_or(Standing::Current);
            (e, standing)
        })
        .collect();
    let today = crate::support::clock::now()?.date_naive();
    let shelf = spec.and_then(|s| {
        crate::record::lifecycle::retest_date(&trend, &rows, current, s.retest_months)
    });
    let mut v = as_json(&trend, &rows, &certs);
    if let Some(o) = v.as_object_mut() {
        o.insert("retest_date".into(), json!(shelf.map(|d| d.to_string())));
        o.insert(
            "expired".into(),
            json!(shelf.map(|d| crate::lot::disposition::expired(d, today))),
        );
    }
    let text = render(&trend, &rows, spec, &certs, shelf.map(|d| (d, today)));
    Ok((text, v))
}

/// The JSON answer: the current row's fields at the top level, older rows under `history`.
fn as_json(t: &Trend, rows: &[&Row], certs: &[Cert]) -> Value {
    let cur = rows[0];
    let mut v = crate::record::answer::row_json(t, cur);
    let obj = v.as_object_mut().expect("object");
    obj.insert("lot".into(), json!(t.cell(cur, "lot")));
    obj.insert("product".into(), json!(t.cell(cur, "product")));
    obj.insert("manufactured".into(), json!(t.cell(cur, "manufactured")));
    obj.insert(
        "mn_uncertainty".into(),
        t.cell(cur, "mn_uncertainty")
            .parse::<f64>()
            .map_or(Value::Null, |x| json!(x)),
    );
    obj.insert(
        "certificates".into(),
        json!(certs
            .iter()
            .map(|(c, st)| json!({"number": c.number, "customer": c.customer_name, "issued_at": c.issued_at, "file": c.file, "po": c.po, "quantity": c.quantity, "standing": st}))
            .collect::<Vec<_>>()),
    );
    obj.insert(
        "history".into(),
        json!(rows[1..]
            .iter()
            .map(|r| crate::record::answer::row_json(t, r))
            .collect::<Vec<_>>()),
    );
    v
}

fn render(
    t: &Trend,
    rows: &[&Row],
    spec: Option<&ProductSpec>,
    certs: &[Cert],
    shelf: Option<(chrono::NaiveDate, chrono::NaiveDate)>,
) -> String {
    let cur = rows[0];
    let c = |n: &str| t.cell(cur, n);
    let mut out = format!(
        "Lot {}: {}{}\n",
        c("lot"),
        c("product"),
        spec.map(|s| format!(" {}", s.name)).unwrap_or_default()
    );
    out.push_str(&crate::support::table::pairs(
        &crate::record::answer::facts(&c, shelf),
    ));
    out.push('\n');
    out.push_str(&property_table(t, spec, &c));
    out.push_str(&limits_source(spec, &c));
    out.push_str(&derived_text(spec, &c));
    if !c("notes").is_empty() {
        out.push_str(&format!("Notes: {}\n", c("notes")));
    }
    out.push_str(&certificates_text(certs));
    out.push_str(&dispositions_text(t, rows));
    out.push_str(&history_text(t, rows, spec));
    out
}

/// Which limits the table shows (issue #15): the spec revision the lot was decided on, when
/// today's file is that file (its SHA-256 matches the one recorded); otherwise a caution that
/// the revision was edited after the decision, or that the row predates the record of it.
fn limits_source<'a>(spec: Option<&ProductSpec>, c: &dyn Fn(&str) -> &'a str) -> String {
    let recorded = c("spec_sha256");
    let short = |h: &str| h[..h.len().min(12)].to_string();
    match spec {
        None => format!(
            "Limits: spec revision {} is not in the specs folder; limits not shown.\n",
            c("spec_revision")
        ),
        Some(s) if recorded.is_empty() => format!(
            "Limits: from today's {} revision {} file (this row was recorded before the spec's SHA-256 was kept, so it cannot be confirmed as the file used).\n",
            s.code, s.revision
        ),
        Some(s) if *s.sha256 == *recorded => format!(
            "Limits: {} revision {}, the file the lot was decided against (SHA-256 {}…).\n",
            s.code,
            s.revision,
            short(recorded)
        ),
        Some(s) => format!(
            "CAUTION: {} revision {} was changed after this lot was decided (recorded SHA-256 {}…, file now {}…): the limits above are today's file, NOT those the lot was decided against. Restore the revision from backup and make a new revision for the change.\n",
            s.code,
            s.revision,
            short(recorded),
            short(&s.sha256)
        ),
    }
}

/// QA's dispositions of the lot, oldest first, in plain words (issue #14).
fn dispositions_text(t: &Trend, rows: &[&Row]) -> String {
    let lines = crate::record::answer::dispositions(t, rows);
    if lines.is_empty() {
        return String::new();
    }
    let mut out = String::from("\nQA dispositions (oldest first):\n");
    for l in lines {
        out.push_str(&format!("  {l}\n"));
    }
    out
}

/// The table of every recorded property: result, unit, limits and verdict.
fn property_table<'a>(
    t: &Trend,
    spec: Option<&ProductSpec>,
    c: &dyn Fn(&str) -> &'a str,
) -> String {
    let mut table = vec![vec![
        "Property".to_string(),
        "Result".into(),
        "Unit".into(),
        "Limits".into(),
        "Verdict".into(),
    ]];
    for k in t.keys() {
        let cell = c(&k);
        if cell.is_empty() {
            continue;
        }
        let p = spec.and_then(|s| s.property(&k));
        table.push(vec![
            p.map_or(k.clone(), |p| p.label.clone()),
            reported(spec, &k, cell),
            p.map_or(String::new(), |p| {
                if p.unit == "1" {
                    String::new()
                } else {
                    p.unit.clone()
                }
            }),
            p.map_or(String::new(), |p| {
                if let Some(words) = crate::spec::conforming_text(p) {
                    words
                } else if p.has_limit() {
                    limits_text(p.min, p.max, p.decimals)
                } else {
                    String::new()
                }
            }),
            c(&format!("{k}_verdict")).replace('_', " "),
        ]);
    }
    crate::support::table::render(&table)
}

/// How Mn, Xn and the extent of reaction were obtained, when recorded.
fn derived_text<'a>(spec: Option<&ProductSpec>, c: &dyn Fn(&str) -> &'a str) -> String {
    let mut out = String::new();
    if !c(keys::MN).is_empty() {
        let u = c("mn_uncertainty").parse::<f64>().ok();
        let f = spec.map_or(2.0, |s| s.functionality);
        out.push_str(&format!(
            "\nMn is {}{} g/mol: calculated from the acid value and hydroxyl value by end-group analysis, assuming {}.\n",
            reported(spec, keys::MN, c(keys::MN)),
            u.map(|u| format!(" ± {u:.0}")).unwrap_or_default(),
            end_groups_words(f)
        ));
        if u.is_some() {
            out.push_str("The ± figure is the expanded uncertainty (k = 2, about 95 % coverage) from those of the two titrations.\n");
        }
    }
    if !c(keys::XN).is_empty() || !c(keys::EXTENT_OF_REACTION).is_empty() {
        out.push_str(&format!(
            "Xn {} and extent of reaction {}: from the batch recipe by the Carothers relations, allowing for the water of condensation.\n",
            if c(keys::XN).is_empty() { "-".to_string() } else { reported(spec, keys::XN, c(keys::XN)) },
            if c(keys::EXTENT_OF_REACTION).is_empty() { "-".to_string() } else { reported(spec, keys::EXTENT_OF_REACTION, c(keys::EXTENT_OF_REACTION)) },
        ));
    }
    out
}

/// The certificates issued for the lot, with their standing.
fn certificates_text(certs: &[Cert]) -> String {
    let mut out = String::new();
    out.push_str("\nCertificates issued:\n");
    if certs.is_empty() {
        out.push_str("  none\n");
    }
    for (e, st) in certs {
        let standing = match st {
            Standing::Withdrawn { at, reason, .. } if !crate::record::certfiles::is_void(e) => {
                format!("  WITHDRAWN {at}: {reason}")
            }
            Standing::Superseded { by, .. } => format!("  superseded by {by}"),
            _ => String::new(),
        };
        out.push_str(&format!(
            "  {}  {}  {}{}{}{standing}\n",
            e.number,
            if crate::record::certfiles::is_void(e) {
                "VOID (a file found without its log entry; not a certificate)"
            } else if e.customer_name.is_empty() {
                "internal (QC record)"
            } else {
                e.customer_name.as_str()
            },
            e.issued_at,
            if e.po.is_empty() {
                String::new()
            } else {
                format!("  PO {}", e.po)
            },
            if e.supersedes.is_empty() {
                String::new()
            } else {
                format!("  (supersedes {}: {})", e.supersedes, e.reason)
            }
        ));
    }
    out
}

/// The lot's superseded rows, newest first, with the retest reason.
fn history_text(t: &Trend, rows: &[&Row], spec: Option<&ProductSpec>) -> String {
    let mut out = String::new();
    if rows.len() > 1 {
        out.push_str("\nHistory (superseded results, newest first):\n");
        for r in &rows[1..] {
            let vals: Vec<String> = t
                .keys()
                .into_iter()
                .filter(|k| !spec.is_some_and(|s| s.property(k).is_some_and(|p| p.derived)))
                .filter(|k| !t.cell(r, k).is_empty())
                .map(|k| format!("{k} {}", t.cell(r, &k)))
                .collect();
            out.push_str(&format!(
                "  row {}  {}  {}  {}\n",
                t.cell(r, "seq"),
                t.cell(r, "recorded_at"),
                t.cell(r, "status").replace('_', " "),
                vals.join(", ")
            ));
        }
        if crate::record::lifecycle::is_retest_row(t, rows[0])
            && !t.cell(rows[0], "reason").is_empty()
        {
            out.push_str(&format!("  Retest reason: {}\n", t.cell(rows[0], "reason")));
        }
    }
    out
}
