//! Lot-to-lot trending of one product: select lots, then I-MR limits, run rules, capability,
//! normality and the viscosity–Mn check for each property (pure; no file I/O).

use std::sync::Arc;

use serde::Serialize;

use rust_decimal::Decimal;

use crate::error::{Error, Result};
use crate::record::query::{Day, LotTable};
use crate::spec::keys;
use crate::spec::{ProductSpec, Property, SpecSet};
use crate::stats::{self, Capability, Limits, Normality, RuleSet, SpecWindow};

/// Where the control limits come from.
#[derive(Debug, Clone, PartialEq)]
pub enum Baseline {
    /// All selected lots (phase I on everything).
    All,
    /// The first N selected lots; limits frozen and applied to the rest (phase II).
    First(usize),
    /// Lots manufactured up to and including this date.
    Until(chrono::NaiveDate),
}

/// Which lots to trend.
#[derive(Debug, Clone, Default)]
pub struct Selection {
    /// Earliest manufacture date.
    pub from: Option<chrono::NaiveDate>,
    /// Latest manufacture date.
    pub to: Option<chrono::NaiveDate>,
    /// Leave out lots that were not released.
    pub released_only: bool,
}

/// Keeps the selected lots (latest row of each), in manufacture order (then record order).
/// The table is in record order, so a stable sort on the date keeps record order within a day;
/// a table already selected and in order is returned as it is (no copy, issue #20).
pub fn select(lots: LotTable, sel: &Selection) -> LotTable {
    // Dates are YYYY-MM-DD, so byte order is date order: no parsing per lot.
    let (from, to) = (sel.from.map(Day::from), sel.to.map(Day::from));
    let mut order: Vec<u32> = (0..lots.len() as u32)
        .filter(|&i| {
            let i = i as usize;
            let d = lots.made(i);
            (!sel.released_only || lots.status(i) == "released")
                && from.is_none_or(|f| d >= f)
                && to.is_none_or(|t| d <= t)
        })
        .collect();
    debug_assert!((1..lots.len()).all(|i| lots.line(i - 1) < lots.line(i)));
    if !order
        .windows(2)
        .all(|w| lots.made(w[0] as usize) <= lots.made(w[1] as usize))
    {
        order.sort_by_key(|&i| lots.made(i as usize));
    }
    lots.gather(&order)
}

/// The lots of one property's trend, in order: indices into the selected lots, which every
/// property of a trend shares (ids and dates are not copied per property, issue #20).
#[derive(Debug, Clone)]
pub struct TrendLots {
    table: Arc<LotTable>,
    /// Indices into `table`; None when every lot of the table has a value.
    rows: Option<Vec<u32>>,
}

impl TrendLots {
    /// The lots `rows` of `table` (None: all of them, in order).
    pub fn new(table: Arc<LotTable>, rows: Option<Vec<u32>>) -> TrendLots {
        TrendLots { table, rows }
    }

    /// Lots with these ids, dated 1970-01-01 (invented test fixtures for charts).
    #[cfg(test)]
    pub(crate) fn of_ids<S: AsRef<str>>(ids: &[S]) -> TrendLots {
        let rows: Vec<crate::record::query::LotRow> = ids
            .iter()
            .enumerate()
            .map(|(i, id)| crate::record::query::LotRow {
                line: i + 2,
                lot: id.as_ref().into(),
                manufactured: Day::from("1970-01-01"),
                status: "released",
                revision: "",
                mn_uncertainty: None,
                values: Vec::new(),
            })
            .collect();
        TrendLots::new(Arc::new(LotTable::from_rows(&rows)), None)
    }

    fn at(&self, i: usize) -> usize {
        match &self.rows {
            Some(r) => r[i] as usize,
            None => i,
        }
    }

    /// Number of lots.
    pub fn len(&self) -> usize {
        self.rows.as_ref().map_or(self.table.len(), Vec::len)
    }

    /// True when there is no lot.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Id of the `i`-th lot.
    pub fn id(&self, i: usize) -> &str {
        self.table.lot(self.at(i))
    }

    /// Manufacture date of the `i`-th lot.
    pub fn date(&self, i: usize) -> Day {
        self.table.made(self.at(i))
    }

    /// The ids in order.
    pub fn iter(&self) -> impl Iterator<Item = &str> + '_ {
        (0..self.len()).map(|i| self.id(i))
    }
}

impl std::ops::Index<usize> for TrendLots {
    type Output = str;
    fn index(&self, i: usize) -> &str {
        self.id(i)
    }
}

impl Serialize for TrendLots {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.collect_seq(self.iter())
    }
}

/// One signal, tied to its lot.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LotSignal {
    /// Nelson rule number (1-8).
    pub rule: u8,
    /// Lot that completes the pattern.
    pub lot: String,
    /// Index of that lot among the selected lots with a value (from 0).
    pub index: usize,
    /// Manufacture date of that lot.
    pub manufactured: String,
    /// Plain description.
    pub description: &'static str,
}

/// Everything about one property's trend.
#[derive(Debug, Clone, Serialize)]
pub struct PropertyTrend {
    /// Product code.
    pub product: String,
    /// Property key.
    pub property: String,
    /// Label from the spec.
    pub label: String,
    /// Unit from the spec.
    pub unit: String,
    /// Lots with a value.
    pub n: usize,
    /// First manufacture date.
    pub date_from: String,
    /// Last manufacture date.
    pub date_to: String,
    /// Lots used for the control limits.
    pub baseline_n: usize,
    /// Control limits.
    #[serde(flatten)]
    pub limits: Limits,
    /// Run-rule signals, in lot order.
    pub signals: Vec<LotSignal>,
    /// Spec window the capability is computed against.
    pub spec_min: Option<f64>,
    /// Upper spec limit.
    pub spec_max: Option<f64>,
    /// Spec revision the window comes from.
    pub spec_revision: Option<String>,
    /// Capability indices (None without limits).
    #[serde(skip)]
    pub capability: Option<Capability>,
    /// Anderson-Darling normality check.
    pub normality: Option<Normality>,
    /// Warnings about how far the figures can be trusted.
    pub warnings: Vec<String>,
    /// The lots in order, one per value, with their ids and manufacture dates (for charts
    /// and the report's signal list); shared with the other properties (issue #20).
    #[serde(skip)]
    pub lots: TrendLots,
    /// Values in order (for charts).
    #[serde(skip)]
    pub values: Vec<f64>,
    /// Raw signals (for charts).
    #[serde(skip)]
    pub raw_signals: Vec<stats::Signal>,
}

/// Computes one property's trend over the selected lots.
#[allow(clippy::too_many_arguments)]
pub fn property_trend(
    product: &str,
    key: &str,
    column: usize,
    label: &str,
    unit: &str,
    lots: &Arc<LotTable>,
    window: SpecWindow,
    spec_revision: Option<String>,
    baseline: &Baseline,
    rules: RuleSet,
) -> Result<PropertyTrend> {
    let mut rows = Vec::new();
    let mut values = Vec::with_capacity(lots.len());
    for i in 0..lots.len() {
        if let Some(v) = lots.value(i, column) {
            rows.push(i as u32);
            values.push(v);
        }
    }
    let ids = TrendLots::new(lots.clone(), (rows.len() < lots.len()).then_some(rows));
    if values.len() < 2 {
        return Err(Error::invalid(
            format!("{product} {key}"),
            format!(
                "{} lot(s) with a value in the selection; a chart needs at least 2",
                values.len()
            ),
            "Widen the date range or choose another property.",
        ));
    }
    let base_n = match baseline {
        Baseline::All => values.len(),
        Baseline::First(n) => (*n).min(values.len()),
        Baseline::Until(d) => {
            let d = Day::from(*d);
            (0..ids.len()).take_while(|&i| ids.date(i) <= d).count()
        }
    };
    if base_n < 2 {
        return Err(Error::invalid(
            "--baseline",
            format!("the baseline holds {base_n} lot(s) with a value for {key}"),
            "Choose a baseline of at least 2 lots (more than 20 is common practice).",
        ));
    }
    let limits = stats::imr_limits(&values[..base_n])?;
    let raw_signals = stats::nelson_signals(&values, &limits, rules);
    let signals = raw_signals
        .iter()
        .map(|s| LotSignal {
            rule: s.rule,
            lot: ids.id(s.index).to_string(),
            index: s.index,
            manufactured: ids.date(s.index).to_string(),
            description: s.description,
        })
        .collect();
    let capability = stats::capability(&values, window)?;
    let normality = stats::anderson_darling(&values);
    let mut warnings = capability
        .as_ref()
        .map(|c| c.warnings.clone())
        .unwrap_or_default();
    if normality.as_ref().is_some_and(|n| n.non_normal) {
        warnings.push(
            "the values do not look normally distributed (Anderson-Darling p < 0.05): capability indices may mislead".into(),
        );
    }
    if !limits.has_spread() {
        // Issue #20: degenerate limits are stated once instead of flagging every lot.
        warnings.push(format!(
            "no spread: all {base_n} baseline lots have the value {}, so the moving range is 0 \
             and there are no control limits; no run rule is applied. Check the result's \
             resolution, or whether it is calculated rather than measured",
            values[0]
        ));
    }
    if base_n < values.len() {
        warnings.push(format!(
            "limits frozen from the first {base_n} lots and applied to the later {}",
            values.len() - base_n
        ));
    }
    Ok(PropertyTrend {
        product: product.to_string(),
        property: key.to_string(),
        label: label.to_string(),
        unit: unit.to_string(),
        n: values.len(),
        date_from: ids.date(0).to_string(),
        date_to: ids.date(ids.len() - 1).to_string(),
        baseline_n: base_n,
        limits,
        signals,
        spec_min: window.min,
        spec_max: window.max,
        spec_revision,
        capability,
        normality,
        warnings,
        lots: ids,
        values,
        raw_signals,
    })
}

/// The baseline of the first `n` lots; a moving range needs at least 2 lots.
pub fn baseline_first(n: usize) -> Result<Baseline> {
    if n < 2 {
        return Err(Error::invalid(
            "--baseline",
            format!("{n} lot(s) cannot give a moving range"),
            "Give at least 2 lots (more than 20 is common practice).",
        ));
    }
    Ok(Baseline::First(n))
}

/// The trend-file columns to load: every key, or for one property only its own column (and
/// both Mn and viscosity for their joint check when it is either), in header order.
pub fn columns_for(keys: &[String], property: Option<&str>) -> Vec<String> {
    match property {
        Some(p) => keys
            .iter()
            .filter(|k| {
                *k == p
                    || (matches!(p, keys::MN | keys::VISCOSITY)
                        && matches!(k.as_str(), keys::MN | keys::VISCOSITY))
            })
            .cloned()
            .collect(),
        None => keys.to_vec(),
    }
}

/// The spec revision in effect for the latest selected lot (lots in manufacture order), or the
/// product's latest revision when none is dated for it.
pub fn spec_for<'a>(specs: &'a SpecSet, product: &str, lots: &LotTable) -> Option<&'a ProductSpec> {
    let latest_date = (!lots.is_empty())
        .then(|| lots.made(lots.len() - 1))
        .and_then(|d| chrono::NaiveDate::parse_from_str(&d, "%Y-%m-%d").ok());
    latest_date
        .and_then(|d| specs.for_date(product, d).ok())
        .or_else(|| specs.latest(product))
}

/// The spec's window on a property as numbers for capability (open without a spec).
pub fn spec_window(p: Option<&Property>) -> SpecWindow {
    let num = |d: Option<Decimal>| d.and_then(|d| d.to_string().parse().ok());
    SpecWindow {
        min: num(p.and_then(|p| p.min)),
        max: num(p.and_then(|p| p.max)),
    }
}

/// What to trend: the product, the lots (loaded with `columns`), the spec, and how.
#[derive(Debug, Clone, Copy)]
pub struct TrendRequest<'a> {
    /// Product code.
    pub product: &'a str,
    /// Columns the lots were loaded with, in order.
    pub columns: &'a [String],
    /// Selected lots, in manufacture order.
    pub lots: &'a Arc<LotTable>,
    /// Spec revision giving labels, units and windows (None: keys, no window).
    pub spec: Option<&'a ProductSpec>,
    /// One property, or None for every column.
    pub property: Option<&'a str>,
    /// Where the control limits come from.
    pub baseline: &'a Baseline,
    /// Nelson rules applied.
    pub rules: RuleSet,
}

/// The trend of the one property asked for, or of every column; in the overview a property
/// with too few values is skipped, not fatal. Errors when no trend remains.
pub fn property_trends(req: &TrendRequest) -> Result<Vec<PropertyTrend>> {
    use rayon::prelude::*;
    let wanted: Vec<(usize, &String)> = req
        .columns
        .iter()
        .enumerate()
        .filter(|(_, key)| req.property.is_none_or(|p| p == *key))
        .collect();
    // The properties are independent: one per core at a time (issue #20), kept in column order.
    let results: Vec<Result<PropertyTrend>> = wanted
        .par_iter()
        .map(|&(col, key)| {
            let p = req.spec.and_then(|s| s.property(key));
            let label = p.map_or(key.as_str(), |p| p.label.as_str());
            let unit = p.map_or("", |p| if p.unit == "1" { "" } else { p.unit.as_str() });
            property_trend(
                req.product,
                key,
                col,
                label,
                unit,
                req.lots,
                spec_window(p),
                req.spec.map(|s| s.revision.clone()),
                req.baseline,
                req.rules,
            )
        })
        .collect();
    let mut trends = Vec::new();
    for r in results {
        match r {
            Ok(t) => trends.push(t),
            Err(_) if req.property.is_none() => {}
            Err(e) => return Err(e),
        }
    }
    if trends.is_empty() {
        return Err(Error::invalid(
            format!("product '{}'", req.product),
            "no property has at least 2 lots in the selection and the baseline",
            "Widen --from/--to, or move --baseline-until past the first lots.",
        ));
    }
    Ok(trends)
}

/// The columns of a trend file that hold words (`kind = "text"` in some revision of
/// `product`): trend leaves them out of its statistics and says so once (issue #15).
pub fn text_columns(specs: &SpecSet, product: &str, columns: &[String]) -> Vec<String> {
    let revs = specs.products.get(product).map_or(&[][..], Vec::as_slice);
    columns
        .iter()
        .filter(|k| {
            revs.iter()
                .any(|s| s.property(k).is_some_and(|p| p.is_text()))
        })
        .cloned()
        .collect()
}

/// The columns that may hold censored results (a `loq` in some revision of `product`).
pub fn censorable_columns(specs: &SpecSet, product: &str, columns: &[String]) -> Vec<String> {
    let revs = specs.products.get(product).map_or(&[][..], Vec::as_slice);
    columns
        .iter()
        .filter(|k| {
            revs.iter()
                .any(|s| s.property(k).is_some_and(|p| p.loq.is_some()))
        })
        .cloned()
        .collect()
}

/// Adds to each trend the warning that `count` results below the limit of quantification
/// were excluded from its statistics (`censored` pairs a key with its count).
pub fn note_censored(trends: &mut [PropertyTrend], censored: &[(String, usize)]) {
    for t in trends {
        if let Some((_, n)) = censored.iter().find(|(k, n)| *k == t.property && *n > 0) {
            t.warnings.push(format!(
                "{n} result{} below the limit of quantification (recorded as <L) excluded from the statistics",
                if *n == 1 { "" } else { "s" }
            ));
        }
    }
}

/// The lines trend prints once under its overview about what it left out (issue #15): text
/// properties, and censored results per property.
pub fn exclusions_text(text_keys: &[String], censored: &[(String, usize)]) -> String {
    let mut out = String::new();
    if !text_keys.is_empty() {
        out.push_str(&format!(
            "Not trended: {} (text results; statistics need numbers).\n",
            text_keys.join(", ")
        ));
    }
    let excluded: Vec<String> = censored
        .iter()
        .filter(|(_, n)| *n > 0)
        .map(|(k, n)| format!("{k} {n}"))
        .collect();
    if !excluded.is_empty() {
        out.push_str(&format!(
            "Excluded from the statistics, results below the limit of quantification: {}.\n",
            excluded.join(", ")
        ));
    }
    out
}

/// True when any trend has a run-rule signal or any lot is off the viscosity–Mn line.
pub fn any_signal(trends: &[PropertyTrend], visc: Option<&ViscosityCheck>) -> bool {
    trends.iter().any(|t| !t.signals.is_empty()) || visc.is_some_and(|v| !v.off_line.is_empty())
}

/// A lot whose viscosity is off the log-log line for its Mn.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OffLine {
    /// Lot id.
    pub lot: String,
    /// Manufacture date.
    pub manufactured: String,
    /// Residual in robust standard deviations.
    pub robust_z: f64,
}

/// Viscosity against Mn over the selected lots.
#[derive(Debug, Clone, Serialize)]
pub struct ViscosityCheck {
    /// The fit.
    #[serde(flatten)]
    pub fit: stats::LogLogFit,
    /// Lots off the line by more than 3 robust standard deviations.
    pub off_line: Vec<OffLine>,
    /// Every lot of the fit with its Mn and viscosity, in the fit's order (for the plot).
    #[serde(skip)]
    pub points: Vec<ViscosityPoint>,
}

/// One lot of the viscosity–Mn fit.
#[derive(Debug, Clone, PartialEq)]
pub struct ViscosityPoint {
    /// Lot id.
    pub lot: String,
    /// Mn, g/mol.
    pub mn: f64,
    /// Viscosity, in the spec's unit.
    pub viscosity: f64,
}

/// The viscosity–Mn check when both columns were loaded ([`viscosity_check`]).
pub fn viscosity_check_of(lots: &LotTable, columns: &[String]) -> Option<ViscosityCheck> {
    let at = |k: &str| columns.iter().position(|c| c == k);
    viscosity_check(lots, at(keys::MN)?, at(keys::VISCOSITY)?)
}

/// Fits log viscosity against log Mn and lists the lots off the line, or None when fewer than
/// three lots have both values.
pub fn viscosity_check(lots: &LotTable, mn: usize, visc: usize) -> Option<ViscosityCheck> {
    let pairs: Vec<(usize, f64, f64)> = (0..lots.len())
        .filter_map(|l| match (lots.value(l, mn), lots.value(l, visc)) {
            (Some(m), Some(v)) if m > 0.0 && v > 0.0 => Some((l, m, v)),
            _ => None,
        })
        .collect();
    let m: Vec<f64> = pairs.iter().map(|p| p.1).collect();
    let v: Vec<f64> = pairs.iter().map(|p| p.2).collect();
    let fit = stats::log_log_fit(&m, &v).ok()?;
    let off_line = fit
        .flagged
        .iter()
        .map(|&i| OffLine {
            lot: lots.lot(pairs[i].0).to_string(),
            manufactured: lots.made(pairs[i].0).to_string(),
            robust_z: if fit.robust_sd > 0.0 {
                (fit.residuals[i] - fit.residual_median) / fit.robust_sd
            } else {
                f64::INFINITY
            },
        })
        .collect();
    let points = pairs
        .iter()
        .map(|&(l, m, v)| ViscosityPoint {
            lot: lots.lot(l).to_string(),
            mn: m,
            viscosity: v,
        })
        .collect();
    Some(ViscosityCheck {
        fit,
        off_line,
        points,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::query::LotRow;

    // Fixture lots with invented values; every expected number below is counted by hand.
    fn lot(
        line: usize,
        id: &str,
        made: &str,
        status: &'static str,
        values: &[Option<f64>],
    ) -> LotRow {
        LotRow {
            line,
            lot: id.into(),
            manufactured: made.into(),
            status,
            revision: "A",
            mn_uncertainty: None,
            values: values.to_vec(),
        }
    }

    /// Values 10, 12, 11, 13, 12 (then more) on consecutive days, all released.
    fn series(values: &[f64]) -> Vec<LotRow> {
        values
            .iter()
            .enumerate()
            .map(|(i, &v)| {
                lot(
                    i + 2,
                    &format!("L{i}"),
                    &format!("2026-03-{:02}", i + 1),
                    "released",
                    &[Some(v)],
                )
            })
            .collect()
    }

    fn date(s: &str) -> chrono::NaiveDate {
        s.parse().unwrap()
    }

    fn trend(lots: &[LotRow], baseline: &Baseline) -> Result<PropertyTrend> {
        property_trend(
            "PD-2000",
            "acid_value",
            0,
            "Acid value",
            "mg KOH/g",
            &Arc::new(LotTable::from_rows(lots)),
            SpecWindow {
                min: None,
                max: None,
            },
            None,
            baseline,
            RuleSet::parse("all", "--rules").unwrap(),
        )
    }

    #[test]
    fn select_keeps_the_window_and_status_in_manufacture_order() {
        let lots = vec![
            lot(2, "C", "2026-03-03", "released", &[]),
            lot(3, "A", "2026-03-01", "on_hold", &[]),
            lot(4, "B", "2026-03-02", "released", &[]),
            lot(5, "B2", "2026-03-02", "rejected", &[]),
            lot(6, "D", "2026-03-04", "released", &[]),
        ];
        let ids = |v: LotTable| {
            (0..v.len())
                .map(|i| v.lot(i).to_string())
                .collect::<Vec<_>>()
        };
        let lots = LotTable::from_rows(&lots);
        // Same day: record order (line) decides.
        assert_eq!(
            ids(select(lots.clone(), &Selection::default())),
            ["A", "B", "B2", "C", "D"]
        );
        let sel = Selection {
            from: Some(date("2026-03-02")),
            to: Some(date("2026-03-03")),
            released_only: false,
        };
        assert_eq!(ids(select(lots.clone(), &sel)), ["B", "B2", "C"]);
        let released = Selection {
            released_only: true,
            ..sel
        };
        assert_eq!(ids(select(lots, &released)), ["B", "C"]);
    }

    #[test]
    fn columns_for_one_property_keep_mn_and_viscosity_together() {
        let keys: Vec<String> = ["acid_value", "viscosity", "mn", "xn"]
            .map(String::from)
            .to_vec();
        assert_eq!(columns_for(&keys, None), keys);
        assert_eq!(columns_for(&keys, Some("acid_value")), ["acid_value"]);
        assert_eq!(columns_for(&keys, Some("mn")), ["viscosity", "mn"]);
        assert_eq!(columns_for(&keys, Some("viscosity")), ["viscosity", "mn"]);
    }

    #[test]
    fn a_baseline_needs_two_lots() {
        assert!(baseline_first(1).is_err());
        assert!(baseline_first(0).is_err());
        assert_eq!(baseline_first(2).unwrap(), Baseline::First(2));
    }

    // I-MR: x̄ = Σx/n, MR̄ = mean |xᵢ − xᵢ₋₁|, limits x̄ ± 2.66·MR̄ (2.66 = 3/d2, d2 = 1.128),
    // MR UCL = 3.267·MR̄: NIST/SEMATECH e-Handbook of Statistical Methods §6.3.2.2.
    #[test]
    fn limits_from_all_lots() {
        let t = trend(&series(&[10.0, 12.0, 11.0, 13.0, 12.0]), &Baseline::All).unwrap();
        // x̄ = 58/5 = 11.6; ranges 2, 1, 2, 1, MR̄ = 1.5.
        assert_eq!((t.n, t.baseline_n), (5, 5));
        assert!((t.limits.mean - 11.6).abs() < 1e-12);
        assert!((t.limits.mr_bar - 1.5).abs() < 1e-12);
        assert!((t.limits.ucl - (11.6 + 2.66 * 1.5)).abs() < 5e-3);
        assert!((t.limits.lcl - (11.6 - 2.66 * 1.5)).abs() < 5e-3);
        assert!((t.limits.mr_ucl - 3.267 * 1.5).abs() < 1e-9);
        assert_eq!(
            (t.date_from.as_str(), t.date_to.as_str()),
            ("2026-03-01", "2026-03-05")
        );
        assert!(t.signals.is_empty());
        assert!(t.capability.is_none());
        assert!(!any_signal(std::slice::from_ref(&t), None));
    }

    #[test]
    fn frozen_baseline_flags_a_later_lot() {
        let lots = series(&[10.0, 12.0, 11.0, 13.0, 12.0, 20.0]);
        let t = trend(&lots, &Baseline::First(5)).unwrap();
        // Limits from the first five only: UCL = 11.6 + 2.66 · 1.5 ≈ 15.59 < 20 (rule 1).
        assert_eq!((t.n, t.baseline_n), (6, 5));
        assert!((t.limits.mean - 11.6).abs() < 1e-12);
        assert!(t.signals.iter().any(|s| s.rule == 1
            && s.lot == "L5"
            && s.index == 5
            && s.manufactured == "2026-03-06"));
        assert!(t
            .warnings
            .iter()
            .any(|w| w == "limits frozen from the first 5 lots and applied to the later 1"));
        assert!(any_signal(std::slice::from_ref(&t), None));
        // A baseline longer than the lots is all of them.
        assert_eq!(trend(&lots, &Baseline::First(50)).unwrap().baseline_n, 6);
    }

    #[test]
    fn baseline_until_a_date_counts_lots_with_a_value() {
        let mut lots = series(&[10.0, 12.0, 11.0, 13.0, 12.0]);
        lots[1].values = vec![None];
        // Up to 2026-03-03: lots L0 and L2 have values (L1 has none), so 2 baseline lots.
        let t = trend(&lots, &Baseline::Until(date("2026-03-03"))).unwrap();
        assert_eq!((t.n, t.baseline_n), (4, 2));
        assert_eq!(t.lots.iter().collect::<Vec<_>>(), ["L0", "L2", "L3", "L4"]);
        // x̄ of 10 and 11 = 10.5, one range of 1.
        assert!((t.limits.mean - 10.5).abs() < 1e-12);
        assert!((t.limits.mr_bar - 1.0).abs() < 1e-12);
        let e = trend(&lots, &Baseline::Until(date("2026-03-01")))
            .unwrap_err()
            .to_string();
        assert!(e.contains("the baseline holds 1 lot(s)"), "{e}");
    }

    #[test]
    fn fewer_than_two_values_is_refused() {
        let e = trend(&series(&[10.0]), &Baseline::All)
            .unwrap_err()
            .to_string();
        assert!(e.contains("1 lot(s) with a value"), "{e}");
    }

    #[test]
    fn viscosity_check_needs_both_columns() {
        let lots = series(&[10.0, 12.0, 11.0]);
        let cols = vec!["mn".to_string()];
        assert!(viscosity_check_of(&LotTable::from_rows(&lots), &cols).is_none());
    }
}
