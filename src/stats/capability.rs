//! Process capability and performance indices (Cp, Cpk, Pp, Ppk) with 95 % confidence intervals.

use serde::Serialize;

use crate::error::{Error, Result};
use crate::stats::dist::{chi_square_quantile, normal_quantile};
use crate::stats::imr::{mean_and_sd, D2};

/// Below this many values the indices are flagged as uncertain (NIST/SEMATECH e-Handbook
/// §6.1.6 advises at least about 50 observations for capability estimates).
pub const SMALL_SAMPLE: usize = 50;

/// Confidence level of the reported intervals.
pub const CONFIDENCE: f64 = 0.95;

/// The specification window in effect; either side may be absent.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SpecWindow {
    /// Lower specification limit (LSL), if any.
    pub min: Option<f64>,
    /// Upper specification limit (USL), if any.
    pub max: Option<f64>,
}

/// The side of a one-sided index: Cpu (upper limit only) or Cpl (lower limit only).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Side {
    /// Only an upper limit: the index is Cpu = (USL − μ)/3σ.
    Upper,
    /// Only a lower limit: the index is Cpl = (μ − LSL)/3σ.
    Lower,
}

/// Capability (σ_within) and performance (overall s) indices of one property.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Capability {
    /// Number of values used.
    pub n: usize,
    /// Sample mean μ̂.
    pub mean: f64,
    /// Within-process σ (MR̄/d2) used by Cp and Cpk.
    pub sigma_within: f64,
    /// Overall sample standard deviation s used by Pp and Ppk.
    pub sigma_overall: f64,
    /// Cp = (USL − LSL)/6σ_within; None for a one-sided window.
    pub cp: Option<f64>,
    /// Cpk = min(Cpu, Cpl) with σ_within; for a one-sided window the one index there is.
    pub cpk: f64,
    /// For a one-sided window, which one-sided index `cpk` and `ppk` hold; None when two-sided.
    pub cpk_side: Option<Side>,
    /// Pp = (USL − LSL)/6s; None for a one-sided window.
    pub pp: Option<f64>,
    /// Ppk = min(Ppu, Ppl) with s (or the one-sided index).
    pub ppk: f64,
    /// 95 % interval for Cp (chi-square), None for a one-sided window or n < 2.
    pub cp_ci95: Option<[f64; 2]>,
    /// 95 % interval for Cpk (Bissell's approximation), None for n < 2.
    pub cpk_ci95: Option<[f64; 2]>,
    /// True when fewer than [`SMALL_SAMPLE`] values were used.
    pub small_sample: bool,
    /// Plain warnings about how far the indices can be trusted.
    pub warnings: Vec<String>,
}

/// Capability of `values` (in manufacture order) against `spec`.
///
/// σ_within = MR̄/1.128 from the moving ranges of span 2, s the sample standard deviation;
/// see [`capability_from_moments`] for the formulas. Returns `Ok(None)` when the window has no
/// limit at all. Errors when fewer than two values are given, a value is not finite, or the
/// lower limit is not below the upper one. O(n), no allocation beyond the result.
pub fn capability(values: &[f64], spec: SpecWindow) -> Result<Option<Capability>> {
    let limits = crate::stats::imr::imr_limits(values)?;
    let (_, s) = mean_and_sd(values);
    capability_from_moments(values.len(), limits.mean, limits.sigma_within, s, spec)
}

/// Capability indices from given n, μ, σ_within and overall s.
///
/// Cp = (USL − LSL)/6σ; Cpu = (USL − μ)/3σ; Cpl = (μ − LSL)/3σ; Cpk = min(Cpu, Cpl); Pp and Ppk
/// the same with the overall s (NIST/SEMATECH e-Handbook §6.1.6; ISO 22514-2). Intervals per
/// [`cp_ci`] and [`cpk_bissell_ci`]. Returns `Ok(None)` when the window has no limit.
pub fn capability_from_moments(
    n: usize,
    mean: f64,
    sigma_within: f64,
    sigma_overall: f64,
    spec: SpecWindow,
) -> Result<Option<Capability>> {
    if let (Some(lo), Some(hi)) = (spec.min, spec.max) {
        if lo >= hi || lo.is_nan() || hi.is_nan() {
            return Err(Error::invalid(
                "spec window",
                format!("the lower limit {lo} is not below the upper limit {hi}"),
                "Correct the product's specification so that min is less than max.",
            ));
        }
    }
    let one_sided = |sigma: f64| -> Option<(f64, Option<Side>)> {
        match (spec.min, spec.max) {
            (Some(lo), Some(hi)) => Some((
                ((hi - mean) / (3.0 * sigma)).min((mean - lo) / (3.0 * sigma)),
                None,
            )),
            (None, Some(hi)) => Some(((hi - mean) / (3.0 * sigma), Some(Side::Upper))),
            (Some(lo), None) => Some(((mean - lo) / (3.0 * sigma), Some(Side::Lower))),
            (None, None) => None,
        }
    };
    let Some((cpk, cpk_side)) = one_sided(sigma_within) else {
        return Ok(None);
    };
    let (ppk, _) = one_sided(sigma_overall).unwrap_or((f64::NAN, None));
    let width = match (spec.min, spec.max) {
        (Some(lo), Some(hi)) => Some(hi - lo),
        _ => None,
    };
    let cp = width.map(|w| w / (6.0 * sigma_within));
    let pp = width.map(|w| w / (6.0 * sigma_overall));
    let small_sample = n < SMALL_SAMPLE;
    let mut warnings = Vec::new();
    if small_sample {
        warnings.push(format!(
            "only {n} lots: capability indices from fewer than about {SMALL_SAMPLE} values are \
             very uncertain (see the confidence interval)"
        ));
    }
    if sigma_within.is_nan()
        || sigma_within <= 0.0
        || sigma_overall.is_nan()
        || sigma_overall <= 0.0
    {
        warnings.push(
            "the values do not vary, so the indices are not meaningful; check the data".to_string(),
        );
    }
    let ci_ok = n >= 2 && cpk.is_finite();
    Ok(Some(Capability {
        n,
        mean,
        sigma_within,
        sigma_overall,
        cp,
        cpk,
        cpk_side,
        pp,
        ppk,
        cp_ci95: cp
            .filter(|c| ci_ok && c.is_finite())
            .map(|c| cp_ci(c, n, CONFIDENCE)),
        cpk_ci95: ci_ok.then(|| cpk_bissell_ci(cpk, n, CONFIDENCE)),
        small_sample,
        warnings,
    }))
}

/// Two-sided confidence interval for Cp from the chi-square distribution of s²:
/// Ĉp·√(χ²(α/2; ν)/ν) ≤ Cp ≤ Ĉp·√(χ²(1 − α/2; ν)/ν), ν = n − 1, α = 1 − confidence
/// (NIST/SEMATECH e-Handbook §6.1.6). With σ from MR̄ the effective degrees of freedom are fewer
/// than n − 1, so the interval is somewhat narrow; ν = n − 1 is common practice. Needs n ≥ 2.
pub fn cp_ci(cp: f64, n: usize, confidence: f64) -> [f64; 2] {
    let nu = (n - 1) as f64;
    let alpha = 1.0 - confidence;
    [
        cp * (chi_square_quantile(alpha / 2.0, nu) / nu).sqrt(),
        cp * (chi_square_quantile(1.0 - alpha / 2.0, nu) / nu).sqrt(),
    ]
}

/// Bissell's approximate two-sided confidence interval for Cpk:
/// Ĉpk ± z(1 − α/2)·√(1/(9n) + Ĉpk²/(2(n − 1))), α = 1 − confidence
/// (A. F. Bissell, "How reliable is your capability index?", Applied Statistics 39(1), 1990,
/// pp. 331–340; quoted in NIST/SEMATECH e-Handbook §6.1.6). Needs n ≥ 2.
pub fn cpk_bissell_ci(cpk: f64, n: usize, confidence: f64) -> [f64; 2] {
    let nf = n as f64;
    let z = normal_quantile(1.0 - (1.0 - confidence) / 2.0);
    let half = z * (1.0 / (9.0 * nf) + cpk * cpk / (2.0 * (nf - 1.0))).sqrt();
    [cpk - half, cpk + half]
}

/// σ_within from a mean moving range: MR̄/d2 (re-exported for callers that hold MR̄).
pub fn sigma_from_mr_bar(mr_bar: f64) -> f64 {
    mr_bar / D2
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn two_sided(lo: f64, hi: f64) -> SpecWindow {
        SpecWindow {
            min: Some(lo),
            max: Some(hi),
        }
    }

    #[test]
    fn nist_capability_example() {
        // NIST/SEMATECH e-Handbook §6.1.6: USL = 20, LSL = 8, μ = 16, σ = 2 give
        // Cp = 1.00 and Cpk = min(4/6, 8/6) = 0.667.
        let c = capability_from_moments(100, 16.0, 2.0, 2.0, two_sided(8.0, 20.0))
            .unwrap()
            .unwrap();
        assert_abs_diff_eq!(c.cp.unwrap(), 1.00, epsilon = 1e-12);
        assert_abs_diff_eq!(c.cpk, 0.667, epsilon = 5e-4);
        assert_abs_diff_eq!(c.pp.unwrap(), 1.00, epsilon = 1e-12);
        assert_abs_diff_eq!(c.ppk, 0.667, epsilon = 5e-4);
        assert_eq!(c.cpk_side, None);
        assert!(!c.small_sample && c.warnings.is_empty());
    }

    #[test]
    fn bissell_interval_worked_by_hand() {
        // Worked by hand from Bissell (1990): Ĉpk = 1.2, n = 50, z(0.975) = 1.959964.
        // 1/(9·50) = 0.0022222; 1.2²/(2·49) = 0.0146939; sum 0.0169161; √ = 0.1300620;
        // × 1.959964 = 0.2549168, so the interval is [0.94508, 1.45492].
        let [lo, hi] = cpk_bissell_ci(1.2, 50, 0.95);
        assert_abs_diff_eq!(lo, 0.94508, epsilon = 1e-5);
        assert_abs_diff_eq!(hi, 1.45492, epsilon = 1e-5);
    }

    #[test]
    fn cp_interval_worked_by_hand() {
        // NIST/SEMATECH e-Handbook §6.1.6 formula with χ²(0.025; 49) = 31.555 and
        // χ²(0.975; 49) = 70.222 (e-Handbook §1.3.6.7.4): Ĉp = 1.33, n = 50 gives
        // 1.33·√(31.555/49) = 1.0673 and 1.33·√(70.222/49) = 1.5922.
        let [lo, hi] = cp_ci(1.33, 50, 0.95);
        assert_abs_diff_eq!(lo, 1.0673, epsilon = 1e-4);
        assert_abs_diff_eq!(hi, 1.5922, epsilon = 1e-4);
    }

    #[test]
    fn one_sided_windows_report_the_side() {
        // Upper limit only: Cpu = (USL − μ)/3σ = (20 − 16)/6 (definition, e-Handbook §6.1.6).
        let up = SpecWindow {
            min: None,
            max: Some(20.0),
        };
        let c = capability_from_moments(60, 16.0, 2.0, 2.5, up)
            .unwrap()
            .unwrap();
        assert_eq!(c.cp, None);
        assert_eq!(c.pp, None);
        assert_eq!(c.cp_ci95, None);
        assert_eq!(c.cpk_side, Some(Side::Upper));
        assert_abs_diff_eq!(c.cpk, 4.0 / 6.0, epsilon = 1e-12);
        assert_abs_diff_eq!(c.ppk, 4.0 / 7.5, epsilon = 1e-12);
        let lo = SpecWindow {
            min: Some(8.0),
            max: None,
        };
        let c = capability_from_moments(60, 16.0, 2.0, 2.0, lo)
            .unwrap()
            .unwrap();
        assert_eq!(c.cpk_side, Some(Side::Lower));
        assert_abs_diff_eq!(c.cpk, 8.0 / 6.0, epsilon = 1e-12);
        let json = serde_json::to_string(&c).unwrap();
        assert!(json.contains("\"cpk_side\":\"lower\""), "{json}");
        assert!(json.contains("\"cp\":null"), "{json}");
    }

    #[test]
    fn no_limit_and_bad_window() {
        let none = SpecWindow {
            min: None,
            max: None,
        };
        assert_eq!(capability(&[1.0, 2.0, 3.0], none).unwrap(), None);
        let e = capability(&[1.0, 2.0], two_sided(5.0, 5.0))
            .unwrap_err()
            .to_string();
        assert!(e.contains("not below the upper limit"), "{e}");
    }

    #[test]
    fn from_values_uses_moving_ranges_and_warns_on_small_samples() {
        // NIST §6.3.2.2 flow data: x̄ = 50.81, σ_within = 1.8778/1.128 = 1.66469; with an
        // invented window 45..57 (test fixture) Cp = 12/(6·1.66469) = 1.20142.
        let data = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1];
        let c = capability(&data, two_sided(45.0, 57.0)).unwrap().unwrap();
        assert_abs_diff_eq!(c.sigma_within, 1.877_777_8 / 1.128, epsilon = 1e-6);
        assert_abs_diff_eq!(
            c.cp.unwrap(),
            12.0 / (6.0 * 1.877_777_8 / 1.128),
            epsilon = 1e-6
        );
        assert!(c.small_sample);
        assert!(c.warnings[0].contains("only 10 lots"));
        let [lo, hi] = c.cpk_ci95.unwrap();
        assert!(lo < c.cpk && c.cpk < hi);
    }
}
