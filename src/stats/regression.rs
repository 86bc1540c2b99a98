//! Least-squares fit of log10(viscosity) against log10(Mn), with robust flagging of lots off the line.

use serde::Serialize;

use crate::error::{Error, Result};

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
}

/// Ordinary least squares of y = log10 η on x = log10 Mn, and robust outlier flags.
///
/// b = Sxy/Sxx, a = ȳ − b·x̄, SE(b) = √(SSE/(n − 2) / Sxx) (Draper & Smith, Applied Regression
/// Analysis, 3rd ed., §1.4). A point is flagged when |rᵢ − median(r)| > 3 · 1.4826 · MAD(r)
/// (robust scale, Rousseeuw & Croux 1993); when MAD is 0 (most points exactly on the line) a point
/// is flagged when it is off the line by more than 1e-9 in log10 units.
///
/// Errors when the slices differ in length, fewer than 3 pairs are given, a value is not a
/// positive finite number, or all Mn values are equal. O(n): two passes plus a linear-time
/// median selection; allocates the residuals and one scratch copy of them.
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
    let nf = n as f64;
    // One pass of Welford-type updates of the means and (co)moments (Welford, Technometrics
    // 4(3), 1962), numerically stable without a separate pass for the means.
    let (mut mx, mut my, mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (k, (&m, &v)) in mn.iter().zip(viscosity).enumerate() {
        let (x, y) = (m.log10(), v.log10());
        let w = 1.0 / (k + 1) as f64;
        let (dx, dy) = (x - mx, y - my);
        mx += dx * w;
        my += dy * w;
        sxx += dx * (x - mx);
        sxy += dx * (y - my);
        syy += dy * (y - my);
    }
    if sxx.is_nan() || sxx <= 0.0 {
        return Err(Error::invalid(
            "viscosity fit",
            "all lots have the same Mn, so no slope can be fitted",
            "Select lots that span a range of Mn.",
        ));
    }
    let exponent = sxy / sxx;
    let intercept = my - exponent * mx;
    let residuals: Vec<f64> = mn
        .iter()
        .zip(viscosity)
        .map(|(&m, &v)| v.log10() - (intercept + exponent * m.log10()))
        .collect();
    let sse: f64 = residuals.iter().map(|r| r * r).sum();
    let exponent_se = (sse / (nf - 2.0) / sxx).sqrt();
    let r_squared = if syy > 0.0 { 1.0 - sse / syy } else { 1.0 };
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
    use approx::assert_abs_diff_eq;

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
}
