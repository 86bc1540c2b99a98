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
        /// The templates folder whose site file is checked too (`--templates`).
        #[command(flatten)]
        templates: TemplatesFolder,
    },
}

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let Action::Check { dir, templates } = &args.action;
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
