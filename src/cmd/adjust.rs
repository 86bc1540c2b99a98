//! `resinlot adjust`: the diol or acid addition that brings a batch to its target hydroxyl value.

use std::path::PathBuf;

use anyhow::Context;

use crate::chem::gel::GelMargin;
use crate::chem::recipe::Recipe;
use crate::cmd::Outcome;
use crate::cook::correction::{self, BatchNow, Correction, Direction, GelOutlook, Limits};
use crate::error::Error;

/// Arguments of `resinlot adjust`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Batch recipe (TOML); the added component is one of its components.
    #[arg(long, value_name = "FILE")]
    pub recipe: PathBuf,
    /// Batch mass now, in kg (the charge less the water distilled so far).
    #[arg(long, value_name = "KG", allow_hyphen_values = true)]
    pub batch_kg: f64,
    /// Acid value of the batch now, in mg KOH/g.
    #[arg(long, value_name = "MG_KOH_G", allow_hyphen_values = true)]
    pub av: f64,
    /// Hydroxyl value of the batch now, in mg KOH/g. Taken as already corrected for acidity
    /// unless --raw-ohv is given.
    #[arg(long, value_name = "MG_KOH_G", allow_hyphen_values = true)]
    pub ohv: f64,
    /// The --ohv given is a raw result, corrected for the sample's acidity before any
    /// calculation as `endgroup --raw-ohv` does: an acetylation method (ISO 4629-1/-2,
    /// ASTM D4274 method A) measures OHV - AV, so the acid value is added; name another method
    /// with --ohv-method. The target is a corrected hydroxyl value. Default: off.
    #[arg(long)]
    pub raw_ohv: bool,
    /// With --raw-ohv: the hydroxyl method the raw result comes from; its row of resinlot's
    /// method table decides whether the acid value is added (acetylation: ISO 4629-1/-2,
    /// DIN 53240-1/-2, ASTM D4274, ASTM E222) or subtracted (ASTM E1899, which measures
    /// OHV + AV). Default: an acetylation method (added).
    #[arg(long, value_name = "METHOD", requires = "raw_ohv")]
    pub ohv_method: Option<String>,
    /// Hydroxyl value to reach, in mg KOH/g. Above --ohv a hydroxyl component is added;
    /// below it an acid is added and cooked back to the present acid value.
    #[arg(long, value_name = "MG_KOH_G", allow_hyphen_values = true)]
    pub target_ohv: f64,
    /// Recipe component to add to raise the hydroxyl value (case is ignored). Default: the
    /// recipe's main hydroxyl component.
    #[arg(long, value_name = "NAME", conflicts_with = "acid")]
    pub diol: Option<String>,
    /// Recipe component to add to lower the hydroxyl value (case is ignored). Default: the
    /// recipe's main acid component.
    #[arg(long, value_name = "NAME")]
    pub acid: Option<String>,
    /// Largest addition accepted, in percent of the batch mass now; a larger one is refused
    /// with exit status 1. Default: 5.
    #[arg(long, value_name = "PERCENT", allow_hyphen_values = true)]
    pub max_addition_pct: Option<f64>,
    /// How close to the recipe's statistical gel point counts as near, as Δp in extent of
    /// reaction of the minority groups (e.g. 0.005) or as an acid value above the one at the
    /// gel point (e.g. 1.5av, mg KOH/g); checked for the batch now and after the addition. Near
    /// prints a GEL WARNING; at or past the gel point the exit status is 1. Default: 0.005.
    #[arg(long, value_name = "DP|AVav", value_parser = crate::cmd::args::gel_margin)]
    pub gel_margin: Option<GelMargin>,
    /// Print one JSON object instead of the text report.
    #[arg(long)]
    pub json: bool,
}

/// The flag behind each field the correction names in its errors.
const FLAGS: &[(&str, &str)] = &[
    ("batch mass", "--batch-kg"),
    ("acid value", "--av"),
    ("hydroxyl value", "--ohv"),
    ("acid value and hydroxyl value", "--av and --ohv"),
    ("target hydroxyl value", "--target-ohv"),
    ("largest addition", "--max-addition-pct"),
    ("hydroxyl method", "--ohv-method"),
];

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let recipe = Recipe::load(&args.recipe).context("cannot use the recipe")?;
    let max_pct = args
        .max_addition_pct
        .unwrap_or(correction::DEFAULT_MAX_ADDITION_PCT);
    crate::error::within("--max-addition-pct", max_pct, 0.0, 100.0, "%")?;
    crate::chem::ranges::group_value("--av", args.av)?;
    crate::chem::ranges::group_value("--ohv", args.ohv)?;
    let acidity = if args.raw_ohv {
        crate::chem::hydroxyl_method::raw_correction(args.ohv_method.as_deref())
            .map_err(|e| crate::cmd::args::name_flags(e, FLAGS))?
    } else {
        crate::chem::hydroxyl_method::AcidityCorrection::None
    };
    let ohv = crate::chem::stepgrowth::corrected_hydroxyl_value(args.ohv, args.av, acidity);
    let raising = args.target_ohv > ohv;
    let (flag, asked) = match (&args.diol, &args.acid) {
        (Some(d), _) => ("--diol", Some(d)),
        (None, Some(a)) => ("--acid", Some(a)),
        (None, None) => ("", None),
    };
    if raising && flag == "--acid" {
        return Err(Error::invalid(
            "--acid",
            "the target hydroxyl value is above the present one, and adding acid lowers it",
            "Name a glycol with --diol, or leave both out to use the recipe's main hydroxyl component.",
        )
        .into());
    }
    if !raising && flag == "--diol" {
        return Err(Error::invalid(
            "--diol",
            "the target hydroxyl value is below the present one, and adding a diol raises it",
            "Name an acid with --acid, or leave both out to use the recipe's main acid.",
        )
        .into());
    }
    let component = match asked {
        Some(name) => recipe.component(name).ok_or_else(|| {
            let names: Vec<&str> = recipe.components.iter().map(|c| c.name.as_str()).collect();
            Error::invalid(
                flag,
                format!("'{name}' is not a component of {}", args.recipe.display()),
                format!("Use one of: {}.", names.join(", ")),
            )
        })?,
        None => if raising {
            recipe.main_hydroxyl_component()
        } else {
            recipe.main_acid_component()
        }
        .expect("a validated recipe has acid and hydroxyl components"),
    };
    let batch = BatchNow {
        mass_kg: args.batch_kg,
        acid_value: args.av,
        hydroxyl_value: ohv,
    };
    let limits = Limits {
        max_addition_pct: max_pct,
        max_ohv_shift: crate::chem::stepgrowth::initial_hydroxyl_value(&recipe.charge()),
    };
    let c = correction::correct(&batch, component, args.target_ohv)
        .map_err(|e| crate::cmd::args::name_flags(e, FLAGS))?;
    correction::check_target_shift(&batch, args.target_ohv, &limits)?;
    correction::check_addition(&batch, &c, &limits)?;
    let outlook = correction::gel_outlook(
        &recipe,
        &batch,
        component,
        &c,
        args.gel_margin.unwrap_or_default(),
    )
    .map_err(|e| crate::cmd::args::name_flags(e, FLAGS))?;
    correction::check_gel_after(&outlook)?;
    let text = if args.json {
        let mut v = serde_json::to_value(&c)?;
        v["hydroxyl_value_now"] = ohv.into();
        v["gel"] = serde_json::to_value(&outlook)?;
        if outlook.beyond() {
            v["note"] = correction::GELLED_NOTE.into();
        }
        v["caution"] = serde_json::Value::String(correction::SAFETY_CAUTION.into());
        serde_json::to_string_pretty(&v)? + "\n"
    } else {
        render(&c, args.target_ohv, &outlook)
    };
    crate::support::output::print(&text)?;
    // Only the batch now can be past the gel point here: an addition that would take it
    // there was refused above.
    Ok(if outlook.beyond() {
        Outcome::FellShort
    } else {
        Outcome::AllGood
    })
}

/// The text report: the addition, the balances, the assumption, any GEL WARNING and the
/// caution.
pub fn render(c: &Correction, target: f64, gel: &GelOutlook) -> String {
    let verb = match c.direction {
        Direction::RaiseHydroxyl => "to raise the hydroxyl value",
        Direction::LowerHydroxyl => "to lower the hydroxyl value",
    };
    let mut rows: Vec<(String, String)> = vec![
        (
            "Add".into(),
            format!(
                "{:.1} kg {} ({verb} to {target} mg KOH/g)",
                c.add_kg, c.component
            ),
        ),
        (
            "Expected acid value".into(),
            format!("{:.2} mg KOH/g", c.new_acid_value),
        ),
        (
            "Expected hydroxyl value".into(),
            format!("{:.2} mg KOH/g", c.new_hydroxyl_value),
        ),
        (
            "Mn, end groups (f = 2)".into(),
            format!("{:.0} g/mol now, {:.0} g/mol expected", c.mn_now, c.new_mn),
        ),
        (
            "Batch mass afterwards".into(),
            format!("{:.1} kg", c.new_batch_kg),
        ),
    ];
    if c.direction == Direction::LowerHydroxyl {
        rows.push((
            "Water to remove".into(),
            format!(
                "{:.1} kg ({:.1} mol ester bonds formed)",
                c.water_released_kg, c.esters_formed_mol
            ),
        ));
    }
    rows.push((
        "Hydroxyl groups".into(),
        format!(
            "{:.2} mol now + {:.2} added - {:.2} reacted = {:.2} mol",
            c.hydroxyl_groups_mol.before,
            c.hydroxyl_groups_mol.added,
            c.hydroxyl_groups_mol.consumed,
            c.hydroxyl_groups_mol.after
        ),
    ));
    rows.push((
        "Acid groups".into(),
        format!(
            "{:.2} mol now + {:.2} added - {:.2} reacted = {:.2} mol",
            c.acid_groups_mol.before,
            c.acid_groups_mol.added,
            c.acid_groups_mol.consumed,
            c.acid_groups_mol.after
        ),
    ));
    let mut out = crate::support::table::pairs(&rows);
    out.push_str(&format!("\nAssumption: {}\n\n", c.assumption));
    for w in &gel.warnings {
        out.push_str(w);
        out.push_str("\n\n");
    }
    if gel.beyond() {
        out.push_str(correction::GELLED_NOTE);
        out.push_str("\n\n");
    }
    out.push_str(correction::SAFETY_CAUTION);
    out.push('\n');
    out
}
