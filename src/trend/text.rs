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
    serde_json::to_value(TrendOut::of(t)).unwrap_or(Value::Null)
}

/// The JSON of one property's trend written straight from the trend (issue #20: no value tree
/// of its signals is built): the same text as [`trend_json`]'s value, whose keys serde_json
/// keeps sorted, so the fields below are declared in that order.
pub fn write_trend_json(out: &mut impl std::io::Write, t: &PropertyTrend) -> std::io::Result<()> {
    serde_json::to_writer_pretty(out, &TrendOut::of(t)).map_err(std::io::Error::other)
}

/// One signal as the JSON shows it (keys in sorted order).
#[derive(serde::Serialize)]
struct SignalOut<'a> {
    description: &'a str,
    index: usize,
    lot: &'a str,
    manufactured: &'a str,
    rule: u8,
}

/// One property's trend as the JSON shows it (keys in sorted order, as a serde_json map
/// orders them).
#[derive(serde::Serialize)]
struct TrendOut<'a> {
    baseline_n: usize,
    cp: Option<f64>,
    cp_ci95: Option<[f64; 2]>,
    cpk: Option<f64>,
    cpk_ci95: Option<[f64; 2]>,
    cpk_side: Option<crate::stats::capability::Side>,
    date_from: &'a str,
    date_to: &'a str,
    label: &'a str,
    lcl: Option<f64>,
    mean: f64,
    mr_bar: f64,
    mr_ucl: Option<f64>,
    n: usize,
    normality: Value,
    pp: Option<f64>,
    ppk: Option<f64>,
    product: &'a str,
    property: &'a str,
    sigma_overall: Option<f64>,
    sigma_within: f64,
    #[serde(serialize_with = "signals_out")]
    signals: &'a [crate::trend::product::LotSignal],
    spec_max: Option<f64>,
    spec_min: Option<f64>,
    spec_revision: &'a Option<String>,
    ucl: Option<f64>,
    unit: &'a str,
    warnings: &'a [String],
}

fn signals_out<S: serde::Serializer>(
    signals: &&[crate::trend::product::LotSignal],
    s: S,
) -> Result<S::Ok, S::Error> {
    s.collect_seq(signals.iter().map(|g| SignalOut {
        description: g.description,
        index: g.index,
        lot: &g.lot,
        manufactured: &g.manufactured,
        rule: g.rule,
    }))
}

impl<'a> TrendOut<'a> {
    fn of(t: &'a PropertyTrend) -> TrendOut<'a> {
        let cap = t.capability.as_ref();
        let limit = |x: f64| t.limits.has_spread().then_some(x);
        TrendOut {
            baseline_n: t.baseline_n,
            cp: cap.and_then(|c| c.cp),
            cp_ci95: cap.and_then(|c| c.cp_ci95),
            cpk: cap.map(|c| c.cpk),
            cpk_ci95: cap.and_then(|c| c.cpk_ci95),
            cpk_side: cap.and_then(|c| c.cpk_side),
            date_from: &t.date_from,
            date_to: &t.date_to,
            label: &t.label,
            lcl: limit(t.limits.lcl),
            mean: t.limits.mean,
            mr_bar: t.limits.mr_bar,
            mr_ucl: limit(t.limits.mr_ucl),
            n: t.n,
            normality: json!(t.normality),
            pp: cap.and_then(|c| c.pp),
            ppk: cap.map(|c| c.ppk),
            product: &t.product,
            property: &t.property,
            sigma_overall: cap.map(|c| c.sigma_overall),
            sigma_within: t.limits.sigma_within,
            signals: &t.signals,
            spec_max: t.spec_max,
            spec_min: t.spec_min,
            spec_revision: &t.spec_revision,
            ucl: limit(t.limits.ucl),
            unit: &t.unit,
            warnings: &t.warnings,
        }
    }
}

/// Writes `value` pretty-printed as it appears nested `level` levels deep in a pretty-printed
/// document: its first line as it is, every further line indented by two spaces per level
/// (serde_json's pretty printer indents exactly so).
pub fn write_nested_json(
    out: &mut impl std::io::Write,
    value: &Value,
    level: usize,
) -> std::io::Result<()> {
    let text = serde_json::to_string_pretty(value).map_err(std::io::Error::other)?;
    write_indented(out, &text, level)
}

/// Writes pretty-printed JSON `text` nested `level` levels deep (see [`write_nested_json`]).
fn write_indented(out: &mut impl std::io::Write, text: &str, level: usize) -> std::io::Result<()> {
    let pad = "  ".repeat(level);
    for (i, line) in text.split('\n').enumerate() {
        if i > 0 {
            out.write_all(b"\n")?;
            out.write_all(pad.as_bytes())?;
        }
        out.write_all(line.as_bytes())?;
    }
    Ok(())
}

/// Writes the overview JSON of `trend PRODUCT --json`, one property at a time (issue #20:
/// the whole document is never held as one value): the same text, byte for byte, as
/// `serde_json::to_string_pretty` of `{"not_trended_text", "product", "properties",
/// "viscosity_vs_mn"}` (keys sorted, as serde_json's map keeps them), then a line feed.
pub fn write_overview_json(
    out: &mut impl std::io::Write,
    product: &str,
    trends: &[PropertyTrend],
    visc: Option<&ViscosityCheck>,
    not_trended_text: &[String],
) -> std::io::Result<()> {
    out.write_all(b"{\n  \"not_trended_text\": ")?;
    write_nested_json(out, &serde_json::json!(not_trended_text), 1)?;
    out.write_all(b",\n  \"product\": ")?;
    write_nested_json(out, &serde_json::json!(product), 1)?;
    out.write_all(b",\n  \"properties\": [")?;
    for (i, t) in trends.iter().enumerate() {
        out.write_all(if i == 0 { b"\n    " } else { b",\n    " })?;
        let mut one = Vec::new();
        write_trend_json(&mut one, t)?;
        // serde_json writes UTF-8 only.
        let text = String::from_utf8(one).map_err(std::io::Error::other)?;
        write_indented(out, &text, 2)?;
    }
    out.write_all(if trends.is_empty() { b"]" } else { b"\n  ]" })?;
    out.write_all(b",\n  \"viscosity_vs_mn\": ")?;
    write_nested_json(out, &visc.map_or(Value::Null, visc_json), 1)?;
    out.write_all(b"\n}\n")
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::query::{LotRow, LotTable};
    use crate::stats::{RuleSet, SpecWindow};
    use crate::trend::product::{property_trend, viscosity_check, Baseline};

    /// Invented test lots: Mn, acid value and viscosity that drift, so that signals, limits
    /// and the viscosity–Mn fit all have content.
    fn trends() -> (Vec<PropertyTrend>, Option<ViscosityCheck>) {
        let rows: Vec<LotRow> = (0..40)
            .map(|i| LotRow {
                line: i + 2,
                lot: format!("T-{i:03}").as_str().into(),
                manufactured: format!("2026-02-{:02}", 1 + i % 28).as_str().into(),
                status: "released",
                revision: "A",
                mn_uncertainty: None,
                values: vec![
                    Some(2000.0 + (i * 7 % 11) as f64 * 3.0 + if i > 30 { 40.0 } else { 0.0 }),
                    Some(0.5 + (i * 5 % 7) as f64 * 0.01),
                    Some(900.0 + (i * 7 % 11) as f64 * 4.0),
                ],
            })
            .collect();
        let lots = std::sync::Arc::new(LotTable::from_rows(&rows));
        let t: Vec<PropertyTrend> = ["mn", "acid_value", "viscosity"]
            .iter()
            .enumerate()
            .map(|(k, key)| {
                property_trend(
                    "TP-1",
                    key,
                    k,
                    key,
                    "",
                    &lots,
                    SpecWindow {
                        min: None,
                        max: Some(2100.0),
                    },
                    Some("A".into()),
                    &Baseline::First(20),
                    RuleSet::ALL,
                )
                .unwrap()
            })
            .collect();
        (t, viscosity_check(&lots, 0, 2))
    }

    /// The value `trend_json` gave before issue #20, built with `json!` (keys sorted by the map).
    fn reference_json(t: &PropertyTrend) -> Value {
        let cap = t.capability.as_ref();
        let limit = |x: f64| t.limits.has_spread().then_some(x);
        json!({
            "product": t.product, "property": t.property, "label": t.label, "unit": t.unit,
            "n": t.n, "date_from": t.date_from, "date_to": t.date_to,
            "baseline_n": t.baseline_n, "mean": t.limits.mean, "mr_bar": t.limits.mr_bar,
            "sigma_within": t.limits.sigma_within, "ucl": limit(t.limits.ucl),
            "lcl": limit(t.limits.lcl), "mr_ucl": limit(t.limits.mr_ucl),
            "signals": t.signals, "spec_min": t.spec_min, "spec_max": t.spec_max,
            "spec_revision": t.spec_revision, "cp": cap.and_then(|c| c.cp),
            "cpk": cap.map(|c| c.cpk), "cpk_side": cap.and_then(|c| c.cpk_side),
            "cpk_ci95": cap.and_then(|c| c.cpk_ci95), "cp_ci95": cap.and_then(|c| c.cp_ci95),
            "pp": cap.and_then(|c| c.pp), "ppk": cap.map(|c| c.ppk),
            "sigma_overall": cap.map(|c| c.sigma_overall), "normality": t.normality,
            "warnings": t.warnings,
        })
    }

    /// Issue #20: one property's JSON written straight from the trend is the text of the
    /// map-built value, byte for byte (the reference: serde_json's `to_string_pretty`).
    #[test]
    fn written_trend_json_equals_the_map_built_value() {
        let (t, _) = trends();
        for t in &t {
            let mut written = Vec::new();
            write_trend_json(&mut written, t).unwrap();
            let want = serde_json::to_string_pretty(&reference_json(t)).unwrap();
            assert_eq!(String::from_utf8(written).unwrap(), want);
            assert_eq!(trend_json(t), reference_json(t));
        }
    }

    /// Issue #20: the streamed overview is the pretty-printed document byte for byte (the
    /// reference: serde_json's own `to_string_pretty` of the whole value).
    #[test]
    fn streamed_overview_json_equals_the_whole_document() {
        let (t, visc) = trends();
        assert!(
            t.iter().any(|t| !t.signals.is_empty()),
            "fixture has signals"
        );
        for (trends, visc, text_keys) in [
            (&t[..], visc.as_ref(), vec!["appearance".to_string()]),
            (&t[..1], None, Vec::new()),
        ] {
            let whole = serde_json::to_string_pretty(&serde_json::json!({
                "product": "TP-1",
                "properties": trends.iter().map(trend_json).collect::<Vec<_>>(),
                "viscosity_vs_mn": visc.map(visc_json),
                "not_trended_text": text_keys,
            }))
            .unwrap()
                + "\n";
            let mut streamed = Vec::new();
            write_overview_json(&mut streamed, "TP-1", trends, visc, &text_keys).unwrap();
            assert_eq!(String::from_utf8(streamed).unwrap(), whole);
        }
    }
}
