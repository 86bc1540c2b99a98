//! Product specifications: one TOML file per product revision, chosen by effective date.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use chrono::NaiveDate;
use indexmap::IndexMap;
use rust_decimal::Decimal;
use serde::Deserialize;

use crate::chem::hydroxyl_method::{self, AcidityCorrection};
use crate::chem::recipe::Recipe;
use crate::error::{Error, Result};
use crate::spec::decision::{decimal_from_f64, DecisionRule, Rounding};
use crate::spec::keys;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SpecFile {
    code: String,
    name: String,
    revision: String,
    effective: toml::value::Datetime,
    functionality: f64,
    decision_rule: DecisionRule,
    recipe: Option<String>,
    retest_months: u32,
    #[serde(default)]
    rounding: Rounding,
    #[serde(default)]
    properties: IndexMap<String, PropertyFile>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct PropertyFile {
    label: Option<String>,
    unit: Option<String>,
    method: Option<String>,
    kind: Option<String>,
    allowed: Option<Vec<String>>,
    conforming: Option<Vec<String>>,
    loq: Option<f64>,
    min: Option<f64>,
    max: Option<f64>,
    decimals: Option<u32>,
    uncertainty: Option<f64>,
    acidity_correction: Option<AcidityField>,
    temperature_c: Option<f64>,
    andrade_b_k: Option<f64>,
    repeatability: Option<f64>,
}

/// What a property's results are: numbers (the default) or words from a fixed list.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub enum Kind {
    /// A number, rounded and decided against limits.
    #[default]
    Number,
    /// One of `allowed` (matched case-insensitively, kept as written in the spec); it passes
    /// when it is one of `conforming` and fails otherwise (`kind = "text"`).
    Text {
        /// Every word a result may be, as written in the spec.
        allowed: Vec<String>,
        /// The words that conform (a subset of `allowed`).
        conforming: Vec<String>,
    },
}

/// `acidity_correction` as written: the historical flag or a named correction.
#[derive(Debug, Deserialize)]
#[serde(untagged, expecting = "true, false, \"add\", \"none\" or \"subtract\"")]
enum AcidityField {
    /// true: results are entered raw, corrected as the method's row of the table says
    /// (add when the method is not in the table); false: entered already corrected.
    Flag(bool),
    /// "add", "none" or "subtract".
    Named(String),
}

/// One property of a product spec, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct Property {
    /// Key used in results files, trend files and JSON.
    pub key: String,
    /// Label for people and certificates.
    pub label: String,
    /// Unit as written on the certificate.
    pub unit: String,
    /// Test method, when stated.
    pub method: Option<String>,
    /// Lower specification limit.
    pub min: Option<Decimal>,
    /// Upper specification limit.
    pub max: Option<Decimal>,
    /// Reporting precision (decimal places).
    pub decimals: u32,
    /// Expanded uncertainty U (k = 2), in `unit`.
    pub uncertainty: Option<Decimal>,
    /// Hydroxyl value entered raw: AV enters it as `acidity_correction_kind` says.
    pub acidity_correction: bool,
    /// How AV corrects a raw hydroxyl value (add, none, subtract), from the method table
    /// ([`crate::chem::hydroxyl_method::METHODS`]) or written in the spec; `None` exactly when
    /// `acidity_correction` is false.
    pub acidity_correction_kind: AcidityCorrection,
    /// Spec temperature of a viscosity, °C.
    pub temperature_c: Option<f64>,
    /// Andrade coefficient B (K) in ln η = A + B/T, for temperature correction.
    pub andrade_b_k: Option<f64>,
    /// Largest allowed range between replicates.
    pub repeatability: Option<Decimal>,
    /// True for computed properties (mn, xn, ...).
    pub derived: bool,
    /// Numbers or words.
    pub kind: Kind,
    /// Limit of quantification: a result entered as `<x` or `nd` is censored (below it).
    pub loq: Option<Decimal>,
}

impl Property {
    /// True when the property has at least one limit (a text property always has: its list of
    /// conforming words).
    pub fn has_limit(&self) -> bool {
        self.min.is_some() || self.max.is_some() || self.is_text()
    }

    /// True for a `kind = "text"` property.
    pub fn is_text(&self) -> bool {
        matches!(self.kind, Kind::Text { .. })
    }

    /// The allowed word matching `entered` case-insensitively, as written in the spec.
    pub fn allowed_word(&self, entered: &str) -> Option<&str> {
        match &self.kind {
            Kind::Text { allowed, .. } => allowed
                .iter()
                .find(|w| w.to_lowercase() == entered.trim().to_lowercase())
                .map(String::as_str),
            Kind::Number => None,
        }
    }

    /// True when `word` (as written in the spec) is a conforming result.
    pub fn conforms(&self, word: &str) -> bool {
        matches!(&self.kind, Kind::Text { conforming, .. } if conforming.iter().any(|c| c == word))
    }
}

/// One product revision, validated, with its recipe loaded.
#[derive(Debug, Clone)]
pub struct ProductSpec {
    /// Product code.
    pub code: String,
    /// Product name.
    pub name: String,
    /// Revision label.
    pub revision: String,
    /// First manufacture date this revision applies to.
    pub effective: NaiveDate,
    /// End groups per molecule for the end-group Mn.
    pub functionality: f64,
    /// The decision rule.
    pub decision_rule: DecisionRule,
    /// Rounding method for reported values.
    pub rounding: Rounding,
    /// Months from manufacture to the retest date.
    pub retest_months: u32,
    /// The recipe, when the spec names one.
    pub recipe: Option<Recipe>,
    /// Properties in the file's order.
    pub properties: Vec<Property>,
    /// The file it came from.
    pub path: PathBuf,
    /// SHA-256 (lower-case hex) of the file's bytes as read: recorded on every lot decided
    /// on this revision, so an edit of the revision after use is found.
    pub sha256: std::sync::Arc<str>,
}

impl ProductSpec {
    /// Finds a property by key.
    pub fn property(&self, key: &str) -> Option<&Property> {
        self.properties.iter().find(|p| p.key == key)
    }

    /// Measured (entered) properties.
    pub fn measured(&self) -> impl Iterator<Item = &Property> {
        self.properties.iter().filter(|p| !p.derived)
    }

    /// Parses and validates one spec file's text; `path` locates the recipe and names errors.
    pub fn parse(path: &Path, text: &str) -> Result<ProductSpec> {
        let file = path.display().to_string();
        let raw: SpecFile = crate::support::tomlfile::parse(&file, text)?;
        let bad = |what: &str, problem: String, fix: &str| {
            Error::invalid(format!("{file}: {what}"), problem, fix)
        };
        if !crate::support::ids::is_product_code(&raw.code) {
            return Err(bad(
                "code",
                format!("'{}' is not a usable product code", raw.code),
                "Use letters, digits, '-', '_' or '.', starting with a letter or digit; \
                 'certificates', 'heads' and 'quarantine' name the register's own files.",
            ));
        }
        // Issue #13 item 6: every text that reaches a trend-file row or a certificate is one
        // printable line, so the row can be read back.
        crate::support::text::check_line(&format!("{file}: name"), "product name", &raw.name, 200)?;
        crate::support::text::check_line(
            &format!("{file}: revision"),
            "revision",
            &raw.revision,
            40,
        )?;
        let effective =
            NaiveDate::parse_from_str(&raw.effective.to_string(), "%Y-%m-%d").map_err(|_| {
                bad(
                    "effective",
                    format!("'{}' is not a plain date", raw.effective),
                    "Write the date as YYYY-MM-DD without quotes, e.g. effective = 2026-09-01.",
                )
            })?;
        // Bounds of plausibility, common practice: an average functionality from 1 (a
        // monofunctional end-capper) to 20 (dendritic polyols stay far below), and a retest
        // interval of at most ten years.
        crate::error::positive(&format!("{file}: functionality"), raw.functionality)?;
        crate::error::within(
            &format!("{file}: functionality"),
            raw.functionality,
            1.0,
            20.0,
            "",
        )?;
        if !(1..=120).contains(&raw.retest_months) {
            return Err(bad(
                "retest_months",
                format!(
                    "{} months is not a usable retest interval",
                    raw.retest_months
                ),
                "Give the retest interval in months, from 1 to 120.",
            ));
        }
        let recipe = match &raw.recipe {
            Some(rel) => {
                let p = path.parent().unwrap_or(Path::new(".")).join(rel);
                Some(Recipe::load(&p)?)
            }
            None => None,
        };
        if raw.properties.is_empty() {
            return Err(bad(
                "properties",
                "the spec has no [properties.*] tables".into(),
                "Add one table per property, e.g. [properties.acid_value].",
            ));
        }
        let mut properties = Vec::new();
        for (key, p) in &raw.properties {
            properties.push(property(
                &file,
                key,
                p,
                raw.decision_rule,
                recipe.is_some(),
            )?);
        }
        let spec = ProductSpec {
            code: raw.code,
            name: raw.name,
            revision: raw.revision,
            effective,
            functionality: raw.functionality,
            decision_rule: raw.decision_rule,
            rounding: raw.rounding,
            retest_months: raw.retest_months,
            recipe,
            properties,
            path: path.to_path_buf(),
            sha256: crate::support::audit::sha256_hex(text.as_bytes()).into(),
        };
        for needs in keys::DERIVED {
            if spec.property(needs).is_none() {
                continue;
            }
            for input in keys::inputs_of(needs) {
                if spec.property(input).is_none_or(|p| p.derived) {
                    return Err(bad(
                        &format!("properties.{needs}"),
                        format!("'{needs}' cannot be computed without a measured '{input}'"),
                        &format!("Add [properties.{input}] or remove [properties.{needs}]."),
                    ));
                }
            }
        }
        if let (Some(hv), None) = (
            spec.property(keys::HYDROXYL_VALUE),
            spec.property(keys::ACID_VALUE),
        ) {
            if hv.acidity_correction {
                return Err(bad(
                    "properties.hydroxyl_value.acidity_correction",
                    "the acidity correction needs the acid value, which the spec does not measure"
                        .into(),
                    "Add [properties.acid_value] or set acidity_correction = false.",
                ));
            }
        }
        Ok(spec)
    }
}

fn dec(file: &str, key: &str, field: &str, v: Option<f64>) -> Result<Option<Decimal>> {
    match v {
        None => Ok(None),
        Some(x) => {
            let place = format!("{file}: properties.{key}.{field}");
            if !x.is_finite() {
                return Err(Error::invalid(
                    place,
                    "the value is not finite",
                    "Enter a number.",
                ));
            }
            Ok(Some(decimal_from_f64(x).ok_or_else(|| {
                Error::invalid(place, "the value is out of range", "Enter a plain number.")
            })?))
        }
    }
}

/// Validates one `[properties.<key>]` table into a [`Property`], in three steps: the key,
/// the unit and label, then the limits and the fields that belong to one property only.
fn property(
    file: &str,
    key: &str,
    p: &PropertyFile,
    rule: DecisionRule,
    has_recipe: bool,
) -> Result<Property> {
    let place = |field: &str| format!("{file}: properties.{key}{field}");
    check_key(&place(""), key, p, has_recipe)?;
    for (field, what, text) in [
        (".label", "label", &p.label),
        (".unit", "unit", &p.unit),
        (".method", "method", &p.method),
    ] {
        if let Some(t) = text.as_deref().filter(|t| !t.trim().is_empty()) {
            crate::support::text::check_line(&place(field), what, t, 200)?;
        }
    }
    let derived = keys::is_derived(key);
    let kind = kind(&place, key, p)?;
    if kind != Kind::Number {
        return text_property(&place, key, p, kind);
    }
    let (unit, label) = unit_and_label(&place, key, p, derived)?;
    let Some(decimals) = p.decimals else {
        return Err(Error::invalid(
            place(".decimals"),
            "the reporting precision is missing",
            "Add decimals = N, the number of decimal places results are reported with.",
        ));
    };
    if decimals > 10 {
        return Err(Error::invalid(
            place(".decimals"),
            format!("{decimals} decimal places is more than any method resolves"),
            "Use 0 to 10.",
        ));
    }
    let (min, max, uncertainty) = limits(file, key, p, rule, derived)?;
    let loq = loq(file, key, p, derived, max)?;
    check_property_fields(&place, key, p)?;
    check_physical_ranges(&place, p)?;
    let acidity = acidity_correction(&place, p)?;
    Ok(Property {
        key: key.to_string(),
        label,
        unit,
        method: p.method.clone(),
        min,
        max,
        decimals,
        uncertainty,
        acidity_correction: acidity.applies(),
        acidity_correction_kind: acidity,
        temperature_c: p.temperature_c,
        andrade_b_k: p.andrade_b_k,
        repeatability: dec(file, key, "repeatability", p.repeatability)?,
        derived,
        kind: Kind::Number,
        loq,
    })
}

/// The property's kind from `kind = "number" | "text"` (default number); `allowed` and
/// `conforming` belong to text properties only.
fn kind(place: &impl Fn(&str) -> String, key: &str, p: &PropertyFile) -> Result<Kind> {
    match p.kind.as_deref() {
        None | Some("number") => {
            if p.allowed.is_some() || p.conforming.is_some() {
                return Err(Error::invalid(
                    place(""),
                    "allowed and conforming belong to text properties",
                    "Add kind = \"text\", or remove allowed and conforming.",
                ));
            }
            Ok(Kind::Number)
        }
        Some("text") => {
            // The end-group inputs and the viscosity feed calculations: they stay numbers.
            if keys::is_derived(key)
                || [keys::ACID_VALUE, keys::HYDROXYL_VALUE, keys::VISCOSITY].contains(&key)
            {
                return Err(Error::invalid(
                    place(".kind"),
                    format!("'{key}' is used in calculations and must be a number"),
                    "Remove kind = \"text\", or use another key for a text result.",
                ));
            }
            let allowed = text_words(&place(".allowed"), p.allowed.as_deref().unwrap_or(&[]))?;
            let given = text_words(
                &place(".conforming"),
                p.conforming.as_deref().unwrap_or(&[]),
            )?;
            let mut conforming = Vec::new();
            for w in &given {
                let Some(a) = allowed
                    .iter()
                    .find(|a| a.to_lowercase() == w.to_lowercase())
                else {
                    return Err(Error::invalid(
                        place(".conforming"),
                        format!("'{w}' is not one of the allowed words"),
                        "List every conforming word in allowed as well.",
                    ));
                };
                conforming.push(a.clone());
            }
            Ok(Kind::Text {
                allowed,
                conforming,
            })
        }
        Some(other) => Err(Error::invalid(
            place(".kind"),
            format!("'{other}' is not a kind of property"),
            "Use kind = \"number\" (the default) or kind = \"text\".",
        )),
    }
}

/// A non-empty list of distinct (case-insensitively) printable words, none of which could be
/// read as a number or a censored result (so a recorded cell says which it is).
fn text_words(place: &str, words: &[String]) -> Result<Vec<String>> {
    if words.is_empty() {
        return Err(Error::invalid(
            place,
            "the list is missing or empty",
            "List the words as they are reported, e.g. [\"clear\", \"hazy\"].",
        ));
    }
    let mut out: Vec<String> = Vec::new();
    for w in words {
        let w = w.trim();
        crate::support::text::check_line(place, "word", w, 40)?;
        if w.is_empty()
            || w.starts_with('<')
            || w.eq_ignore_ascii_case("nd")
            || w.parse::<f64>().is_ok()
        {
            return Err(Error::invalid(
                place,
                format!("'{w}' cannot be a word result: it is empty or reads as a number"),
                "Use words such as \"clear\" or \"conforms\".",
            ));
        }
        if out.iter().any(|o| o.to_lowercase() == w.to_lowercase()) {
            return Err(Error::invalid(
                place,
                format!("'{w}' is listed twice"),
                "List each word once (words are matched regardless of case).",
            ));
        }
        out.push(w.to_string());
    }
    Ok(out)
}

/// A text property: label and unit (optional, empty), the word lists, and none of the
/// numeric fields.
fn text_property(
    place: &impl Fn(&str) -> String,
    key: &str,
    p: &PropertyFile,
    kind: Kind,
) -> Result<Property> {
    let numeric = [
        ("min", p.min.is_some()),
        ("max", p.max.is_some()),
        ("decimals", p.decimals.is_some()),
        ("uncertainty", p.uncertainty.is_some()),
        ("loq", p.loq.is_some()),
        ("repeatability", p.repeatability.is_some()),
        ("acidity_correction", p.acidity_correction.is_some()),
        ("temperature_c", p.temperature_c.is_some()),
        ("andrade_b_k", p.andrade_b_k.is_some()),
    ];
    if let Some((field, _)) = numeric.iter().find(|(_, given)| *given) {
        return Err(Error::invalid(
            place(&format!(".{field}")),
            format!("a text property has no {field}"),
            "Remove this line; a text result is decided by its conforming words.",
        ));
    }
    let Some(label) = given(&p.label) else {
        return Err(Error::invalid(
            place(".label"),
            "the label is missing",
            "Add label = \"...\", the name printed on certificates.",
        ));
    };
    Ok(Property {
        key: key.to_string(),
        label: label.to_string(),
        unit: given(&p.unit).unwrap_or("").to_string(),
        method: p.method.clone(),
        min: None,
        max: None,
        decimals: 0,
        uncertainty: None,
        acidity_correction: false,
        acidity_correction_kind: Default::default(),
        temperature_c: None,
        andrade_b_k: None,
        repeatability: None,
        derived: false,
        kind,
        loq: None,
    })
}

/// The limit of quantification: measured, non-end-group properties only (Mn, Xn and p need
/// quantified titrations), positive, and at most the maximum (else no result below it could
/// show conformity).
fn loq(
    file: &str,
    key: &str,
    p: &PropertyFile,
    derived: bool,
    max: Option<Decimal>,
) -> Result<Option<Decimal>> {
    let place = format!("{file}: properties.{key}.loq");
    let Some(loq) = dec(file, key, "loq", p.loq)? else {
        return Ok(None);
    };
    if derived || key == keys::ACID_VALUE || key == keys::HYDROXYL_VALUE {
        return Err(Error::invalid(
            place,
            format!("'{key}' must be quantified: Mn, Xn and p are calculated from it"),
            "Remove loq; enter the titration result as a number.",
        ));
    }
    if loq <= Decimal::ZERO {
        return Err(Error::invalid(
            place,
            format!("{loq} is not a usable limit of quantification"),
            "Give the limit of quantification as a positive number in the property's unit.",
        ));
    }
    if let Some(m) = max.filter(|m| loq > *m) {
        return Err(Error::invalid(
            place,
            format!("the limit of quantification {loq} is above the maximum {m}"),
            "A result below the LOQ must be able to conform: check the LOQ and the limit.",
        ));
    }
    Ok(Some(loq))
}

/// The key is well formed, and a derived key can be computed from what the spec holds.
fn check_key(place: &str, key: &str, p: &PropertyFile, has_recipe: bool) -> Result<()> {
    if !keys::is_valid(key) {
        return Err(Error::invalid(
            place,
            format!("'{key}' is not a usable property key"),
            "Use lower-case letters, digits and '_', starting with a letter (e.g. acid_value).",
        ));
    }
    if keys::needs_recipe(key) && !has_recipe {
        return Err(Error::invalid(
            place,
            format!("'{key}' cannot be computed without a recipe"),
            "Add recipe = \"recipes/<file>.toml\" to the spec, or remove this property.",
        ));
    }
    if key == keys::MN && p.uncertainty.is_some() {
        return Err(Error::invalid(
            format!("{place}.uncertainty"),
            "the uncertainty of Mn is computed from those of AV and OHV, not given",
            "Remove this line; give uncertainties on acid_value and hydroxyl_value.",
        ));
    }
    Ok(())
}

/// The unit and label as given, or a derived property's defaults.
fn unit_and_label(
    place: &impl Fn(&str) -> String,
    key: &str,
    p: &PropertyFile,
    derived: bool,
) -> Result<(String, String)> {
    let unit = match (given(&p.unit), keys::default_unit(key)) {
        (Some(u), _) | (None, Some(u)) => u.to_string(),
        (None, None) => {
            return Err(Error::invalid(
                place(".unit"),
                "the unit is missing",
                "Add unit = \"...\", e.g. unit = \"mg KOH/g\".",
            ))
        }
    };
    let label = match (
        given(&p.label),
        keys::default_label(key).filter(|_| derived),
    ) {
        (Some(l), _) | (None, Some(l)) => l.to_string(),
        (None, None) => {
            return Err(Error::invalid(
                place(".label"),
                "the label is missing",
                "Add label = \"...\", the name printed on certificates.",
            ))
        }
    };
    Ok((unit, label))
}

/// Lower and upper limits and the expanded uncertainty, checked against each other and the
/// decision rule (the guarded rule needs U on every limited measured property).
fn limits(
    file: &str,
    key: &str,
    p: &PropertyFile,
    rule: DecisionRule,
    derived: bool,
) -> Result<(Option<Decimal>, Option<Decimal>, Option<Decimal>)> {
    let place = |field: &str| format!("{file}: properties.{key}{field}");
    let min = dec(file, key, "min", p.min)?;
    let max = dec(file, key, "max", p.max)?;
    if let (Some(lo), Some(hi)) = (min, max) {
        if lo > hi {
            return Err(Error::invalid(
                place(""),
                format!("min {lo} is greater than max {hi}"),
                "Swap or correct the limits.",
            ));
        }
    }
    let uncertainty = dec(file, key, "uncertainty", p.uncertainty)?;
    if uncertainty.is_some_and(|u| u.is_sign_negative()) {
        return Err(Error::invalid(
            place(".uncertainty"),
            "the uncertainty is negative",
            "Give the expanded uncertainty U (k = 2) as a positive number.",
        ));
    }
    if rule == DecisionRule::Guarded
        && !derived
        && (min.is_some() || max.is_some())
        && uncertainty.is_none()
    {
        return Err(Error::invalid(
            place(".uncertainty"),
            "the guarded decision rule needs the expanded uncertainty of every limited property",
            "Add uncertainty = U (k = 2, in the property's unit), or use decision_rule = \"simple\".",
        ));
    }
    Ok((min, max, uncertainty))
}

/// The viscosity's spec temperature, its Andrade constant and the repeatability must be finite
/// and physically sensible (issue #13 item 19). Bounds, common practice: resin viscosities are
/// measured from -40 °C to 300 °C; Andrade's B = E_a/R lies well inside 100–50 000 K for
/// polyester melts and solutions (Andrade, Nature 125, 1930, for the form ln η = A + B/T).
fn check_physical_ranges(place: &impl Fn(&str) -> String, p: &PropertyFile) -> Result<()> {
    if let Some(t) = p.temperature_c {
        crate::error::within(&place(".temperature_c"), t, -40.0, 300.0, "°C")?;
    }
    if let Some(b) = p.andrade_b_k {
        crate::error::within(&place(".andrade_b_k"), b, 100.0, 50_000.0, "K")?;
    }
    if let Some(r) = p.repeatability {
        crate::error::non_negative(&place(".repeatability"), r)?;
    }
    Ok(())
}

/// A text field as given, trimmed, or `None` when absent or blank.
fn given(v: &Option<String>) -> Option<&str> {
    v.as_deref().map(str::trim).filter(|t| !t.is_empty())
}

/// The acidity correction of a hydroxyl value: `true` takes the method's row of
/// [`hydroxyl_method::METHODS`] (add for a method not in the table, the historical meaning);
/// a named correction that contradicts the method's row is refused.
fn acidity_correction(
    place: &impl Fn(&str) -> String,
    p: &PropertyFile,
) -> Result<AcidityCorrection> {
    let row = p.method.as_deref().and_then(hydroxyl_method::lookup);
    let kind = match &p.acidity_correction {
        None | Some(AcidityField::Flag(false)) => return Ok(AcidityCorrection::None),
        Some(AcidityField::Flag(true)) => row.map_or(AcidityCorrection::Add, |r| r.correction),
        Some(AcidityField::Named(name)) => AcidityCorrection::parse(name).ok_or_else(|| {
            Error::invalid(
                place(".acidity_correction"),
                format!("'{}' is not an acidity correction", name.escape_debug()),
                "Write \"add\" (the method measures OHV − AV), \"subtract\" (OHV + AV), \"none\", or true to follow the method's row.",
            )
        })?,
    };
    if let Some(r) = row.filter(|r| kind.applies() && r.correction != kind) {
        return Err(Error::invalid(
            place(".acidity_correction"),
            format!(
                "\"{}\" contradicts the method {}, which measures {} and so needs \"{}\"",
                kind.name(),
                r.designation,
                r.measures,
                r.correction.name()
            ),
            format!(
                "Write acidity_correction = \"{}\" (or true), or correct the method name.",
                r.correction.name()
            ),
        ));
    }
    Ok(kind)
}

/// Fields that belong to one property only: the acidity correction to the hydroxyl value,
/// the spec temperature and Andrade constant to the viscosity.
fn check_property_fields(
    place: &impl Fn(&str) -> String,
    key: &str,
    p: &PropertyFile,
) -> Result<()> {
    if p.acidity_correction.is_some() && key != keys::HYDROXYL_VALUE {
        return Err(Error::invalid(
            place(".acidity_correction"),
            "only hydroxyl_value takes an acidity correction",
            "Remove this line.",
        ));
    }
    if (p.temperature_c.is_some() || p.andrade_b_k.is_some()) && key != keys::VISCOSITY {
        return Err(Error::invalid(
            place(""),
            "temperature_c and andrade_b_k belong to viscosity only",
            "Remove them, or rename the property to viscosity.",
        ));
    }
    if p.andrade_b_k.is_some() && p.temperature_c.is_none() {
        return Err(Error::invalid(
            place(".andrade_b_k"),
            "a temperature correction needs the spec temperature",
            "Add temperature_c = ... (°C).",
        ));
    }
    Ok(())
}

/// Retest date: the manufacture date plus `months` calendar months; a day past the end of the
/// target month falls back to its last day (31 January + 1 month = 28 or 29 February).
/// `None` only when the date would leave chrono's range.
pub fn retest_date(manufactured: NaiveDate, months: u32) -> Option<NaiveDate> {
    manufactured.checked_add_months(chrono::Months::new(months))
}

/// Every product spec in a folder (top level only), grouped by code and sorted by date.
#[derive(Debug, Clone, Default)]
pub struct SpecSet {
    /// Product code to its revisions, oldest first.
    pub products: BTreeMap<String, Vec<ProductSpec>>,
    /// The folder they came from.
    pub dir: PathBuf,
}

/// Compares revision labels: shorter first, then alphabetical ("B" < "C" < "AA", "9" < "10").
fn revision_order(a: &str, b: &str) -> std::cmp::Ordering {
    a.len().cmp(&b.len()).then_with(|| a.cmp(b))
}

impl SpecSet {
    /// Loads and validates every `*.toml` directly inside `dir`.
    pub fn load(dir: &Path) -> Result<SpecSet> {
        let entries = std::fs::read_dir(dir).map_err(|e| Error::io(dir, "reading folder", e))?;
        let mut paths: Vec<PathBuf> = entries
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.is_file() && p.extension().is_some_and(|x| x == "toml"))
            .collect();
        paths.sort();
        let mut products: BTreeMap<String, Vec<ProductSpec>> = BTreeMap::new();
        for path in paths {
            let text = read_text(&path)?;
            let spec = ProductSpec::parse(&path, &text)?;
            products.entry(spec.code.clone()).or_default().push(spec);
        }
        for revs in products.values_mut() {
            revs.sort_by_key(|s| s.effective);
            for pair in revs.windows(2) {
                let (old, new) = (&pair[0], &pair[1]);
                if old.effective == new.effective {
                    return Err(Error::invalid(
                        new.path.display().to_string(),
                        format!(
                            "{} revisions {} and {} are both effective from {} ({} also)",
                            new.code,
                            old.revision,
                            new.revision,
                            new.effective,
                            old.path.display()
                        ),
                        "Give the newer revision a later effective date.",
                    ));
                }
                if revision_order(&new.revision, &old.revision) != std::cmp::Ordering::Greater {
                    return Err(Error::invalid(
                        new.path.display().to_string(),
                        format!(
                            "{} revision {} (effective {}) does not come after revision {} (effective {})",
                            new.code, new.revision, new.effective, old.revision, old.effective
                        ),
                        "Revisions must go forward with the effective date; correct the revision label or the date.",
                    ));
                }
            }
        }
        if products.is_empty() {
            return Err(Error::invalid(
                dir.display().to_string(),
                "no product spec files (*.toml) found",
                "Point --specs at the folder holding the product specs.",
            ));
        }
        Ok(SpecSet {
            products,
            dir: dir.to_path_buf(),
        })
    }

    /// The revision of `code` in effect on `date`.
    pub fn for_date(&self, code: &str, date: NaiveDate) -> Result<&ProductSpec> {
        let revs = self.products.get(code).ok_or_else(|| {
            let known: Vec<&str> = self.products.keys().map(String::as_str).collect();
            Error::invalid(
                format!("product '{code}'"),
                format!("no spec in {} has this code", self.dir.display()),
                format!("Known products: {}.", known.join(", ")),
            )
        })?;
        revs.iter()
            .rev()
            .find(|s| s.effective <= date)
            .ok_or_else(|| {
                Error::invalid(
                    format!("product '{code}', manufactured {date}"),
                    format!(
                        "no revision is effective yet on that date (the earliest, {}, starts {})",
                        revs[0].revision, revs[0].effective
                    ),
                    "Check the manufacture date, or add the revision that applied then.",
                )
            })
    }

    /// Revision `revision` of `code`, as recorded on a lot.
    pub fn revision(&self, code: &str, revision: &str) -> Option<&ProductSpec> {
        self.products
            .get(code)?
            .iter()
            .find(|s| s.revision == revision)
    }

    /// The newest revision of `code`.
    pub fn latest(&self, code: &str) -> Option<&ProductSpec> {
        self.products.get(code).and_then(|v| v.last())
    }

    /// Every property key that is a text property in some revision of some product: a
    /// results file reads those cells as words.
    pub fn text_keys(&self) -> std::collections::BTreeSet<String> {
        self.products
            .values()
            .flatten()
            .flat_map(|s| s.properties.iter())
            .filter(|p| p.is_text())
            .map(|p| p.key.clone())
            .collect()
    }

    /// Every property key used by any revision of `code`, in first-seen order.
    pub fn all_keys(&self, code: &str) -> Vec<String> {
        let mut keys: Vec<String> = Vec::new();
        for spec in self.products.get(code).into_iter().flatten().rev() {
            for p in &spec.properties {
                if !keys.contains(&p.key) {
                    keys.push(p.key.clone());
                }
            }
        }
        keys
    }
}

/// Reads a UTF-8 text file with a clear message on failure.
pub fn read_text(path: &Path) -> Result<String> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    String::from_utf8(bytes).map_err(|e| {
        Error::invalid(
            path.display().to_string(),
            format!("byte {} is not valid UTF-8", e.utf8_error().valid_up_to()),
            "Save the file as UTF-8.",
        )
    })
}

/// Limits as written on certificates and answers: "≤ 1.00", "≥ 53.0", "53.0 – 59.0".
pub fn limits_text(min: Option<Decimal>, max: Option<Decimal>, decimals: u32) -> String {
    let f = |d: Decimal| {
        let mut d = d;
        d.rescale(decimals);
        d.to_string()
    };
    match (min, max) {
        (Some(lo), Some(hi)) => format!("{} – {}", f(lo), f(hi)),
        (None, Some(hi)) => format!("≤ {}", f(hi)),
        (Some(lo), None) => format!("≥ {}", f(lo)),
        (None, None) => "report only".to_string(),
    }
}

/// The requirement of a text property as printed: its conforming words ("clear" or
/// "clear, slightly hazy"); `None` for a numeric property (see [`limits_text`]).
pub fn conforming_text(p: &Property) -> Option<String> {
    match &p.kind {
        Kind::Text { conforming, .. } => Some(conforming.join(", ")),
        Kind::Number => None,
    }
}

/// Plain words for the end groups assumed in Mn: "two end groups per chain", "2.7 ...".
pub fn end_groups_words(f: f64) -> String {
    if (f - 2.0).abs() < 1e-9 {
        "two end groups per chain".to_string()
    } else if (f - 3.0).abs() < 1e-9 {
        "three end groups per molecule".to_string()
    } else {
        format!("{f} end groups per molecule on average")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn retest_date_adds_calendar_months() {
        let d = |y, m, d| NaiveDate::from_ymd_opt(y, m, d).unwrap();
        assert_eq!(retest_date(d(2026, 9, 14), 12), Some(d(2027, 9, 14)));
        // End of month clamps: 2028 is a leap year (Gregorian rule).
        assert_eq!(retest_date(d(2028, 1, 31), 1), Some(d(2028, 2, 29)));
        assert_eq!(retest_date(d(2027, 1, 31), 1), Some(d(2027, 2, 28)));
    }

    pub(crate) const SPEC: &str = r#"
code = "PD-2000"
name = "Linear polyester diol"
revision = "C"
effective = 2026-09-01
functionality = 2.0
decision_rule = "guarded"
retest_months = 12
[properties.acid_value]
label = "Acid value"
unit = "mg KOH/g"
method = "ISO 2114"
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
[properties.mn]
min = 1900
max = 2100
decimals = 0
"#;

    fn parse(text: &str) -> Result<ProductSpec> {
        ProductSpec::parse(Path::new("specs/x.toml"), text)
    }

    #[test]
    fn parses_the_documented_example() {
        let s = parse(SPEC).unwrap();
        assert_eq!(s.properties.len(), 3);
        assert_eq!(s.properties[0].key, "acid_value");
        assert_eq!(s.property("mn").unwrap().unit, "g/mol");
        assert!(s.property("hydroxyl_value").unwrap().acidity_correction);
    }

    #[test]
    fn acidity_correction_follows_the_method_table_issue_18() {
        // chem::hydroxyl_method::METHODS: ISO 4629-2 measures OHV − AV (add), ASTM E1899
        // measures OHV + AV (subtract); true follows the row, a contradiction is refused.
        let kind = |text: &str| {
            parse(text).map(|s| {
                s.property("hydroxyl_value")
                    .unwrap()
                    .acidity_correction_kind
            })
        };
        let with = |method: &str, corr: &str| {
            SPEC.replace(
                "acidity_correction = true",
                &format!("method = \"{method}\"\nacidity_correction = {corr}"),
            )
        };
        assert_eq!(kind(SPEC).unwrap(), AcidityCorrection::Add);
        assert_eq!(
            kind(&with("ISO 4629-2", "true")).unwrap(),
            AcidityCorrection::Add
        );
        assert_eq!(
            kind(&with("ASTM E1899", "true")).unwrap(),
            AcidityCorrection::Subtract
        );
        assert_eq!(
            kind(&with("ASTM E1899-16", "\"subtract\"")).unwrap(),
            AcidityCorrection::Subtract
        );
        assert_eq!(
            kind(&with("ISO 4629-2", "\"none\"")).unwrap(),
            AcidityCorrection::None
        );
        assert_eq!(
            kind(&with("in-house", "\"subtract\"")).unwrap(),
            AcidityCorrection::Subtract
        );
        let e = kind(&with("ISO 4629-2", "\"subtract\""))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("properties.hydroxyl_value.acidity_correction")
                && e.contains("measures OHV − AV")
                && e.contains("\"add\""),
            "{e}"
        );
        let e = kind(&with("ISO 4629-2", "\"yes\""))
            .unwrap_err()
            .to_string();
        assert!(e.contains("'yes' is not an acidity correction"), "{e}");
        let e = kind(&with("ISO 4629-2", "2")).unwrap_err().to_string();
        assert!(
            e.contains("\"subtract\"") && e.contains("specs/x.toml:"),
            "{e}"
        );
    }

    #[test]
    fn min_above_max_is_refused() {
        let e = parse(&SPEC.replace("min = 53.0", "min = 60.0")).unwrap_err();
        assert!(
            e.to_string().contains("min 60 is greater than max 59"),
            "{e}"
        );
    }

    #[test]
    fn xn_without_recipe_is_refused() {
        let e = parse(&format!("{SPEC}[properties.xn]\ndecimals = 1\n")).unwrap_err();
        assert!(e.to_string().contains("without a recipe"), "{e}");
    }

    #[test]
    fn guarded_needs_uncertainty() {
        let e = parse(&SPEC.replace("uncertainty = 0.05\n", "")).unwrap_err();
        assert!(e.to_string().contains("expanded uncertainty"), "{e}");
    }

    #[test]
    fn missing_unit_is_refused() {
        let e = parse(&SPEC.replace("unit = \"mg KOH/g\"\nmethod", "method")).unwrap_err();
        assert!(e.to_string().contains("unit is missing"), "{e}");
    }

    #[test]
    fn unknown_field_names_line() {
        let e = parse(&SPEC.replace("decimals = 2", "decimals = 2\ncolor = 1")).unwrap_err();
        assert!(e.to_string().contains("specs/x.toml:"), "{e}");
    }

    #[test]
    fn revisions_must_go_forward() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("c.toml"), SPEC).unwrap();
        let b = SPEC
            .replace("revision = \"C\"", "revision = \"B\"")
            .replace("2026-09-01", "2026-10-01");
        std::fs::write(dir.path().join("b.toml"), b).unwrap();
        let e = SpecSet::load(dir.path()).unwrap_err();
        assert!(e.to_string().contains("does not come after"), "{e}");
    }

    #[test]
    fn revision_in_effect_is_chosen_by_date() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("c.toml"), SPEC).unwrap();
        let b = SPEC
            .replace("revision = \"C\"", "revision = \"B\"")
            .replace("2026-09-01", "2025-06-01");
        std::fs::write(dir.path().join("b.toml"), b).unwrap();
        let set = SpecSet::load(dir.path()).unwrap();
        let d = |s| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        assert_eq!(
            set.for_date("PD-2000", d("2026-08-31")).unwrap().revision,
            "B"
        );
        assert_eq!(
            set.for_date("PD-2000", d("2026-09-01")).unwrap().revision,
            "C"
        );
        assert!(set.for_date("PD-2000", d("2025-01-01")).is_err());
        assert!(set.for_date("XX", d("2026-01-01")).is_err());
    }
}

#[cfg(test)]
mod text_tests {
    use super::*;

    #[test]
    fn limits_are_written_with_reporting_precision() {
        let d = |s: &str| s.parse::<Decimal>().unwrap();
        assert_eq!(limits_text(None, Some(d("1")), 2), "≤ 1.00");
        assert_eq!(limits_text(Some(d("53")), Some(d("59")), 1), "53.0 – 59.0");
        assert_eq!(limits_text(Some(d("1900")), None, 0), "≥ 1900");
        assert_eq!(end_groups_words(2.0), "two end groups per chain");
    }
}
