//! The certificate's data companion: `<same name>.json` beside every PDF, carrying what the
//! certificate prints in a form a customer's system can read (issue #17). Its fields are
//! documented by the JSON Schema `docs/certificate-data.schema.json`; its SHA-256 is logged
//! next to the PDF's, so `verify` identifies either file.
//!
//! Numbers are JSON strings holding the decimal exactly as printed or recorded (a JSON number
//! would lose trailing zeros and may lose digits). Text is plain: the no-break spaces the PDF
//! uses to keep a number with its unit are ordinary spaces here.

use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

use crate::certificate::model::{Certificate, InspectionDocument, Representative, Supersedes};

/// Identifies this layout of the companion; a change of meaning gets a new number.
pub const FORMAT: &str = "resinlot certificate data 1";

/// The data companion of one certificate.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CertificateData {
    /// Always [`FORMAT`].
    pub format: String,
    /// Certificate number.
    pub certificate_number: String,
    /// File name of the PDF this file accompanies.
    pub pdf_file: String,
    /// Document title.
    pub title: String,
    /// Date of issue.
    pub issue_date: NaiveDate,
    /// Issuing site.
    pub issuer: Party,
    /// The customer, for a shipment certificate.
    pub customer: Option<CustomerData>,
    /// EN 10204 document type and statement, when the customer orders to one.
    pub inspection_document: Option<InspectionDocument>,
    /// False for an internal record of a lot that is not released.
    pub released: bool,
    /// Statement of conformity, decision rule and guard band.
    pub conformity: ConformityData,
    /// Who authorised release (or recorded the decision), and when.
    pub authorisation: Authorised,
    /// The certificate this one replaces, on a reissue.
    pub supersedes: Option<Supersedes>,
    /// The lots certified (one today).
    pub lots: Vec<LotData>,
}

/// A named party with its address.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Party {
    /// Name.
    pub name: String,
    /// Postal address lines.
    pub address: Vec<String>,
    /// Contact lines.
    pub contact: Vec<String>,
    /// The authorised inspection representative (EN 10204 type 3.1), when named.
    pub inspection_representative: Option<Representative>,
}

/// The customer and their order.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CustomerData {
    /// Legal name.
    pub name: String,
    /// Postal address lines.
    pub address: Vec<String>,
    /// The customer's part number.
    pub part_number: Option<String>,
    /// Purchase order.
    pub purchase_order: Option<String>,
    /// Quantity shipped, as written.
    pub quantity: Option<String>,
}

/// The conformity statement and the rule it was reached under.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ConformityData {
    /// The statement as printed.
    pub statement: String,
    /// The decision rule.
    pub decision_rule: String,
    /// The guard band.
    pub guard_band: String,
}

/// The person who authorised release.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Authorised {
    /// Name.
    pub name: String,
    /// Role.
    pub role: String,
    /// Date of the decision.
    pub date: NaiveDate,
}

/// One lot and its results.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LotData {
    /// Lot number.
    pub lot: String,
    /// Product code.
    pub product_code: String,
    /// Product name.
    pub product_name: String,
    /// Specification code.
    pub specification: String,
    /// Specification revision.
    pub revision: String,
    /// Date of manufacture.
    pub manufactured: NaiveDate,
    /// Retest date.
    pub retest: NaiveDate,
    /// First day of testing (null when the record does not hold it).
    pub tested_from: Option<NaiveDate>,
    /// Last day of testing (null when the record does not hold it).
    pub tested_to: Option<NaiveDate>,
    /// Results in reporting order.
    pub properties: Vec<PropertyData>,
}

/// One reported property.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PropertyData {
    /// Property key of the spec.
    pub key: String,
    /// Printed name.
    pub label: String,
    /// Test method.
    pub method: String,
    /// Reporting unit (empty for a dimensionless value).
    pub unit: String,
    /// Limits as printed (`53.0 – 59.0`, `≤ 1.00`, `≥ 450`, `report`).
    pub limits: String,
    /// Result as printed (rounded, in the reporting unit), or `not measured`.
    pub result: String,
    /// The recorded value at full precision, in the spec's unit (empty when not measured).
    pub result_full: String,
    /// Expanded uncertainty U (k = 2) in the reporting unit, when known.
    pub uncertainty: Option<String>,
    /// Verdict as printed.
    pub verdict: String,
}

/// Plain text: no-break spaces become ordinary spaces.
fn plain(s: &str) -> String {
    s.replace('\u{a0}', " ")
}

/// The companion of `cert`, filed beside the PDF named `pdf_file`.
pub fn data(cert: &Certificate, pdf_file: &str) -> CertificateData {
    CertificateData {
        format: FORMAT.to_string(),
        certificate_number: cert.number.clone(),
        pdf_file: pdf_file.to_string(),
        title: cert.title.clone(),
        issue_date: cert.issue_date,
        issuer: Party {
            name: cert.issuer.name.clone(),
            address: cert.issuer.address.clone(),
            contact: cert.issuer.contact.clone(),
            inspection_representative: cert.issuer.inspection_representative.clone(),
        },
        customer: cert.customer.as_ref().map(|c| CustomerData {
            name: c.name.clone(),
            address: c.address.clone(),
            part_number: c.part_number.clone(),
            purchase_order: c.purchase_order.clone(),
            quantity: c.quantity.as_deref().map(plain),
        }),
        inspection_document: cert.inspection_document.clone(),
        released: cert.released,
        conformity: ConformityData {
            statement: plain(&cert.conformity.statement),
            decision_rule: cert.conformity.decision_rule.clone(),
            guard_band: cert.conformity.guard_band.clone(),
        },
        authorisation: Authorised {
            name: cert.authorisation.name.clone(),
            role: cert.authorisation.role.clone(),
            date: cert.authorisation.date,
        },
        supersedes: cert.supersedes.clone(),
        lots: lots_data(cert),
    }
}

/// The companion file's bytes: pretty-printed JSON and a final line feed.
pub fn to_bytes(cert: &Certificate, pdf_file: &str) -> Vec<u8> {
    let mut out = serde_json::to_vec_pretty(&data(cert, pdf_file))
        .expect("the certificate data is plain strings, dates and lists");
    out.push(b'\n');
    out
}

/// The companion's file name for a certificate PDF `<lot>_<number>.pdf`: `<lot>_<number>.json`.
pub fn file_name(pdf_file: &str) -> String {
    format!("{}.json", pdf_file.strip_suffix(".pdf").unwrap_or(pdf_file))
}

/// Every lot of the certificate with its dates and results: the first lot from the rows
/// themselves, every further lot of a several-lot certificate from its cells (issue #16).
fn lots_data(cert: &Certificate) -> Vec<LotData> {
    let lots: Vec<crate::certificate::model::Lot> = if cert.lots.is_empty() {
        vec![cert.lot.clone()]
    } else {
        cert.lots.clone()
    };
    lots.iter()
        .enumerate()
        .map(|(i, lot)| LotData {
            lot: lot.id.clone(),
            product_code: cert.product.code.clone(),
            product_name: cert.product.name.clone(),
            specification: cert.spec.code.clone(),
            revision: cert.spec.revision.clone(),
            manufactured: lot.manufactured,
            retest: lot.retest,
            tested_from: lot.tested_from,
            tested_to: lot.tested_to,
            properties: cert
                .rows
                .iter()
                .map(|r| {
                    let cell = r.lots.get(i).filter(|c| c.lot == lot.id);
                    PropertyData {
                        key: r.key.clone(),
                        label: plain(&r.label),
                        method: r.method.clone(),
                        unit: r.unit.clone(),
                        limits: r.limits.clone(),
                        result: cell.map_or_else(|| r.result.clone(), |c| c.result.clone()),
                        result_full: cell.map_or_else(|| r.exact.clone(), |c| c.exact.clone()),
                        uncertainty: cell
                            .map_or_else(|| r.uncertainty.clone(), |c| c.uncertainty.clone()),
                        verdict: cell.map_or_else(|| r.verdict.clone(), |c| c.verdict.clone()),
                    }
                })
                .collect(),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fixture() -> Certificate {
        serde_json::from_str(include_str!(
            "../../tests/fixtures/certificates/customer.json"
        ))
        .unwrap()
    }

    #[test]
    fn the_companion_carries_the_printed_values() {
        let mut cert = fixture();
        cert.rows[0].label = "Viscosity at 75\u{a0}°C".into();
        cert.rows[0].exact = "0.53125".into();
        let d = data(&cert, "L_FW-1.pdf");
        assert_eq!(d.format, FORMAT);
        assert_eq!(d.certificate_number, cert.number);
        assert_eq!(d.lots.len(), 1);
        let p = &d.lots[0].properties[0];
        assert_eq!(p.label, "Viscosity at 75 °C", "no-break space made plain");
        assert_eq!(p.result, cert.rows[0].result);
        assert_eq!(p.result_full, "0.53125");
        assert_eq!(d.customer.as_ref().unwrap().name, "A&B <Ltd>");
        // It reads back as written.
        let bytes = to_bytes(&cert, "L_FW-1.pdf");
        assert_eq!(bytes.last(), Some(&b'\n'));
        let back: CertificateData = serde_json::from_slice(&bytes).unwrap();
        assert_eq!(back, d);
    }

    #[test]
    fn the_file_name_follows_the_pdf() {
        assert_eq!(
            file_name("F2611-D05_FW-000006.pdf"),
            "F2611-D05_FW-000006.json"
        );
    }
}
