//! Least-squares straight lines: ordinary and weighted fits with inverse prediction, and the fit of
//! log10(viscosity) against log10(Mn) with robust flagging of lots off the line.

use serde::Serialize;

use crate::error::{Error, Result};
use crate::stats::dist::student_t_quantile;

/// Least-squares straight line y = intercept + slope·x (ordinary or weighted).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LineFit {
    /// Slope.
    pub slope: f64,
    /// Intercept.
    pub intercept: f64,
    /// Standard error of the slope.
    pub slope_se: f64,
    /// Standard error of the intercept.
    pub intercept_se: f64,
    /// Coefficient of determination (weighted when the fit is weighted).
    pub r_squared: f64,
    /// Residual standard deviation of unit weight, s = sqrt(Σw·e²/(n-2)).
    pub residual_sd: f64,
    /// Number of points.
    pub n: usize,
    /// Sum of the weights, W (= n for an ordinary fit).
    pub weight_sum: f64,
    /// Weighted mean of x.
    pub x_mean: f64,
    /// Weighted sum of squared deviations of x, Sxx = Σw(x - x̄)².
    pub sxx: f64,
}

/// Fits y = a + b·x by ordinary least squares; needs at least three points with distinct x.
///
/// b = Sxy/Sxx, a = ȳ - b·x̄, s² = SSE/(n-2), SE(b) = s/√Sxx, SE(a) = s·√(1/n + x̄²/Sxx),
/// R² = 1 - SSE/Syy. Source: NIST/SEMATECH e-Handbook §4.1.4.1 and §4.4.
pub fn fit_line(x: &[f64], y: &[f64]) -> Option<LineFit> {
    fit_weighted(x, y, &vec![1.0; x.len()])
}

/// Weighted least squares: as [`fit_line`] with every sum weighted by w_i (x̄ = Σwx/W,
/// Sxx = Σw(x-x̄)², s² = Σw·e²/(n-2), SE(a) = s·√(1/W + x̄²/Sxx)); w_i = 1 gives the ordinary fit.
/// Source: N. R. Draper and H. Smith, Applied Regression Analysis, 3rd ed., §9.2; NIST/SEMATECH
/// e-Handbook §4.4.5.2 (weighted least squares).
pub fn fit_weighted(x: &[f64], y: &[f64], w: &[f64]) -> Option<LineFit> {
    let n = x.len();
    if n < 3 || y.len() != n || w.len() != n || w.iter().any(|v| !v.is_finite() || *v <= 0.0) {
        return None;
    }
    let nf = n as f64;
    let ws: f64 = w.iter().sum();
    let xm = x.iter().zip(w).map(|(a, c)| a * c).sum::<f64>() / ws;
    let ym = y.iter().zip(w).map(|(a, c)| a * c).sum::<f64>() / ws;
    let mut sxx = 0.0;
    let mut syy = 0.0;
    let mut sxy = 0.0;
    for ((a, b), c) in x.iter().zip(y).zip(w) {
        sxx += c * (a - xm).powi(2);
        syy += c * (b - ym).powi(2);
        sxy += c * (a - xm) * (b - ym);
    }
    if sxx <= 0.0 || !sxx.is_finite() {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = ym - slope * xm;
    let sse: f64 = x
        .iter()
        .zip(y)
        .zip(w)
        .map(|((a, b), c)| c * (b - intercept - slope * a).powi(2))
        .sum();
    let s = (sse / (nf - 2.0)).sqrt();
    Some(LineFit {
        slope,
        intercept,
        slope_se: s / sxx.sqrt(),
        intercept_se: s * (1.0 / ws + xm * xm / sxx).sqrt(),
        r_squared: if syy > 0.0 { 1.0 - sse / syy } else { 1.0 },
        residual_sd: s,
        n,
        weight_sum: ws,
        x_mean: xm,
        sxx,
    })
}

impl LineFit {
    /// Fitted value at x.
    pub fn at(&self, x: f64) -> f64 {
        self.intercept + self.slope * x
    }

    /// Leverage per unit weight, 1/W + (x - x̄)²/Sxx, at x (the leverage of a point of
    /// weight w is w times this; for an ordinary fit it is 1/n + (x - x̄)²/Sxx).
    pub fn leverage(&self, x: f64) -> f64 {
        1.0 / self.weight_sum + (x - self.x_mean).powi(2) / self.sxx
    }

    /// Inverse prediction: the x at which a new observation of weight `w0` (1 for an ordinary
    /// fit) is expected to equal `y0`, with its two-sided prediction interval at `level`.
    ///
    /// The limits are the x where the prediction band ŷ(x) ± t·s·√(1/w0 + 1/W + (x-x̄)²/Sxx)
    /// meets y0 (Fieller's construction). With u = x - x̄, d = y0 - ȳ, q = t²s²:
    /// (b² - q/Sxx)·u² - 2bd·u + d² - q(1/w0 + 1/W) = 0.
    /// Returns None for the interval when the slope is not significant at that level (the band
    /// never closes). Source: N. R. Draper and H. Smith, Applied Regression Analysis, 3rd ed.,
    /// §3.2 (inverse regression); E. C. Fieller, J. R. Stat. Soc. Suppl. 7, 1 (1940).
    pub fn inverse_predict(&self, y0: f64, w0: f64, level: f64) -> (f64, Option<(f64, f64)>) {
        let x0 = (y0 - self.intercept) / self.slope;
        let dof = self.n as f64 - 2.0;
        let t = student_t_quantile(0.5 + level / 2.0, dof);
        let q = t * t * self.residual_sd * self.residual_sd;
        let b = self.slope;
        let d = y0 - (self.intercept + b * self.x_mean);
        let a2 = b * b - q / self.sxx;
        if a2 <= 0.0 {
            return (x0, None);
        }
        let c = d * d - q * (1.0 / w0 + 1.0 / self.weight_sum);
        let disc = b * b * d * d - a2 * c;
        if disc < 0.0 {
            return (x0, None);
        }
        let r = disc.sqrt();
        let u1 = (b * d - r) / a2;
        let u2 = (b * d + r) / a2;
        let (lo, hi) = (u1.min(u2) + self.x_mean, u1.max(u2) + self.x_mean);
        (x0, Some((lo, hi)))
    }
}

/// Residuals beyond this many robust standard deviations are flagged.
pub const FLAG_SIGMAS: f64 = 3.0;

/// Scale factor turning a median absolute deviation into a normal-consistent σ
/// (1/Φ⁻¹(0.75) = 1.4826; Rousseeuw & Croux, JASA 88(424), 1993).
pub const MAD_SCALE: f64 = 1.4826;

/// Result of the log–log fit log10 η = intercept + exponent · log10 Mn.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LogLogFit {
    /// Number of (Mn, viscosity) pairs.
    pub n: usize,
    /// Fitted exponent (slope of log10 η against log10 Mn).
    pub exponent: f64,
    /// Standard error of the exponent.
    pub exponent_se: f64,
    /// Fitted intercept log10 K (η in the caller's unit, Mn in g/mol).
    pub intercept: f64,
    /// Coefficient of determination R².
    pub r_squared: f64,
    /// Residuals log10 η − fitted, in input order.
    pub residuals: Vec<f64>,
    /// Median of the residuals.
    pub residual_median: f64,
    /// Robust standard deviation of the residuals, 1.4826 · MAD.
    pub robust_sd: f64,
    /// Indices (from 0) of the points whose |residual − median| exceeds 3 robust SDs.
    pub flagged: Vec<usize>,
    /// The fitted line itself (log10 units), for predictions and their intervals.
    #[serde(skip)]
    pub line: LineFit,
}

/// Ordinary least squares of y = log10 η on x = log10 Mn, and robust outlier flags.
///
/// b = Sxy/Sxx, a = ȳ − b·x̄, SE(b) = √(SSE/(n − 2) / Sxx) (Draper & Smith, Applied Regression
/// Analysis, 3rd ed., §1.4). A point is flagged when |rᵢ − median(r)| > 3 · 1.4826 · MAD(r)
/// (robust scale, Rousseeuw & Croux 1993); when MAD is 0 (most points exactly on the line) a point
/// is flagged when it is off the line by more than 1e-9 in log10 units.
///
/// Errors when the slices differ in length, fewer than 3 pairs are given, a value is not a
/// positive finite number, or all Mn values are equal. The line is [`fit_line`] on the logs,
/// the one straight-line fit of the crate (the cook's viscosity predictor uses it too). O(n):
/// a few passes plus a linear-time median selection; allocates the logs, the residuals and
/// one scratch copy of them.
pub fn log_log_fit(mn: &[f64], viscosity: &[f64]) -> Result<LogLogFit> {
    if mn.len() != viscosity.len() {
        return Err(Error::invalid(
            "viscosity fit",
            format!("{} Mn values but {} viscosities", mn.len(), viscosity.len()),
            "Pass one viscosity per Mn value.",
        ));
    }
    let n = mn.len();
    if n < 3 {
        return Err(Error::invalid(
            "viscosity fit",
            format!("{n} lot(s) with both Mn and viscosity, at least 3 are needed"),
            "Select more lots that have both results.",
        ));
    }
    for (i, (&m, &v)) in mn.iter().zip(viscosity).enumerate() {
        if !(m.is_finite() && m > 0.0 && v.is_finite() && v > 0.0) {
            return Err(Error::invalid(
                format!("viscosity fit, lot {}", i + 1),
                format!("Mn {m} and viscosity {v} must both be positive numbers"),
                "Correct or leave out that lot's result.",
            ));
        }
    }
    // The one straight-line fit of the crate ([`fit_line`]), on log10 of both.
    let x: Vec<f64> = mn.iter().map(|m| m.log10()).collect();
    let y: Vec<f64> = viscosity.iter().map(|v| v.log10()).collect();
    let line = fit_line(&x, &y).ok_or_else(|| {
        Error::invalid(
            "viscosity fit",
            "all lots have the same Mn, so no slope can be fitted",
            "Select lots that span a range of Mn.",
        )
    })?;
    let (exponent, intercept) = (line.slope, line.intercept);
    let residuals: Vec<f64> = x.iter().zip(&y).map(|(&x, &y)| y - line.at(x)).collect();
    let (exponent_se, r_squared) = (line.slope_se, line.r_squared);
    let mut scratch = residuals.clone();
    let residual_median = median_in_place(&mut scratch);
    for d in scratch.iter_mut() {
        *d = (*d - residual_median).abs();
    }
    let robust_sd = MAD_SCALE * median_in_place(&mut scratch);
    let threshold = if robust_sd > 0.0 {
        FLAG_SIGMAS * robust_sd
    } else {
        1e-9
    };
    let flagged = residuals
        .iter()
        .enumerate()
        .filter(|(_, r)| (**r - residual_median).abs() > threshold)
        .map(|(i, _)| i)
        .collect();
    Ok(LogLogFit {
        n,
        exponent,
        exponent_se,
        intercept,
        r_squared,
        residuals,
        residual_median,
        robust_sd,
        flagged,
        line,
    })
}

/// Median by linear-time selection (reorders `v`); the mean of the two middle values for even n.
pub fn median_in_place(v: &mut [f64]) -> f64 {
    let n = v.len();
    if n == 0 {
        return f64::NAN;
    }
    let k = n / 2;
    let (lower, mid, _) = v.select_nth_unstable_by(k, f64::total_cmp);
    let upper = *mid;
    if n % 2 == 1 {
        upper
    } else {
        let below = lower.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (below + upper)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::dist::student_t_quantile;
    use approx::{assert_abs_diff_eq, assert_relative_eq};

    #[test]
    fn exact_power_law_is_recovered() {
        // First principles: η = 2e-9 · Mn^3.4 exactly gives exponent 3.4, SE 0, no flags.
        let mn = [1000.0, 2000.0, 3000.0, 5000.0, 8000.0];
        let eta: Vec<f64> = mn.iter().map(|m: &f64| 2e-9 * m.powf(3.4)).collect();
        let f = log_log_fit(&mn, &eta).unwrap();
        assert_abs_diff_eq!(f.exponent, 3.4, epsilon = 1e-12);
        assert_abs_diff_eq!(f.intercept, 2e-9f64.log10(), epsilon = 1e-10);
        assert!(f.exponent_se < 1e-10);
        assert!(f.flagged.is_empty());
    }

    const SLOPE: f64 = 2.613_225_710_115_205_7;
    const INTERCEPT: f64 = -8.187_214_655_328_336;
    const STDERR: f64 = 0.354_358_002_189_113_06;
    const RVALUE: f64 = 0.933_681_706_501_486_9;

    #[test]
    fn matches_reference_library_and_flags_the_outlier() {
        // Invented test fixture (not plant data). Reference: scipy.stats.linregress on
        // log10 values (scipy 1.17.1) gives slope, intercept and stderr below; the MAD-based
        // flag picks lot index 5, whose viscosity is about twice the line.
        let mn = [
            1800.0, 2000.0, 2100.0, 2300.0, 2500.0, 2600.0, 2800.0, 3000.0, 3300.0, 3500.0,
        ];
        let eta = [2.1, 2.6, 2.9, 3.6, 4.4, 10.1, 6.0, 7.2, 9.6, 11.5];
        let f = log_log_fit(&mn, &eta).unwrap();
        assert_abs_diff_eq!(f.exponent, SLOPE, epsilon = 1e-10);
        assert_abs_diff_eq!(f.intercept, INTERCEPT, epsilon = 1e-9);
        assert_abs_diff_eq!(f.exponent_se, STDERR, epsilon = 1e-10);
        assert_abs_diff_eq!(f.r_squared, RVALUE * RVALUE, epsilon = 1e-10);
        assert_eq!(f.flagged, vec![5]);
    }

    #[test]
    fn bad_input_is_refused() {
        assert!(log_log_fit(&[1.0, 2.0], &[1.0, 2.0]).is_err());
        assert!(log_log_fit(&[1.0, 2.0, 3.0], &[1.0, 2.0]).is_err());
        let e = log_log_fit(&[1.0, 2.0, 3.0], &[1.0, -2.0, 3.0])
            .unwrap_err()
            .to_string();
        assert!(e.contains("lot 2"), "{e}");
        assert!(log_log_fit(&[2.0, 2.0, 2.0], &[1.0, 2.0, 3.0]).is_err());
    }

    #[test]
    fn median_even_and_odd() {
        assert_eq!(median_in_place(&mut [3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median_in_place(&mut [4.0, 1.0, 3.0, 2.0]), 2.5);
    }

    #[test]
    fn line_fit_matches_hand_computation() {
        // First principles: x = 1..5, y = 2.1, 3.9, 6.2, 7.8, 10.1. Sxx = 10, Sxy = 19.9,
        // b = 1.99, a = 6.02 - 5.97 = 0.05; residuals 0.06,-0.13,0.18,-0.21,0.10; SSE = 0.107,
        // s² = 0.035667, SE(b) = √(0.0035667) = 0.059722.
        let fit = fit_line(&[1.0, 2.0, 3.0, 4.0, 5.0], &[2.1, 3.9, 6.2, 7.8, 10.1]).unwrap();
        assert_relative_eq!(fit.slope, 1.99, max_relative = 1e-12);
        assert_relative_eq!(fit.intercept, 0.05, epsilon = 1e-12);
        assert_relative_eq!(fit.slope_se, 0.059722, epsilon = 1e-6);
        assert_relative_eq!(fit.r_squared, 1.0 - 0.107 / 39.708, max_relative = 1e-9);
        assert!(fit_line(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]).is_none());
    }

    #[test]
    fn integer_weights_equal_repeated_points() {
        // First principles: a point of weight 2 is the same, for the estimates, as the point
        // entered twice (the weighted normal equations are the same sums).
        let x = [1.0, 2.0, 3.0, 4.0, 5.0];
        let y = [2.1, 3.9, 6.2, 7.8, 10.1];
        let w = fit_weighted(&x, &y, &[1.0, 2.0, 1.0, 1.0, 3.0]).unwrap();
        let xr = [1.0, 2.0, 2.0, 3.0, 4.0, 5.0, 5.0, 5.0];
        let yr = [2.1, 3.9, 3.9, 6.2, 7.8, 10.1, 10.1, 10.1];
        let r = fit_line(&xr, &yr).unwrap();
        assert_relative_eq!(w.slope, r.slope, max_relative = 1e-12);
        assert_relative_eq!(w.intercept, r.intercept, max_relative = 1e-12);
        assert_relative_eq!(w.r_squared, r.r_squared, max_relative = 1e-12);
        assert_relative_eq!(w.sxx, r.sxx, max_relative = 1e-12);
        // Equal weights give the ordinary fit whatever their size.
        let e = fit_weighted(&x, &y, &[4.0; 5]).unwrap();
        let o = fit_line(&x, &y).unwrap();
        assert_relative_eq!(e.slope_se, o.slope_se, max_relative = 1e-12);
        assert_relative_eq!(e.slope, o.slope, max_relative = 1e-12);
        assert!(fit_weighted(&x, &y, &[1.0, 0.0, 1.0, 1.0, 1.0]).is_none());
    }

    #[test]
    fn prediction_interval_brackets_the_point_estimate() {
        // Definition of the inverse-prediction limits (Draper and Smith §3.2): at each limit the
        // prediction band for a new observation of weight w0 passes through the target.
        let x = [1.0, 2.0, 3.0, 4.0, 5.0];
        let y = [2.1, 3.9, 6.2, 7.8, 10.1];
        for (w, w0) in [([1.0; 5], 1.0), ([2.0, 1.5, 1.0, 0.7, 0.4], 0.25)] {
            let fit = fit_weighted(&x, &y, &w).unwrap();
            let (x0, pi) = fit.inverse_predict(12.0, w0, 0.95);
            let (lo, hi) = pi.unwrap();
            assert!(lo < x0 && x0 < hi);
            let t = student_t_quantile(0.975, 3.0);
            for xl in [lo, hi] {
                let half = t * fit.residual_sd * (1.0 / w0 + fit.leverage(xl)).sqrt();
                let edge = if xl < x0 {
                    fit.at(xl) + half
                } else {
                    fit.at(xl) - half
                };
                assert_relative_eq!(edge, 12.0, max_relative = 1e-9);
            }
        }
    }
}
