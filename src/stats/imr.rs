//! Individuals and moving-range (I-MR) control limits: centre line, MR̄, σ_within and 3σ limits.

use serde::Serialize;

use crate::error::{Error, Result};

/// Bias-correction constant d2 for ranges of two (ASTM E2587 Table 6; ISO 7870-2 Table 2).
pub const D2: f64 = 1.128;
/// Upper moving-range limit factor D4 for ranges of two (ASTM E2587 Table 6; ISO 7870-2 Table 2).
pub const D4: f64 = 3.267;

/// Control limits of an I-MR chart, computed from a baseline and applied to every point.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Limits {
    /// Number of baseline values the limits were computed from.
    pub n: usize,
    /// Centre line x̄ of the individuals chart.
    pub mean: f64,
    /// Average moving range MR̄ of span 2 (the MR chart's centre line).
    pub mr_bar: f64,
    /// Within-process standard deviation σ_within = MR̄ / d2.
    pub sigma_within: f64,
    /// Upper control limit x̄ + 3σ_within.
    pub ucl: f64,
    /// Lower control limit x̄ − 3σ_within.
    pub lcl: f64,
    /// Upper limit of the moving-range chart, D4 · MR̄.
    pub mr_ucl: f64,
    /// Lower limit of the moving-range chart, 0 for ranges of two.
    pub mr_lcl: f64,
}

impl Limits {
    /// Whether the baseline shows any spread: MR̄ > 0. With MR̄ = 0 every baseline value is the
    /// same, σ_within = 0 and the limits collapse onto the centre line, so an individuals chart
    /// has no limits to judge points by (any later difference, even the last digit of a
    /// float sum, would read as "beyond 3σ"). Such data show the resolution of the result, not
    /// the process: Wheeler and Chambers, Understanding Statistical Process Control (2nd ed.,
    /// 1992), on "chunky data", where too coarse a measurement increment makes the moving
    /// ranges zero and the limits meaningless (from memory). The limits themselves are
    /// x̄ ± 3·MR̄/d2 (NIST/SEMATECH e-Handbook §6.3.2.2), which need σ̂ > 0.
    pub fn has_spread(&self) -> bool {
        self.mr_bar > 0.0
    }

    /// The value at `k` within-process standard deviations from the centre (k may be negative).
    pub fn at_sigma(&self, k: f64) -> f64 {
        self.mean + k * self.sigma_within
    }
}

/// I-MR control limits from a baseline (phase I), to be applied to later points too (phase II).
///
/// x̄ = Σx/n; MRᵢ = |xᵢ − xᵢ₋₁|; MR̄ = ΣMRᵢ/(n − 1); σ_within = MR̄/d2 with d2 = 1.128;
/// UCL, LCL = x̄ ± 3σ_within; MR chart UCL = D4·MR̄ with D4 = 3.267, LCL = 0.
/// Sources: ASTM E2587-16 §8; ISO 7870-2:2023 §8 (charts for individuals);
/// NIST/SEMATECH e-Handbook of Statistical Methods §6.3.2.2. One pass, no allocation.
///
/// Errors when fewer than two values are given or a value is not finite.
pub fn imr_limits(baseline: &[f64]) -> Result<Limits> {
    if baseline.len() < 2 {
        return Err(Error::invalid(
            "control limits",
            format!(
                "{} value(s) in the baseline, at least 2 are needed for a moving range",
                baseline.len()
            ),
            "Select or keep at least two lots for the baseline.",
        ));
    }
    let mut sum = 0.0;
    let mut mr_sum = 0.0;
    let mut prev = f64::NAN;
    for (i, &x) in baseline.iter().enumerate() {
        if !x.is_finite() {
            return Err(Error::invalid(
                format!("control limits, value {}", i + 1),
                format!("{x} is not a finite number"),
                "Correct or remove that lot's result.",
            ));
        }
        sum += x;
        if i > 0 {
            mr_sum += (x - prev).abs();
        }
        prev = x;
    }
    let n = baseline.len();
    let mean = sum / n as f64;
    let mr_bar = mr_sum / (n - 1) as f64;
    let sigma_within = mr_bar / D2;
    Ok(Limits {
        n,
        mean,
        mr_bar,
        sigma_within,
        ucl: mean + 3.0 * sigma_within,
        lcl: mean - 3.0 * sigma_within,
        mr_ucl: D4 * mr_bar,
        mr_lcl: 0.0,
    })
}

/// Moving ranges of span 2: MRᵢ = |xᵢ − xᵢ₋₁| for i ≥ 1 (lazily, no allocation).
pub fn moving_ranges(values: &[f64]) -> impl Iterator<Item = f64> + '_ {
    values.windows(2).map(|w| (w[1] - w[0]).abs())
}

/// Mean and sample standard deviation s (divisor n − 1) in one pass (Welford's update,
/// Technometrics 4(3), 1962). Returns (NaN, NaN) for an empty slice and s = NaN for one value.
pub fn mean_and_sd(values: &[f64]) -> (f64, f64) {
    let mut mean = 0.0;
    let mut m2 = 0.0;
    for (i, &x) in values.iter().enumerate() {
        let delta = x - mean;
        mean += delta / (i + 1) as f64;
        m2 += delta * (x - mean);
    }
    match values.len() {
        0 => (f64::NAN, f64::NAN),
        1 => (mean, f64::NAN),
        n => (mean, (m2 / (n - 1) as f64).sqrt()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn nist_individuals_chart_example() {
        // NIST/SEMATECH e-Handbook §6.3.2.2, "Example of moving range" (flow rate data):
        // x̄ = 50.81, MR̄ = 1.8778, UCL = 55.80, LCL = 45.82.
        let data = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1];
        let l = imr_limits(&data).unwrap();
        assert_eq!(l.n, 10);
        assert_abs_diff_eq!(l.mean, 50.81, epsilon = 1e-9);
        assert_abs_diff_eq!(l.mr_bar, 1.8778, epsilon = 5e-5);
        assert_abs_diff_eq!(l.ucl, 55.80, epsilon = 5e-3);
        assert_abs_diff_eq!(l.lcl, 45.82, epsilon = 5e-3);
        // MR chart UCL = 3.267 × 1.8778 = 6.1347 (same source, D4 = 3.267).
        assert_abs_diff_eq!(l.mr_ucl, 6.1347, epsilon = 5e-4);
        assert_eq!(l.mr_lcl, 0.0);
    }

    #[test]
    fn montgomery_runger_individuals_chart_example() {
        // Montgomery & Runger, Applied Statistics and Probability for Engineers (3rd ed.),
        // §16-6, Table 16-3, chemical process concentration: x̄ = 99.1, MR̄ = 2.59,
        // UCL = 105.99, LCL = 92.21. The book works from the rounded x̄ and MR̄, so its limits
        // differ from the unrounded ones by up to 0.01.
        let data = crate::stats::testdata::CONCENTRATION;
        let l = imr_limits(&data).unwrap();
        assert_abs_diff_eq!(l.mean, 99.1, epsilon = 0.0051);
        assert_abs_diff_eq!(l.mr_bar, 2.59, epsilon = 0.005);
        assert_abs_diff_eq!(l.ucl, 105.99, epsilon = 0.015);
        assert_abs_diff_eq!(l.lcl, 92.21, epsilon = 0.015);
    }

    #[test]
    fn too_few_or_non_finite_values_are_refused() {
        let e = imr_limits(&[1.0]).unwrap_err().to_string();
        assert!(e.contains("at least 2"), "{e}");
        let e = imr_limits(&[1.0, f64::NAN]).unwrap_err().to_string();
        assert!(e.contains("value 2"), "{e}");
    }

    #[test]
    fn constant_baseline_has_no_spread() {
        // First principles: equal values have every moving range 0, so MR̄ = σ = 0 and
        // UCL = LCL = x̄ (issue #20).
        let l = imr_limits(&[0.9989; 5]).unwrap();
        assert_eq!((l.mr_bar, l.sigma_within), (0.0, 0.0));
        assert!(!l.has_spread());
        assert!(imr_limits(&[1.0, 1.0, 1.1]).unwrap().has_spread());
    }

    #[test]
    fn moving_ranges_and_sd() {
        let mr: Vec<f64> = moving_ranges(&[1.0, 4.0, 2.0]).collect();
        assert_eq!(mr, vec![3.0, 2.0]);
        // First principles: values 2, 4, 4, 4, 5, 5, 7, 9 have mean 5 and Σ(x − x̄)² = 32,
        // so s = √(32/7).
        let (m, s) = mean_and_sd(&[2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0]);
        assert_abs_diff_eq!(m, 5.0, epsilon = 1e-12);
        assert_abs_diff_eq!(s, (32.0f64 / 7.0).sqrt(), epsilon = 1e-12);
    }
}
