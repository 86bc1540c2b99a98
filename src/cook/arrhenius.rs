//! Several cooks of one recipe at different temperatures: one common order, then ln k against 1/T.
//!
//! Builds on [`kinetics::fit_order`] and [`kinetics::arrhenius_fit`]; the command only formats
//! the [`ArrheniusReport`].

use std::path::PathBuf;

use serde::Serialize;

use crate::chem::recipe::{Charge, Recipe};
use crate::cook::fit::{extents, groups_of, orders_to_try, points_of, relocate};
use crate::cook::kinetics::{self, Arrhenius, Groups, Point, Selection};
use crate::cook::samples::{self, Samples, Warning};
use crate::error::{Error, Result};

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

/// One cook ready for the common-order fit: its mean temperature, points and selection.
#[derive(Debug, Clone)]
pub struct CookAtTemperature {
    /// Samples file.
    pub file: String,
    /// Mean of the temperature readings (°C).
    pub temperature_c: f64,
    /// Every sample as time and extent of reaction.
    pub points: Vec<Point>,
    /// Points kept and left out by the early-point rule.
    pub selection: Selection,
}

/// Prepares one cook: every sample must carry a temperature; their mean is the cook's
/// temperature (with a warning when the readings span more than 5 °C), the acid values become
/// extents of reaction and the early points are left out. Returns the cook and its warnings
/// (the spread first, then the samples file's own).
pub fn cook_at_temperature(
    data: &Samples,
    ch: &Charge,
    exclude_below: f64,
) -> Result<(CookAtTemperature, Vec<Warning>)> {
    let mut warnings = Vec::new();
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
    let points = points_of(data, &extents(data, ch)?);
    let selection = kinetics::select_points(&points, exclude_below);
    let cook = CookAtTemperature {
        file: data.file.clone(),
        temperature_c: mean,
        points,
        selection,
    };
    Ok((cook, warnings))
}

/// The common order: the forced one, or the candidate with the best R² summed over the cooks
/// (the first of equal sums).
pub fn common_order(
    cooks: &[CookAtTemperature],
    order: Option<f64>,
    groups: Groups,
) -> Result<f64> {
    let mut best: Option<(f64, f64)> = None;
    for n in orders_to_try(order) {
        let mut total = 0.0;
        for c in cooks {
            total += kinetics::fit_order(&c.points, &c.selection.kept, n, groups)
                .map_err(|e| relocate(e, &c.file))?
                .line
                .r_squared;
        }
        if best.is_none_or(|(_, r)| total > r) {
            best = Some((n, total));
        }
    }
    Ok(best.map_or(3.0, |b| b.0))
}

/// Fits every cook at order `n` and then ln k against 1/T ([`kinetics::arrhenius_fit`]).
pub fn fit_cooks(
    recipe: &Recipe,
    cooks: &[CookAtTemperature],
    n: f64,
    groups: Groups,
    warnings: Vec<Warning>,
) -> Result<ArrheniusReport> {
    let mut batches = Vec::new();
    let mut rates = Vec::new();
    for c in cooks {
        let fit = kinetics::fit_order(&c.points, &c.selection.kept, n, groups)?;
        rates.push(kinetics::RateAtTemperature {
            temperature_c: c.temperature_c,
            rate_constant: fit.rate_constant,
        });
        batches.push(ArrheniusBatch {
            file: c.file.clone(),
            temperature_c: c.temperature_c,
            rate_constant: fit.rate_constant,
            rate_constant_standard_error: fit.rate_constant_se,
            r_squared: fit.line.r_squared,
            excluded: c.selection.excluded.iter().map(|e| e.index).collect(),
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

/// Reads several cooks' samples files, fits them at one common order and then ln k against 1/T.
///
/// Each file is read and checked in turn ([`cook_at_temperature`]), so the first bad file is
/// the one named.
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
        let (cook, found) = cook_at_temperature(&data, &ch, exclude_below)?;
        warnings.extend(found);
        cooks.push(cook);
    }
    let n = common_order(&cooks, order, groups)?;
    fit_cooks(recipe, &cooks, n, groups, warnings)
}
