//! Step-growth kinetics of a cook: linearised rate laws, their weighted fit, end-point prediction, Arrhenius.
//!
//! Time in minutes, concentrations in mol/kg of charge, temperatures in °C at the edges and
//! kelvin inside the Arrhenius fit. Nothing here knows about files or the command line. The
//! straight-line fits and the Student t quantile are the shared ones of [`crate::stats`].

use serde::Serialize;

use crate::error::{Error, Result};
use crate::stats::dist::student_t_quantile;
use crate::stats::regression::{fit_line, fit_weighted, LineFit};

/// Molar gas constant R in J/(mol·K) (CODATA 2018, exact since the 2019 SI redefinition).
pub const GAS_CONSTANT: f64 = 8.314_462_618;

/// Kelvin offset of the Celsius scale (SI Brochure, 9th ed., §2.3.1).
pub const KELVIN_OFFSET: f64 = 273.15;

/// The orders tried when none is forced: external catalysis, the apparent 2.5, self-catalysis.
pub const CANDIDATE_ORDERS: [f64; 3] = [2.0, 2.5, 3.0];

/// Default conversion threshold below which early points are excluded from the fit.
///
/// Source: P. J. Flory, J. Am. Chem. Soc. 61, 3334 (1939): the self-catalysed third-order plot
/// of diethylene glycol + adipic acid is linear only beyond about 80 % conversion; the early
/// region is faster than the equal-reactivity law.
pub const DEFAULT_EXCLUDE_BELOW: f64 = 0.80;

/// Externally studentized residual above which a kept point is flagged as an outlier (never
/// dropped).
///
/// Common practice: |t_i| > 3 for the studentized deleted residual (D. A. Belsley, E. Kuh and
/// R. E. Welsch, Regression Diagnostics, Wiley 1980, §2.1). The internally studentized residual
/// cannot exceed √(n-2), so it could never reach 3 in a cook of ten samples.
pub const OUTLIER_LIMIT: f64 = 3.0;

/// Externally studentized (deleted) residual from the internally studentized one.
///
/// t_i = r_i·√((n-3)/(n-2-r_i²)) for a straight line (two parameters); infinite when the point
/// alone carries all the residual scatter. Source: Belsley, Kuh and Welsch (1980), eq. 2.26;
/// Cook and Weisberg, Residuals and Influence in Regression (1982), §2.2.
pub fn externally_studentized(r_internal: f64, n: usize) -> f64 {
    let n = n as f64;
    let d = n - 2.0 - r_internal * r_internal;
    if d <= 0.0 {
        return f64::INFINITY.copysign(r_internal);
    }
    r_internal * ((n - 3.0) / d).sqrt()
}

/// The linearised quantity of the order-n rate law: y = (1-p)^(1-n).
///
/// Integrating -d\[COOH\]/dt = k·\[COOH\]^n at equal group concentrations C0 gives
/// (1-p)^(1-n) = 1 + (n-1)·k·C0^(n-1)·t. For n = 2 this is 1/(1-p) = 1 + k·C0·t (external acid
/// catalysis) and for n = 3 it is 1/(1-p)² = 1 + 2·k·C0²·t (self-catalysis).
/// Source: Odian, Principles of Polymerization, 4th ed., §2-2a (eqs. 2-12, 2-18, 2-20);
/// Flory, J. Am. Chem. Soc. 61, 3334 (1939).
pub fn linearised(p: f64, order: f64) -> f64 {
    (1.0 - p).powf(1.0 - order)
}

/// Inverse of [`linearised`]: p = 1 - y^(1/(1-n)).
pub fn extent_from_linearised(y: f64, order: f64) -> f64 {
    1.0 - y.powf(1.0 / (1.0 - order))
}

/// Group concentrations of the charge, in mol per kg of charge.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Groups {
    /// Acid groups at the start, C0 (mol/kg).
    pub c0: f64,
    /// Hydroxyl minus acid groups, Δ (mol/kg): 0 for an equal charge, negative with acid in
    /// excess. \[OH\] = \[COOH\] + Δ throughout the cook.
    pub excess: f64,
}

impl Groups {
    /// Equal acid and hydroxyl groups.
    pub fn equal(c0: f64) -> Groups {
        Groups { c0, excess: 0.0 }
    }
}

/// ∫ from c to C0 of du / (u^(n-1)·(u + Δ)), by composite Simpson's rule in s = ln(C0/u).
///
/// The substitution u = C0·e^(-s) makes the integrand u^(2-n)/(u + Δ) smooth; 4000 panels give
/// a relative error far below 1e-9 for the orders used here (checked against the closed forms
/// in the tests). Returns infinity when u + Δ reaches zero (the minority hydroxyls run out).
pub fn rate_integral(c: f64, c0: f64, order: f64, excess: f64) -> f64 {
    if c >= c0 {
        return 0.0;
    }
    if c <= 0.0 || c + excess <= 0.0 {
        return f64::INFINITY;
    }
    const PANELS: usize = 4000;
    let s_max = (c0 / c).ln();
    let h = s_max / PANELS as f64;
    let f = |s: f64| {
        let u = c0 * (-s).exp();
        u.powf(2.0 - order) / (u + excess)
    };
    let mut sum = f(0.0) + f(s_max);
    for i in 1..PANELS {
        let weight = if i % 2 == 1 { 4.0 } else { 2.0 };
        sum += weight * f(h * i as f64);
    }
    sum * h / 3.0
}

/// The linearised quantity of the order-n law with unequal groups.
///
/// With -d\[COOH\]/dt = k·\[COOH\]^(n-1)·\[OH\], \[COOH\] = c = C0(1-p) and \[OH\] = c + Δ (one hydroxyl
/// and n-2 acid groups per elementary step as catalyst: n = 2 external catalysis, n = 3
/// self-catalysis), separating variables gives Y = 1 + (n-1)·C0^(n-1)·∫_c^C0 du/(u^(n-1)(u+Δ))
/// = 1 + (n-1)·k·C0^(n-1)·t, so the slope and k have the same meaning as in [`linearised`], to
/// which Y reduces exactly at Δ = 0. For n = 2 the integral is (1/Δ)·ln[(C0/(C0+Δ))·((c+Δ)/c)]
/// and for n = 3 it is [1/(Δu) + ln(u/(u+Δ))/Δ²] from C0 to c.
/// Source: first-principles integration by partial fractions of the rate law with
/// stoichiometric imbalance (Odian, Principles of Polymerization, 4th ed., §2-2a-3, from memory
/// for the section number; Flory, J. Am. Chem. Soc. 61, 3334 (1939) for the self-catalysed law).
pub fn linearised_with_excess(p: f64, order: f64, groups: Groups) -> f64 {
    if groups.excess == 0.0 {
        return linearised(p, order);
    }
    let c = groups.c0 * (1.0 - p);
    1.0 + (order - 1.0)
        * groups.c0.powf(order - 1.0)
        * rate_integral(c, groups.c0, order, groups.excess)
}

/// Rate constant from the fitted slope: k = slope / ((n-1)·C0^(n-1)).
///
/// Units: (kg/mol)^(n-1) per minute with C0 in mol/kg and the slope per minute.
/// Source: the slope of the integrated law in [`linearised`] (Odian §2-2a).
pub fn rate_constant(slope_per_min: f64, order: f64, c0_mol_per_kg: f64) -> f64 {
    slope_per_min / ((order - 1.0) * c0_mol_per_kg.powf(order - 1.0))
}

/// Unit text of the rate constant of a given order.
pub fn rate_constant_unit(order: f64) -> String {
    let e = order - 1.0;
    if (e - 1.0).abs() < 1e-12 {
        "kg/(mol·min)".into()
    } else {
        format!("(kg/mol)^{e}/min")
    }
}

/// One sample as the kinetics sees it: time and extent of reaction of the acid groups.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Point {
    /// Elapsed time (min).
    pub elapsed_min: f64,
    /// Extent of reaction of the acid groups (from the water mass balance).
    pub p: f64,
}

/// Why a point was left out of the fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Exclusion {
    /// Index of the point (0-based, in file order).
    pub index: usize,
    /// Plain-language reason.
    pub reason: String,
}

/// A kept point whose residual is unusually large: flagged, still in the fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Outlier {
    /// Index of the point (0-based, in file order).
    pub index: usize,
    /// Externally studentized residual t_i (see [`externally_studentized`]) from
    /// r_i = e_i / (s·√(1-h_i)).
    pub studentized_residual: f64,
}

/// The fit of one order on the kept points.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelFit {
    /// Reaction order n.
    pub order: f64,
    /// Group concentrations the linearisation used.
    pub groups: Groups,
    /// Weighted least-squares line of Y ([`linearised_with_excess`]) against minutes.
    pub line: LineFit,
    /// Signs of the residuals in time order ('+' above the line, '-' below).
    pub residual_signs: String,
    /// Number of runs of equal sign: few runs mean a curved, ill-fitting model.
    pub residual_runs: usize,
    /// Rate constant in (kg/mol)^(n-1)/min.
    pub rate_constant: f64,
    /// Standard error of the rate constant (from the slope's).
    pub rate_constant_se: f64,
    /// Kept points flagged as outliers.
    pub outliers: Vec<Outlier>,
}

/// Points kept and left out under the early-point rule.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Selection {
    /// Indices of the kept points.
    pub kept: Vec<usize>,
    /// Points left out, with reasons.
    pub excluded: Vec<Exclusion>,
}

/// Applies the early-point rule: points with p below `exclude_below` are left out of the fit.
///
/// Late points are never left out (see [`ModelFit::outliers`] for flagging instead).
/// Source of the default 0.80: Flory (1939), see [`DEFAULT_EXCLUDE_BELOW`].
pub fn select_points(points: &[Point], exclude_below: f64) -> Selection {
    let mut sel = Selection {
        kept: Vec::new(),
        excluded: Vec::new(),
    };
    for (i, pt) in points.iter().enumerate() {
        if pt.p < exclude_below {
            sel.excluded.push(Exclusion {
                index: i,
                reason: format!(
                    "early point: p = {:.4} is below the threshold {exclude_below}",
                    pt.p
                ),
            });
        } else {
            sel.kept.push(i);
        }
    }
    sel
}

/// Weight of a sample in the cook fits: w = 1/(c·dY/dc)², up to a constant factor.
///
/// A titration with a constant relative error σ_c/c = σ_AV/AV gives σ_Y = |dY/dc|·c·σ_AV/AV
/// (propagation of uncertainty, GUM, JCGM 100:2008 §5.1.2), and dY/dc ∝ 1/(c^(n-1)(c+Δ)), so
/// w ∝ [(1-p)^(n-2)·((1-p) + Δ/C0)]² (weights 1/σ², Draper and Smith §9.2). At Δ = 0 this is
/// 1/Y²: the scatter of Y grows in proportion to Y. Without weights the last samples would
/// dominate the fit and be flagged as outliers by their size alone.
pub fn cook_weight(p: f64, order: f64, groups: Groups) -> f64 {
    let q = 1.0 - p;
    (q.powf(order - 2.0) * (q + groups.excess / groups.c0)).powi(2)
}

/// Fits one order to the kept points by weighted least squares (weights [`cook_weight`]).
///
/// Errors when fewer than three points are kept or their times do not differ.
pub fn fit_order(points: &[Point], kept: &[usize], order: f64, groups: Groups) -> Result<ModelFit> {
    if kept.len() < 3 {
        return Err(Error::invalid(
            "samples",
            format!(
                "only {} point(s) are left after excluding the early ones; a straight-line fit with an uncertainty needs at least three",
                kept.len()
            ),
            "Add later samples, or lower the threshold with --exclude-below.",
        ));
    }
    let x: Vec<f64> = kept.iter().map(|&i| points[i].elapsed_min).collect();
    let y: Vec<f64> = kept
        .iter()
        .map(|&i| linearised_with_excess(points[i].p, order, groups))
        .collect();
    let w: Vec<f64> = kept
        .iter()
        .map(|&i| cook_weight(points[i].p, order, groups))
        .collect();
    let line = fit_weighted(&x, &y, &w).ok_or_else(|| {
        Error::invalid(
            "samples",
            "the kept points all have the same elapsed time",
            "Check the elapsed_min column.",
        )
    })?;
    let mut signs = String::new();
    let mut runs = 0;
    let mut last = ' ';
    let mut outliers = Vec::new();
    for (j, &i) in kept.iter().enumerate() {
        let e = y[j] - line.at(x[j]);
        let s = if e >= 0.0 { '+' } else { '-' };
        if s != last {
            runs += 1;
            last = s;
        }
        signs.push(s);
        // Internally studentized weighted residual r = e·√w / (s·√(1 - w·h)).
        let denom = line.residual_sd * (1.0 - w[j] * line.leverage(x[j])).max(1e-12).sqrt();
        if denom > 0.0 {
            let r = externally_studentized(e * w[j].sqrt() / denom, line.n);
            if r.abs() > OUTLIER_LIMIT {
                outliers.push(Outlier {
                    index: i,
                    studentized_residual: r,
                });
            }
        }
    }
    let k = rate_constant(line.slope, order, groups.c0);
    Ok(ModelFit {
        order,
        groups,
        rate_constant: k,
        rate_constant_se: k * line.slope_se / line.slope.abs(),
        line,
        residual_signs: signs,
        residual_runs: runs,
        outliers,
    })
}

/// Fits the given orders and returns them all with the index of the best (highest R²).
pub fn choose_model(
    points: &[Point],
    kept: &[usize],
    orders: &[f64],
    groups: Groups,
) -> Result<(Vec<ModelFit>, usize)> {
    let fits = orders
        .iter()
        .map(|&n| fit_order(points, kept, n, groups))
        .collect::<Result<Vec<_>>>()?;
    let best = fits
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.line.r_squared.total_cmp(&b.1.line.r_squared))
        .map_or(0, |(i, _)| i);
    Ok((fits, best))
}

/// When the fitted line reaches the linearised target, with its 95 % prediction interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct EndPoint {
    /// Predicted elapsed time (min).
    pub elapsed_min: f64,
    /// 95 % prediction interval (min), None when the slope is not significant.
    pub pi95: Option<(f64, f64)>,
}

/// Predicts when the extent of reaction reaches `p_target` under the fitted model.
///
/// t* = (Y(p*) - a)/b with the inverse-prediction interval of [`LineFit::inverse_predict`]
/// for a new titration of weight [`cook_weight`] at the target.
pub fn predict_end_point(fit: &ModelFit, p_target: f64) -> EndPoint {
    let y0 = linearised_with_excess(p_target, fit.order, fit.groups);
    let w0 = cook_weight(p_target, fit.order, fit.groups);
    let (t, pi) = fit.line.inverse_predict(y0, w0, 0.95);
    EndPoint {
        elapsed_min: t,
        pi95: pi,
    }
}

/// One batch's rate constant at its temperature, for the Arrhenius fit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RateAtTemperature {
    /// Temperature in °C.
    pub temperature_c: f64,
    /// Rate constant (same order and units for every batch).
    pub rate_constant: f64,
}

/// Arrhenius fit ln k = ln A - Ea/(R·T).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Arrhenius {
    /// Activation energy (kJ/mol).
    pub activation_energy_kj_per_mol: f64,
    /// Standard error of Ea (kJ/mol).
    pub activation_energy_se: f64,
    /// Half-width of the 95 % confidence interval of Ea (kJ/mol), t quantile with n-2 dof.
    pub activation_energy_ci95_half_width: f64,
    /// ln of the pre-exponential factor (k units).
    pub ln_pre_exponential: f64,
    /// R² of ln k against 1/T.
    pub r_squared: f64,
    /// Number of batches.
    pub n: usize,
}

/// Fits ln k against 1/T (kelvin): slope = -Ea/R, so Ea = -R·slope and SE(Ea) = R·SE(slope).
///
/// Needs at least three batches at no fewer than two temperatures.
/// Source: S. Arrhenius, Z. Phys. Chem. 4, 226 (1889); IUPAC Gold Book, "Arrhenius equation".
pub fn arrhenius_fit(rates: &[RateAtTemperature]) -> Result<Arrhenius> {
    if rates.len() < 3 {
        return Err(Error::invalid(
            "--arrhenius",
            format!(
                "{} batch(es) given; an activation energy with an uncertainty needs at least three",
                rates.len()
            ),
            "Give three or more samples files, from cooks at at least two temperatures.",
        ));
    }
    for r in rates {
        if r.rate_constant <= 0.0 || !r.rate_constant.is_finite() {
            return Err(Error::invalid(
                "--arrhenius",
                format!(
                    "a batch at {} °C has a non-positive rate constant",
                    r.temperature_c
                ),
                "Check that AV falls during that cook.",
            ));
        }
    }
    let x: Vec<f64> = rates
        .iter()
        .map(|r| 1.0 / (r.temperature_c + KELVIN_OFFSET))
        .collect();
    let y: Vec<f64> = rates.iter().map(|r| r.rate_constant.ln()).collect();
    let line = fit_line(&x, &y).ok_or_else(|| {
        Error::invalid(
            "--arrhenius",
            "all batches were cooked at the same temperature",
            "Add cooks at a second temperature (the temperature_c column).",
        )
    })?;
    let t = student_t_quantile(0.975, line.n as f64 - 2.0);
    let se = GAS_CONSTANT * line.slope_se / 1000.0;
    Ok(Arrhenius {
        activation_energy_kj_per_mol: -GAS_CONSTANT * line.slope / 1000.0,
        activation_energy_se: se,
        activation_energy_ci95_half_width: t * se,
        ln_pre_exponential: line.intercept,
        r_squared: line.r_squared,
        n: line.n,
    })
}

/// Power-law fit of viscosity against Mn: ln η = ln c + a·ln Mn.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ViscosityFit {
    /// Exponent a of η = c·Mn^a.
    pub exponent: f64,
    /// Standard error of the exponent.
    pub exponent_se: f64,
    /// ln c.
    pub ln_coefficient: f64,
    /// R² on the log-log scale.
    pub r_squared: f64,
    /// Points used.
    pub n: usize,
    /// Viscosity expected at the target Mn (same unit as the readings).
    pub viscosity_at_target: f64,
    /// 95 % prediction interval of that viscosity.
    pub viscosity_at_target_pi95: (f64, f64),
}

/// Fits log η against log Mn and predicts the viscosity at `mn_target`, the second end-point
/// signal: the batch is near its end when the viscometer reads this value.
///
/// Melt viscosity of unentangled polyesters follows η ∝ Mn^a with a near 1 (and rises faster
/// with the end-group contribution at low Mn); the power law is fitted, not assumed.
/// Source: T. G. Fox and P. J. Flory, J. Appl. Phys. 21, 581 (1950); Flory, J. Am. Chem. Soc.
/// 62, 1057 (1940) (melt viscosity of linear polyesters against chain length). The prediction
/// interval is ŷ ± t·s·√(1 + h), NIST/SEMATECH e-Handbook §4.1.4.1 (prediction intervals).
pub fn viscosity_fit(mn: &[f64], viscosity: &[f64], mn_target: f64) -> Option<ViscosityFit> {
    // The one log-log fit of the crate (stats::log_log_fit, in log10); ln K = ln 10 · log10 K.
    let fit = crate::stats::log_log_fit(mn, viscosity).ok()?;
    let line = fit.line;
    let x0 = mn_target.log10();
    let t = student_t_quantile(0.975, line.n as f64 - 2.0);
    let half = t * line.residual_sd * (1.0 + line.leverage(x0)).sqrt();
    let y0 = line.at(x0);
    let pow10 = |y: f64| 10f64.powf(y);
    Some(ViscosityFit {
        exponent: fit.exponent,
        exponent_se: fit.exponent_se,
        ln_coefficient: fit.intercept * std::f64::consts::LN_10,
        r_squared: fit.r_squared,
        n: fit.n,
        viscosity_at_target: pow10(y0),
        viscosity_at_target_pi95: (pow10(y0 - half), pow10(y0 + half)),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn general_order_reduces_to_second_and_third() {
        // Odian §2-2a: n = 2 gives 1/(1-p) with slope k·C0; n = 3 gives 1/(1-p)² with
        // slope 2·k·C0².
        for p in [0.5, 0.8, 0.95, 0.999] {
            assert_relative_eq!(linearised(p, 2.0), 1.0 / (1.0 - p), max_relative = 1e-12);
            assert_relative_eq!(
                linearised(p, 3.0),
                1.0 / (1.0 - p).powi(2),
                max_relative = 1e-12
            );
            assert_relative_eq!(
                extent_from_linearised(linearised(p, 2.5), 2.5),
                p,
                max_relative = 1e-12
            );
        }
        let (k, c0) = (0.0123, 7.5);
        assert_relative_eq!(rate_constant(k * c0, 2.0, c0), k, max_relative = 1e-12);
        assert_relative_eq!(
            rate_constant(2.0 * k * c0 * c0, 3.0, c0),
            k,
            max_relative = 1e-12
        );
    }

    #[test]
    fn unequal_groups_match_the_closed_forms() {
        // First principles, partial fractions of 1/(u(u+Δ)) and 1/(u²(u+Δ)); C0 = 7.54 and
        // Δ = 0.888 mol/kg are the demo PD-2000 charge's (an invented test fixture).
        let (c0, d) = (7.54, 0.888);
        let g = Groups { c0, excess: d };
        for p in [0.5, 0.8, 0.95, 0.99, 0.998] {
            let c = c0 * (1.0 - p);
            let i2 = ((c0 / (c0 + d)) * ((c + d) / c)).ln() / d;
            let f3 = |u: f64| -1.0 / (d * u) - (u / (u + d)).ln() / (d * d);
            let i3 = f3(c0) - f3(c);
            assert_relative_eq!(rate_integral(c, c0, 2.0, d), i2, max_relative = 1e-9);
            assert_relative_eq!(rate_integral(c, c0, 3.0, d), i3, max_relative = 1e-9);
            assert_relative_eq!(
                linearised_with_excess(p, 3.0, g),
                1.0 + 2.0 * c0 * c0 * i3,
                max_relative = 1e-9
            );
            // Δ → 0: the general form reduces to (1-p)^(1-n) (Odian §2-2a).
            for n in [2.0, 2.5, 3.0] {
                let tiny = Groups { c0, excess: 1e-9 };
                assert_relative_eq!(
                    linearised_with_excess(p, n, tiny),
                    linearised(p, n),
                    max_relative = 1e-6
                );
            }
        }
        // The weight reduces to 1/Y² at Δ = 0.
        let y = linearised(0.97, 3.0);
        assert_relative_eq!(
            cook_weight(0.97, 3.0, Groups::equal(c0)),
            1.0 / (y * y),
            max_relative = 1e-12
        );
    }

    #[test]
    fn round_trip_with_hydroxyl_excess() {
        // Synthetic cook (test fixture) from the unequal-groups law of each order: times from
        // t = (Y(p) - 1)/b on a grid of p; the fit must recover order and slope.
        let g = Groups {
            c0: 7.54,
            excess: 0.888,
        };
        for (order, slope) in [(2.0, 0.05), (2.5, 0.8), (3.0, 60.0)] {
            let pts: Vec<Point> = (0..15)
                .map(|i| {
                    let p = 0.85 + 0.0099 * f64::from(i);
                    let wobble = 1.0 + 0.002 * (f64::from(i % 3) - 1.0);
                    Point {
                        elapsed_min: (linearised_with_excess(p, order, g) - 1.0) / slope * wobble,
                        p,
                    }
                })
                .collect();
            let sel = select_points(&pts, DEFAULT_EXCLUDE_BELOW);
            let (fits, best) = choose_model(&pts, &sel.kept, &CANDIDATE_ORDERS, g).unwrap();
            assert_eq!(fits[best].order, order, "{fits:?}");
            assert_relative_eq!(fits[best].line.slope, slope, max_relative = 0.02);
        }
    }

    /// Synthetic cook: y = 1 + b·t for the law of `order`, plus a faster early region (three
    /// points at p = 0.5 to 0.75 in the first 10 min and an extra E·(1 - e^(-t/τ)), τ = 8 min,
    /// that has died out by the later samples), plus small multiplicative noise on (1-p).
    /// Invented numbers, a test fixture.
    fn synthetic(order: f64, slope: f64, early: f64, noise: f64) -> Vec<Point> {
        let mut seed: u64 = 0x2545_f491_4f6c_dd1d;
        let mut uniform = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        let first = [0.5, 0.65, 0.75].map(|p| Point {
            elapsed_min: 0.0,
            p,
        });
        let late = (1..30).map(|i| {
            let t = 20.0 * f64::from(i);
            let y = 1.0 + slope * t + early * (1.0 - (-t / 8.0).exp());
            let one_minus_p = (1.0 - extent_from_linearised(y, order)) * (1.0 + noise * uniform());
            Point {
                elapsed_min: t,
                p: 1.0 - one_minus_p,
            }
        });
        // Early points at 0, 5 and 10 min, above the backward extrapolation of the line.
        first
            .into_iter()
            .enumerate()
            .map(|(i, pt)| Point {
                elapsed_min: 5.0 * i as f64,
                ..pt
            })
            .chain(late)
            .collect()
    }

    #[test]
    fn round_trip_recovers_order_slope_and_time() {
        // Synthetic cooks from each law (Odian §2-2a forms); the fit must recover the order,
        // the slope within 2 % and the time to reach p = 0.99 within 3 %.
        let c0 = 7.5;
        for (order, slope) in [(2.0, 0.15), (2.5, 0.9), (3.0, 12.0)] {
            let pts = synthetic(order, slope, 3.0, 0.004);
            let sel = select_points(&pts, DEFAULT_EXCLUDE_BELOW);
            assert_eq!(sel.excluded.len(), 3, "order {order}: {:?}", sel.excluded);
            let (fits, best) =
                choose_model(&pts, &sel.kept, &CANDIDATE_ORDERS, Groups::equal(c0)).unwrap();
            let fit = &fits[best];
            assert_eq!(fit.order, order, "candidates {fits:?}");
            assert_relative_eq!(fit.line.slope, slope, max_relative = 0.02);
            let p_target = 0.99;
            let truth = (linearised(p_target, order) - 1.0 - 3.0) / slope; // early term has decayed
            let end = predict_end_point(fit, p_target);
            assert_relative_eq!(end.elapsed_min, truth, max_relative = 0.03);
            let (lo, hi) = end.pi95.unwrap();
            assert!(lo < end.elapsed_min && end.elapsed_min < hi);
            let k = rate_constant(slope, order, c0);
            assert_relative_eq!(fit.rate_constant, k, max_relative = 0.02);
        }
    }

    #[test]
    fn deleted_residual_matches_its_definition() {
        // Brute force (definition, Belsley, Kuh and Welsch 1980 §2.1): refit without point j and
        // divide its prediction error by its standard error; compare with the closed form.
        let x = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
        let y = [2.0, 4.1, 5.9, 8.2, 13.0, 12.1];
        let fit = fit_line(&x, &y).unwrap();
        let j = 4;
        let r = (y[j] - fit.at(x[j])) / (fit.residual_sd * (1.0 - fit.leverage(x[j])).sqrt());
        let xs: Vec<f64> = (0..6).filter(|&i| i != j).map(|i| x[i]).collect();
        let ys: Vec<f64> = (0..6).filter(|&i| i != j).map(|i| y[i]).collect();
        let f = fit_line(&xs, &ys).unwrap();
        let brute = (y[j] - f.at(x[j])) / (f.residual_sd * (1.0 + f.leverage(x[j])).sqrt());
        assert_relative_eq!(externally_studentized(r, 6), brute, max_relative = 1e-9);
    }

    #[test]
    fn late_outlier_is_flagged_not_dropped() {
        let mut pts = synthetic(3.0, 12.0, 3.0, 0.0005);
        let last = pts.len() - 5;
        pts[last].p = 1.0 - (1.0 - pts[last].p) * 1.3;
        let sel = select_points(&pts, DEFAULT_EXCLUDE_BELOW);
        assert!(sel.kept.contains(&last));
        let fit = fit_order(&pts, &sel.kept, 3.0, Groups::equal(7.5)).unwrap();
        assert!(fit.outliers.iter().any(|o| o.index == last), "{fit:?}");
    }

    #[test]
    fn fewer_than_three_kept_points_is_an_error() {
        let pts = synthetic(3.0, 12.0, 3.0, 0.0);
        let err = fit_order(&pts, &[5, 6], 3.0, Groups::equal(7.5))
            .unwrap_err()
            .to_string();
        assert!(err.contains("at least three"), "{err}");
    }

    #[test]
    fn arrhenius_recovers_a_known_activation_energy() {
        // Synthetic k(T) = A·exp(-Ea/RT) with Ea = 65 kJ/mol (test fixture); Arrhenius (1889).
        let ea = 65_000.0;
        let rates: Vec<RateAtTemperature> = [190.0, 200.0, 210.0, 220.0]
            .iter()
            .map(|&t| RateAtTemperature {
                temperature_c: t,
                rate_constant: 3.0e4 * (-ea / (GAS_CONSTANT * (t + KELVIN_OFFSET))).exp(),
            })
            .collect();
        let fit = arrhenius_fit(&rates).unwrap();
        assert_relative_eq!(fit.activation_energy_kj_per_mol, 65.0, max_relative = 1e-9);
        assert!(fit.activation_energy_se < 1e-6);
        assert_relative_eq!(fit.ln_pre_exponential, 3.0e4f64.ln(), max_relative = 1e-9);
        let one_temp: Vec<_> = rates
            .iter()
            .map(|r| RateAtTemperature {
                temperature_c: 200.0,
                ..*r
            })
            .collect();
        assert!(arrhenius_fit(&one_temp).is_err());
        assert!(arrhenius_fit(&rates[..2]).is_err());
    }

    #[test]
    fn viscosity_power_law_is_recovered() {
        // Synthetic η = 2e-4·Mn^1.8 (test fixture): exponent and prediction recovered exactly.
        let mn = [900.0, 1100.0, 1400.0, 1700.0];
        let eta: Vec<f64> = mn.iter().map(|m: &f64| 2e-4 * m.powf(1.8)).collect();
        let v = viscosity_fit(&mn, &eta, 2000.0).unwrap();
        assert_relative_eq!(v.exponent, 1.8, max_relative = 1e-9);
        assert_relative_eq!(
            v.viscosity_at_target,
            2e-4 * 2000f64.powf(1.8),
            max_relative = 1e-9
        );
    }
}
