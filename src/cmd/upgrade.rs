//! `resinlot upgrade`: bring a register written by an earlier version to the current layout,
//! keeping the old files byte for byte and the history verifiable end to end.

use std::time::Duration;

use crate::cmd::args::{CertificatesFolder, Locking, RegisterFolder};
use crate::cmd::Outcome;
use crate::record::trend_file::Wait;

/// Arguments of `resinlot upgrade`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The register folder (`--register`).
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The certificates folder (`--certificates`), whose PDFs are checked before upgrading.
    #[command(flatten)]
    pub certificates_folder: CertificatesFolder,
    /// How long to wait for another process writing the record (`--lock-timeout`).
    #[command(flatten)]
    pub locking: Locking,
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let now = crate::support::clock::now()?.to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let wait = Wait {
        timeout: Duration::from_secs(args.locking.lock_timeout),
    };
    let done =
        crate::record::upgrade::upgrade(&args.register, &args.certificates_folder, &now, wait)?;
    let mut out = String::new();
    if done.nothing_to_do() {
        out.push_str(&format!(
            "{} is already in the current layout: nothing to upgrade, nothing written.\n",
            args.register.display()
        ));
    }
    if let Some((path, files)) = &done.heads {
        out.push_str(&format!(
            "{}: started, recording the row count and last chain value of {files} trend file{}.\n",
            path.display(),
            if *files == 1 { "" } else { "s" }
        ));
    }
    if let Some((pred, sha, rows)) = &done.log {
        out.push_str(&format!(
            "{}: rewritten in the current layout beside its predecessor {} ({rows} rows, SHA-256 {sha}), which is kept unchanged; its first row records that hash.\n",
            crate::record::certlog::path(&args.register).display(),
            pred.display()
        ));
    }
    for (path, rows) in &done.widened {
        out.push_str(&format!(
            "{}: widened to the current layout (new columns added, empty in its {rows} earlier rows; every chain value kept).\n",
            path.display()
        ));
    }
    if !done.nothing_to_do() {
        out.push_str(
            "Check the result with `resinlot verify`; keep the predecessor with the record.\n",
        );
    }
    crate::support::output::print(&out)?;
    Ok(Outcome::AllGood)
}
