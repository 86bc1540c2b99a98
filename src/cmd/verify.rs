//! `resinlot verify`: check the record (trend files, certificate log) or identify certificates.

use std::path::PathBuf;
use std::time::Duration;

use crate::cmd::args::{CertificatesFolder, Locking, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::record::certfiles;
use crate::record::integrity::{self, CertVerdict, Repair};
use crate::record::lifecycle;
use crate::record::trend_file::Wait;

/// Arguments of `resinlot verify`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Certificate PDFs, or their JSON data companions, to identify against the issue log:
    /// genuine (current, exit 0), superseded, withdrawn, altered or unknown (exit 1). Without
    /// any, the whole record is checked instead.
    #[arg(id = "pdf", value_name = "CERTIFICATES")]
    pub certificates: Vec<PathBuf>,
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The certificates folder (`--certificates`).
    #[command(flatten)]
    pub certificates_folder: CertificatesFolder,
    /// The specs folder (`--specs`): every lot's recorded spec SHA-256 is compared with the
    /// revision file there. When the folder does not exist, verify says so and skips this.
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// Move a torn last line (left by an interrupted write) to a side file beside the trend
    /// file, never deleting it, or restore the line end of a complete last row that lacks
    /// one, or record the head of a trend file whose last rows were appended without one (a
    /// release interrupted before it recorded them in heads.csv); in the certificates folder,
    /// remove stray temporary `.part` files and log a certificate file found without its log
    /// entry as void; record the withdrawals of certificates whose lot a later trend row
    /// rejected or held (a withdrawal interrupted after its trend row). Each repair is logged in
    /// quarantine.log. Safe to run again after an interruption.
    #[arg(long)]
    pub quarantine: bool,
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
    /// How long to wait for a lock (`--lock-timeout`), when repairing.
    #[command(flatten)]
    pub locking: Locking,
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    if !args.certificates.is_empty() {
        return certificates(args);
    }
    let mut checks = integrity::check_register(&args.register, &args.certificates_folder)?;
    let mut out = String::new();
    if args.quarantine {
        let now = crate::support::clock::now()?.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
        // A repair can uncover the next (a torn tail hides rows that have no head yet), so
        // repair and check again, a few rounds at most.
        for _ in 0..3 {
            let fixable: Vec<&integrity::FileCheck> =
                checks.iter().filter(|c| c.repairable()).collect();
            if fixable.is_empty() {
                break;
            }
            for c in fixable {
                let repair = if c.withdrawals_owed {
                    let wait = Wait {
                        timeout: Duration::from_secs(args.locking.lock_timeout),
                    };
                    for line in lifecycle::complete_withdrawals(&args.register, &now, wait)? {
                        out.push_str(&format!("{line} (logged in quarantine.log)\n"));
                    }
                    continue;
                } else if c.heads_behind {
                    integrity::record_head(&c.path, &now)?
                } else {
                    integrity::quarantine(&c.path, c.offset.unwrap_or(0), &now)?
                };
                out.push_str(&repair_text(&c.path, &repair));
            }
            checks = integrity::check_register(&args.register, &args.certificates_folder)?;
        }
        let wait = Wait {
            timeout: Duration::from_secs(args.locking.lock_timeout),
        };
        for line in certfiles::repair_folder(&args.register, &args.certificates_folder, &now, wait)?
        {
            out.push_str(&format!("{line} (logged in quarantine.log)\n"));
        }
    }
    // The certificates folder against the log and the trend files (issue #13, items 7-9).
    let findings = certfiles::check_folder(&args.register, &args.certificates_folder)?;
    // The limits on record against today's spec files (issue #15).
    let specs = if args.specs.is_dir() {
        let set = crate::spec::SpecSet::load(&args.specs)?;
        Some(crate::record::frozen::check_register(&args.register, &set)?)
    } else {
        None
    };
    let ok = checks.iter().all(integrity::FileCheck::ok)
        && findings.is_empty()
        && specs.as_ref().is_none_or(|s| s.changed.is_empty());
    if args.json {
        out = serde_json::to_string_pretty(
            &serde_json::json!({ "intact": ok, "files": checks, "certificates_folder": findings, "specs": specs }),
        )? + "\n";
    } else {
        for c in &checks {
            match (&c.problem, &c.note) {
                (None, Some(note)) => out.push_str(&format!("{}: {note}\n", c.path.display())),
                (None, None) => {
                    out.push_str(&format!("{}: {} rows, intact\n", c.path.display(), c.rows))
                }
                (Some(p), _) => out.push_str(&format!(
                    "{}:{} ({}{}): BROKEN: {p}{}\n",
                    c.path.display(),
                    c.line.unwrap_or(0),
                    c.offset
                        .map_or("anchor check".to_string(), |o| format!("byte {o}")),
                    c.lot
                        .as_ref()
                        .map(|l| format!(", lot '{l}'"))
                        .unwrap_or_default(),
                    if c.torn_tail {
                        " (run with --quarantine to move it aside)"
                    } else if c.heads_behind {
                        " (run with --quarantine to record their head)"
                    } else if c.withdrawals_owed {
                        " (run with --quarantine to record the withdrawals)"
                    } else if c.newline_missing {
                        " (run with --quarantine to restore the line end)"
                    } else {
                        ""
                    }
                )),
            }
        }
        for f in &findings {
            out.push_str(&format!(
                "{}: BROKEN: {}. {}\n",
                f.path.display(),
                f.problem,
                f.fix
            ));
        }
        out.push_str(&specs_text(&args.specs, specs.as_ref()));
        out.push_str(if ok {
            "The record is intact.\n"
        } else {
            "The record is NOT intact: restore the named file from backup, or quarantine a torn tail.\n"
        });
    }
    crate::support::output::print(&out)?;
    Ok(if ok {
        Outcome::AllGood
    } else {
        Outcome::FellShort
    })
}

/// What verify says of the spec revisions the lots were decided on.
pub fn specs_text(
    dir: &std::path::Path,
    specs: Option<&crate::record::frozen::RegisterSpecs>,
) -> String {
    let Some(specs) = specs else {
        return format!(
            "{}: not found, so the spec revisions recorded on the lots were not compared (give --specs)\n",
            dir.display()
        );
    };
    let mut out = String::new();
    for c in &specs.changed {
        out.push_str(&format!("{}: BROKEN: {}\n", dir.display(), c.message()));
    }
    if specs.unrecorded > 0 {
        out.push_str(&format!(
            "{}: {} row{} recorded before spec hashes were kept cannot be compared with the spec files\n",
            dir.display(),
            specs.unrecorded,
            if specs.unrecorded == 1 { "" } else { "s" }
        ));
    }
    out
}

/// The line `verify --quarantine` prints for one repair of `path`.
fn repair_text(path: &std::path::Path, repair: &Repair) -> String {
    match repair {
        Repair::Quarantined(side) => format!(
            "{}: moved the torn last line to {} (logged in quarantine.log)\n",
            path.display(),
            side.display()
        ),
        Repair::NewlineRestored => format!(
            "{}: the last row was complete; restored its missing line end (logged in quarantine.log)\n",
            path.display()
        ),
        Repair::HeadRecorded { rows } => format!(
            "{}: rows had been appended without their head; recorded its head at {rows} rows in heads.csv (logged in quarantine.log)\n",
            path.display()
        ),
    }
}

fn certificates(args: &Args) -> anyhow::Result<Outcome> {
    let mut all_genuine = true;
    let mut out = String::new();
    let mut json = Vec::new();
    for pdf in &args.certificates {
        let v = integrity::verify_certificate(pdf, &args.register)?;
        all_genuine &= v.is_genuine();
        out.push_str(&format!("{}: {}\n", pdf.display(), verdict_text(&v)));
        json.push(verdict_json(pdf, &v));
    }
    if args.json {
        out = serde_json::to_string_pretty(&json)? + "\n";
    }
    crate::support::output::print(&out)?;
    Ok(if all_genuine {
        Outcome::AllGood
    } else {
        Outcome::FellShort
    })
}

/// One line on a verdict, in plain words.
fn verdict_text(v: &CertVerdict) -> String {
    let to = |e: &crate::record::certlog::Entry| {
        if e.customer_name.is_empty() {
            String::new()
        } else {
            format!(" to {}", e.customer_name)
        }
    };
    match v {
        CertVerdict::Withdrawn { entry, withdrawn_at, .. } if certfiles::is_void(entry) => format!(
            "VOID: number {} was logged as void on {withdrawn_at} (a file found without its log entry); it is not a valid certificate",
            entry.number
        ),
        CertVerdict::Genuine { entry } => format!(
            "genuine: certificate {} for lot {}{}, issued {}",
            entry.number,
            entry.lot,
            to(entry),
            entry.issued_at
        ),
        CertVerdict::Superseded {
            entry,
            superseded_by,
            superseded_at,
            reason,
        } => format!(
            "SUPERSEDED: certificate {} for lot {}{}, issued {}, was replaced by certificate {superseded_by} on {superseded_at} ({reason}); ask for {superseded_by}",
            entry.number,
            entry.lot,
            to(entry),
            entry.issued_at
        ),
        CertVerdict::Withdrawn {
            entry,
            withdrawn_at,
            reason,
            ..
        } => format!(
            "WITHDRAWN: certificate {} for lot {}{}, issued {}, was withdrawn on {withdrawn_at}: {reason}; the lot must not be used on its strength",
            entry.number,
            entry.lot,
            to(entry),
            entry.issued_at
        ),
        CertVerdict::Altered { entry, .. } => format!(
            "ALTERED: its bytes differ from certificate {} as issued on {}",
            entry.number, entry.issued_at
        ),
        CertVerdict::Unknown { .. } => {
            "UNKNOWN: no certificate with these bytes was issued from this record".to_string()
        }
    }
}

/// The JSON of one verdict: `file`, `verdict` (genuine, superseded, withdrawn, altered or
/// unknown), `superseded_by`, `withdrawn_at` and `reason` (null when they do not apply), and
/// the certificate's log entry when there is one.
fn verdict_json(pdf: &std::path::Path, v: &CertVerdict) -> serde_json::Value {
    let (entry, superseded_by, withdrawn_at, reason, sha256) = match v {
        CertVerdict::Genuine { entry } => (Some(entry), None, None, None, None),
        CertVerdict::Superseded {
            entry,
            superseded_by,
            reason,
            ..
        } => (Some(entry), Some(superseded_by), None, Some(reason), None),
        CertVerdict::Withdrawn {
            entry,
            withdrawn_at,
            reason,
            ..
        } => (Some(entry), None, Some(withdrawn_at), Some(reason), None),
        CertVerdict::Altered { entry, sha256 } => (Some(entry), None, None, None, Some(sha256)),
        CertVerdict::Unknown { sha256 } => (None, None, None, None, Some(sha256)),
    };
    serde_json::json!({
        "file": pdf,
        "verdict": v.name(),
        "superseded_by": superseded_by,
        "withdrawn_at": withdrawn_at,
        "reason": reason,
        "certificate": entry,
        "sha256": sha256,
        "result": v,
    })
}
