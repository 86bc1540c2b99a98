//! Evaluates one lot against its spec: unit and temperature handling, replicates, derived
//! values (Mn, Xn, p, HEW) with uncertainty, rounding, verdicts and the lot status.

use std::str::FromStr;

use rust_decimal::Decimal;
use serde::Serialize;

use crate::chem::analysis::{analyse, Titration};
use crate::chem::hydroxyl_method::AcidityCorrection;
use crate::error::{Error, Result};
use crate::lot::intake::{entered_text, Form, LotResults, Reading};
use crate::lot::note::LotNote;
use crate::spec::decision::{
    censored_text, censored_verdict, decimal_from_f64, decimal_text, decimal_to_f64 as to_f64,
    round, verdict, DecisionRule, Verdict,
};
use crate::spec::keys;
use crate::spec::units::unit_factor;
use crate::spec::{ProductSpec, Property};
use crate::support::text::Text;

/// The guard bands live with the customer-fit rule in the spec layer; re-exported for callers
/// of the lot layer.
pub use crate::spec::customer::{guard_uncertainty, recorded_uncertainty};

/// Release status of a lot.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Every property passes.
    Released,
    /// A property is conditional (or replicates disagree): QA must decide.
    OnHold,
    /// A property fails.
    Rejected,
    /// A spec'd measured property is missing.
    Incomplete,
}

impl Status {
    /// The snake_case name used in files and JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Released => "released",
            Status::OnHold => "on_hold",
            Status::Rejected => "rejected",
            Status::Incomplete => "incomplete",
        }
    }

    /// Parses the snake_case name.
    pub fn parse(text: &str) -> Option<Status> {
        [
            Status::Released,
            Status::OnHold,
            Status::Rejected,
            Status::Incomplete,
        ]
        .into_iter()
        .find(|s| s.as_str() == text)
    }
}

/// The outcome for one property.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PropertyResult {
    /// Property key.
    pub property: Text,
    /// Value at full precision (mean of replicates, in the spec's unit), None when missing.
    pub value: Option<f64>,
    /// Exact decimal text of the value for measured properties.
    #[serde(skip)]
    pub exact: Option<Text>,
    /// The value as entered (mean of replicates), before any acidity correction.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub entered: Option<Text>,
    /// Value rounded to the spec's decimals (ASTM E29), as text.
    pub reported: Option<Text>,
    /// The spec's unit.
    pub unit: Text,
    /// Verdict; None when missing or when the property has no limit.
    pub verdict: Option<Verdict>,
    /// Expanded uncertainty used as guard band (k = 2), when known.
    pub uncertainty: Option<f64>,
}

/// The decision for one lot.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LotDecision {
    /// Lot id.
    pub lot: Text,
    /// Product code.
    pub product: Text,
    /// Spec revision applied.
    pub spec_revision: Text,
    /// Manufacture date.
    pub manufactured: chrono::NaiveDate,
    /// Lot status.
    pub status: Status,
    /// Every property of the spec, in its order.
    pub properties: Vec<PropertyResult>,
    /// Reasons and notes (conditional results, corrections, missing values).
    pub notes: Vec<LotNote>,
    /// Analysts of the lot's results, as named in the results file.
    pub analysts: Vec<String>,
    /// Earliest `tested_at` of the results, when the results file gives test times.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tested_from: Option<String>,
    /// Latest `tested_at` of the results, when the results file gives test times.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tested_to: Option<String>,
    /// Approver named for the lot in the results file (history imports).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub approver: Option<String>,
    /// Decision time given in the results file (history imports): recorded instead of now.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub decided_at: Option<String>,
    /// SHA-256 of the spec revision file the lot was decided on.
    pub spec_sha256: std::sync::Arc<str>,
}

impl LotDecision {
    /// The result for `key`.
    pub fn get(&self, key: &str) -> Option<&PropertyResult> {
        self.properties.iter().find(|p| p.property == key)
    }
}

/// Largest gap (°C) between measurement and spec temperature that a viscosity correction may
/// bridge; one Andrade coefficient holds only over a short span (common practice).
pub const MAX_CORRECTION_SPAN_C: f64 = 10.0;

/// Converts a viscosity from `t_meas` to `t_spec` (°C) with Andrade's equation.
///
/// ln η = A + B/T (T in K), so η(T_spec) = η(T_meas) · exp(B·(1/T_spec − 1/T_meas)).
/// Source: E. N. da C. Andrade, Nature 125, 309 (1930).
pub fn andrade_correct(eta: f64, t_meas_c: f64, t_spec_c: f64, b_k: f64) -> f64 {
    let k = |c: f64| c + 273.15;
    eta * (b_k * (1.0 / k(t_spec_c) - 1.0 / k(t_meas_c))).exp()
}

struct Mean {
    value: Decimal,
    range: Decimal,
    n: usize,
}

fn mean_reading(
    lot: &LotResults,
    p: &Property,
    readings: &[Reading],
    notes: &mut Vec<LotNote>,
    file: &str,
) -> Result<Mean> {
    // Sum, extremes and the first value, as the readings are converted.
    let mut sum = Decimal::ZERO;
    let mut extremes: Option<(Decimal, Decimal)> = None;
    let mut first = None;
    for r in readings {
        let mut v = r.value;
        if let Some(u) = &r.unit {
            let f = unit_factor(u, &p.unit).ok_or_else(|| {
                Error::invalid(
                    format!("{file}:{}, lot '{}', {}", r.line, lot.lot, p.key),
                    format!("unit '{u}' cannot be converted to the spec's '{}'", p.unit),
                    "Report the result in the spec's unit (known conversions: cP, mPa·s, Pa·s).",
                )
            })?;
            v *= f;
        }
        if let (Some(t), Some(ts)) = (r.temperature_c, p.temperature_c) {
            if (t - ts).abs() > 0.05 {
                if (t - ts).abs() > MAX_CORRECTION_SPAN_C {
                    return Err(Error::invalid(
                        format!("{file}:{}, lot '{}', {}", r.line, lot.lot, p.key),
                        format!("measured at {t} °C, more than {MAX_CORRECTION_SPAN_C} °C from the spec temperature {ts} °C"),
                        "Measure at the spec temperature; a temperature correction is trusted only over a short span.",
                    ));
                }
                let b = p.andrade_b_k.ok_or_else(|| {
                    Error::invalid(
                        format!("{file}:{}, lot '{}', {}", r.line, lot.lot, p.key),
                        format!("measured at {t} °C but the spec temperature is {ts} °C"),
                        "Measure at the spec temperature, or give andrade_b_k in the spec to allow a correction.",
                    )
                })?;
                let corrected = andrade_correct(to_f64(v), t, ts, b);
                v = decimal_from_f64(corrected).unwrap_or(v);
                notes.push(LotNote::temperature_corrected(&p.label, t, ts, b));
            }
        }
        sum += v;
        extremes = Some(extremes.map_or((v, v), |(lo, hi)| (lo.min(v), hi.max(v))));
        first.get_or_insert(v);
    }
    let n = readings.len();
    let (min, max) = extremes.unwrap_or_default();
    Ok(Mean {
        value: if n == 1 {
            first.unwrap_or_default()
        } else {
            (sum / Decimal::from(n as u64)).normalize()
        },
        range: max - min,
        n,
    })
}

/// Evaluates one lot; `file` names the results file in messages.
pub fn evaluate(spec: &ProductSpec, lot: &LotResults, file: &str) -> Result<LotDecision> {
    check_entered_keys(spec, lot, file)?;
    let mut notes = Vec::new();
    let means = measured_means(spec, lot, file, &mut notes)?;
    let mut results = measured_results(spec, &means);
    let derived_missing = derived_results(spec, lot, file, &means.values, &mut results)?;
    for r in &results {
        if let Some(v) = r.verdict {
            if v != Verdict::Pass {
                let label = &spec.property(&r.property).unwrap().label;
                notes.push(LotNote::not_passed(
                    label,
                    r.reported.as_deref().unwrap_or(""),
                    &r.unit,
                    v.words(),
                ));
            }
        }
    }
    notes.extend(lot.notes.iter().map(|n| LotNote::lab(n)));
    let worst = results.iter().filter_map(|r| r.verdict).max();
    let status = if worst == Some(Verdict::Fail) {
        Status::Rejected
    } else if means.any_missing || derived_missing {
        Status::Incomplete
    } else if worst.is_some_and(|w| w != Verdict::Pass) || means.repeat_fail {
        Status::OnHold
    } else {
        Status::Released
    };
    Ok(LotDecision {
        lot: lot.lot.clone(),
        product: Text::from(spec.code.as_str()),
        spec_revision: Text::from(spec.revision.as_str()),
        manufactured: lot.manufactured,
        status,
        properties: results,
        notes,
        analysts: lot.analysts.clone(),
        tested_from: lot.tested_from.as_ref().map(|t| t.text.clone()),
        tested_to: lot.tested_to.as_ref().map(|t| t.text.clone()),
        approver: lot.approver.clone(),
        decided_at: lot.decided_at.as_ref().map(|t| t.text.clone()),
        spec_sha256: spec.sha256.clone(),
    })
}

/// Refuses an entered property the spec does not have, or one resinlot computes.
fn check_entered_keys(spec: &ProductSpec, lot: &LotResults, file: &str) -> Result<()> {
    for key in lot.readings.keys() {
        match spec.property(key) {
            None => {
                return Err(Error::invalid(
                    format!("{file}:{}, lot '{}'", lot.line, lot.lot),
                    format!(
                        "property '{key}' is not in the spec of {} revision {}",
                        spec.code, spec.revision
                    ),
                    format!(
                        "Known properties: {}.",
                        spec.measured()
                            .map(|p| p.key.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                ))
            }
            Some(p) if p.derived => {
                return Err(Error::invalid(
                    format!("{file}:{}, lot '{}'", lot.line, lot.lot),
                    format!("'{key}' is computed by resinlot and cannot be entered"),
                    "Remove this column or row; enter acid_value and hydroxyl_value instead.",
                ))
            }
            _ => {}
        }
    }
    Ok(())
}

/// A result that is not a number: a word of a text property, or a censored result.
#[derive(Debug, Clone, PartialEq)]
enum Special {
    /// The allowed word, as written in the spec.
    Word(String),
    /// Below the stated limit, in the spec's unit.
    Below(Decimal),
}

/// The means of the measured properties of one lot, by the spec's property keys.
struct Means<'s> {
    /// Mean of the replicates, by property key, in spec order.
    values: Vec<(&'s str, Decimal)>,
    /// Words and censored results, by property key.
    special: Vec<(&'s str, Special)>,
    /// A measured property has no reading.
    any_missing: bool,
    /// A replicate range exceeds the property's repeatability limit.
    repeat_fail: bool,
}

/// Averages the replicates of every measured property, noting missing properties, replicate
/// counts and ranges beyond the repeatability limit.
fn measured_means<'s>(
    spec: &'s ProductSpec,
    lot: &LotResults,
    file: &str,
    notes: &mut Vec<LotNote>,
) -> Result<Means<'s>> {
    let mut means = Means {
        values: Vec::with_capacity(spec.properties.len()),
        special: Vec::new(),
        any_missing: false,
        repeat_fail: false,
    };
    for p in spec.measured() {
        let Some(readings) = lot.readings.get(p.key.as_str()) else {
            means.any_missing = true;
            notes.push(LotNote::not_measured(&p.label));
            continue;
        };
        if let Some(sp) = special_result(lot, p, readings, file)? {
            means.special.push((p.key.as_str(), sp));
            continue;
        }
        let m = mean_reading(lot, p, readings, notes, file)?;
        if m.n > 1 {
            match p.repeatability {
                Some(r) if m.range > r => {
                    means.repeat_fail = true;
                    notes.push(LotNote::repeatability_exceeded(&p.label, m.n, m.range, r));
                }
                _ => notes.push(LotNote::replicates(&p.label, m.n, m.range)),
            }
        }
        means.values.push((p.key.as_str(), m.value));
    }
    Ok(means)
}

/// The word or censored result of property `p`, or `None` when its readings are numbers;
/// refuses what the spec does not allow (issue #15): a word that is not in the allowed list,
/// a number for a text property or a word for a numeric one, `<L` or `nd` without a limit of
/// quantification, a stated limit under the LOQ or above the maximum, and censored and
/// quantified replicates mixed.
fn special_result(
    lot: &LotResults,
    p: &Property,
    readings: &[Reading],
    file: &str,
) -> Result<Option<Special>> {
    let place = |r: &Reading| format!("{file}:{}, lot '{}', {}", r.line, lot.lot, p.key);
    if let crate::spec::Kind::Text { allowed, .. } = &p.kind {
        let mut word: Option<&str> = None;
        for r in readings {
            let entered = entered_text(r.value, &r.form);
            let w = p.allowed_word(&entered).ok_or_else(|| {
                Error::invalid(
                    place(r),
                    format!("'{entered}' is not one of the words this property allows"),
                    format!("Enter one of: {}.", allowed.join(", ")),
                )
            })?;
            if word.is_some_and(|old| old != w) {
                return Err(Error::invalid(
                    place(r),
                    format!(
                        "'{w}' differs from '{}' given for the same lot",
                        word.unwrap_or("")
                    ),
                    "Enter the reported result once.",
                ));
            }
            word = Some(w);
        }
        return Ok(word.map(|w| Special::Word(w.to_string())));
    }
    let mut below: Option<Decimal> = None;
    let mut numbers = false;
    for r in readings {
        let limit = match &r.form {
            Form::Number => {
                numbers = true;
                continue;
            }
            Form::Word(w) => {
                return Err(Error::invalid(
                    place(r),
                    format!("'{w}' is not a number"),
                    "Enter the result as a plain decimal number, e.g. 55.2, or as <L below the limit of quantification.",
                ))
            }
            Form::Below => r.value,
            Form::NotDetected => p.loq.unwrap_or_default(),
        };
        let Some(loq) = p.loq else {
            return Err(Error::invalid(
                place(r),
                format!(
                    "'{}' is a result below a limit, but the spec gives no limit of quantification for {}",
                    entered_text(r.value, &r.form),
                    p.key
                ),
                "Enter the measured number, or add loq = ... to the property in the spec.",
            ));
        };
        let limit = match &r.unit {
            Some(u) => {
                limit
                    * unit_factor(u, &p.unit).ok_or_else(|| {
                        Error::invalid(
                    place(r),
                    format!("unit '{u}' cannot be converted to the spec's '{}'", p.unit),
                    "Report the result in the spec's unit (known conversions: cP, mPa·s, Pa·s).",
                )
                    })?
            }
            None => limit,
        };
        if limit < loq {
            return Err(Error::invalid(
                place(r),
                format!("'<{limit}' is below the limit of quantification {loq}"),
                format!("A result cannot be stated below the LOQ: enter <{loq} or nd."),
            ));
        }
        if let Some(max) = p.max.filter(|m| limit > *m) {
            return Err(Error::invalid(
                place(r),
                format!("'<{limit}' is above the maximum {max}, so it cannot show conformity"),
                "Enter the measured number (a method with a lower limit of quantification may be needed).",
            ));
        }
        below = Some(below.map_or(limit, |b: Decimal| b.max(limit)));
    }
    match below {
        Some(_) if numbers => Err(Error::invalid(
            place(&readings[0]),
            "quantified and below-limit replicates are mixed",
            "Enter the reported result: either the number or <L, not both.",
        )),
        Some(l) => Ok(Some(Special::Below(l.normalize()))),
        None => Ok(None),
    }
}

/// The decided result of a word or a censored result.
fn special_decided(spec: &ProductSpec, p: &Property, sp: &Special) -> PropertyResult {
    let mut r = missing(p);
    match sp {
        Special::Word(w) => {
            r.exact = Some(Text::from(w.as_str()));
            r.reported = Some(Text::from(w.as_str()));
            r.verdict = Some(if p.conforms(w) {
                Verdict::Pass
            } else {
                Verdict::Fail
            });
        }
        Special::Below(l) => {
            let u = guard_uncertainty(spec, p);
            let w = match spec.decision_rule {
                DecisionRule::Guarded => u.unwrap_or_default(),
                DecisionRule::Simple => Decimal::ZERO,
            };
            r.exact = Some(
                crate::spec::decision::RecordedResult::Below(*l)
                    .cell()
                    .into(),
            );
            r.reported = Some(censored_text(*l, p.decimals).into());
            r.verdict = if p.has_limit() {
                censored_verdict(*l, p.min, p.max, w)
            } else {
                None
            };
            r.uncertainty = u.map(to_f64);
        }
    }
    r
}

/// The result of every measured property, in spec order, from the replicate means.
fn measured_results(spec: &ProductSpec, means: &Means) -> Vec<PropertyResult> {
    let special = &means.special;
    let means = &means.values;
    let guarded = spec.decision_rule == DecisionRule::Guarded;
    let av_mean = means
        .iter()
        .find(|(k, _)| *k == keys::ACID_VALUE)
        .map(|(_, v)| *v);
    let mut results = Vec::with_capacity(spec.properties.len());
    for p in spec.measured() {
        if let Some((_, sp)) = special.iter().find(|(k, _)| *k == p.key) {
            results.push(special_decided(spec, p, sp));
            continue;
        }
        let Some(entered) = means.iter().find(|(k, _)| *k == p.key).map(|(_, v)| *v) else {
            results.push(missing(p));
            continue;
        };
        // Acidity correction of the method (chem::hydroxyl_method): the limits apply to the
        // corrected hydroxyl value.
        let corrected = p.key == keys::HYDROXYL_VALUE && p.acidity_correction;
        let u = guard_uncertainty(spec, p);
        let value = if corrected {
            let Some(av) = av_mean else {
                results.push(missing(p));
                continue;
            };
            match p.acidity_correction_kind {
                AcidityCorrection::Subtract => entered - av,
                _ => entered + av,
            }
        } else {
            entered
        };
        let w = if guarded {
            u.unwrap_or_default()
        } else {
            Decimal::ZERO
        };
        let exact = decimal_text(value);
        // Uncorrected, the value is the entered one: its text is written once.
        let entered = if corrected {
            decimal_text(entered)
        } else {
            exact.clone()
        };
        let mut r = decide(p, value, None, w, spec, Some(exact), u.map(to_f64));
        r.entered = Some(entered);
        results.push(r);
    }
    results
}

/// Appends the result of every derived property (Mn, Xn, ...) to `results`; true when one
/// could not be computed for want of a measured value.
fn derived_results(
    spec: &ProductSpec,
    lot: &LotResults,
    file: &str,
    means: &[(&str, Decimal)],
    results: &mut Vec<PropertyResult>,
) -> Result<bool> {
    let guarded = spec.decision_rule == DecisionRule::Guarded;
    let mean_of = |k: &str| {
        means
            .iter()
            .find(|(key, _)| *key == k)
            .map(|(_, v)| to_f64(*v))
    };
    let av = mean_of(keys::ACID_VALUE);
    let ohv = mean_of(keys::HYDROXYL_VALUE);
    let u = |k: &str| spec.property(k).and_then(|p| p.uncertainty).map(to_f64);
    let hv_corr = spec
        .property(keys::HYDROXYL_VALUE)
        .map_or(AcidityCorrection::None, |p| p.acidity_correction_kind);
    let inputs = DerivedInputs {
        av,
        ohv,
        u_av: u(keys::ACID_VALUE),
        u_ohv: u(keys::HYDROXYL_VALUE),
        acidity_correction: hv_corr,
    };
    let mut analyses = Analyses::default();
    let mut any_missing = false;
    for p in spec.properties.iter().filter(|p| p.derived) {
        let computed = derived_value_memo(spec, &p.key, &inputs, &mut analyses).map_err(|e| {
            e.at(|field| format!("{file}:{}, lot '{}', {field}", lot.line, lot.lot))
        })?;
        match computed {
            Some((value, unc)) => {
                let d = decimal_from_f64(value).unwrap_or_default();
                let w = match (guarded, unc) {
                    (true, Some(u)) => decimal_from_f64(u).unwrap_or_default(),
                    _ => Decimal::ZERO,
                };
                results.push(decide(p, d, Some(value), w, spec, None, unc));
            }
            None => {
                any_missing = true;
                results.push(missing(p));
            }
        }
    }
    Ok(any_missing)
}

fn missing(p: &Property) -> PropertyResult {
    PropertyResult {
        property: Text::from(p.key.as_str()),
        value: None,
        exact: None,
        entered: None,
        reported: None,
        unit: Text::from(p.unit.as_str()),
        verdict: None,
        uncertainty: None,
    }
}

/// The result of property `p` with `value` (as a float `float` when it was computed as one,
/// else converted from the decimal), decided with guard band `w`.
fn decide(
    p: &Property,
    value: Decimal,
    float: Option<f64>,
    w: Decimal,
    spec: &ProductSpec,
    exact: Option<Text>,
    uncertainty: Option<f64>,
) -> PropertyResult {
    let reported = round(value, p.decimals, spec.rounding);
    PropertyResult {
        value: Some(float.unwrap_or_else(|| to_f64(value))),
        exact,
        reported: Some(decimal_text(reported)),
        verdict: p.has_limit().then(|| verdict(reported, p.min, p.max, w)),
        uncertainty,
        ..missing(p)
    }
}

/// A derived value and its expanded uncertainty, or None when an input is missing.
///
/// Mn and HEW use the closed-form propagation of `chemistry`; Xn and p propagate U(AV) by a
/// central finite difference of the sensitivity coefficient (GUM, JCGM 100:2008 §5.1.3).
pub fn derived_value(
    spec: &ProductSpec,
    key: &str,
    av: Option<f64>,
    ohv: Option<f64>,
    u_av: Option<f64>,
    u_ohv: Option<f64>,
    acidity_correction: AcidityCorrection,
) -> Result<Option<(f64, Option<f64>)>> {
    let inputs = DerivedInputs {
        av,
        ohv,
        u_av,
        u_ohv,
        acidity_correction,
    };
    derived_value_memo(spec, key, &inputs, &mut Analyses::default())
}

/// The measured inputs of one lot's derived properties.
struct DerivedInputs {
    av: Option<f64>,
    ohv: Option<f64>,
    u_av: Option<f64>,
    u_ohv: Option<f64>,
    acidity_correction: AcidityCorrection,
}

/// The analyses of one lot's titration made so far: a lot's derived properties share them
/// instead of analysing the same titration once per property and per side of each finite
/// difference (issue #13, item 11). Every derived property of a lot asks first for the
/// analysis at the lot's own acid value (`own`), then perhaps at acid values beside it
/// (`beside`, by their bits; `None` where the analysis failed).
#[derive(Default)]
struct Analyses {
    own: Option<(u64, crate::chem::analysis::Analysis)>,
    beside: Vec<(u64, Option<crate::chem::analysis::Analysis>)>,
}

impl Analyses {
    /// The analysis at the lot's own acid value `av` of the titration `t` makes, made once;
    /// its error when it fails.
    fn own(
        &mut self,
        av: f64,
        t: &dyn Fn(f64) -> Titration,
        recipe: Option<&crate::chem::recipe::Recipe>,
    ) -> Result<&crate::chem::analysis::Analysis> {
        let bits = av.to_bits();
        let current = match self.own.take() {
            Some((b, a)) if b == bits => a,
            _ => analyse(&t(av), recipe)?,
        };
        Ok(&self.own.insert((bits, current)).1)
    }

    /// The recipe figures at acid value `av`, or None when there are none or the analysis
    /// fails.
    fn recipe_at(
        &mut self,
        av: f64,
        t: &dyn Fn(f64) -> Titration,
        recipe: Option<&crate::chem::recipe::Recipe>,
    ) -> Option<&crate::chem::analysis::RecipeFigures> {
        if let Some((bits, a)) = &self.own {
            if *bits == av.to_bits() {
                return a.recipe.as_ref();
            }
        }
        let i = match self
            .beside
            .iter()
            .position(|(bits, _)| *bits == av.to_bits())
        {
            Some(i) => i,
            None => {
                self.beside
                    .push((av.to_bits(), analyse(&t(av), recipe).ok()));
                self.beside.len() - 1
            }
        };
        self.beside[i].1.as_ref().and_then(|a| a.recipe.as_ref())
    }
}

/// [`derived_value`], reusing the analyses of the same lot's other derived properties.
fn derived_value_memo(
    spec: &ProductSpec,
    key: &str,
    inputs: &DerivedInputs,
    analyses: &mut Analyses,
) -> Result<Option<(f64, Option<f64>)>> {
    let DerivedInputs {
        av,
        ohv,
        u_av,
        u_ohv,
        acidity_correction,
    } = *inputs;
    let (Some(ohv), av) = (ohv, av) else {
        return Ok(None);
    };
    let needs_av = key != keys::HYDROXYL_EQUIVALENT_WEIGHT || acidity_correction.applies();
    if needs_av && av.is_none() {
        return Ok(None);
    }
    let av_v = av.unwrap_or(0.0);
    let t = |av: f64| Titration {
        av,
        ohv,
        acidity_correction,
        functionality: spec.functionality,
        u_av,
        u_ohv,
        solids_fraction: None,
    };
    let recipe = spec.recipe.as_ref();
    let a = analyses.own(av_v, &t, recipe)?;
    let (mn, mn_uncertainty) = (a.mn, a.mn_uncertainty);
    let (hew, ohv_corrected) = (a.hydroxyl_equivalent_weight, a.hydroxyl_value_corrected);
    let xn = a.recipe.as_ref().and_then(|r| r.xn_carothers);
    let extent = a.recipe.as_ref().map(|r| r.extent_of_reaction);
    let mut spread = |f: &dyn Fn(&crate::chem::analysis::RecipeFigures) -> Option<f64>| {
        let u = u_av?;
        if u == 0.0 {
            return Some(0.0);
        }
        let hi = f(analyses.recipe_at(av_v + u, &t, recipe)?)?;
        let lo = f(analyses.recipe_at((av_v - u).max(0.0), &t, recipe)?)?;
        let step = av_v + u - (av_v - u).max(0.0);
        Some(((hi - lo) / step * u).abs())
    };
    Ok(match key {
        keys::MN => mn.map(|mn| (mn, mn_uncertainty)),
        keys::HYDROXYL_EQUIVALENT_WEIGHT => hew.map(|hew| {
            let u = match (u_av, u_ohv) {
                (Some(ua), Some(uo)) => {
                    let uc = if acidity_correction.applies() {
                        (ua * ua + uo * uo).sqrt()
                    } else {
                        uo
                    };
                    Some(hew * uc / ohv_corrected)
                }
                _ => None,
            };
            (hew, u)
        }),
        keys::XN => xn.map(|x| (x, spread(&|r| r.xn_carothers))),
        keys::EXTENT_OF_REACTION => extent.map(|p| (p, spread(&|r| Some(r.extent_of_reaction)))),
        _ => None,
    })
}

/// Parses an exact decimal string (used when reading trend files back).
pub fn parse_decimal(text: &str) -> Option<Decimal> {
    Decimal::from_str(text).ok()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lot::intake::{parse, Options};
    use crate::lot::note::NoteKind;
    use std::path::Path;

    const SPEC: &str = r#"
code = "PD-2000"
name = "Linear polyester diol"
revision = "C"
effective = 2026-01-01
functionality = 2.0
decision_rule = "guarded"
retest_months = 12
[properties.acid_value]
label = "Acid value"
unit = "mg KOH/g"
max = 1.0
decimals = 2
uncertainty = 0.05
[properties.hydroxyl_value]
label = "Hydroxyl value"
unit = "mg KOH/g"
acidity_correction = true
min = 53.0
max = 59.0
decimals = 1
uncertainty = 0.8
repeatability = 1.0
[properties.viscosity]
label = "Viscosity"
unit = "mPa·s"
temperature_c = 75
andrade_b_k = 6000
max = 650
decimals = 0
uncertainty = 15
[properties.mn]
min = 1900
max = 2100
decimals = 0
"#;

    fn run(csv: &str) -> LotDecision {
        let spec = ProductSpec::parse(Path::new("s.toml"), SPEC).unwrap();
        let lots = parse("r.csv", csv.as_bytes(), Options::default()).unwrap();
        evaluate(&spec, &lots[0], "r.csv").unwrap()
    }

    #[test]
    fn clean_lot_is_released_with_mn() {
        let d = run("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nL1,PD-2000,2026-10-01,0.50,55.6,520\n");
        assert_eq!(d.status, Status::Released, "{:?}", d.notes);
        // Mn = 56100·2/(0.5 + 55.6 + 0.5) = 1982.3 (definition, acidity-corrected OHV).
        let mn = d.get("mn").unwrap();
        approx::assert_relative_eq!(mn.value.unwrap(), 112200.0 / 56.6, max_relative = 1e-12);
        assert_eq!(mn.reported.as_deref(), Some("1982"));
    }

    #[test]
    fn guard_band_holds_and_rejects() {
        let d = run("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nL1,PD-2000,2026-10-01,0.98,55.6,520\n");
        assert_eq!(d.status, Status::OnHold);
        let d = run("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nL1,PD-2000,2026-10-01,1.20,55.6,520\n");
        assert_eq!(d.status, Status::Rejected);
    }

    #[test]
    fn hydroxyl_limits_apply_to_the_corrected_value() {
        // ISO 4629-2: OHV = raw acetylation value + AV. Raw 53.5 + AV 0.5 = 54.0 passes the
        // 53.0 minimum with U = √(0.8² + 0.05²) = 0.8016 (GUM); 53.5 alone would be conditional.
        let d = run("lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nL1,PD-2000,2026-10-01,0.5,53.5,520\n");
        let ohv = d.get("hydroxyl_value").unwrap();
        assert_eq!(ohv.reported.as_deref(), Some("54.0"));
        assert_eq!(ohv.entered.as_deref(), Some("53.5"));
        assert_eq!(ohv.verdict, Some(Verdict::Pass));
        approx::assert_relative_eq!(ohv.uncertainty.unwrap(), 0.801561, epsilon = 1e-6);
    }

    #[test]
    fn isocyanate_method_subtracts_the_acid_value_issue_18() {
        // ASTM E1899 measures OHV + AV (chem::hydroxyl_method): raw 56.1 − AV 0.5 = 55.6, and
        // Mn = 56100·2/(0.5 + 55.6) = 2000.0 (definition of the OHV; S equals the raw result).
        let text = SPEC.replace(
            "acidity_correction = true",
            "method = \"ASTM E1899\"\nacidity_correction = true",
        );
        let spec = ProductSpec::parse(Path::new("s.toml"), &text).unwrap();
        let csv = "lot,product,manufactured,acid_value,hydroxyl_value,viscosity\nL1,PD-2000,2026-10-01,0.50,56.1,520\n";
        let lots = parse("r.csv", csv.as_bytes(), Options::default()).unwrap();
        let d = evaluate(&spec, &lots[0], "r.csv").unwrap();
        let ohv = d.get("hydroxyl_value").unwrap();
        assert_eq!(ohv.reported.as_deref(), Some("55.6"));
        assert_eq!(ohv.entered.as_deref(), Some("56.1"));
        let mn = d.get("mn").unwrap();
        approx::assert_relative_eq!(mn.value.unwrap(), 112200.0 / 56.1, max_relative = 1e-12);
    }

    #[test]
    fn missing_property_is_incomplete() {
        let d = run(
            "lot,product,manufactured,acid_value,hydroxyl_value\nL1,PD-2000,2026-10-01,0.5,55.6\n",
        );
        assert_eq!(d.status, Status::Incomplete);
    }

    #[test]
    fn units_and_temperature_are_converted() {
        // 0.52 Pa·s = 520 mPa·s (SI).
        let d = run(
            "lot,product,property,value,unit,temperature_c,manufactured\n\
                     L1,PD-2000,acid_value,0.5,mg KOH/g,,2026-10-01\n\
                     L1,PD-2000,hydroxyl_value,55.6,mg KOH/g,,\n\
                     L1,PD-2000,viscosity,0.52,Pa·s,75,\n",
        );
        approx::assert_relative_eq!(d.get("viscosity").unwrap().value.unwrap(), 520.0);
        let d = run(
            "lot,product,property,value,unit,temperature_c,manufactured\n\
                     L1,PD-2000,acid_value,0.5,mg KOH/g,,2026-10-01\n\
                     L1,PD-2000,hydroxyl_value,55.6,mg KOH/g,,\n\
                     L1,PD-2000,viscosity,400,mPa·s,80,\n",
        );
        let expected = andrade_correct(400.0, 80.0, 75.0, 6000.0);
        approx::assert_relative_eq!(
            d.get("viscosity").unwrap().value.unwrap(),
            expected,
            max_relative = 1e-9
        );
        assert!(d
            .notes
            .iter()
            .any(|n| n.kind == NoteKind::TemperatureCorrected && n.text.contains("Andrade")));
    }

    #[test]
    fn andrade_correction_direction() {
        // A liquid is more viscous when colder (Andrade 1930): B > 0 raises η from 80 to 75 °C;
        // by hand: exp(6000·(1/348.15 − 1/353.15)) = exp(0.244003) = 1.276349.
        approx::assert_relative_eq!(
            andrade_correct(100.0, 80.0, 75.0, 6000.0),
            127.6349,
            epsilon = 1e-3
        );
    }

    #[test]
    fn replicate_range_over_repeatability_holds_the_lot() {
        let d = run("lot,product,property,value,replicate,manufactured\n\
                     L1,PD-2000,acid_value,0.5,1,2026-10-01\n\
                     L1,PD-2000,hydroxyl_value,55.0,1,\n\
                     L1,PD-2000,hydroxyl_value,56.5,2,\n\
                     L1,PD-2000,viscosity,520,1,\n");
        assert_eq!(d.status, Status::OnHold);
        assert!(
            d.notes
                .iter()
                .any(|n| n.kind == NoteKind::RepeatabilityExceeded
                    && n.text.contains("repeatability"))
        );
    }

    // Test fixture (invented): text and below-LOQ properties (issue #15).
    const TW: &str = r#"
code = "TW-10"
name = "Test"
revision = "A"
effective = 2026-01-01
functionality = 2.0
decision_rule = "guarded"
retest_months = 12
[properties.water]
label = "Water"
unit = "%"
max = 0.05
decimals = 2
uncertainty = 0.01
loq = 0.01
[properties.appearance]
label = "Appearance"
kind = "text"
allowed = ["clear", "hazy"]
conforming = ["clear"]
"#;

    fn run_tw(csv: &str) -> Result<LotDecision> {
        let spec = ProductSpec::parse(Path::new("s.toml"), TW).unwrap();
        let opts = Options {
            text_keys: ["appearance".to_string()].into_iter().collect(),
            ..Options::default()
        };
        let lots = parse("r.csv", csv.as_bytes(), opts).unwrap();
        evaluate(&spec, &lots[0], "r.csv")
    }

    #[test]
    fn words_and_censored_results_are_decided_issue_15() {
        let head = "lot,product,manufactured,water,appearance\n";
        let d = run_tw(&format!("{head}L1,TW-10,2026-10-01,<0.01,CLEAR\n")).unwrap();
        assert_eq!(d.status, Status::Released);
        let w = d.get("water").unwrap();
        // Stored as <L, reported "< 0.01", no number; U = 0.01: 0.01 <= 0.05 - 0.01 passes.
        assert_eq!(
            (w.exact.as_deref(), w.reported.as_deref(), w.value),
            (Some("<0.01"), Some("< 0.01"), None)
        );
        assert_eq!(w.verdict, Some(Verdict::Pass));
        let a = d.get("appearance").unwrap();
        assert_eq!(a.exact.as_deref(), Some("clear"));
        // 0.045 > 0.05 - 0.01: conditional pass, the lot is held; a non-conforming word fails.
        let d = run_tw(&format!("{head}L1,TW-10,2026-10-01,<0.045,hazy\n")).unwrap();
        assert_eq!(
            d.get("water").unwrap().verdict,
            Some(Verdict::ConditionalPass)
        );
        assert_eq!(d.get("appearance").unwrap().verdict, Some(Verdict::Fail));
        assert_eq!(d.status, Status::Rejected);
        // nd is censored at the LOQ.
        let d = run_tw(&format!("{head}L1,TW-10,2026-10-01,ND,clear\n")).unwrap();
        assert_eq!(d.get("water").unwrap().exact.as_deref(), Some("<0.01"));
        for (cells, want) in [
            ("<0.06,clear", "above the maximum"),
            ("<0.001,clear", "below the limit of quantification"),
            ("0.02,cloudy", "not one of the words"),
        ] {
            let e = run_tw(&format!("{head}L1,TW-10,2026-10-01,{cells}\n")).unwrap_err();
            assert!(e.to_string().contains(want), "{want}: {e}");
        }
    }

    #[test]
    fn unknown_unit_is_refused() {
        let spec = ProductSpec::parse(Path::new("s.toml"), SPEC).unwrap();
        let lots = parse(
            "r.csv",
            b"lot,product,property,value,unit,manufactured\nL1,PD-2000,viscosity,5,St,2026-10-01\n",
            Options::default(),
        )
        .unwrap();
        let e = evaluate(&spec, &lots[0], "r.csv").unwrap_err().to_string();
        assert!(e.contains("unit 'St' cannot be converted"), "{e}");
    }
}
