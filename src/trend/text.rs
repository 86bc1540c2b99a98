//! Text and JSON of a product's trend as the `trend` command prints them: the overview, one
//! property's detail and the JSON objects (presentation only; the figures come from
//! [`crate::trend::product`]).

use serde_json::{json, Value};

use crate::spec::keys;
use crate::trend::product::{PropertyTrend, ViscosityCheck};

/// The JSON of one property's trend (the documented keys, and more).
///
/// Without spread (MR̄ = 0, issue #20) `ucl`, `lcl` and `mr_ucl` are null: there are no
/// control limits, and a warning says why.
pub fn trend_json(t: &PropertyTrend) -> Value {
    let cap = t.capability.as_ref();
    let limit = |x: f64| t.limits.has_spread().then_some(x);
    json!({
        "product": t.product,
        "property": t.property,
        "label": t.label,
        "unit": t.unit,
        "n": t.n,
        "date_from": t.date_from,
        "date_to": t.date_to,
        "baseline_n": t.baseline_n,
        "mean": t.limits.mean,
        "mr_bar": t.limits.mr_bar,
        "sigma_within": t.limits.sigma_within,
        "ucl": limit(t.limits.ucl),
        "lcl": limit(t.limits.lcl),
        "mr_ucl": limit(t.limits.mr_ucl),
        "signals": t.signals,
        "spec_min": t.spec_min,
        "spec_max": t.spec_max,
        "spec_revision": t.spec_revision,
        "cp": cap.and_then(|c| c.cp),
        "cpk": cap.map(|c| c.cpk),
        "cpk_side": cap.and_then(|c| c.cpk_side),
        "cpk_ci95": cap.and_then(|c| c.cpk_ci95),
        "cp_ci95": cap.and_then(|c| c.cp_ci95),
        "pp": cap.and_then(|c| c.pp),
        "ppk": cap.map(|c| c.ppk),
        "sigma_overall": cap.map(|c| c.sigma_overall),
        "normality": t.normality,
        "warnings": t.warnings,
    })
}

/// The JSON of the viscosity–Mn check.
pub fn visc_json(v: &ViscosityCheck) -> Value {
    json!({
        "n": v.fit.n,
        "exponent": v.fit.exponent,
        "exponent_se": v.fit.exponent_se,
        "intercept_log10": v.fit.intercept,
        "r_squared": v.fit.r_squared,
        "robust_sd": v.fit.robust_sd,
        "off_line": v.off_line,
    })
}

fn num(x: f64) -> String {
    let a = x.abs();
    if a >= 1000.0 {
        format!("{x:.0}")
    } else if a >= 100.0 {
        format!("{x:.1}")
    } else if a >= 1.0 {
        format!("{x:.3}")
    } else {
        format!("{x:.4}")
    }
}

fn cap_text(t: &PropertyTrend) -> String {
    match &t.capability {
        None => "no spec limit".into(),
        Some(c) => {
            let ci = c
                .cpk_ci95
                .map(|[a, b]| format!(" [{a:.2}, {b:.2}]"))
                .unwrap_or_default();
            let side = c
                .cpk_side
                .map(|s| {
                    format!(
                        " ({})",
                        serde_json::to_value(s)
                            .ok()
                            .and_then(|v| v.as_str().map(String::from))
                            .unwrap_or_default()
                    )
                })
                .unwrap_or_default();
            format!("Cpk {:.2}{ci}{side}", c.cpk)
        }
    }
}

/// The viscosity–Mn check in words (empty without one), as `trend` prints it.
pub fn visc_text(v: Option<&ViscosityCheck>) -> String {
    let Some(v) = v else { return String::new() };
    let mut s = format!(
        "\nViscosity against Mn ({} lots): viscosity ∝ Mn^{:.2} ± {:.2} (standard error), R² {:.3}.\n",
        v.fit.n, v.fit.exponent, v.fit.exponent_se, v.fit.r_squared
    );
    if v.off_line.is_empty() {
        s.push_str("  No lot is off the line by more than 3 robust standard deviations.\n");
    } else {
        for o in &v.off_line {
            s.push_str(&format!(
                "  OFF THE LINE: lot {} ({}) viscosity is {:+.1} robust standard deviations from the line for its Mn: check for branching, contamination or solids content.\n",
                o.lot, o.manufactured, o.robust_z
            ));
        }
    }
    s
}

/// The overview: one line per property, then the viscosity–Mn check.
pub fn summary(
    product: &str,
    trends: &[PropertyTrend],
    visc: Option<&ViscosityCheck>,
    released_only: bool,
) -> String {
    let mut rows = vec![vec![
        "property".to_string(),
        "n".into(),
        "mean".into(),
        "σ_within".into(),
        "capability (95 % CI)".into(),
        "signals".into(),
        "first signal".into(),
    ]];
    for t in trends {
        let first = t.signals.first().map_or(String::new(), |s| {
            format!("rule {} at {} ({})", s.rule, s.lot, s.manufactured)
        });
        let lots_signalled = {
            let mut l: Vec<&str> = t.signals.iter().map(|s| s.lot.as_str()).collect();
            l.dedup();
            l.len()
        };
        rows.push(vec![
            t.property.clone(),
            t.n.to_string(),
            num(t.limits.mean),
            num(t.limits.sigma_within),
            cap_text(t),
            if t.signals.is_empty() {
                "0".into()
            } else {
                format!("{} on {} lots", t.signals.len(), lots_signalled)
            },
            first,
        ]);
    }
    let mut out = format!(
        "{product}: {} lots from {} to {}{}\n\n",
        trends.first().map_or(0, |t| t.n),
        trends.first().map_or("", |t| t.date_from.as_str()),
        trends.first().map_or("", |t| t.date_to.as_str()),
        if released_only {
            " (released lots only)"
        } else {
            ""
        }
    );
    out.push_str(&crate::support::table::render(&rows));
    out.push_str(&visc_text(visc));
    out
}

/// The full detail of one property: limits, capability, normality, signals, warnings (and the
/// viscosity–Mn check for Mn or viscosity); `rules` as the user gave them.
pub fn detail(t: &PropertyTrend, visc: Option<&ViscosityCheck>, rules: &str) -> String {
    let mut out = format!(
        "{} {} ({}{}): {} lots from {} to {}\n",
        t.product,
        t.property,
        t.label,
        if t.unit.is_empty() {
            String::new()
        } else {
            format!(", {}", t.unit)
        },
        t.n,
        t.date_from,
        t.date_to
    );
    out.push_str(&crate::support::table::pairs(&detail_pairs(t)));
    out.push_str(&signals_text(t, rules));
    for w in &t.warnings {
        out.push_str(&format!("Warning: {w}\n"));
    }
    if matches!(t.property.as_str(), keys::VISCOSITY | keys::MN) {
        out.push_str(&visc_text(visc));
    }
    out
}

/// The detail's statistics as label–value pairs.
pub fn detail_pairs(t: &PropertyTrend) -> Vec<(String, String)> {
    let l = &t.limits;
    let base = if t.baseline_n < t.n {
        format!("the first {} lots (frozen)", t.baseline_n)
    } else {
        format!("all {} lots", t.n)
    };
    let mut pairs = vec![
        ("Control limits from".to_string(), base),
        ("Centre line x̄".to_string(), num(l.mean)),
        (
            "UCL / LCL".to_string(),
            if l.has_spread() {
                format!("{} / {}", num(l.ucl), num(l.lcl))
            } else {
                "none (no spread)".into()
            },
        ),
        (
            "MR̄ / MR UCL".to_string(),
            if l.has_spread() {
                format!("{} / {}", num(l.mr_bar), num(l.mr_ucl))
            } else {
                format!("{} / none", num(l.mr_bar))
            },
        ),
        ("σ_within = MR̄/1.128".to_string(), num(l.sigma_within)),
        (
            "Spec window".to_string(),
            match (t.spec_min, t.spec_max) {
                (None, None) => "none".into(),
                (a, b) => format!(
                    "{} to {}{}",
                    a.map_or("open".into(), num),
                    b.map_or("open".into(), num),
                    t.spec_revision
                        .as_ref()
                        .map(|r| format!(" (revision {r})"))
                        .unwrap_or_default()
                ),
            },
        ),
    ];
    if let Some(c) = &t.capability {
        let ci = |v: Option<[f64; 2]>| {
            v.map(|[a, b]| format!(" (95 % CI {a:.2} to {b:.2})"))
                .unwrap_or_default()
        };
        if let Some(cp) = c.cp {
            pairs.push(("Cp".into(), format!("{cp:.2}{}", ci(c.cp_ci95))));
        }
        pairs.push(("Cpk".into(), format!("{:.2}{}", c.cpk, ci(c.cpk_ci95))));
        if let Some(pp) = c.pp {
            pairs.push(("Pp".into(), format!("{pp:.2}")));
        }
        pairs.push((
            "Ppk".into(),
            format!("{:.2} (overall s = {})", c.ppk, num(c.sigma_overall)),
        ));
    }
    if let Some(n) = &t.normality {
        pairs.push((
            "Normality (Anderson-Darling)".into(),
            format!("A²* = {:.3}, p = {:.3}", n.a2_star, n.p_value),
        ));
    }
    pairs
}

/// The run-rule signals as a table, or a line saying there are none.
fn signals_text(t: &PropertyTrend, rules: &str) -> String {
    if t.signals.is_empty() {
        return format!("\nNo run-rule signals (rules: {rules}).\n");
    }
    let mut out = format!(
        "\nSignals ({}; tag: the lot's number on the chart, 1 = newest):\n",
        t.signals.len()
    );
    let marked =
        crate::trend::chart::marked_lots(&t.values, &t.raw_signals, t.spec_min, t.spec_max);
    let tag = |index: usize| {
        marked
            .iter()
            .find(|m| m.index == index)
            .map_or(String::new(), |m| m.number.to_string())
    };
    let mut rows = vec![vec![
        "tag".to_string(),
        "rule".to_string(),
        "lot".into(),
        "manufactured".into(),
        "#".into(),
        "pattern".into(),
    ]];
    for s in &t.signals {
        rows.push(vec![
            tag(s.index),
            s.rule.to_string(),
            s.lot.clone(),
            s.manufactured.clone(),
            s.index.to_string(),
            s.description.to_string(),
        ]);
    }
    out.push_str(&crate::support::table::render(&rows));
    out
}
