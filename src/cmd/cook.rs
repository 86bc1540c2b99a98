//! `resinlot cook`: fit in-process acid values to step-growth kinetics and predict the end point.
//!
//! Parses and checks the flags, calls [`crate::cook::fit`] or [`crate::cook::arrhenius`], and
//! prints the text report, the JSON or the chart file.

use std::path::{Path, PathBuf};

use anyhow::Context;

use crate::chem::recipe::Recipe;
use crate::cmd::args::{CertificatesFolder, RegisterFolder, SpecsFolder};
use crate::cmd::Outcome;
use crate::cook::arrhenius::{self, ArrheniusReport};
use crate::cook::chart;
use crate::cook::fit::{self, CookReport, GelGuard, Target};
use crate::cook::kinetics;
use crate::cook::samples;
use crate::error::Error;
use crate::support::output::OutputKind;

/// Arguments of `resinlot cook`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// In-process samples (CSV with elapsed_min,acid_value and optionally temperature_c,
    /// viscosity, hydroxyl_value, sampled_at; lines starting with # are comments). Exactly one
    /// file, or several with --arrhenius. Viscosities (any one unit) are fitted against Mn: the
    /// end-group Mn where the sample has a hydroxyl value (corrected for acidity), otherwise the
    /// recipe Mn.
    #[arg(value_name = "SAMPLES.csv", required = true, num_args = 1..)]
    pub samples: Vec<PathBuf>,
    /// Batch recipe (TOML): converts each acid value to extent of reaction with the
    /// condensation-water balance and gives C0, the acid groups per kg of charge.
    #[arg(long, value_name = "FILE")]
    pub recipe: PathBuf,
    /// Target acid value of the end point, in mg KOH/g.
    #[arg(
        long,
        value_name = "MG_KOH_G",
        required_unless_present_any = ["target_mn", "arrhenius"],
        conflicts_with = "target_mn",
        allow_hyphen_values = true
    )]
    pub target_av: Option<f64>,
    /// Target Mn of the end point in g/mol, converted to an acid value through the recipe
    /// (batch mass over molecules, no glycol loss). Use instead of --target-av.
    #[arg(long, value_name = "G_PER_MOL", allow_hyphen_values = true)]
    pub target_mn: Option<f64>,
    /// Force the reaction order: 2 (external acid catalyst), 2.5 (apparent), or 3
    /// (self-catalysed). Default: all three are fitted and the best R² is chosen.
    #[arg(long, value_name = "N", value_parser = crate::cmd::args::reaction_order)]
    pub order: Option<f64>,
    /// Leave out of the fit the early samples whose extent of reaction p is below this value
    /// (they react faster than the equal-reactivity law). Default: 0.8.
    #[arg(hide_default_value = true, long, value_name = "P", default_value_t = kinetics::DEFAULT_EXCLUDE_BELOW)]
    pub exclude_below: f64,
    /// Fit several cooks of the same recipe at different temperatures and report the
    /// activation energy. Default: off.
    ///
    /// Give three or more samples files of the same recipe, cooked at no fewer than two
    /// temperatures. Each file must have a temperature_c column; its mean is the cook's
    /// temperature (a warning is shown if it varies by more than 5 °C). One common order is
    /// fitted to every cook (the order with the best summed R², or --order), each file gives its
    /// rate constant k, and ln k is fitted against 1/T (T in kelvin). The activation energy is
    /// Ea = -R·slope, reported with its standard error and 95 % confidence interval (Student t,
    /// n-2 degrees of freedom). No target and no chart are used in this mode.
    #[arg(long, conflicts_with_all = ["chart", "target_av", "target_mn"])]
    pub arrhenius: bool,
    /// How close to the recipe's statistical gel point counts as near, as Δp in extent of
    /// reaction of the minority groups (e.g. 0.005) or as an acid value above the one at the
    /// gel point (e.g. 1.5av, mg KOH/g). A target or last sample that near prints a GEL
    /// WARNING. Default: 0.005.
    #[arg(long, value_name = "DP|AVav", value_parser = crate::cmd::args::gel_margin, conflicts_with = "arrhenius")]
    pub gel_margin: Option<crate::chem::gel::GelMargin>,
    /// Predict the end point even when the target lies at or past the statistical gel point
    /// (with a GEL WARNING). Without it such a target is refused with exit status 1. Default: off.
    #[arg(long, conflicts_with = "arrhenius")]
    pub beyond_gel: bool,
    /// Write the cook chart to this file: the acid value against time with the fitted model,
    /// the target and the predicted end point, over the linearised quantity against time, with
    /// the safety caution at its foot. SVG, or PNG (twice the SVG's 960 px width) for a name
    /// ending in .png; an existing file there is replaced only if it is a resinlot chart, and
    /// the chart never goes into the workspace folders. Default: no chart.
    #[arg(long, value_name = "FILE")]
    pub chart: Option<PathBuf>,
    /// The specs folder (`--specs`), which the chart never enters.
    #[command(flatten)]
    pub specs: SpecsFolder,
    /// The register folder (`--register`), which the chart never enters.
    #[command(flatten)]
    pub register: RegisterFolder,
    /// The certificates folder (`--certificates`), which the chart never enters.
    #[command(flatten)]
    pub certificates: CertificatesFolder,
    /// Print one JSON object instead of the text report. "excluded" lists the left-out samples
    /// as 0-based indices in file order; "excluded_detail" adds their file lines and reasons.
    #[arg(long)]
    pub json: bool,
}

/// The flag behind each field the cook fit names in its errors.
const FLAGS: &[(&str, &str)] = &[
    ("target acid value", "--target-av"),
    ("target Mn", "--target-mn"),
];

/// Runs the command.
pub fn run(args: &Args) -> anyhow::Result<Outcome> {
    let recipe = Recipe::load(&args.recipe).context("cannot use the recipe")?;
    crate::error::positive("--exclude-below", args.exclude_below)?;
    if args.exclude_below >= 1.0 {
        return Err(Error::invalid(
            "--exclude-below",
            format!("{} leaves no point to fit", args.exclude_below),
            "Give an extent of reaction below 1, e.g. 0.8.",
        )
        .into());
    }
    let order = args.order;
    if args.arrhenius {
        let rep = arrhenius::arrhenius(&args.samples, &recipe, order, args.exclude_below)
            .map_err(|e| crate::cmd::args::name_flags(e, FLAGS))?;
        let text = if args.json {
            serde_json::to_string_pretty(&rep)? + "\n"
        } else {
            render_arrhenius(&rep)
        };
        crate::support::output::print(&text)?;
        return Ok(Outcome::AllGood);
    }
    if args.samples.len() != 1 {
        return Err(Error::invalid(
            "SAMPLES.csv",
            format!("{} files given", args.samples.len()),
            "Give one samples file, or add --arrhenius to fit several cooks together.",
        )
        .into());
    }
    let data = samples::load(&args.samples[0])?;
    let target = match (args.target_av, args.target_mn) {
        (Some(av), _) => Target::AcidValue(av),
        (None, Some(mn)) => Target::Mn(mn),
        (None, None) => unreachable!("clap requires a target"),
    };
    let guard = GelGuard {
        margin: args.gel_margin.unwrap_or_default(),
        beyond_gel: args.beyond_gel,
    };
    let rep = fit::analyse(&data, &recipe, target, order, args.exclude_below, guard)
        .map_err(|e| crate::cmd::args::name_flags(e, FLAGS))?;
    let chart = match &args.chart {
        Some(path) => Some((path, chart_bytes(&rep, &recipe)?)),
        None => None,
    };
    let text = if args.json {
        serde_json::to_string_pretty(&rep)? + "\n"
    } else {
        render(&rep)
    };
    if let Some((path, bytes)) = chart {
        let record =
            crate::cmd::args::record_folders(&args.specs, &args.register, &args.certificates);
        // A .png name gets the chart rasterised, not SVG text under the wrong name.
        let png = path
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("png"));
        if png {
            let bytes = crate::support::visual::svg_to_png(&bytes, 2.0)?;
            crate::support::output::write_output(path, bytes, OutputKind::Png, &record)?;
        } else {
            crate::support::output::write_output(path, bytes, OutputKind::Svg, &record)?;
        }
    }
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

/// The SVG chart of one cook (acid value and kinetics panels), titled with the recipe and the
/// samples file name.
fn chart_bytes(rep: &CookReport, recipe: &Recipe) -> crate::error::Result<Vec<u8>> {
    let title = format!("{} — {}", recipe.name, file_name(&rep.file));
    let acid_values = chart::AcidValuePanel::of(rep, &recipe.charge())?;
    chart::render(&rep.chart_input(title), &acid_values)
}

fn file_name(path: &str) -> String {
    Path::new(path)
        .file_name()
        .map_or(path.to_string(), |f| f.to_string_lossy().into_owned())
}

/// Four significant figures, in plain notation between 0.001 and 10000.
fn sig(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let mag = x.abs().log10().floor() as i32;
    if (-3..4).contains(&mag) {
        let decimals = (3 - mag).max(0) as usize;
        format!("{x:.decimals$}")
    } else {
        format!("{x:.3e}")
    }
}

fn fmt_pi(pi: Option<[f64; 2]>) -> String {
    pi.map_or("not finite (slope not significant)".into(), |[a, b]| {
        format!("{a:.0} to {b:.0} min")
    })
}

/// The text report of one cook.
pub fn render(r: &CookReport) -> String {
    let mut out = format!("Cook fit: {} (recipe: {})\n\n", r.file, r.recipe);
    out.push_str(&candidate_table(r));
    out.push('\n');
    let mut pairs = fit_pairs(r);
    pairs.extend(end_point_pairs(r));
    if let Some(v) = &r.viscosity {
        pairs.extend(viscosity_pairs(v));
    }
    out.push_str(&crate::support::table::pairs(&pairs));
    for w in &r.warnings {
        out.push_str(&format!("warning: {}: {}\n", w.place, w.message));
    }
    for w in &r.gel_warnings {
        out.push_str(&format!("\n{w}\n"));
    }
    out.push('\n');
    out.push_str(crate::cook::correction::SAFETY_CAUTION);
    out.push('\n');
    out
}

/// The table of candidate orders: R², residual signs and runs, k.
fn candidate_table(r: &CookReport) -> String {
    let mut rows = vec![vec![
        "order".to_string(),
        "R²".to_string(),
        "residual signs".to_string(),
        "runs".to_string(),
        "k".to_string(),
    ]];
    for c in &r.candidates {
        rows.push(vec![
            format!(
                "{}{}",
                c.order,
                if c.order == r.order { " (chosen)" } else { "" }
            ),
            format!("{:.5}", c.r_squared),
            c.residual_signs.clone(),
            c.residual_runs.to_string(),
            format!(
                "{} {}",
                sig(c.rate_constant),
                kinetics::rate_constant_unit(c.order)
            ),
        ]);
    }
    crate::support::table::render(&rows)
}

/// Model, slope, intercept, R², C0, k and the samples kept and left out.
fn fit_pairs(r: &CookReport) -> Vec<(String, String)> {
    let mut pairs: Vec<(String, String)> = vec![
        (
            "Model".into(),
            format!(
                "order {} ({}), {}",
                r.order,
                chart::y_label(r.order, r.hydroxyl_excess_mol_per_kg),
                if r.order_forced {
                    "forced by --order"
                } else {
                    "best R² of the candidates"
                }
            ),
        ),
        (
            "Slope".into(),
            format!(
                "{:.6} ± {:.6} per min (standard error)",
                r.slope_per_min, r.slope_standard_error
            ),
        ),
        (
            "Intercept".into(),
            format!("{:.4} ± {:.4}", r.intercept, r.intercept_standard_error),
        ),
        ("R²".into(), format!("{:.5}", r.r_squared)),
        (
            "C0 (acid groups)".into(),
            format!(
                "{:.4} mol/kg; hydroxyl excess Δ = {:.4} mol/kg (r = {:.4}), in the rate law",
                r.c0_mol_per_kg, r.hydroxyl_excess_mol_per_kg, r.stoichiometric_ratio
            ),
        ),
        (
            "Rate constant k".into(),
            format!(
                "{} ± {} {}",
                sig(r.rate_constant),
                sig(r.rate_constant_standard_error),
                r.rate_constant_unit
            ),
        ),
        (
            "Samples kept / left out".into(),
            format!(
                "{} / {}",
                r.samples.len() - r.excluded.len(),
                r.excluded.len()
            ),
        ),
    ];
    for e in &r.excluded_detail {
        pairs.push((format!("  left out: line {}", e.line), e.reason.clone()));
    }
    pairs
}

/// Target, predicted end point with its interval, Mn and Xn at the end point.
fn end_point_pairs(r: &CookReport) -> Vec<(String, String)> {
    vec![
        (
            "Target".into(),
            format!(
                "AV {} mg KOH/g (p = {:.5})",
                r.target_acid_value, r.target_extent
            ),
        ),
        (
            "Predicted end point".into(),
            format!(
                "{:.0} min elapsed ({:.0} min after the last sample)",
                r.predicted_elapsed_min, r.remaining_min
            ),
        ),
        (
            "  95 % prediction interval".into(),
            fmt_pi(r.predicted_elapsed_min_pi95),
        ),
        (
            "  extrapolation".into(),
            format!(
                "{:.1} sampled time spans from the first sample{}",
                r.extrapolation_ratio,
                if r.extrapolation_ratio > fit::EXTRAPOLATION_LIMIT {
                    format!(" (beyond {}: see the warning)", fit::EXTRAPOLATION_LIMIT)
                } else {
                    String::new()
                }
            ),
        ),
        (
            "Mn at the end point (recipe)".into(),
            r.predicted_mn
                .map_or("not computable".into(), |m| format!("{m:.0} g/mol")),
        ),
        (
            "Xn at the end point (Carothers)".into(),
            r.predicted_xn
                .map_or("not computable".into(), |x| format!("{x:.2}")),
        ),
        ("Gel point, statistical".into(), gel_text(r)),
    ]
}

/// The statistical gel point of the recipe with its acid value, or why there is none.
fn gel_text(r: &CookReport) -> String {
    match (r.gel.statistical, r.gel.statistical_none) {
        (Some(g), _) => format!(
            "p_c = {:.5}{}; target {}, guard margin {}",
            g.p_minority,
            r.gel
                .acid_value_at_gel
                .map_or(String::new(), |av| format!(" (AV {av:.2} mg KOH/g)")),
            match r.target_gel_state {
                crate::chem::gel::GelState::Clear => "clear of it",
                crate::chem::gel::GelState::Near => "near it",
                crate::chem::gel::GelState::Beyond => "past it",
            },
            r.gel_margin
        ),
        (None, Some(why)) => why.describe().into(),
        (None, None) => "none".into(),
    }
}

/// The viscosity–Mn power law and the viscosity expected at the end point.
fn viscosity_pairs(v: &fit::ViscosityReport) -> Vec<(String, String)> {
    vec![
        (
            "Viscosity vs Mn".into(),
            format!(
                "η ∝ Mn^{:.2} ± {:.2} (R² {:.4}, {} readings; {})",
                v.fit.exponent, v.fit.exponent_se, v.fit.r_squared, v.fit.n, v.mn_basis
            ),
        ),
        (
            "Viscosity at the end point".into(),
            format!(
                "{:.0} (95 % prediction interval {:.0} to {:.0}), same unit as the readings",
                v.fit.viscosity_at_target,
                v.fit.viscosity_at_target_pi95.0,
                v.fit.viscosity_at_target_pi95.1
            ),
        ),
    ]
}

/// The text report of an Arrhenius fit.
pub fn render_arrhenius(r: &ArrheniusReport) -> String {
    let mut out = format!(
        "Arrhenius fit: {} cooks of {} at order {}\n\n",
        r.batches.len(),
        r.recipe,
        r.order
    );
    let mut rows = vec![vec![
        "file".to_string(),
        "T (°C)".to_string(),
        format!("k ({})", r.rate_constant_unit),
        "R²".to_string(),
        "left out".to_string(),
    ]];
    for b in &r.batches {
        rows.push(vec![
            file_name(&b.file),
            format!("{:.1}", b.temperature_c),
            format!(
                "{} ± {}",
                sig(b.rate_constant),
                sig(b.rate_constant_standard_error)
            ),
            format!("{:.5}", b.r_squared),
            b.excluded.len().to_string(),
        ]);
    }
    out.push_str(&crate::support::table::render(&rows));
    out.push('\n');
    out.push_str(&crate::support::table::pairs(&[
        (
            "Activation energy Ea".into(),
            format!(
                "{:.1} ± {:.1} kJ/mol (standard error); 95 % CI ± {:.1} kJ/mol",
                r.fit.activation_energy_kj_per_mol,
                r.fit.activation_energy_se,
                r.fit.activation_energy_ci95_half_width
            ),
        ),
        (
            "ln A".into(),
            format!(
                "{:.3} (A in {})",
                r.fit.ln_pre_exponential, r.rate_constant_unit
            ),
        ),
        (
            "R² of ln k vs 1/T".into(),
            format!("{:.5}", r.fit.r_squared),
        ),
    ]));
    for w in &r.warnings {
        out.push_str(&format!("warning: {}: {}\n", w.place, w.message));
    }
    out
}
