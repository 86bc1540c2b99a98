//! The certificate of analysis as data: every field the template and the PDF stamps receive.
//!
//! Content follows ISO/IEC 17025:2017 §7.8.2.1 (report content) and §7.8.6 (statements of
//! conformity), adapted to a manufacturer's certificate in the way EN 10204:2004 type 3.1
//! certificates are: the issuer, the product and lot, the results against the specification,
//! the decision rule, and the person who authorised release. Values arrive already rounded and
//! formatted (the decision module owns rounding); this module only carries and checks them.

use std::path::Path;

use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// The issuing site, read from `templates/site.toml`.
///
/// ```toml
/// name = "Harrowgate Resins Ltd, Fenmoor Works"
/// address = ["Fenmoor Industrial Estate", "Harrowgate HG9 0ZZ", "United Kingdom"]
/// contact = ["Quality Control Laboratory", "qc@example.invalid"]
/// inspection_representative = { name = "A. Person", role = "Quality Manager" }
/// ```
///
/// A text field starting with [`PLACEHOLDER`] (as `resinlot init` writes them) has not been
/// filled in yet: no certificate is issued under such a site ([`Site::check_filled_in`]).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Site {
    /// Legal or trading name of the issuing site.
    pub name: String,
    /// Postal address, one entry per printed line.
    pub address: Vec<String>,
    /// Contact lines (department, telephone, e-mail), one entry per printed line.
    #[serde(default)]
    pub contact: Vec<String>,
    /// Prefix of certificate numbers (letters, digits, '-', '_', '.'), e.g. "FW-".
    #[serde(default = "default_prefix")]
    pub certificate_prefix: String,
    /// The manufacturer's authorised inspection representative, independent of the
    /// manufacturing department, who validates EN 10204 type 3.1 certificates.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inspection_representative: Option<Representative>,
}

/// A named person and their role, as printed.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Representative {
    /// Name of the person.
    pub name: String,
    /// Role, e.g. `Quality Manager`.
    pub role: String,
}

/// Start of a value in `site.toml` that still has to be filled in.
pub const PLACEHOLDER: &str = "PLACEHOLDER";

/// The site file `resinlot init` writes and the site assumed when no templates folder exists:
/// every field a placeholder, so nothing is issued until the lab fills it in.
pub const PLACEHOLDER_SITE: &str = "\
# The issuing site printed on every certificate of analysis. Replace every value starting with
# PLACEHOLDER: resinlot refuses to issue certificates until none is left.
# Keys: name (text), address (list of lines), contact (list of lines), certificate_prefix
# (start of every certificate number), and inspection_representative (needed for customers
# who order EN 10204 type 3.1 certificates: a person independent of manufacturing).
name = \"PLACEHOLDER: legal name of the issuing site\"
address = [\"PLACEHOLDER: street\", \"PLACEHOLDER: town and postcode\", \"PLACEHOLDER: country\"]
contact = [\"PLACEHOLDER: laboratory name\", \"PLACEHOLDER: e-mail or telephone\"]
certificate_prefix = \"CoA-\"
# inspection_representative = { name = \"PLACEHOLDER: name\", role = \"PLACEHOLDER: role\" }
";

fn default_prefix() -> String {
    "CoA-".to_string()
}

/// File name of the site file inside the templates folder.
pub const SITE_FILE: &str = "site.toml";

impl Site {
    /// Reads and validates a site file; errors name the file, line and field.
    pub fn load(path: &Path) -> Result<Site> {
        let site: Site = crate::support::tomlfile::load(path)?;
        let place = path.display().to_string();
        if site.name.trim().is_empty() {
            return Err(Error::invalid(
                format!("{place}: name"),
                "the site name is empty",
                "Enter the issuing site's name as it should appear on certificates.",
            ));
        }
        if !crate::support::ids::is_safe_id(&site.certificate_prefix)
            || site.certificate_prefix.len() > 12
        {
            return Err(Error::invalid(
                format!("{place}: certificate_prefix"),
                format!("'{}' cannot start a file name", site.certificate_prefix),
                "Use up to 12 letters, digits, '-', '_' or '.', e.g. certificate_prefix = \"FW-\".",
            ));
        }
        if site.address.iter().all(|l| l.trim().is_empty()) {
            return Err(Error::invalid(
                format!("{place}: address"),
                "the address has no lines",
                "Give the postal address as a list of lines, e.g. address = [\"Street\", \"Town\"].",
            ));
        }
        Ok(site)
    }

    /// The fields still holding a [`PLACEHOLDER`] value, by name (`name`, `address[1]`, ...).
    pub fn placeholders(&self) -> Vec<String> {
        let is = |t: &str| t.trim_start().starts_with(PLACEHOLDER);
        let mut out = Vec::new();
        if is(&self.name) {
            out.push("name".to_string());
        }
        for (list, field) in [(&self.address, "address"), (&self.contact, "contact")] {
            for (i, l) in list.iter().enumerate() {
                if is(l) {
                    out.push(format!("{field}[{}]", i + 1));
                }
            }
        }
        if let Some(r) = &self.inspection_representative {
            if is(&r.name) || is(&r.role) {
                out.push("inspection_representative".to_string());
            }
        }
        out
    }

    /// The site assumed when no templates folder exists: [`PLACEHOLDER_SITE`].
    pub fn placeholder() -> Site {
        toml::from_str(PLACEHOLDER_SITE).expect("the built-in site file is valid")
    }

    /// Refuses (exit 2) a site whose fields are still placeholders: certificates would go out
    /// in no one's name. `path` is the site file, named in the message (it may not exist yet:
    /// then the message says to create it).
    pub fn check_filled_in(&self, path: &Path) -> Result<()> {
        let fields = self.placeholders();
        if fields.is_empty() {
            return Ok(());
        }
        if !path.exists() {
            return Err(Error::invalid(
                path.display().to_string(),
                "there is no site file, so no certificate can be issued: it would name no issuer",
                format!(
                    "Create {} with your site's name, address and contact lines (`resinlot init NEW-FOLDER` writes one to fill in), or give --templates DIR; `release --no-certificates` records decisions without certificates.",
                    path.display()
                ),
            ));
        }
        Err(Error::invalid(
            format!("{}: {}", path.display(), fields.join(", ")),
            "the issuing site is still a placeholder, so no certificate can be issued in its name",
            format!(
                "Edit {} and replace every value starting with {PLACEHOLDER} with your site's own details.",
                path.display()
            ),
        ))
    }

    /// Writes [`PLACEHOLDER_SITE`] to `path` (for `resinlot init`), replacing what is there.
    pub fn write_placeholder(path: &Path) -> Result<()> {
        crate::support::output::write_atomic(path, PLACEHOLDER_SITE.as_bytes(), true)
    }
}

/// Warnings about the site file at `path` for `specs check` (issue #17): missing, still
/// holding placeholders, or naming no inspection representative while the customers in
/// `needs_31` order EN 10204 type 3.1 certificates. Each warning is one line; none is empty
/// text. A site file that cannot be read or parsed is an error, as everywhere else.
pub fn site_warnings<'a>(path: &Path, needs_31: impl Iterator<Item = &'a str>) -> Result<String> {
    if !path.is_file() {
        return Ok(format!(
            "warning: {}: no site file; certify and release refuse to issue certificates until it exists.\n",
            path.display()
        ));
    }
    let site = Site::load(path)?;
    let mut out = String::new();
    let fields = site.placeholders();
    if !fields.is_empty() {
        out.push_str(&format!(
            "warning: {}: {} still {PLACEHOLDER}; certify and release refuse to issue certificates until filled in.\n",
            path.display(),
            fields.join(", ")
        ));
    }
    let needs: Vec<&str> = needs_31.collect();
    if !needs.is_empty() && site.inspection_representative.is_none() {
        out.push_str(&format!(
            "warning: {}: no inspection_representative, but {} order EN 10204 type 3.1 certificates, which certify refuses without one.\n",
            path.display(),
            needs.join(", ")
        ));
    }
    Ok(out)
}

/// Product identity as printed.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Product {
    /// Product code, e.g. `PD-2000`.
    pub code: String,
    /// Product name.
    pub name: String,
}

/// The specification (and its revision) the lot was judged against.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpecRef {
    /// Specification code (usually the product code).
    pub code: String,
    /// Revision letter or number.
    pub revision: String,
}

/// The lot the results relate to.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Lot {
    /// Lot number.
    pub id: String,
    /// Date of manufacture.
    pub manufactured: NaiveDate,
    /// Retest date: manufacture date plus the spec's `retest_months` (see [`crate::spec::retest_date`]).
    pub retest: NaiveDate,
    /// First day of testing, when the record holds it (rows recorded before issue #15 do not).
    #[serde(default)]
    pub tested_from: Option<NaiveDate>,
    /// Last day of testing, when the record holds it.
    #[serde(default)]
    pub tested_to: Option<NaiveDate>,
}

impl Lot {
    /// The test date(s) as printed: one day, `from – to`, or `not recorded`.
    pub fn tested_text(&self) -> String {
        match (self.tested_from, self.tested_to) {
            (Some(a), Some(b)) if a != b => format!("{a} – {b}"),
            (Some(a), _) | (None, Some(a)) => a.to_string(),
            (None, None) => "not recorded".to_string(),
        }
    }
}

/// Shipment details when the certificate is issued for a customer.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Customer {
    /// Customer's legal name.
    pub name: String,
    /// Customer's postal address, one entry per line.
    #[serde(default)]
    pub address: Vec<String>,
    /// Customer's own part number for the product.
    pub part_number: Option<String>,
    /// Customer's purchase order.
    pub purchase_order: Option<String>,
    /// Quantity shipped as written, e.g. `20 t`.
    pub quantity: Option<String>,
}

/// One reported property.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ResultRow {
    /// Property key from the spec, e.g. `acid_value`.
    pub key: String,
    /// Printed name, e.g. `Acid value`.
    pub label: String,
    /// Test method, e.g. `ISO 2114`, or `Calculated (end-group analysis)`.
    pub method: String,
    /// Reporting unit, e.g. `mg KOH/g`.
    pub unit: String,
    /// Limits as written in the spec (see [`limits_text`]).
    pub limits: String,
    /// Result rounded as the spec says, as a string.
    pub result: String,
    /// The recorded value at full precision (in the spec's unit), empty when not measured.
    #[serde(default)]
    pub exact: String,
    /// Expanded uncertainty U (k = 2) in the reporting unit, when known.
    #[serde(default)]
    pub uncertainty: Option<String>,
    /// Verdict text, e.g. `Pass` or `Conditional pass`.
    pub verdict: String,
    /// True when the verdict is anything but a pass (printed in bold).
    #[serde(default)]
    pub flagged: bool,
    /// Number of the footnote (a calculated value's note) this row refers to.
    #[serde(default)]
    pub note: Option<usize>,
    /// The result and verdict of every lot on the certificate, in the order of
    /// [`Certificate::lots`] (issue #16); `result` and `verdict` above are the first lot's.
    #[serde(default)]
    pub lots: Vec<LotCell>,
}

/// One lot's result for one property, on a certificate that may cover several lots.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LotCell {
    /// Lot number.
    pub lot: String,
    /// Result rounded as the spec says, as a string.
    pub result: String,
    /// Verdict text.
    pub verdict: String,
    /// The recorded value at full precision (in the spec's unit), empty when not measured.
    #[serde(default)]
    pub exact: String,
    /// Expanded uncertainty U (k = 2) in the reporting unit, when known.
    #[serde(default)]
    pub uncertainty: Option<String>,
}

/// A value calculated rather than measured (Mn, Xn), with its expanded uncertainty.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalculatedNote {
    /// Footnote mark, as printed in the row and before the note (`¹`, `²`, ...).
    #[serde(default)]
    pub mark: String,
    /// Property key, e.g. `mn`.
    pub key: String,
    /// Printed symbol or name, e.g. `Mn`.
    pub label: String,
    /// Reported value as a string.
    pub value: String,
    /// Unit, e.g. `g/mol`; empty for dimensionless values such as Xn.
    pub unit: String,
    /// Expanded uncertainty U as a string in the same unit, when known.
    pub expanded_uncertainty: Option<String>,
    /// Coverage factor k of U, as a string (usually `2`).
    pub coverage_factor: Option<String>,
    /// How it was obtained, e.g. `end-group analysis from acid value and hydroxyl value`.
    pub basis: String,
}

/// The statement of conformity (ISO/IEC 17025:2017 §7.8.6.2).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Conformity {
    /// Name of the decision rule, e.g. `guarded acceptance (ILAC-G8:09/2019 §4.2.3)`.
    pub decision_rule: String,
    /// The guard band as applied, e.g. `w = U (k = 2)`.
    pub guard_band: String,
    /// The full statement as printed.
    pub statement: String,
}

/// The EN 10204:2004 inspection document this certificate is, as the customer ordered.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InspectionDocument {
    /// Type as written in the standard, `3.1` or `2.2`.
    #[serde(rename = "type")]
    pub kind: String,
    /// The statement as printed.
    pub statement: String,
}

/// Who authorised release, and when.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Authorisation {
    /// Name of the person.
    pub name: String,
    /// Role, e.g. `QC Manager`.
    pub role: String,
    /// Date of authorisation.
    pub date: NaiveDate,
}

/// The certificate a reissue replaces.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Supersedes {
    /// Number of the replaced certificate.
    pub number: String,
    /// Why it was reissued.
    pub reason: String,
}

/// A complete certificate of analysis; the template receives every field at top level.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Certificate {
    /// Document title, e.g. `Certificate of Analysis`.
    pub title: String,
    /// Issuing site.
    pub issuer: Site,
    /// Unique certificate number.
    pub number: String,
    /// Date of issue.
    pub issue_date: NaiveDate,
    /// Product code and name.
    pub product: Product,
    /// Specification and revision applied.
    pub spec: SpecRef,
    /// Lot, manufacture and retest dates (the first lot, on a certificate for several).
    pub lot: Lot,
    /// Every lot the certificate covers, in order (issue #16: a delivery made of several lots
    /// has one certificate); the template shows a column per lot, or a block per lot when
    /// there are more than [`LOT_COLUMNS`].
    #[serde(default)]
    pub lots: Vec<Lot>,
    /// True when the lots are more than [`LOT_COLUMNS`]: the results come as a block per lot.
    #[serde(default)]
    pub lot_blocks: bool,
    /// Shipment details, for a customer certificate.
    pub customer: Option<Customer>,
    /// Whether the results table has the U column (guarded decision rule, unless the
    /// customer file says `show_uncertainty = false`).
    #[serde(default)]
    pub show_uncertainty: bool,
    /// Reported properties, in reporting order.
    pub rows: Vec<ResultRow>,
    /// Calculated values with their uncertainty (Mn, Xn).
    pub calculated: Vec<CalculatedNote>,
    /// Statement of conformity with decision rule and guard band.
    pub conformity: Conformity,
    /// "Results relate only to the lot tested; not to be reproduced except in full."
    pub scope_statement: String,
    /// Extra statements (customer-specific), each printed as its own paragraph.
    pub statements: Vec<String>,
    /// The EN 10204 document type and statement, when the customer orders to one.
    #[serde(default)]
    pub inspection_document: Option<InspectionDocument>,
    /// Release authorisation.
    pub authorisation: Authorisation,
    /// False for a held or rejected lot: every page carries a NOT RELEASED marking.
    pub released: bool,
    /// Set on a reissue: the certificate this one replaces.
    pub supersedes: Option<Supersedes>,
}

/// Most lots shown side by side, a results column each; more get a block per lot.
pub const LOT_COLUMNS: usize = 4;

/// The standard scope statement, wording our own. ISO/IEC 17025:2017 §7.8.2.1 asks for a
/// statement that the results relate only to the items tested, and for a report not to be
/// reproduced except in full without the laboratory's approval (item letters from memory,
/// not confirmed here; the requirement itself is named in issue 4).
pub const SCOPE_STATEMENT: &str = "The results relate only to the lot tested. This certificate \
     shall not be reproduced except in full without the written approval of the issuer.";

/// Formats spec limits as written on a certificate.
///
/// Both limits give `min – max` (en dash), only a maximum `≤ max`, only a minimum `≥ min`,
/// none `report` (the property is reported without a limit). Each limit is printed with
/// `decimals` decimal places, so the limits read at the same precision as the result.
pub fn limits_text(min: Option<f64>, max: Option<f64>, decimals: u32) -> String {
    let d = decimals as usize;
    match (min, max) {
        (Some(lo), Some(hi)) => format!("{lo:.d$} – {hi:.d$}"),
        (None, Some(hi)) => format!("≤ {hi:.d$}"),
        (Some(lo), None) => format!("≥ {lo:.d$}"),
        (None, None) => "report".to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limits_text_follows_the_spec_form() {
        assert_eq!(limits_text(Some(53.0), Some(59.0), 1), "53.0 – 59.0");
        assert_eq!(limits_text(None, Some(1.0), 2), "≤ 1.00");
        assert_eq!(limits_text(Some(450.0), None, 0), "≥ 450");
        assert_eq!(limits_text(None, None, 2), "report");
    }

    #[test]
    fn certificate_round_trips_through_json() {
        let c: Certificate = serde_json::from_str(include_str!(
            "../../tests/fixtures/certificates/customer.json"
        ))
        .unwrap();
        let json = serde_json::to_string(&c).unwrap();
        let back: Certificate = serde_json::from_str(&json).unwrap();
        assert_eq!(back, c);
    }

    #[test]
    fn site_file_loads_and_refuses_unknown_fields() {
        let dir = tempfile::tempdir().unwrap();
        let good = dir.path().join("site.toml");
        std::fs::write(
            &good,
            "name = \"Harrowgate Resins Ltd, Fenmoor Works\"\naddress = [\"Fenmoor\"]\n",
        )
        .unwrap();
        let site = Site::load(&good).unwrap();
        assert_eq!(site.address, vec!["Fenmoor".to_string()]);
        assert!(site.contact.is_empty());

        let bad = dir.path().join("bad.toml");
        std::fs::write(&bad, "name = \"X\"\naddress = [\"Y\"]\nfax = \"1\"\n").unwrap();
        let msg = Site::load(&bad).unwrap_err().to_string();
        assert!(msg.contains("bad.toml:3:1"), "{msg}");
        assert!(msg.contains("fax"), "{msg}");
    }

    #[test]
    fn site_file_needs_an_address() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("site.toml");
        std::fs::write(&p, "name = \"X\"\naddress = []\n").unwrap();
        let msg = Site::load(&p).unwrap_err().to_string();
        assert!(msg.contains("address"), "{msg}");
    }

    #[test]
    fn a_placeholder_site_is_refused_naming_the_file_issue_17() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("site.toml");
        Site::write_placeholder(&p).unwrap();
        let site = Site::load(&p).unwrap();
        assert_eq!(site, Site::placeholder());
        assert_eq!(
            site.placeholders(),
            [
                "name",
                "address[1]",
                "address[2]",
                "address[3]",
                "contact[1]",
                "contact[2]"
            ]
        );
        let err = site.check_filled_in(&p).unwrap_err();
        assert_eq!(err.exit_code(), 2);
        let msg = err.to_string();
        assert!(msg.contains("site.toml: name"), "{msg}");
        assert!(msg.contains("Edit"), "{msg}");
        // Without the file the message says to create it.
        let missing = dir.path().join("none").join("site.toml");
        let msg = site.check_filled_in(&missing).unwrap_err().to_string();
        assert!(msg.contains("Create"), "{msg}");
        // A filled-in site passes.
        let mut real = site.clone();
        real.name = "Example Works".into();
        real.address = vec!["1 Road".into()];
        real.contact = vec![];
        assert!(real.check_filled_in(&p).is_ok());
    }

    #[test]
    fn specs_check_warns_about_the_site_issue_17() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("site.toml");
        let none = site_warnings(&p, std::iter::empty()).unwrap();
        assert!(none.contains("no site file"), "{none}");
        Site::write_placeholder(&p).unwrap();
        let w = site_warnings(&p, ["acme"].into_iter()).unwrap();
        assert!(w.contains("name, address[1]"), "{w}");
        assert!(w.contains("acme order EN 10204 type 3.1"), "{w}");
        std::fs::write(&p, "name = \"X\"\naddress = [\"Y\"]\n").unwrap();
        assert_eq!(site_warnings(&p, std::iter::empty()).unwrap(), "");
    }

    #[test]
    fn shipped_site_file_loads() {
        let p = Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("templates")
            .join(SITE_FILE);
        let site = Site::load(&p).unwrap();
        assert!(site.name.contains("Fenmoor"));
    }
}
