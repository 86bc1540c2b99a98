//! `resinlot endgroup`: one acid value and hydroxyl value to Mn, and with a recipe to p, Xn, r.

use std::path::PathBuf;

use anyhow::Context;

use crate::chem::analysis::{analyse, Analysis, Titration};
use crate::chem::gel::{GelMargin, GelState};
use crate::chem::hydroxyl_method::AcidityCorrection;
use crate::chem::recipe::Recipe;
use crate::cmd::Outcome;

/// Arguments of `resinlot endgroup`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Acid value of the sample in mg KOH/g (e.g. ISO 2114).
    #[arg(long, value_name = "MG_KOH_G", allow_hyphen_values = true)]
    pub av: f64,
    /// Hydroxyl value of the sample in mg KOH/g. Taken as already corrected for acidity unless
    /// --raw-ohv is given.
    #[arg(long, value_name = "MG_KOH_G", allow_hyphen_values = true)]
    pub ohv: f64,
    /// End groups per molecule used for the end-group Mn. Default: 2 (linear chains).
    #[arg(
        hide_default_value = true,
        long,
        default_value_t = 2.0,
        value_name = "F"
    )]
    pub functionality: f64,
    /// The --ohv given is a raw result, corrected for the sample's acidity before any
    /// calculation as its method needs: an acetylation method (ISO 4629-1/-2, ASTM D4274
    /// method A) measures OHV - AV, so the acid value is added; name another method with
    /// --ohv-method. Default: off (the --ohv given is already corrected).
    #[arg(long)]
    pub raw_ohv: bool,
    /// With --raw-ohv: the hydroxyl method the raw result comes from; its row of resinlot's
    /// method table decides whether the acid value is added (acetylation: ISO 4629-1/-2,
    /// DIN 53240-1/-2, ASTM D4274, ASTM E222) or subtracted (ASTM E1899, which measures
    /// OHV + AV). Default: an acetylation method (added).
    #[arg(long, value_name = "METHOD", requires = "raw_ohv")]
    pub ohv_method: Option<String>,
    /// Expanded uncertainty (k = 2) of the acid value, in mg KOH/g. With --ohv-u it gives the
    /// expanded uncertainty of Mn. Default: none.
    #[arg(long, value_name = "MG_KOH_G")]
    pub av_u: Option<f64>,
    /// Expanded uncertainty (k = 2) of the entered hydroxyl value, in mg KOH/g. Default: none.
    #[arg(long, value_name = "MG_KOH_G")]
    pub ohv_u: Option<f64>,
    /// Non-volatile (solids) mass fraction of the measured sample, 0 to 1, when AV and OHV were
    /// measured on a resin solution; results are converted to solids basis. Default: 1.
    #[arg(long, value_name = "FRACTION")]
    pub solids: Option<f64>,
    /// Batch recipe (TOML) for extent of reaction, water of condensation, Xn, gel points and the
    /// recipe Mn. Default: none.
    #[arg(long, value_name = "FILE")]
    pub recipe: Option<PathBuf>,
    /// With --recipe: how close to the statistical gel point counts as near, as Δp in extent
    /// of reaction of the minority groups (e.g. 0.005) or as an acid value above the one at the
    /// gel point (e.g. 1.5av, mg KOH/g). Near prints a GEL WARNING; at or past the gel point
    /// the figures are marked not meaningful and the exit status is 1. Default: 0.005.
    #[arg(long, value_name = "DP|AVav", value_parser = crate::cmd::args::gel_margin)]
    pub gel_margin: Option<GelMargin>,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// The flag behind each field the end-group analysis names in its errors.
const FLAGS: &[(&str, &str)] = &[
    ("acid value", "--av"),
    ("hydroxyl value", "--ohv"),
    ("functionality", "--functionality"),
    ("acid value uncertainty", "--av-u"),
    ("hydroxyl value uncertainty", "--ohv-u"),
    (
        "acid and hydroxyl value uncertainties",
        "--av-u and --ohv-u",
    ),
    ("solids fraction", "--solids"),
    ("hydroxyl method", "--ohv-method"),
];

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let recipe = match &args.recipe {
        Some(path) => Some(Recipe::load(path).context("cannot use the recipe")?),
        None => None,
    };
    let acidity_correction = if args.raw_ohv {
        crate::chem::hydroxyl_method::raw_correction(args.ohv_method.as_deref())
            .map_err(|e| crate::cmd::args::name_flags(e, FLAGS))?
    } else {
        AcidityCorrection::None
    };
    let t = Titration {
        av: args.av,
        ohv: args.ohv,
        acidity_correction,
        functionality: args.functionality,
        u_av: args.av_u,
        u_ohv: args.ohv_u,
        solids_fraction: args.solids,
    };
    let a = analyse(&t, recipe.as_ref()).map_err(|e| crate::cmd::args::name_flags(e, FLAGS))?;
    if args.gel_margin.is_some() && a.recipe.is_none() {
        return Err(crate::error::Error::invalid(
            "--gel-margin",
            "the gel guard needs the batch recipe",
            "Add --recipe FILE, or leave out --gel-margin.",
        )
        .into());
    }
    let margin = args.gel_margin.unwrap_or_default();
    let guard = a.recipe.as_ref().map(|r| r.gel_guard(a.acid_value, margin));
    let text = if args.json {
        let mut v = serde_json::to_value(&a)?;
        if let Some((state, warning)) = &guard {
            v["gel_margin"] = serde_json::to_value(margin)?;
            v["gel_state"] = serde_json::to_value(state)?;
            v["gel_warning"] = serde_json::to_value(warning)?;
            if *state == GelState::Beyond {
                v["note"] = GELLED_NOTE.into();
            }
        }
        serde_json::to_string_pretty(&v)? + "\n"
    } else {
        let mut out = render(&a, args.solids.is_some(), args.raw_ohv);
        if let Some((state, warning)) = &guard {
            if let Some(w) = warning {
                out.push('\n');
                out.push_str(w);
                out.push('\n');
            }
            if *state == GelState::Beyond {
                out.push_str(GELLED_NOTE);
                out.push('\n');
            }
        }
        out
    };
    crate::support::output::print(&text)?;
    Ok(match guard {
        Some((GelState::Beyond, _)) => Outcome::FellShort,
        _ => Outcome::AllGood,
    })
}

/// Printed when the titration puts the batch at or past the statistical gel point.
const GELLED_NOTE: &str = "The batch is at or past the statistical gel point: Mn, Xn, p and \
the recipe figures above assume soluble chains and are not meaningful for a gelled batch.";

fn opt(v: Option<f64>, decimals: usize, unit: &str) -> String {
    v.map_or_else(
        || "not computable".to_string(),
        |x| format!("{x:.decimals$} {unit}").trim_end().to_string(),
    )
}

/// The human-readable table.
pub fn render(a: &Analysis, solids: bool, corrected: bool) -> String {
    let basis = if solids { " (solids basis)" } else { "" };
    let mut rows: Vec<(String, String)> = vec![
        (
            format!("Acid value{basis}"),
            format!("{:.2} mg KOH/g", a.acid_value),
        ),
        (
            format!(
                "Hydroxyl value{}{basis}",
                match (corrected, a.acidity_correction) {
                    (false, _) | (_, AcidityCorrection::None) => "",
                    (true, AcidityCorrection::Subtract) => ", acidity-corrected (AV subtracted)",
                    (true, AcidityCorrection::Add) => ", acidity-corrected",
                }
            ),
            format!("{:.2} mg KOH/g", a.hydroxyl_value_corrected),
        ),
        (
            "Hydroxyl equivalent weight".into(),
            opt(a.hydroxyl_equivalent_weight, 1, "g/eq"),
        ),
        (
            format!("Mn, end groups (f = {})", a.functionality),
            match (a.mn, a.mn_uncertainty) {
                (Some(mn), Some(u)) => format!("{mn:.0} ± {u:.0} g/mol (k = 2)"),
                (mn, _) => opt(mn, 0, "g/mol"),
            },
        ),
    ];
    if let Some(r) = &a.recipe {
        let pct = |x: f64| format!("{:.4}", x);
        rows.extend([
            ("Recipe".into(), r.recipe_name.clone()),
            (
                "Initial acid value AV0".into(),
                format!("{:.1} mg KOH/g", r.initial_acid_value),
            ),
            (
                "Initial hydroxyl value OHV0".into(),
                format!("{:.1} mg KOH/g", r.initial_hydroxyl_value),
            ),
            (
                "Extent of reaction p (acid)".into(),
                pct(r.extent_of_reaction),
            ),
            (
                "  naive 1 - AV/AV0, for comparison".into(),
                pct(r.extent_of_reaction_naive),
            ),
            (
                "Extent of reaction (hydroxyl)".into(),
                pct(r.extent_of_reaction_hydroxyl),
            ),
            (
                "Water of condensation".into(),
                format!("{:.2} kg", r.water_released_kg),
            ),
            (
                "Batch mass after water loss".into(),
                format!("{:.2} kg", r.batch_mass_kg),
            ),
            (
                "Predicted OHV, no glycol loss".into(),
                format!("{:.2} mg KOH/g", r.predicted_hydroxyl_value),
            ),
            (
                "Hydroxyl shortfall".into(),
                format!(
                    "{:.3} mol OH{}",
                    r.hydroxyl_shortfall_mol,
                    match (&r.main_polyol, r.polyol_lost_kg) {
                        (Some(n), Some(kg)) => format!(" (= {kg:.2} kg {n})"),
                        _ => String::new(),
                    }
                ),
            ),
            (
                "Stoichiometric ratio r".into(),
                format!(
                    "{:.4} ({} groups in the minority)",
                    r.stoichiometric_ratio, r.minority_group
                ),
            ),
            (
                "Average functionality f_avg".into(),
                format!("{:.4}", r.average_functionality),
            ),
            ("Xn (Carothers)".into(), opt(r.xn_carothers, 2, "")),
            (
                "Gel point, Carothers".into(),
                r.gel_point_carothers
                    .map_or("none (f_avg ≤ 2)".into(), |g| {
                        format!("p_c = {g:.4} (now {:.4})", r.extent_of_reaction_minority)
                    }),
            ),
            (
                "Gel point, statistical (Stockmayer)".into(),
                match (r.gel.statistical, r.gel.statistical_none) {
                    (Some(g), _) => format!(
                        "p_c = {:.4} (now {:.4}){}",
                        g.p_minority,
                        r.extent_of_reaction_minority,
                        r.gel
                            .acid_value_at_gel
                            .map_or(String::new(), |av| format!(", at AV {av:.2} mg KOH/g"))
                    ),
                    (None, Some(why)) => why.describe().into(),
                    (None, None) => "none".into(),
                },
            ),
            ("Mn from recipe".into(), opt(r.mn_recipe, 0, "g/mol")),
            (
                "End-group vs recipe Mn".into(),
                opt(r.mn_disagreement_percent, 1, "%"),
            ),
        ]);
    }
    crate::support::table::pairs(&rows)
}
