//! `resinlot specs check`: validate every product spec (and its recipe) in a folder.

use std::path::PathBuf;

use crate::cmd::args::TemplatesFolder;
use crate::cmd::Outcome;
use crate::spec::SpecSet;

/// Arguments of `resinlot specs`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// What to do with the specs.
    #[command(subcommand)]
    pub action: Action,
}

/// Actions on the specs folder.
#[derive(Debug, clap::Subcommand)]
pub enum Action {
    /// Validate every spec file, recipe and customer file and print one line per product.
    Check {
        /// Folder holding the product specs. Default: specs.
        #[arg(hide_default_value = true, default_value = "specs")]
        dir: PathBuf,
        /// The register whose lots' recorded spec SHA-256 are compared with the spec files
        /// (a revision edited after use is refused). Default: register; skipped when the
        /// folder does not exist.
        #[arg(
            long,
            hide_default_value = true,
            default_value = "register",
            value_name = "DIR"
        )]
        register: PathBuf,
        /// The templates folder whose site file is checked too (`--templates`).
        #[command(flatten)]
        templates: TemplatesFolder,
    },
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let Action::Check {
        dir,
        register,
        templates,
    } = &args.action;
    let set = SpecSet::load(dir)?;
    let customers = crate::spec::customer::load_all(&dir.join("customers"), &set)?;
    let mut rows = vec![vec![
        "product".to_string(),
        "revisions".into(),
        "current".into(),
        "properties".into(),
        "rule".into(),
        "recipe".into(),
    ]];
    for (code, revs) in &set.products {
        let last = revs.last().expect("at least one revision");
        rows.push(vec![
            code.clone(),
            revs.iter()
                .map(|r| format!("{} from {}", r.revision, r.effective))
                .collect::<Vec<_>>()
                .join(", "),
            last.revision.clone(),
            last.properties
                .iter()
                .map(|p| p.key.as_str())
                .collect::<Vec<_>>()
                .join(" "),
            format!("{:?}", last.decision_rule).to_lowercase(),
            last.recipe
                .as_ref()
                .map_or("none".to_string(), |r| r.name.clone()),
        ]);
    }
    let mut text = crate::support::table::render(&rows);
    // Revisions edited after lots were decided on them (issue #15).
    let used = if register.is_dir() {
        Some(crate::record::frozen::check_register(register, &set)?)
    } else {
        None
    };
    let changed = used.as_ref().map_or(0, |u| u.changed.len());
    for c in used.iter().flat_map(|u| &u.changed) {
        text.push_str(&format!("CHANGED AFTER USE: {}\n", c.message()));
    }
    if changed > 0 {
        text.push_str(&format!(
            "{} products, {} customer files: valid, but {changed} revision{} changed after use.\n",
            set.products.len(),
            customers.len(),
            if changed == 1 { "" } else { "s" }
        ));
        crate::support::output::print(&text)?;
        return Ok(Outcome::FellShort);
    }
    text.push_str(&format!(
        "{} products, {} customer files: all valid.\n",
        set.products.len(),
        customers.len()
    ));
    text.push_str(&crate::certificate::model::site_warnings(
        &templates.join(crate::certificate::model::SITE_FILE),
        customers
            .iter()
            .filter(|c| {
                c.inspection_document
                    == Some(crate::spec::customer::InspectionDocument::Certificate31)
            })
            .map(|c| c.id.as_str()),
    )?);
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}
