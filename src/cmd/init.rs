//! `resinlot init`: an empty workspace for a lab adopting the tool.

use std::path::PathBuf;

use crate::cmd::Outcome;

/// Arguments of `resinlot init`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The new workspace folder; it must not exist or must be empty.
    pub dir: PathBuf,
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let files = crate::record::workspace::init(&args.dir)?;
    // The shipped site file names the demo plant: a new workspace gets one to fill in, and
    // certify and release refuse to issue until it is (issue #17).
    crate::certificate::model::Site::write_placeholder(
        &args
            .dir
            .join("templates")
            .join(crate::certificate::model::SITE_FILE),
    )?;
    let mut out = format!("Created the workspace {}:\n", args.dir.display());
    for f in files {
        out.push_str(&format!("  {f}\n"));
    }
    out.push_str(
        "Edit first: templates/site.toml (site name, address, certificate prefix: every PLACEHOLDER value; no certificate is issued until they are filled in), then the example spec and recipe.\n\
         Check them with: resinlot specs check specs\n",
    );
    crate::support::output::print(&out)?;
    Ok(Outcome::AllGood)
}
