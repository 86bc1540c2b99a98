//! `resinlot cook`: fit in-process acid values to step-growth kinetics and predict the end point.

use std::path::{Path, PathBuf};

use anyhow::Context;
use serde::Serialize;

use crate::chem::recipe::{Charge, Recipe};
use crate::chem::stepgrowth::{self, Progress};
use crate::cmd::Outcome;
use crate::cook::chart::{self, ChartInput, Mark};
use crate::cook::kinetics::{self, Arrhenius, Exclusion, ModelFit, Outlier, Point, ViscosityFit};
use crate::cook::samples::{self, Samples, Warning};
use crate::error::{Error, Result};

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
    #[arg(long, value_name = "N", value_parser = ["2", "2.5", "3"])]
    pub order: Option<String>,
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
    /// Write an SVG chart of the linearised quantity against time to this file (replaced if it
    /// exists). Default: no chart.
    #[arg(long, value_name = "FILE")]
    pub chart: Option<PathBuf>,
    /// Print one JSON object instead of the text report. "excluded" lists the left-out samples
    /// as 0-based indices in file order; "excluded_detail" adds their file lines and reasons.
    #[arg(long)]
    pub json: bool,
}

/// One cook fitted: everything the report and JSON show.
#[derive(Debug, Clone, Serialize)]
pub struct CookReport {
    /// Samples file.
    pub file: String,
    /// Recipe name.
    pub recipe: String,
    /// Chosen (or forced) reaction order.
    pub order: f64,
    /// True when --order forced it.
    pub order_forced: bool,
    /// Fitted slope of the linearised quantity (per min).
    pub slope_per_min: f64,
    /// Standard error of the slope (per min).
    pub slope_standard_error: f64,
    /// Fitted intercept.
    pub intercept: f64,
    /// Standard error of the intercept.
    pub intercept_standard_error: f64,
    /// R² of the chosen model on the kept points.
    pub r_squared: f64,
    /// Indices (0-based, file order) of the samples left out of the fit.
    pub excluded: Vec<usize>,
    /// Why each was left out, with its file line.
    pub excluded_detail: Vec<ExcludedSample>,
    /// Kept samples with large studentized residuals (still in the fit).
    pub outliers: Vec<FlaggedSample>,
    /// Acid groups per kg of charge, C0 (mol/kg).
    pub c0_mol_per_kg: f64,
    /// Hydroxyl minus acid groups per kg of charge, Δ (mol/kg), used in the rate law.
    pub hydroxyl_excess_mol_per_kg: f64,
    /// Stoichiometric ratio r of the charge (minority / majority groups).
    pub stoichiometric_ratio: f64,
    /// Rate constant k.
    pub rate_constant: f64,
    /// Standard error of k.
    pub rate_constant_standard_error: f64,
    /// Unit of k.
    pub rate_constant_unit: String,
    /// Every candidate order with its R² and residual signs.
    pub candidates: Vec<Candidate>,
    /// Target acid value (mg KOH/g).
    pub target_acid_value: f64,
    /// Extent of reaction at the target.
    pub target_extent: f64,
    /// Predicted elapsed time at the target (min).
    pub predicted_elapsed_min: f64,
    /// 95 % prediction interval of that time (min), null when the slope is not significant.
    pub predicted_elapsed_min_pi95: Option<[f64; 2]>,
    /// Minutes from the last sample to the predicted end point.
    pub remaining_min: f64,
    /// Mn at the target from the recipe (batch mass / molecules, no glycol loss), g/mol.
    pub predicted_mn: Option<f64>,
    /// Carothers Xn at the target.
    pub predicted_xn: Option<f64>,
    /// Viscosity against Mn, when the samples carry viscosities.
    pub viscosity: Option<ViscosityReport>,
    /// Every sample with its extent of reaction.
    pub samples: Vec<SampleRow>,
    /// Non-fatal findings.
    pub warnings: Vec<Warning>,
    /// The safety cautions.
    pub caution: String,
}

/// One excluded sample.
#[derive(Debug, Clone, Serialize)]
pub struct ExcludedSample {
    /// 0-based index.
    pub index: usize,
    /// File line.
    pub line: u64,
    /// Reason.
    pub reason: String,
}

/// One flagged sample.
#[derive(Debug, Clone, Serialize)]
pub struct FlaggedSample {
    /// 0-based index.
    pub index: usize,
    /// File line.
    pub line: u64,
    /// Studentized residual.
    pub studentized_residual: f64,
}

/// One candidate order.
#[derive(Debug, Clone, Serialize)]
pub struct Candidate {
    /// Order.
    pub order: f64,
    /// R² on the kept points.
    pub r_squared: f64,
    /// Residual signs in time order.
    pub residual_signs: String,
    /// Number of sign runs.
    pub residual_runs: usize,
    /// Rate constant.
    pub rate_constant: f64,
}

/// One sample as fitted.
#[derive(Debug, Clone, Serialize)]
pub struct SampleRow {
    /// File line.
    pub line: u64,
    /// Elapsed minutes.
    pub elapsed_min: f64,
    /// Acid value (mg KOH/g).
    pub acid_value: f64,
    /// Extent of reaction (water balance).
    pub extent: f64,
    /// Linearised value for the chosen order.
    pub linearised: f64,
    /// True when used in the fit.
    pub kept: bool,
}

/// The viscosity predictor.
#[derive(Debug, Clone, Serialize)]
pub struct ViscosityReport {
    /// The log-log fit and prediction.
    #[serde(flatten)]
    pub fit: ViscosityFit,
    /// Which Mn the readings were paired with.
    pub mn_basis: String,
}

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
    let order = args
        .order
        .as_deref()
        .map(|s| s.parse::<f64>())
        .transpose()?;
    if args.arrhenius {
        let rep = arrhenius(&args.samples, &recipe, order, args.exclude_below)?;
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
    let rep = analyse(&data, &recipe, target, order, args.exclude_below)?;
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
        crate::support::output::write_atomic(path, &bytes, true)?;
    }
    crate::support::output::print(&text)?;
    Ok(Outcome::AllGood)
}

/// The end point asked for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Target {
    /// Acid value (mg KOH/g).
    AcidValue(f64),
    /// Mn from the recipe (g/mol).
    Mn(f64),
}

/// Converts every sample's acid value to extent of reaction, naming the line on error.
pub fn extents(data: &Samples, ch: &Charge) -> Result<Vec<Progress>> {
    data.samples
        .iter()
        .map(|s| {
            let place = format!("{}:{}, field acid_value", data.file, s.line);
            let pr = stepgrowth::progress_at(ch, s.acid_value).map_err(|e| match e {
                Error::Invalid { problem, fix, .. } => Error::invalid(&place, problem, fix),
                other => other,
            })?;
            if pr.p_acid >= 1.0 - 1e-12 {
                return Err(Error::invalid(
                    place,
                    "an acid value of zero means every acid group has reacted, which the rate laws cannot use",
                    "Check the titration; write the measured value, not zero, or remove the line.",
                ));
            }
            Ok(pr)
        })
        .collect()
}

/// Group concentrations of the charge per kg of charge: C0 = acid groups, Δ = OH - acid.
pub fn groups_of(ch: &Charge) -> kinetics::Groups {
    kinetics::Groups {
        c0: ch.acid_eq / ch.mass_kg,
        excess: (ch.hydroxyl_eq - ch.acid_eq) / ch.mass_kg,
    }
}

/// Acid value at which the recipe Mn equals `mn` (bisection; recipe Mn falls as AV rises).
fn acid_value_for_mn(ch: &Charge, mn: f64) -> Result<f64> {
    let av0 = stepgrowth::initial_acid_value(ch);
    let mn_at = |av: f64| -> Result<f64> {
        Ok(stepgrowth::mn_recipe(&stepgrowth::progress_at(ch, av)?).unwrap_or(f64::INFINITY))
    };
    let (mut lo, mut hi) = (0.0, av0);
    if mn <= mn_at(av0)? || mn >= mn_at(0.0)? {
        return Err(Error::invalid(
            "--target-mn",
            format!(
                "{mn} g/mol is outside what this recipe can reach ({:.0} to {:.0} g/mol)",
                mn_at(av0)?,
                mn_at(0.0)?
            ),
            "Choose a target Mn inside that range, or give --target-av.",
        ));
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mn_at(mid)? > mn {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Ok(0.5 * (lo + hi))
}

/// Fits one cook and predicts its end point.
pub fn analyse(
    data: &Samples,
    recipe: &Recipe,
    target: Target,
    order: Option<f64>,
    exclude_below: f64,
) -> Result<CookReport> {
    let ch = recipe.charge();
    let groups = groups_of(&ch);
    let progress = extents(data, &ch)?;
    let points: Vec<Point> = data
        .samples
        .iter()
        .zip(&progress)
        .map(|(s, p)| Point {
            elapsed_min: s.elapsed_min,
            p: p.p_acid,
        })
        .collect();
    let sel = kinetics::select_points(&points, exclude_below);
    let orders: Vec<f64> = order.map_or(kinetics::CANDIDATE_ORDERS.to_vec(), |n| vec![n]);
    let (fits, best) = kinetics::choose_model(&points, &sel.kept, &orders, groups)
        .map_err(|e| relocate(e, &data.file))?;
    let fit = &fits[best];
    let target_av = match target {
        Target::AcidValue(av) => {
            crate::error::positive("--target-av", av)?;
            av
        }
        Target::Mn(mn) => {
            crate::error::positive("--target-mn", mn)?;
            acid_value_for_mn(&ch, mn)?
        }
    };
    let at_target = stepgrowth::progress_at(&ch, target_av).map_err(|e| match e {
        Error::Invalid { problem, fix, .. } => Error::invalid("--target-av", problem, fix),
        other => other,
    })?;
    let end = kinetics::predict_end_point(fit, at_target.p_acid);
    let mut warnings = data.warnings.clone();
    let last = data.samples.last().expect("samples are never empty");
    if last.acid_value <= target_av {
        warnings.push(Warning {
            place: format!("{}:{}", data.file, last.line),
            message: format!(
                "the target AV {target_av} mg KOH/g is already reached (AV {} at {} min); the prediction only shows where the fit crosses it",
                last.acid_value, last.elapsed_min
            ),
        });
    }
    if end.pi95.is_none() {
        warnings.push(Warning {
            place: data.file.clone(),
            message: "the slope is not significant at 95 %, so the end point has no finite prediction interval".into(),
        });
    }
    if fit.line.slope <= 0.0 {
        return Err(Error::invalid(
            &data.file,
            "the acid value does not fall over the kept samples, so no end point can be predicted",
            "Check the samples and their order.",
        ));
    }
    for o in &fit.outliers {
        warnings.push(Warning {
            place: format!("{}:{}", data.file, data.samples[o.index].line),
            message: format!(
                "studentized residual {:.1} exceeds ±{}; check this titration (the point is kept in the fit)",
                o.studentized_residual,
                kinetics::OUTLIER_LIMIT
            ),
        });
    }
    let predicted_mn = stepgrowth::mn_recipe(&at_target);
    let f_avg = stepgrowth::average_functionality(&ch);
    let predicted_xn = stepgrowth::xn_carothers(at_target.p_minority(&ch), f_avg);
    let viscosity = viscosity_report(data, &progress, predicted_mn);
    let excluded_detail = sel
        .excluded
        .iter()
        .map(|Exclusion { index, reason }| ExcludedSample {
            index: *index,
            line: data.samples[*index].line,
            reason: reason.clone(),
        })
        .collect();
    let outliers = fit
        .outliers
        .iter()
        .map(
            |Outlier {
                 index,
                 studentized_residual,
             }| FlaggedSample {
                index: *index,
                line: data.samples[*index].line,
                studentized_residual: *studentized_residual,
            },
        )
        .collect();
    Ok(CookReport {
        file: data.file.clone(),
        recipe: recipe.name.clone(),
        order: fit.order,
        order_forced: order.is_some(),
        slope_per_min: fit.line.slope,
        slope_standard_error: fit.line.slope_se,
        intercept: fit.line.intercept,
        intercept_standard_error: fit.line.intercept_se,
        r_squared: fit.line.r_squared,
        excluded: sel.excluded.iter().map(|e| e.index).collect(),
        excluded_detail,
        outliers,
        c0_mol_per_kg: groups.c0,
        hydroxyl_excess_mol_per_kg: groups.excess,
        stoichiometric_ratio: stepgrowth::stoichiometric_ratio(&ch),
        rate_constant: fit.rate_constant,
        rate_constant_standard_error: fit.rate_constant_se,
        rate_constant_unit: kinetics::rate_constant_unit(fit.order),
        candidates: fits.iter().map(candidate).collect(),
        target_acid_value: target_av,
        target_extent: at_target.p_acid,
        predicted_elapsed_min: end.elapsed_min,
        predicted_elapsed_min_pi95: end.pi95.map(|(a, b)| [a, b]),
        remaining_min: end.elapsed_min - last.elapsed_min,
        predicted_mn,
        predicted_xn,
        viscosity,
        samples: data
            .samples
            .iter()
            .zip(&points)
            .enumerate()
            .map(|(i, (s, pt))| SampleRow {
                line: s.line,
                elapsed_min: s.elapsed_min,
                acid_value: s.acid_value,
                extent: pt.p,
                linearised: kinetics::linearised_with_excess(pt.p, fit.order, groups),
                kept: sel.kept.contains(&i),
            })
            .collect(),
        warnings,
        caution: crate::cook::correction::SAFETY_CAUTION.into(),
    })
}

fn relocate(e: Error, file: &str) -> Error {
    match e {
        Error::Invalid {
            place,
            problem,
            fix,
        } if place == "samples" => Error::invalid(file, problem, fix),
        other => other,
    }
}

fn candidate(f: &ModelFit) -> Candidate {
    Candidate {
        order: f.order,
        r_squared: f.line.r_squared,
        residual_signs: f.residual_signs.clone(),
        residual_runs: f.residual_runs,
        rate_constant: f.rate_constant,
    }
}

/// Pairs viscosity readings with Mn: end-group Mn (f = 2) where the sample has a hydroxyl
/// value, otherwise the recipe Mn; needs three readings.
fn viscosity_report(
    data: &Samples,
    progress: &[Progress],
    mn_target: Option<f64>,
) -> Option<ViscosityReport> {
    let mn_target = mn_target?;
    let mut mn = Vec::new();
    let mut eta = Vec::new();
    let mut end_group = 0;
    for (s, p) in data.samples.iter().zip(progress) {
        let Some(v) = s.viscosity else { continue };
        let m = match s.hydroxyl_value {
            Some(oh) => {
                end_group += 1;
                stepgrowth::mn_end_group(s.acid_value, oh, 2.0)
            }
            None => stepgrowth::mn_recipe(p),
        };
        if let Some(m) = m {
            mn.push(m);
            eta.push(v);
        }
    }
    let fit = kinetics::viscosity_fit(&mn, &eta, mn_target)?;
    let mn_basis = match end_group {
        0 => "recipe Mn (no hydroxyl values in the samples)".to_string(),
        n if n == mn.len() => "end-group Mn, f = 2, from each sample's AV and OHV".to_string(),
        n => {
            format!("end-group Mn for {n} samples with a hydroxyl value, recipe Mn for the others")
        }
    };
    Some(ViscosityReport { fit, mn_basis })
}

fn chart_bytes(rep: &CookReport, recipe: &Recipe) -> Result<Vec<u8>> {
    let flagged: Vec<usize> = rep.outliers.iter().map(|o| o.index).collect();
    let input = ChartInput {
        title: format!("{} — {}", recipe.name, file_name(&rep.file)),
        order: rep.order,
        excess: rep.hydroxyl_excess_mol_per_kg,
        points: rep
            .samples
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let mark = if !s.kept {
                    Mark::Excluded
                } else if flagged.contains(&i) {
                    Mark::Outlier
                } else {
                    Mark::Kept
                };
                (s.elapsed_min, s.linearised, mark)
            })
            .collect(),
        intercept: rep.intercept,
        slope: rep.slope_per_min,
        target_y: kinetics::linearised_with_excess(
            rep.target_extent,
            rep.order,
            kinetics::Groups {
                c0: rep.c0_mol_per_kg,
                excess: rep.hydroxyl_excess_mol_per_kg,
            },
        ),
        target_label: format!("target AV {} mg KOH/g", rep.target_acid_value),
        predicted: Some((
            rep.predicted_elapsed_min,
            rep.predicted_elapsed_min_pi95.map(|[a, b]| (a, b)),
        )),
    };
    chart::render(&input)
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
    out.push_str(&crate::support::table::render(&rows));
    out.push('\n');
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
    pairs.extend([
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
            "Mn at the end point (recipe)".into(),
            r.predicted_mn
                .map_or("not computable".into(), |m| format!("{m:.0} g/mol")),
        ),
        (
            "Xn at the end point (Carothers)".into(),
            r.predicted_xn
                .map_or("not computable".into(), |x| format!("{x:.2}")),
        ),
    ]);
    if let Some(v) = &r.viscosity {
        pairs.extend([
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
        ]);
    }
    out.push_str(&crate::support::table::pairs(&pairs));
    for w in &r.warnings {
        out.push_str(&format!("warning: {}: {}\n", w.place, w.message));
    }
    out.push('\n');
    out.push_str(crate::cook::correction::SAFETY_CAUTION);
    out.push('\n');
    out
}

/// One cook in the Arrhenius fit.
#[derive(Debug, Clone, Serialize)]
pub struct ArrheniusBatch {
    /// Samples file.
    pub file: String,
    /// Mean batch temperature (°C).
    pub temperature_c: f64,
    /// Rate constant.
    pub rate_constant: f64,
    /// Standard error of k.
    pub rate_constant_standard_error: f64,
    /// R² of that cook's fit.
    pub r_squared: f64,
    /// Samples left out as early points.
    pub excluded: Vec<usize>,
}

/// The Arrhenius report.
#[derive(Debug, Clone, Serialize)]
pub struct ArrheniusReport {
    /// Recipe name.
    pub recipe: String,
    /// Common order.
    pub order: f64,
    /// Unit of k.
    pub rate_constant_unit: String,
    /// Each cook.
    pub batches: Vec<ArrheniusBatch>,
    /// The fit.
    #[serde(flatten)]
    pub fit: Arrhenius,
    /// Non-fatal findings.
    pub warnings: Vec<Warning>,
}

/// Range of a cook's temperature readings (°C) above which --arrhenius warns that the mean is a
/// rough summary (common practice: a hold controlled within a few kelvin).
const MAX_TEMPERATURE_SPREAD: f64 = 5.0;

/// Fits several cooks at one common order and then ln k against 1/T.
pub fn arrhenius(
    files: &[PathBuf],
    recipe: &Recipe,
    order: Option<f64>,
    exclude_below: f64,
) -> Result<ArrheniusReport> {
    let ch = recipe.charge();
    let groups = groups_of(&ch);
    let mut cooks = Vec::new();
    let mut warnings = Vec::new();
    for path in files {
        let data = samples::load(path)?;
        let mut temps = Vec::new();
        for s in &data.samples {
            let t = s.temperature_c.ok_or_else(|| {
                Error::invalid(
                    format!("{}:{}, field temperature_c", data.file, s.line),
                    "the temperature is missing",
                    "--arrhenius needs the batch temperature on every sample.",
                )
            })?;
            temps.push(t);
        }
        let mean = temps.iter().sum::<f64>() / temps.len() as f64;
        let spread = temps.iter().cloned().fold(f64::MIN, f64::max)
            - temps.iter().cloned().fold(f64::MAX, f64::min);
        if spread > MAX_TEMPERATURE_SPREAD {
            warnings.push(Warning {
                place: data.file.clone(),
                message: format!(
                    "the temperature varies by {spread:.1} °C; the mean {mean:.1} °C is used"
                ),
            });
        }
        warnings.extend(data.warnings.iter().cloned());
        let points: Vec<Point> = data
            .samples
            .iter()
            .zip(extents(&data, &ch)?)
            .map(|(s, p)| Point {
                elapsed_min: s.elapsed_min,
                p: p.p_acid,
            })
            .collect();
        let sel = kinetics::select_points(&points, exclude_below);
        cooks.push((data.file.clone(), mean, points, sel));
    }
    let orders: Vec<f64> = order.map_or(kinetics::CANDIDATE_ORDERS.to_vec(), |n| vec![n]);
    let mut best: Option<(f64, f64)> = None;
    for &n in &orders {
        let mut total = 0.0;
        for (file, _, points, sel) in &cooks {
            total += kinetics::fit_order(points, &sel.kept, n, groups)
                .map_err(|e| relocate(e, file))?
                .line
                .r_squared;
        }
        if best.is_none_or(|(_, r)| total > r) {
            best = Some((n, total));
        }
    }
    let n = best.map_or(3.0, |b| b.0);
    let mut batches = Vec::new();
    let mut rates = Vec::new();
    for (file, t, points, sel) in &cooks {
        let fit = kinetics::fit_order(points, &sel.kept, n, groups)?;
        rates.push(kinetics::RateAtTemperature {
            temperature_c: *t,
            rate_constant: fit.rate_constant,
        });
        batches.push(ArrheniusBatch {
            file: file.clone(),
            temperature_c: *t,
            rate_constant: fit.rate_constant,
            rate_constant_standard_error: fit.rate_constant_se,
            r_squared: fit.line.r_squared,
            excluded: sel.excluded.iter().map(|e| e.index).collect(),
        });
    }
    let fit = kinetics::arrhenius_fit(&rates)?;
    Ok(ArrheniusReport {
        recipe: recipe.name.clone(),
        order: n,
        rate_constant_unit: kinetics::rate_constant_unit(n),
        batches,
        fit,
        warnings,
    })
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

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    const PD: &str = include_str!("../../specs/recipes/pd-2000.toml");

    /// Acid value at extent p for a charge without anhydride, by the hand mass balance:
    /// esters x = p·E_A, water x·0.018015 kg, AV = 56.1·(E_A - x)/(m0 - water).
    fn av_at(ch: &Charge, p: f64) -> f64 {
        let x = p * ch.acid_eq;
        56.1 * (ch.acid_eq - x) / (ch.mass_kg - 0.018015 * x)
    }

    #[test]
    fn extents_agree_with_the_core_engine_and_hand_balance() {
        // First-principles mass balance (Odian §2-1), checked against stepgrowth::progress_at.
        let recipe = Recipe::parse("pd", PD).unwrap();
        let ch = recipe.charge();
        let ps = [0.7, 0.9, 0.99, 0.998];
        let mut text = String::from("elapsed_min,acid_value\n");
        for (i, p) in ps.iter().enumerate() {
            text.push_str(&format!("{},{}\n", i * 60, av_at(&ch, *p)));
        }
        let data = samples::parse("s.csv", &text).unwrap();
        let pr = extents(&data, &ch).unwrap();
        for (p, got) in ps.iter().zip(&pr) {
            assert_relative_eq!(got.p_acid, *p, max_relative = 1e-9);
        }
    }

    #[test]
    fn av_above_av0_names_the_line() {
        let recipe = Recipe::parse("pd", PD).unwrap();
        let data = samples::parse("s.csv", "elapsed_min,acid_value\n0,900\n").unwrap();
        let err = extents(&data, &recipe.charge()).unwrap_err().to_string();
        assert!(err.starts_with("s.csv:2, field acid_value"), "{err}");
    }

    #[test]
    fn zero_acid_value_is_refused() {
        let recipe = Recipe::parse("pd", PD).unwrap();
        let data = samples::parse("s.csv", "elapsed_min,acid_value\n0,20\n60,0\n").unwrap();
        let err = extents(&data, &recipe.charge()).unwrap_err().to_string();
        assert!(err.starts_with("s.csv:3, field acid_value"), "{err}");
    }

    #[test]
    fn target_mn_converts_through_the_recipe() {
        let recipe = Recipe::parse("pd", PD).unwrap();
        let ch = recipe.charge();
        let av = acid_value_for_mn(&ch, 1800.0).unwrap();
        let mn = stepgrowth::mn_recipe(&stepgrowth::progress_at(&ch, av).unwrap()).unwrap();
        assert_relative_eq!(mn, 1800.0, max_relative = 1e-9);
        assert!(acid_value_for_mn(&ch, 1e7).is_err());
    }
}
