//! `/shipments`: the customer certificates issued, one per delivery, newest first, with the
//! filters of `resinlot shipments` (customer, lot, purchase order, issue dates) and a CSV
//! download equal to `resinlot shipments --csv`.

use axum::extract::{Query, State};
use axum::http::header;
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};

use crate::record::query::parse_date;
use crate::record::shipments::{self, Query as ShipmentQuery};
use crate::spec::customer::Customer;
use crate::web::find::encode;
use crate::web::pages::{self, Link, PageError};
use crate::web::server::Shared;

/// The form's fields, as the browser sends them (empty fields are "not given").
#[derive(Debug, Default, Clone, Deserialize, Serialize)]
#[serde(default)]
pub struct ShipmentsForm {
    /// Customer file stem or legal name.
    pub customer: String,
    /// A lot the certificate covers.
    pub lot: String,
    /// Purchase order, exactly as on the certificate.
    pub po: String,
    /// Issued on or after (YYYY-MM-DD).
    pub since: String,
    /// Issued on or before (YYYY-MM-DD).
    pub until: String,
    /// `csv` for the download.
    pub format: String,
}

/// One certificate of the table.
#[derive(Debug, Serialize)]
struct Row {
    number: Link,
    issued: String,
    customer: String,
    po: String,
    quantity: String,
    lots: Vec<Link>,
    product: String,
    status: String,
    supersedes: String,
}

/// One entry of the form's customer list.
#[derive(Debug, Serialize)]
struct CustomerChoice {
    /// File stem (the value sent).
    id: String,
    /// Legal name (what is shown).
    name: String,
}

#[derive(Debug, Serialize)]
struct ShipmentsPage {
    title: &'static str,
    form: ShipmentsForm,
    /// Every customer, for the form's list.
    customers: Vec<CustomerChoice>,
    /// Customer certificates in the whole log (0: nothing shipped yet).
    issued: usize,
    rows: Vec<Row>,
    summary: String,
    csv_link: String,
}

fn optional(s: &str) -> Option<&str> {
    let s = s.trim();
    (!s.is_empty()).then_some(s)
}

/// The shipments page, or its CSV download.
pub async fn page(
    State(config): State<Shared>,
    Query(form): Query<ShipmentsForm>,
) -> Result<Response, PageError> {
    pages::blocking(move || answer(&config, form)).await
}

fn customers_of(specs: &std::path::Path) -> Result<Vec<Customer>, PageError> {
    if !specs.join("customers").is_dir() {
        return Ok(Vec::new());
    }
    let set = crate::spec::SpecSet::load(specs)?;
    Ok(crate::spec::customer::load_all(
        &specs.join("customers"),
        &set,
    )?)
}

fn answer(config: &crate::web::Config, form: ShipmentsForm) -> Result<Response, PageError> {
    let customers = customers_of(&config.specs)?;
    let customer = optional(&form.customer);
    if let Some(c) = customer {
        shipments::known_customer(
            &format!("customer '{c}'"),
            c,
            &customers,
            &config.specs.join("customers"),
        )?;
    }
    let since = optional(&form.since)
        .map(|d| parse_date("issued from", d))
        .transpose()?;
    let until = optional(&form.until)
        .map(|d| parse_date("issued to", d))
        .transpose()?;
    if let (Some(s), Some(u)) = (since, until) {
        if s > u {
            return Err(PageError::bad_request(format!(
                "issued from {s} to {u}: the period ends before it starts. Give a first day on or before the last."
            )));
        }
    }
    let certs = crate::record::certlog::all_certificates(&config.register)?;
    let q = ShipmentQuery {
        customer,
        lot: optional(&form.lot),
        po: optional(&form.po),
        part_number: None,
        since,
        until,
    };
    let found = shipments::shipments(&certs, &q, &customers);
    if form.format == "csv" {
        return Ok((
            [
                (header::CONTENT_TYPE, "text/csv; charset=utf-8"),
                (
                    header::CONTENT_DISPOSITION,
                    "attachment; filename=\"shipments.csv\"",
                ),
            ],
            shipments::csv_text(&found)?,
        )
            .into_response());
    }
    let issued = shipments::shipments(&certs, &ShipmentQuery::default(), &[]).len();
    let current = found
        .iter()
        .filter(|c| c.status == crate::record::certlog::CertStatus::Current)
        .count();
    let summary = format!(
        "{} certificate{} ({current} current).",
        found.len(),
        if found.len() == 1 { "" } else { "s" }
    );
    let rows = found
        .iter()
        .map(|c| Row {
            number: Link {
                href: format!("/certificate/{}", c.number),
                text: c.number.clone(),
            },
            issued: c.issued_at.get(..10).unwrap_or(&c.issued_at).to_string(),
            customer: c.customer_name.clone(),
            po: c.po.clone(),
            quantity: c.quantity.clone(),
            lots: c
                .lots
                .iter()
                .map(|l| Link {
                    href: format!("/lot/{l}"),
                    text: l.clone(),
                })
                .collect(),
            product: c.product.clone(),
            status: c.status.as_str().to_string(),
            supersedes: c.supersedes.clone(),
        })
        .collect();
    let fields = [
        ("customer", &form.customer),
        ("lot", &form.lot),
        ("po", &form.po),
        ("since", &form.since),
        ("until", &form.until),
    ];
    let csv_link = format!(
        "/shipments?{}&format=csv",
        fields
            .iter()
            .map(|(k, v)| format!("{k}={}", encode(v.trim())))
            .collect::<Vec<_>>()
            .join("&")
    );
    pages::page(
        "shipments.html",
        &ShipmentsPage {
            title: "Shipments",
            customers: customers
                .iter()
                .map(|c| CustomerChoice {
                    id: c.id.clone(),
                    name: c.name.clone(),
                })
                .collect(),
            form,
            issued,
            rows,
            summary,
            csv_link,
        },
    )
}
