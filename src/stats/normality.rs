//! Anderson–Darling test of normality with both parameters estimated from the sample.

use serde::Serialize;

use crate::stats::dist::ln_normal_cdf_pair;
use crate::stats::imr::mean_and_sd;

/// Smallest sample for which the p-value approximation is used (as in common practice, n ≥ 8).
pub const MIN_N: usize = 8;

/// Significance level below which the capability indices are flagged as possibly misleading.
pub const ALPHA: f64 = 0.05;

/// Result of the Anderson–Darling normality test.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Normality {
    /// Number of values.
    pub n: usize,
    /// The statistic A².
    pub a2: f64,
    /// A² with Stephens' small-sample correction, A*² = A²(1 + 0.75/n + 2.25/n²).
    pub a2_star: f64,
    /// Approximate p-value for the hypothesis that the values are normal.
    pub p_value: f64,
    /// True when p < 0.05: normal-theory indices may mislead.
    pub non_normal: bool,
}

/// Anderson–Darling A² for normality, mean and variance estimated (case 3), with its p-value.
///
/// With zᵢ = (x₍ᵢ₎ − x̄)/s for the sorted values,
/// A² = −n − (1/n) Σᵢ (2i − 1)[ln Φ(zᵢ) + ln(1 − Φ(z₍ₙ₊₁₋ᵢ₎))], and A*² = A²(1 + 0.75/n + 2.25/n²).
/// p-value from A*² (D'Agostino & Stephens, Goodness-of-Fit Techniques, 1986, Table 4.9):
/// A*² ≥ 0.6: exp(1.2937 − 5.709A + 0.0186A²); 0.34 ≤ A*² < 0.6: exp(0.9177 − 4.279A − 1.38A²);
/// 0.2 ≤ A*² < 0.34: 1 − exp(−8.318 + 42.796A − 59.938A²); else 1 − exp(−13.436 + 101.14A − 223.73A²).
///
/// Returns None for fewer than [`MIN_N`] values, non-finite values or zero spread.
/// O(n log n): sorts one copy of the values.
pub fn anderson_darling(values: &[f64]) -> Option<Normality> {
    let n = values.len();
    if n < MIN_N || values.iter().any(|x| !x.is_finite()) {
        return None;
    }
    let (mean, s) = mean_and_sd(values);
    if s.is_nan() || s <= 0.0 {
        return None;
    }
    let mut sorted = values.to_vec();
    sorted.sort_unstable_by(f64::total_cmp);
    let nf = n as f64;
    // Σ (2i−1) ln Φ(zᵢ) + (2(n−i)+1) ln Φ(−zᵢ), i from 1: the same sum regrouped per point.
    let mut sum = 0.0;
    // Equal values (results are recorded to a few decimals, so a long series repeats them)
    // share one evaluation of the tails: the same x gives the same z bit for bit (issue #20).
    let mut last: Option<(f64, (f64, f64))> = None;
    for (k, &x) in sorted.iter().enumerate() {
        let i = (k + 1) as f64;
        let (ln_cdf, ln_sf) = match last {
            Some((lx, pair)) if lx.to_bits() == x.to_bits() => pair,
            _ => {
                let pair = ln_normal_cdf_pair((x - mean) / s);
                last = Some((x, pair));
                pair
            }
        };
        sum += (2.0 * i - 1.0) * ln_cdf + (2.0 * (nf - i) + 1.0) * ln_sf;
    }
    let a2 = -nf - sum / nf;
    let a2_star = a2 * (1.0 + 0.75 / nf + 2.25 / (nf * nf));
    let p_value = ad_p_value(a2_star);
    Some(Normality {
        n,
        a2,
        a2_star,
        p_value,
        non_normal: p_value < ALPHA,
    })
}

/// p-value of the corrected statistic A*² (D'Agostino & Stephens 1986, Table 4.9).
pub fn ad_p_value(a: f64) -> f64 {
    let p = if a >= 0.6 {
        (1.2937 - 5.709 * a + 0.0186 * a * a).exp()
    } else if a >= 0.34 {
        (0.9177 - 4.279 * a - 1.38 * a * a).exp()
    } else if a >= 0.2 {
        1.0 - (-8.318 + 42.796 * a - 59.938 * a * a).exp()
    } else {
        1.0 - (-13.436 + 101.14 * a - 223.73 * a * a).exp()
    };
    p.clamp(0.0, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    // Reference values: scipy.stats.anderson(x, 'norm').statistic (A², scipy 1.17.1) and
    // statsmodels.stats.diagnostic.normal_ad(x) (A² and the D'Agostino–Stephens p-value,
    // statsmodels 0.15.0), run on the data sets below.
    const AD_FLOW: f64 = 0.304_858_049_270_947_6;
    const P_FLOW: f64 = 0.507_861_843_609_488_9;
    const AD_CONC: f64 = 0.398_356_325_238_403;
    const P_CONC: f64 = 0.333_317_314_624_475;
    const AD_POW2: f64 = 4.355_833_781_934_557;
    const P_POW2: f64 = 2.904_523_450_582_166e-11;

    #[test]
    fn flow_rate_data() {
        // Data: NIST/SEMATECH e-Handbook §6.3.2.2 flow-rate example.
        let data = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1];
        let r = anderson_darling(&data).unwrap();
        assert_abs_diff_eq!(r.a2, AD_FLOW, epsilon = 1e-9);
        assert_abs_diff_eq!(r.p_value, P_FLOW, epsilon = 1e-9);
        assert!(!r.non_normal);
    }

    #[test]
    fn concentration_data() {
        // Data: Montgomery & Runger, Applied Statistics and Probability for Engineers (3rd ed.),
        // Table 16-3.
        let data = crate::stats::testdata::CONCENTRATION;
        let r = anderson_darling(&data).unwrap();
        assert_abs_diff_eq!(r.a2, AD_CONC, epsilon = 1e-9);
        assert_abs_diff_eq!(r.p_value, P_CONC, epsilon = 1e-9);
    }

    #[test]
    fn skewed_data_is_flagged() {
        // Powers of two, 1..2^19 (first principles: strongly right-skewed).
        let data: Vec<f64> = (0..20).map(|i| 2f64.powi(i)).collect();
        let r = anderson_darling(&data).unwrap();
        assert_abs_diff_eq!(r.a2, AD_POW2, epsilon = 1e-9);
        assert_abs_diff_eq!(r.p_value, P_POW2, epsilon = 1e-9);
        assert!(r.non_normal);
    }

    #[test]
    fn p_value_branches_match_reference() {
        // Worked by hand from the Table 4.9 formula: A = 0.1 → 1 − exp(−13.436 + 10.114 − 2.2373).
        assert_abs_diff_eq!(ad_p_value(0.1), 1.0 - (-5.5593f64).exp(), epsilon = 1e-12);
        assert!(ad_p_value(0.2) > ad_p_value(0.34) && ad_p_value(0.34) > ad_p_value(0.6));
        assert!(anderson_darling(&[1.0; 10]).is_none());
        assert!(anderson_darling(&[1.0, 2.0, 3.0]).is_none());
    }
}
