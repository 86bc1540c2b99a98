//! `resinlot lookup`: everything the record holds about one lot, in plain words.

use crate::cmd::args::{check_lot_id, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::error::Error;
use crate::record::answer;
use crate::spec::SpecSet;

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
    let Some(rec) = answer::load(&args.register, &args.lot)? else {
        let near = crate::record::query::suggestions(&args.register, &args.lot, 3)?;
        return Err(Error::Shortfall(format!(
            "lot '{}' is not in the record at {}. {}",
            args.lot,
            args.register.display(),
            answer::not_found_hint(&near)
        ))
        .into());
    };
    let specs = if args.specs.is_dir() {
        Some(SpecSet::load(&args.specs)?)
    } else {
        None
    };
    let spec = rec.spec(specs.as_ref());
    let today = crate::support::clock::now()?.date_naive();
    let text = if args.json {
        serde_json::to_string_pretty(&answer::as_json(&rec, spec, today))? + "\n"
    } else {
        answer::answer(&rec, spec, today).text()
    };
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}
