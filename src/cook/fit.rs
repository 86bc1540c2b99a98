//! One cook fitted: samples to extent of reaction, model choice, end point, viscosity predictor.
//!
//! Pure functions over parsed samples and a recipe; the command only formats the
//! [`CookReport`] this builds. Error places name the samples file and line.

use serde::Serialize;

use crate::chem::gel::{self, GelMargin, GelPoints, GelState};
use crate::chem::recipe::{Charge, Recipe};
use crate::chem::stepgrowth::{self, Progress};
use crate::cook::chart::{ChartInput, Mark};
use crate::cook::kinetics::{
    self, EndPoint, Exclusion, Groups, ModelFit, Outlier, Point, Selection, ViscosityFit,
};
use crate::cook::samples::{Samples, Warning};
use crate::error::{Error, Result};
use crate::stats::solve::bisect;

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
    /// Predicted end point's distance from the first sample in units of the sampled time
    /// span: (t_end − t_first)/(t_last − t_first). Above
    /// [`EXTRAPOLATION_LIMIT`] a warning says the end point is extrapolated.
    pub extrapolation_ratio: f64,
    /// Gel points of the recipe (statistical and Carothers) and the acid value at the
    /// statistical one.
    pub gel: GelPoints,
    /// The gel guard's margin used.
    pub gel_margin: GelMargin,
    /// The target against the statistical gel point.
    pub target_gel_state: GelState,
    /// The last sample against the statistical gel point.
    pub last_sample_gel_state: GelState,
    /// GEL WARNING lines (target or last sample near or past the gel point).
    pub gel_warnings: Vec<String>,
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

/// The end point may lie at most this many sampled time spans from the first sample before the report warns that it is extrapolated (issue #18; common practice: a fitted rate
/// law is trusted near the data it was fitted to).
pub const EXTRAPOLATION_LIMIT: f64 = 2.0;

/// The gel guard's settings for one cook.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct GelGuard {
    /// How close to the statistical gel point counts as near.
    pub margin: GelMargin,
    /// True when a target past the gel point is to be predicted anyway (with a warning).
    pub beyond_gel: bool,
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
            let pr = stepgrowth::progress_at(ch, s.acid_value).map_err(|e| e.at(|_| place.clone()))?;
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
pub fn groups_of(ch: &Charge) -> Groups {
    Groups {
        c0: ch.acid_eq / ch.mass_kg,
        excess: (ch.hydroxyl_eq - ch.acid_eq) / ch.mass_kg,
    }
}

/// Acid value at which the recipe Mn equals `mn` (bisection; recipe Mn falls as AV rises).
pub fn acid_value_for_mn(ch: &Charge, mn: f64) -> Result<f64> {
    let av0 = stepgrowth::initial_acid_value(ch);
    let mn_at = |av: f64| -> Result<f64> {
        Ok(stepgrowth::mn_recipe(&stepgrowth::progress_at(ch, av)?).unwrap_or(f64::INFINITY))
    };
    if mn <= mn_at(av0)? || mn >= mn_at(0.0)? {
        return Err(Error::invalid(
            "target Mn",
            format!(
                "{mn} g/mol is outside what this recipe can reach ({:.0} to {:.0} g/mol)",
                mn_at(av0)?,
                mn_at(0.0)?
            ),
            "Choose a target Mn inside that range, or give --target-av.",
        ));
    }
    bisect(0.0, av0, |av| Ok(mn_at(av)? > mn), |_, _| false)
}

/// Extent-of-reaction points of the samples, in file order.
pub fn points_of(data: &Samples, progress: &[Progress]) -> Vec<Point> {
    data.samples
        .iter()
        .zip(progress)
        .map(|(s, p)| Point {
            elapsed_min: s.elapsed_min,
            p: p.p_acid,
        })
        .collect()
}

/// The orders to fit: the forced one, or every candidate of [`kinetics::CANDIDATE_ORDERS`].
pub fn orders_to_try(order: Option<f64>) -> Vec<f64> {
    order.map_or(kinetics::CANDIDATE_ORDERS.to_vec(), |n| vec![n])
}

/// The target as an acid value (mg KOH/g), converting a target Mn through the recipe.
pub fn target_acid_value(ch: &Charge, target: Target) -> Result<f64> {
    Ok(match target {
        Target::AcidValue(av) => {
            crate::error::positive("target acid value", av)?;
            crate::chem::ranges::group_value("target acid value", av)?
        }
        Target::Mn(mn) => {
            crate::error::positive("target Mn", mn)?;
            acid_value_for_mn(ch, mn)?
        }
    })
}

/// Fits one cook and predicts its end point.
///
/// The steps: acid values to extent of reaction ([`extents`]), early points left out
/// ([`kinetics::select_points`]), the orders fitted ([`kinetics::choose_model`]), the target
/// converted to an extent, the end point predicted ([`kinetics::predict_end_point`]), and Mn,
/// Xn (Carothers) and viscosity at the target. A target at or past the statistical gel point
/// is refused ([`Error::Shortfall`], exit 1) unless `guard.beyond_gel`; a target or last
/// sample within the margin gets a GEL WARNING ([`gel::gel_state`]).
pub fn analyse(
    data: &Samples,
    recipe: &Recipe,
    target: Target,
    order: Option<f64>,
    exclude_below: f64,
    guard: GelGuard,
) -> Result<CookReport> {
    let ch = recipe.charge();
    let groups = groups_of(&ch);
    let progress = extents(data, &ch)?;
    let points = points_of(data, &progress);
    let sel = kinetics::select_points(&points, exclude_below);
    let orders = orders_to_try(order);
    let (fits, best) = kinetics::choose_model(&points, &sel.kept, &orders, groups)
        .map_err(|e| relocate(e, &data.file))?;
    let fit = &fits[best];
    let target_av = target_acid_value(&ch, target)?;
    let at_target = stepgrowth::progress_at(&ch, target_av)
        .map_err(|e| e.at(|_| "target acid value".into()))?;
    let gel = gel::gel_points(recipe);
    let p_target = at_target.p_minority(&ch);
    let target_gel_state = gel::gel_state(p_target, target_av, &gel, guard.margin);
    if target_gel_state == GelState::Beyond && !guard.beyond_gel {
        return Err(Error::Shortfall(past_gel_refusal(
            target_av, p_target, &gel,
        )));
    }
    let end = kinetics::predict_end_point(fit, at_target.p_acid);
    let mut warnings = fit_warnings(data, fit, &end, target_av)?;
    let last = data.samples.last().expect("samples are never empty");
    let last_progress = progress.last().expect("samples are never empty");
    let last_sample_gel_state = gel::gel_state(
        last_progress.p_minority(&ch),
        last.acid_value,
        &gel,
        guard.margin,
    );
    let mut gel_warnings = Vec::new();
    if let Some(w) = gel::gel_warning(
        &format!("the last sample ({}:{})", data.file, last.line),
        last_progress.p_minority(&ch),
        last_sample_gel_state,
        &gel,
        guard.margin,
    ) {
        gel_warnings.push(w);
    }
    if let Some(w) = gel::gel_warning(
        &format!("the target AV {target_av} mg KOH/g"),
        p_target,
        target_gel_state,
        &gel,
        guard.margin,
    ) {
        gel_warnings.push(w);
    }
    if target_gel_state == GelState::Beyond {
        gel_warnings.push(
            "--beyond-gel: the end point, Mn and Xn below are predicted for a target past the \
             statistical gel point; they assume soluble chains and are not meaningful for a gelled batch."
                .into(),
        );
    }
    let extrapolation_ratio = extrapolation_ratio(data, end.elapsed_min);
    if extrapolation_ratio > EXTRAPOLATION_LIMIT {
        warnings.push(Warning {
            place: data.file.clone(),
            message: format!(
                "the predicted end point ({:.0} min) lies {extrapolation_ratio:.1} sampled time spans from the first sample, beyond the limit of {EXTRAPOLATION_LIMIT}: it is an extrapolation of the rate law, and its prediction interval covers the fit's scatter only; take more samples before relying on it",
                end.elapsed_min
            ),
        });
    }
    let predicted_mn = stepgrowth::mn_recipe(&at_target);
    let f_avg = stepgrowth::average_functionality(&ch);
    let predicted_xn = stepgrowth::xn_carothers(at_target.p_minority(&ch), f_avg);
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
        excluded_detail: excluded_detail(data, &sel),
        outliers: flagged(data, fit),
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
        extrapolation_ratio,
        gel,
        gel_margin: guard.margin,
        target_gel_state,
        last_sample_gel_state,
        gel_warnings,
        viscosity: viscosity_report(data, &progress, predicted_mn),
        samples: sample_rows(data, &points, &sel, fit.order, groups),
        warnings,
        caution: crate::cook::correction::SAFETY_CAUTION.into(),
    })
}

/// The refusal of a target at or past the statistical gel point.
fn past_gel_refusal(target_av: f64, p_target: f64, gel: &GelPoints) -> String {
    let g = gel
        .statistical
        .expect("a state is past the gel point only when there is one");
    format!(
        "the target AV {target_av} mg KOH/g (p = {p_target:.5}) lies at or past the statistical gel point p_c = {:.5}{} (Carothers p_c = {}): the batch would gel before reaching it. Choose a target short of the gel point, or give --beyond-gel to see the prediction with a warning; the site's cook procedure decides",
        g.p_minority,
        gel.acid_value_at_gel
            .map_or(String::new(), |av| format!(", reached at AV {av:.2} mg KOH/g")),
        gel.carothers.map_or("none".into(), |c| format!("{c:.5}")),
    )
}

/// (t_end − t_first)/(t_last − t_first) over the samples: the predicted end point's distance
/// from the first sample in sampled time spans (1 = at the last sample). Infinite when the
/// samples span no time.
pub fn extrapolation_ratio(data: &Samples, end_min: f64) -> f64 {
    let times = data.samples.iter().map(|s| s.elapsed_min);
    let first = times.clone().fold(f64::INFINITY, f64::min);
    let last = times.fold(f64::NEG_INFINITY, f64::max);
    let span = last - first;
    if span > 0.0 {
        (end_min - first) / span
    } else {
        f64::INFINITY
    }
}

/// The samples file's warnings, then those of the fit: target already passed, no finite
/// prediction interval, outliers. Errors when the acid value does not fall over the kept samples.
fn fit_warnings(
    data: &Samples,
    fit: &ModelFit,
    end: &EndPoint,
    target_av: f64,
) -> Result<Vec<Warning>> {
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
    Ok(warnings)
}

/// The left-out samples with their file lines and reasons.
fn excluded_detail(data: &Samples, sel: &Selection) -> Vec<ExcludedSample> {
    sel.excluded
        .iter()
        .map(|Exclusion { index, reason }| ExcludedSample {
            index: *index,
            line: data.samples[*index].line,
            reason: reason.clone(),
        })
        .collect()
}

/// The outliers of the fit with their file lines.
fn flagged(data: &Samples, fit: &ModelFit) -> Vec<FlaggedSample> {
    fit.outliers
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
        .collect()
}

/// Every sample with its extent and linearised value under the chosen order.
fn sample_rows(
    data: &Samples,
    points: &[Point],
    sel: &Selection,
    order: f64,
    groups: Groups,
) -> Vec<SampleRow> {
    data.samples
        .iter()
        .zip(points)
        .enumerate()
        .map(|(i, (s, pt))| SampleRow {
            line: s.line,
            elapsed_min: s.elapsed_min,
            acid_value: s.acid_value,
            extent: pt.p,
            linearised: kinetics::linearised_with_excess(pt.p, order, groups),
            kept: sel.kept.contains(&i),
        })
        .collect()
}

/// Moves an error placed at "samples" by the kinetics to the samples file.
pub fn relocate(e: Error, file: &str) -> Error {
    e.at(|place| {
        if place == "samples" {
            file.to_string()
        } else {
            place.to_string()
        }
    })
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

impl CookReport {
    /// What the cook chart draws: every sample's linearised value (kept, left out or
    /// flagged), the fitted line, the linearised target and the predicted end point.
    pub fn chart_input(&self, title: String) -> ChartInput {
        let flagged: Vec<usize> = self.outliers.iter().map(|o| o.index).collect();
        ChartInput {
            title,
            order: self.order,
            excess: self.hydroxyl_excess_mol_per_kg,
            points: self
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
            intercept: self.intercept,
            slope: self.slope_per_min,
            target_y: kinetics::linearised_with_excess(
                self.target_extent,
                self.order,
                Groups {
                    c0: self.c0_mol_per_kg,
                    excess: self.hydroxyl_excess_mol_per_kg,
                },
            ),
            target_label: format!("target AV {} mg KOH/g", self.target_acid_value),
            predicted: Some((
                self.predicted_elapsed_min,
                self.predicted_elapsed_min_pi95.map(|[a, b]| (a, b)),
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cook::samples;
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

    /// The refusal of [`extents`] for the samples file `csv` (named s.csv) of the PD recipe.
    fn extents_error(csv: &str) -> String {
        let recipe = Recipe::parse("pd", PD).unwrap();
        let data = samples::parse("s.csv", csv).unwrap();
        extents(&data, &recipe.charge()).unwrap_err().to_string()
    }

    #[test]
    fn av_above_av0_names_the_line() {
        let err = extents_error("elapsed_min,acid_value\n0,900\n");
        assert!(err.starts_with("s.csv:2, field acid_value"), "{err}");
    }

    #[test]
    fn zero_acid_value_is_refused() {
        let err = extents_error("elapsed_min,acid_value\n0,20\n60,0\n");
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
