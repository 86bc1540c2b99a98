//! Customer overlays: a customer's names, part numbers, report order, tighter windows and units.

use std::path::{Path, PathBuf};

use indexmap::IndexMap;
use rust_decimal::Decimal;
use serde::Deserialize;

use crate::error::{Error, Result};
use crate::spec::keys;

use crate::spec::decision::{
    decimal_from_f64, decimal_to_f64 as to_f64, round, verdict, DecisionRule, Verdict,
};
use crate::spec::{ProductSpec, Property, SpecSet};

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct CustomerFile {
    name: String,
    #[serde(default)]
    address: Vec<String>,
    inspection_document: Option<String>,
    #[serde(default = "yes")]
    show_uncertainty: bool,
    #[serde(default)]
    products: IndexMap<String, ProductFile>,
}

fn yes() -> bool {
    true
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct ProductFile {
    part_number: Option<String>,
    report: Option<Vec<String>>,
    #[serde(default)]
    statements: Vec<String>,
    #[serde(default)]
    limits: IndexMap<String, WindowFile>,
    #[serde(default)]
    units: IndexMap<String, String>,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct WindowFile {
    min: Option<f64>,
    max: Option<f64>,
}

/// A customer's window on one property.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Window {
    /// Lower limit.
    pub min: Option<Decimal>,
    /// Upper limit.
    pub max: Option<Decimal>,
}

/// A customer's requirements for one product.
#[derive(Debug, Clone, PartialEq)]
pub struct CustomerProduct {
    /// The customer's part number.
    pub part_number: Option<String>,
    /// Properties to report, in order (None: all of the spec, in spec order).
    pub report: Option<Vec<String>>,
    /// Extra statements printed on the certificate.
    pub statements: Vec<String>,
    /// Tighter windows by property key.
    pub limits: IndexMap<String, Window>,
    /// Reporting units by property key.
    pub units: IndexMap<String, String>,
}

/// A validated customer file.
#[derive(Debug, Clone, PartialEq)]
pub struct Customer {
    /// File stem, the name given to `--customer`.
    pub id: String,
    /// The customer's legal name.
    pub name: String,
    /// Postal address, one entry per printed line (may be empty).
    pub address: Vec<String>,
    /// The EN 10204:2004 inspection document the customer orders to, if any.
    pub inspection_document: Option<InspectionDocument>,
    /// Whether certificates show the U column under the guarded rule (default true).
    pub show_uncertainty: bool,
    /// Requirements per product code.
    pub products: IndexMap<String, CustomerProduct>,
    /// The file.
    pub path: PathBuf,
}

impl Customer {
    /// Loads `<dir>/<id>.toml` and validates it against the specs.
    pub fn load(dir: &Path, id: &str, specs: &SpecSet) -> Result<Customer> {
        if !crate::support::ids::is_safe_id(id) {
            return Err(Error::invalid(
                format!("--customer '{id}'"),
                "not a usable customer name",
                "Give the customer file's stem: letters, digits, '-', '_' or '.'.",
            ));
        }
        let path = dir.join(format!("{id}.toml"));
        if !path.is_file() {
            let known = list(dir);
            return Err(Error::invalid(
                format!("--customer '{id}'"),
                format!("no file {} exists", path.display()),
                if known.is_empty() {
                    "Create the customer file first.".to_string()
                } else {
                    format!("Known customers: {}.", known.join(", "))
                },
            ));
        }
        let raw: CustomerFile = crate::support::tomlfile::load(&path)?;
        validate(id, raw, &path, specs)
    }

    /// The customer's requirements for `product`, or a clear error.
    pub fn product(&self, product: &str) -> Result<&CustomerProduct> {
        self.products.get(product).ok_or_else(|| {
            Error::invalid(
                self.path.display().to_string(),
                format!(
                    "customer '{}' has no entry for product {product}",
                    self.name
                ),
                format!("Add a [products.{product}] table to the customer file."),
            )
        })
    }
}

/// The type of inspection document of EN 10204:2004 a customer orders to (types named in the
/// standard's clause 4; wording of the certificate's statement is resinlot's own).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InspectionDocument {
    /// Type 2.2, test report: the manufacturer's declaration of compliance with test results.
    TestReport22,
    /// Type 3.1, inspection certificate: results of specific inspection, validated by the
    /// manufacturer's authorised inspection representative independent of manufacturing.
    Certificate31,
}

impl InspectionDocument {
    /// Parses `"2.2"` or `"3.1"` as written in a customer file.
    pub fn parse(s: &str) -> Option<InspectionDocument> {
        match s.trim() {
            "2.2" => Some(InspectionDocument::TestReport22),
            "3.1" => Some(InspectionDocument::Certificate31),
            _ => None,
        }
    }

    /// The type as written, `"2.2"` or `"3.1"`.
    pub fn as_str(self) -> &'static str {
        match self {
            InspectionDocument::TestReport22 => "2.2",
            InspectionDocument::Certificate31 => "3.1",
        }
    }
}

/// Customer stems in a folder, sorted.
pub fn list(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .into_iter()
        .flatten()
        .filter_map(|e| e.ok())
        .filter_map(|e| {
            let p = e.path();
            (p.extension().is_some_and(|x| x == "toml"))
                .then(|| p.file_stem().map(|s| s.to_string_lossy().to_string()))
                .flatten()
        })
        .collect();
    v.sort();
    v
}

/// Loads and validates every customer file in `dir` (none when the folder is missing).
pub fn load_all(dir: &Path, specs: &SpecSet) -> Result<Vec<Customer>> {
    list(dir)
        .iter()
        .map(|id| Customer::load(dir, id, specs))
        .collect()
}

fn validate(id: &str, raw: CustomerFile, path: &Path, specs: &SpecSet) -> Result<Customer> {
    let file = path.display().to_string();
    // Every text field ends up on a certificate: one line of printable text, no control or
    // bidirectional-override characters (issue #13, item 6).
    crate::support::text::check_line(&format!("{file}: name"), "customer name", &raw.name, 200)?;
    for (i, line) in raw.address.iter().enumerate() {
        crate::support::text::check_line(
            &format!("{file}: address[{}]", i + 1),
            "address line",
            line,
            120,
        )?;
    }
    let inspection_document = match &raw.inspection_document {
        None => None,
        Some(t) => Some(InspectionDocument::parse(t).ok_or_else(|| {
            Error::invalid(
                format!("{file}: inspection_document"),
                format!("'{t}' is not an EN 10204 document type resinlot issues"),
                "Write inspection_document = \"3.1\" (inspection certificate) or \"2.2\" (test report), or leave it out.",
            )
        })?),
    };
    let mut products = IndexMap::new();
    for (code, p) in raw.products {
        let place = |f: &str| format!("{file}: products.{code}{f}");
        check_texts(&place, &p)?;
        let spec = specs.latest(&code).ok_or_else(|| {
            Error::invalid(
                place(""),
                format!("no product spec has code {code}"),
                format!(
                    "Known products: {}.",
                    specs
                        .products
                        .keys()
                        .cloned()
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )
        })?;
        let known = |key: &str, f: &str| -> Result<()> {
            if spec.property(key).is_none() {
                return Err(Error::invalid(
                    place(f),
                    format!("'{key}' is not a property of {code}"),
                    format!(
                        "Use one of: {}.",
                        spec.properties
                            .iter()
                            .map(|p| p.key.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                ));
            }
            Ok(())
        };
        if let Some(r) = &p.report {
            for k in r {
                known(k, ".report")?;
            }
        }
        let mut limits = IndexMap::new();
        for (k, w) in &p.limits {
            known(k, &format!(".limits.{k}"))?;
            // A window holds numbers; a text property is decided by its conforming words
            // (issue #15), so a window on one would be silently ignored.
            if spec.property(k).is_some_and(|p| p.is_text()) {
                return Err(Error::invalid(
                    place(&format!(".limits.{k}")),
                    format!("{k} is a text property: its results are words, which a window cannot limit"),
                    "Remove this window; the spec's conforming words apply to every customer.",
                ));
            }
            let conv = |v: Option<f64>, f: &str| -> Result<Option<Decimal>> {
                v.map(|x| {
                    decimal_from_f64(x).ok_or_else(|| {
                        Error::invalid(
                            place(&format!(".limits.{k}.{f}")),
                            "not a finite number",
                            "Enter a number.",
                        )
                    })
                })
                .transpose()
            };
            let win = Window {
                min: conv(w.min, "min")?,
                max: conv(w.max, "max")?,
            };
            check_not_looser(spec, k, &win, &place(&format!(".limits.{k}")))?;
            limits.insert(k.clone(), win);
        }
        for (k, unit) in &p.units {
            known(k, &format!(".units.{k}"))?;
            let sp = spec.property(k).expect("checked");
            if crate::spec::units::unit_factor(&sp.unit, unit).is_none() {
                return Err(Error::invalid(
                    place(&format!(".units.{k}")),
                    format!("'{unit}' cannot be converted from the spec's '{}'", sp.unit),
                    "Known conversions: mPa·s, cP, Pa·s.",
                ));
            }
        }
        products.insert(
            code,
            CustomerProduct {
                part_number: p.part_number,
                report: p.report,
                statements: p.statements,
                limits,
                units: p.units,
            },
        );
    }
    Ok(Customer {
        id: id.to_string(),
        name: raw.name.trim().to_string(),
        address: raw.address.iter().map(|l| l.trim().to_string()).collect(),
        inspection_document,
        show_uncertainty: raw.show_uncertainty,
        products,
        path: path.to_path_buf(),
    })
}

/// Checks the free text of one product entry of a customer file (part number, statements,
/// units) with [`crate::support::text::check_line`]: each is printed on the certificate.
fn check_texts(place: &dyn Fn(&str) -> String, p: &ProductFile) -> Result<()> {
    use crate::support::text::check_line;
    if let Some(n) = &p.part_number {
        check_line(&place(".part_number"), "part number", n, 80)?;
    }
    for (i, t) in p.statements.iter().enumerate() {
        check_line(
            &place(&format!(".statements[{}]", i + 1)),
            "statement",
            t,
            400,
        )?;
    }
    for (k, u) in &p.units {
        check_line(&place(&format!(".units.{k}")), "unit", u, 40)?;
    }
    Ok(())
}

fn check_not_looser(spec: &ProductSpec, key: &str, w: &Window, place: &str) -> Result<()> {
    let p = spec.property(key).expect("checked by caller");
    if let (Some(lo), Some(hi)) = (w.min, w.max) {
        if lo > hi {
            return Err(Error::invalid(
                place,
                format!("min {lo} is above max {hi}"),
                "Correct the window.",
            ));
        }
    }
    let looser_min = match (p.min, w.min) {
        (Some(s), Some(c)) => c < s,
        (Some(_), None) => false,
        _ => false,
    };
    let looser_max = match (p.max, w.max) {
        (Some(s), Some(c)) => c > s,
        _ => false,
    };
    let both = combined(p.min, p.max, Some(w));
    if let (Some(lo), Some(hi)) = (both.min, both.max) {
        if lo > hi {
            return Err(Error::invalid(
                place,
                format!(
                    "together with the {} revision {} window the customer's window leaves nothing ({lo} to {hi})",
                    spec.code, spec.revision
                ),
                format!("Customer limits are written in the spec's unit ({}); correct the window.", p.unit),
            ));
        }
    }
    if looser_min || looser_max {
        let fmt = |v: Option<Decimal>| v.map_or("open".to_string(), |d| d.to_string());
        return Err(Error::invalid(
            place,
            format!(
                "the customer window {}..{} is looser than the {} revision {} window {}..{}",
                fmt(w.min),
                fmt(w.max),
                spec.code,
                spec.revision,
                fmt(p.min),
                fmt(p.max)
            ),
            "A customer window may only tighten the product spec; correct the customer file.",
        ));
    }
    Ok(())
}

/// The tighter of the spec's and the customer's limits.
pub fn combined(
    spec_min: Option<Decimal>,
    spec_max: Option<Decimal>,
    w: Option<&Window>,
) -> Window {
    let tight_min = match (spec_min, w.and_then(|w| w.min)) {
        (Some(a), Some(b)) => Some(a.max(b)),
        (a, b) => a.or(b),
    };
    let tight_max = match (spec_max, w.and_then(|w| w.max)) {
        (Some(a), Some(b)) => Some(a.min(b)),
        (a, b) => a.or(b),
    };
    Window {
        min: tight_min,
        max: tight_max,
    }
}

/// Expanded uncertainty of a measured property's decided value: the spec's U, combined with
/// U(AV) for an acidity-corrected hydroxyl value (GUM, JCGM 100:2008 §5.1.2, uncorrelated:
/// U = √(U_OHV² + U_AV²)).
pub fn guard_uncertainty(spec: &ProductSpec, p: &Property) -> Option<Decimal> {
    if p.key == keys::HYDROXYL_VALUE && p.acidity_correction {
        let u_av = spec.property(keys::ACID_VALUE).and_then(|a| a.uncertainty);
        match (p.uncertainty, u_av) {
            (Some(uo), Some(ua)) => {
                decimal_from_f64((to_f64(uo).powi(2) + to_f64(ua).powi(2)).sqrt())
            }
            (uo, _) => uo,
        }
    } else {
        p.uncertainty
    }
}

/// Guard band of a recorded value for a later check (a customer's window): the recorded
/// expanded uncertainty of Mn, the spec's U for measured properties, and none for the other
/// derived properties (their propagated U is not kept in the trend file, so w = 0 there).
pub fn recorded_uncertainty(
    spec: &ProductSpec,
    p: &Property,
    mn_uncertainty: Option<f64>,
) -> Option<Decimal> {
    if p.key == keys::MN {
        mn_uncertainty.and_then(decimal_from_f64)
    } else if p.derived {
        None
    } else {
        guard_uncertainty(spec, p)
    }
}

/// How one property of a recorded lot stands against a customer's requirements.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Fit {
    /// Neither the spec nor the customer limits the property: nothing to decide.
    Open,
    /// A limit applies (the spec's, or a customer window is given) but no value is recorded.
    Missing,
    /// The recorded value, decided against the tighter window.
    Decided {
        /// Verdict under the product's decision rule.
        verdict: Verdict,
        /// The value rounded as the spec says (ASTM E29).
        reported: Decimal,
        /// The tighter of the spec's and the customer's limits.
        window: Window,
        /// Recorded expanded uncertainty, the guard band under the guarded rule.
        uncertainty: Option<Decimal>,
    },
}

impl Fit {
    /// True when the property does not stand in the way: open, or decided as a pass.
    pub fn passes(&self) -> bool {
        match self {
            Fit::Open => true,
            Fit::Missing => false,
            Fit::Decided { verdict, .. } => *verdict == Verdict::Pass,
        }
    }

    /// The verdict, when one was reached.
    pub fn verdict(&self) -> Option<Verdict> {
        match self {
            Fit::Decided { verdict, .. } => Some(*verdict),
            _ => None,
        }
    }
}

/// Does a lot's recorded value of `p` fit the customer's window? The one customer-fit rule,
/// used by `find --customer`, the certificate check and the certificate's verdict column.
///
/// The value is rounded as the spec says (ASTM E29) and compared with the tighter of the spec
/// and customer limits, with guard band w = U (the recorded uncertainty, see
/// [`recorded_uncertainty`]) under the guarded rule and w = 0 under the simple rule
/// (ILAC-G8:09/2019 §4.2.3). `value` is the recorded full-precision value; `mn_uncertainty`
/// the recorded expanded uncertainty of Mn.
pub fn customer_fit(
    spec: &ProductSpec,
    p: &Property,
    value: Option<Decimal>,
    mn_uncertainty: Option<f64>,
    window: Option<&Window>,
) -> Fit {
    let Some(value) = value else {
        return if p.has_limit() || window.is_some() {
            Fit::Missing
        } else {
            Fit::Open
        };
    };
    let lim = combined(p.min, p.max, window);
    if lim.min.is_none() && lim.max.is_none() {
        return Fit::Open;
    }
    let reported = round(value, p.decimals, spec.rounding);
    let u = recorded_uncertainty(spec, p, mn_uncertainty);
    let w = match spec.decision_rule {
        DecisionRule::Guarded => u.unwrap_or_default(),
        DecisionRule::Simple => Decimal::ZERO,
    };
    Fit::Decided {
        verdict: verdict(reported, lim.min, lim.max, w),
        reported,
        window: lim,
        uncertainty: u,
    }
}

/// The customer-fit rule for a result that is not a number (issue #15): a word passes when
/// it is one of the spec's conforming words (a customer window holds numbers and does not
/// apply to it); a censored result "< L" is decided by
/// [`censored_verdict`](crate::spec::decision::censored_verdict) against the tighter of the
/// spec's and the customer's windows, with the product's guard band, and a stated limit above
/// the window's maximum fails. `None` for a number (use [`customer_fit`]).
pub fn special_fit(
    spec: &ProductSpec,
    p: &Property,
    recorded: &crate::spec::decision::RecordedResult,
    window: Option<&Window>,
) -> Option<Verdict> {
    use crate::spec::decision::RecordedResult;
    match recorded {
        RecordedResult::Number(_) => None,
        RecordedResult::Word(w) => Some(if p.conforms(w) {
            Verdict::Pass
        } else {
            Verdict::Fail
        }),
        RecordedResult::Below(l) => {
            let lim = combined(p.min, p.max, window);
            let w = match spec.decision_rule {
                DecisionRule::Guarded => recorded_uncertainty(spec, p, None).unwrap_or_default(),
                DecisionRule::Simple => Decimal::ZERO,
            };
            Some(
                crate::spec::decision::censored_verdict(*l, lim.min, lim.max, w)
                    .unwrap_or(Verdict::Fail),
            )
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn specs(dir: &Path) -> SpecSet {
        std::fs::write(
            dir.join("pd.toml"),
            "code='PD-2000'\nname='d'\nrevision='C'\neffective=2026-01-01\nfunctionality=2.0\n\
             decision_rule='simple'\nretest_months=12\n[properties.acid_value]\nlabel='AV'\nunit='mg KOH/g'\nmax=1.0\ndecimals=2\n\
             [properties.hydroxyl_value]\nlabel='OHV'\nunit='mg KOH/g'\nmin=53\nmax=59\ndecimals=1\n\
             [properties.viscosity]\nlabel='V'\nunit='mPa·s'\nmax=650\ndecimals=0\n[properties.mn]\nmin=1900\nmax=2100\ndecimals=0\n",
        )
        .unwrap();
        SpecSet::load(dir).unwrap()
    }

    #[test]
    fn tighter_window_accepted_looser_refused() {
        let d = tempfile::tempdir().unwrap();
        let set = specs(d.path());
        let c = d.path().join("customers");
        std::fs::create_dir(&c).unwrap();
        std::fs::write(
            c.join("acme.toml"),
            "name='A & B <Ltd>'\n[products.PD-2000]\npart_number='C-1'\nreport=['mn','acid_value']\n\
             [products.PD-2000.limits.mn]\nmin=1950\nmax=2050\n[products.PD-2000.units]\nviscosity='Pa·s'\n",
        )
        .unwrap();
        let cu = Customer::load(&c, "acme", &set).unwrap();
        assert_eq!(
            cu.product("PD-2000").unwrap().limits["mn"].min,
            Some(Decimal::from(1950))
        );
        std::fs::write(
            c.join("loose.toml"),
            "name='L'\n[products.PD-2000.limits.mn]\nmin=1800\n",
        )
        .unwrap();
        let e = Customer::load(&c, "loose", &set).unwrap_err().to_string();
        assert!(e.contains("looser"), "{e}");
        assert!(Customer::load(&c, "../x", &set).is_err());
        assert!(Customer::load(&c, "nobody", &set)
            .unwrap_err()
            .to_string()
            .contains("Known customers"));
    }

    proptest::proptest! {
        #[test]
        fn customer_parser_never_panics(s in "\\PC{0,300}") {
            let _ = crate::support::tomlfile::parse::<CustomerFile>("c.toml", &s);
        }
    }

    #[test]
    fn combined_takes_the_tighter_limits() {
        let w = Window {
            min: Some(Decimal::from(1950)),
            max: None,
        };
        let c = combined(
            Some(Decimal::from(1900)),
            Some(Decimal::from(2100)),
            Some(&w),
        );
        assert_eq!(
            (c.min, c.max),
            (Some(Decimal::from(1950)), Some(Decimal::from(2100)))
        );
    }

    fn guarded(dir: &Path) -> SpecSet {
        // Fixture numbers, invented for the test.
        std::fs::write(
            dir.join("pg.toml"),
            "code='PG-1'\nname='g'\nrevision='A'\neffective=2026-01-01\nfunctionality=2.0\n\
             decision_rule='guarded'\nretest_months=12\n\
             [properties.hydroxyl_value]\nlabel='OHV'\nunit='mg KOH/g'\nmin=53\nmax=59\ndecimals=1\nuncertainty=0.8\n\
             [properties.acid_value]\nlabel='AV'\nunit='mg KOH/g'\nmax=1.0\ndecimals=2\nuncertainty=0.05\n[properties.colour]\nlabel='Colour'\nunit='Gardner'\ndecimals=0\n[properties.mn]\nmin=1900\nmax=2100\ndecimals=0\n",
        )
        .unwrap();
        SpecSet::load(dir).unwrap()
    }

    fn dec(s: &str) -> Decimal {
        s.parse().unwrap()
    }

    fn win(lo: &str, hi: &str) -> Window {
        Window {
            min: Some(dec(lo)),
            max: Some(dec(hi)),
        }
    }

    // Expected verdicts from the ILAC-G8:09/2019 §4.2.3 zones (see spec::decision::verdict),
    // counted by hand: lower limit TL, guard band w; x ≥ TL + w pass, TL ≤ x < TL + w
    // conditional pass, TL − w ≤ x < TL conditional fail, below that fail.
    #[test]
    fn customer_fit_simple_rule_rounds_then_compares_with_the_tighter_window() {
        let d = tempfile::tempdir().unwrap();
        let set = specs(d.path());
        let spec = set.latest("PD-2000").unwrap();
        let p = spec.property("hydroxyl_value").unwrap();
        let w = win("54", "58");
        let fit = customer_fit(spec, p, Some(dec("56.04")), None, Some(&w));
        assert_eq!(
            fit,
            Fit::Decided {
                verdict: Verdict::Pass,
                reported: dec("56.0"),
                window: w,
                uncertainty: None,
            }
        );
        // 53.96 rounds to 54.0, on the customer's limit: pass (w = 0 under the simple rule).
        assert!(customer_fit(spec, p, Some(dec("53.96")), None, Some(&w)).passes());
        let low = customer_fit(spec, p, Some(dec("53.5")), None, Some(&w));
        assert_eq!(low.verdict(), Some(Verdict::Fail));
        assert!(!low.passes());
        // Without the customer, 53.5 is inside the spec's 53..59.
        assert!(customer_fit(spec, p, Some(dec("53.5")), None, None).passes());
        assert_eq!(customer_fit(spec, p, None, None, Some(&w)), Fit::Missing);
        assert!(!Fit::Missing.passes());
    }

    #[test]
    fn customer_fit_guarded_rule_uses_the_recorded_uncertainty() {
        let d = tempfile::tempdir().unwrap();
        let set = guarded(d.path());
        let spec = set.latest("PG-1").unwrap();
        let p = spec.property("hydroxyl_value").unwrap();
        let w = win("54", "58");
        let v = |x: &str| customer_fit(spec, p, Some(dec(x)), None, Some(&w)).verdict();
        assert_eq!(v("55.0"), Some(Verdict::Pass)); // 55.0 ≥ 54 + 0.8
        assert_eq!(v("54.5"), Some(Verdict::ConditionalPass)); // 54 ≤ 54.5 < 54.8
        assert_eq!(v("53.5"), Some(Verdict::ConditionalFail)); // 53.2 ≤ 53.5 < 54
        assert_eq!(v("53.1"), Some(Verdict::Fail)); // below 54 − 0.8
        assert_eq!(recorded_uncertainty(spec, p, None), Some(dec("0.8")));
        // Mn's guard band is its recorded expanded uncertainty: 1930 < 1900 + 40.
        let mn = spec.property("mn").unwrap();
        assert_eq!(
            customer_fit(spec, mn, Some(dec("1930")), Some(40.0), None).verdict(),
            Some(Verdict::ConditionalPass)
        );
        assert_eq!(
            customer_fit(spec, mn, Some(dec("1930")), None, None).verdict(),
            Some(Verdict::Pass)
        );
    }

    #[test]
    fn customer_fit_without_limits_is_open_unless_the_customer_names_it() {
        let d = tempfile::tempdir().unwrap();
        let set = guarded(d.path());
        let spec = set.latest("PG-1").unwrap();
        let p = spec.property("colour").unwrap();
        assert_eq!(customer_fit(spec, p, None, None, None), Fit::Open);
        assert_eq!(customer_fit(spec, p, Some(dec("3")), None, None), Fit::Open);
        let empty = Window {
            min: None,
            max: None,
        };
        assert_eq!(
            customer_fit(spec, p, None, None, Some(&empty)),
            Fit::Missing
        );
        assert_eq!(
            customer_fit(spec, p, Some(dec("3")), None, Some(&empty)),
            Fit::Open
        );
    }
}
