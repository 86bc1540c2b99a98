//! `/find`: the `find` command as a form: product, windows, customer, status and dates, with
//! the same rules (`record::find::search`), a results table and a CSV download equal to
//! `resinlot find --csv`.

use axum::extract::{Query, State};
use axum::http::header;
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};

use crate::lot::evaluate::Status;
use crate::record::find::{self, Search};
use crate::record::query::{parse_date, parse_window, Window};
use crate::web::pages::{self, PageError};
use crate::web::server::Shared;

/// The form's fields, as the browser sends them (empty fields are "not given").
#[derive(Debug, Default, Clone, Deserialize, Serialize)]
#[serde(default)]
pub struct FindForm {
    /// Product code.
    pub product: String,
    /// Windows as `find --where` takes them, separated by spaces, commas or lines
    /// (`mn=1900..2100 acid_value=..0.5`).
    #[serde(rename = "where")]
    pub windows: String,
    /// Status (released, on_hold, rejected, incomplete), empty for the default.
    pub status: String,
    /// Customer file stem, empty for none.
    pub customer: String,
    /// Manufactured on or after (YYYY-MM-DD).
    pub from: String,
    /// Manufactured on or before (YYYY-MM-DD).
    pub to: String,
    /// `csv` for the download.
    pub format: String,
    /// `on` (the checkbox) to list lots past their retest date too.
    pub include_expired: String,
}

/// One lot of the results table.
#[derive(Debug, Serialize)]
struct FoundLot {
    lot: String,
    href: String,
    manufactured: String,
    status: String,
    values: Vec<String>,
}

#[derive(Debug, Serialize)]
struct FindPage {
    title: &'static str,
    form: FindForm,
    products: Vec<String>,
    customers: Vec<String>,
    statuses: Vec<&'static str>,
    searched: bool,
    columns: Vec<String>,
    lots: Vec<FoundLot>,
    summary: String,
    expired: String,
    csv_link: String,
}

/// Percent-encodes a query-string value (RFC 3986 unreserved characters pass as they are).
pub fn encode(s: &str) -> String {
    s.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'_' | b'.' | b'~' => {
                (b as char).to_string()
            }
            _ => format!("%{b:02X}"),
        })
        .collect()
}

/// The windows typed into the form, each checked as `find --where` checks it.
pub fn windows_of(text: &str) -> crate::error::Result<Vec<Window>> {
    text.split(|c: char| c.is_whitespace() || c == ',' || c == ';')
        .filter(|w| !w.is_empty())
        .map(parse_window)
        .collect()
}

/// Names the form's field where the library names the command's flag (`--where` is the
/// Windows field here).
fn on_the_form(e: crate::error::Error) -> crate::error::Error {
    e.at(|place| place.replacen("--where", "Windows", 1))
}

fn optional(s: &str) -> Option<&str> {
    let s = s.trim();
    (!s.is_empty()).then_some(s)
}

/// The customers' file stems in `specs/customers`, sorted.
fn customers(specs: &std::path::Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(specs.join("customers"))
        .map(|rd| {
            rd.filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.extension().is_some_and(|x| x == "toml"))
                .filter_map(|p| p.file_stem().map(|s| s.to_string_lossy().to_string()))
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

/// The find page, its results, or the CSV download.
pub async fn page(
    State(config): State<Shared>,
    Query(form): Query<FindForm>,
) -> Result<Response, PageError> {
    pages::blocking(move || answer(&config, form)).await
}

fn answer(config: &crate::web::Config, form: FindForm) -> Result<Response, PageError> {
    let products: Vec<String> = crate::record::query::trend_files(&config.register)?
        .iter()
        .filter_map(|p| p.file_stem().map(|s| s.to_string_lossy().to_string()))
        .collect();
    let mut page = FindPage {
        title: "Find lots",
        products,
        customers: customers(&config.specs),
        statuses: vec!["released", "on_hold", "rejected", "incomplete"],
        searched: false,
        columns: Vec::new(),
        lots: Vec::new(),
        summary: String::new(),
        expired: String::new(),
        csv_link: String::new(),
        form: form.clone(),
    };
    let Some(product) = optional(&form.product) else {
        return pages::page("find.html", &page);
    };
    if !page.products.iter().any(|p| p == product) {
        return Err(PageError::bad_request(format!(
            "product '{product}': the record holds no lots of it. Choose one of: {}.",
            page.products.join(", ")
        )));
    }
    let windows = windows_of(&form.windows).map_err(on_the_form)?;
    let status = match optional(&form.status) {
        None => None,
        Some(s) => Some(Status::parse(s).ok_or_else(|| {
            PageError::bad_request(format!(
                "status '{s}': not a lot status. Use released, on_hold, rejected or incomplete."
            ))
        })?),
    };
    let from = optional(&form.from)
        .map(|d| parse_date("from", d))
        .transpose()?;
    let to = optional(&form.to)
        .map(|d| parse_date("to", d))
        .transpose()?;
    let customer = optional(&form.customer);
    if let Some(c) = customer {
        if !page.customers.iter().any(|x| x == c) {
            return Err(PageError::bad_request(format!(
                "customer '{c}': no such customer file in the specs. Choose one from the list."
            )));
        }
    }
    let csv = form.format == "csv";
    let trend_file = crate::record::trend_file::path_for(&config.register, product);
    let found = find::search(&Search {
        product,
        trend_file: &trend_file,
        windows: &windows,
        status,
        from,
        to,
        customer,
        specs: &config.specs,
        full_precision: false,
        every: csv,
        include_expired: !form.include_expired.is_empty(),
        today: crate::support::clock::now()?.date_naive(),
    })
    .map_err(on_the_form)?;
    if csv {
        let text = find::csv_text(product, &found)?;
        let disposition = format!("attachment; filename=\"{product}-lots.csv\"");
        return Ok((
            [
                (header::CONTENT_TYPE, "text/csv; charset=utf-8".to_string()),
                (header::CONTENT_DISPOSITION, disposition),
            ],
            text,
        )
            .into_response());
    }
    page.searched = true;
    page.columns = find::shown_keys(&found.keys, &windows);
    page.lots = found
        .hits
        .iter()
        .map(|&i| (i, &found.lots[i]))
        .map(|(i, r)| FoundLot {
            lot: r.lot.to_string(),
            href: format!("/lot/{}", r.lot),
            manufactured: r.manufactured.to_string(),
            status: found.status_text(i).replace('_', " "),
            values: page
                .columns
                .iter()
                .map(|k| find::table_cell(&found, r, k))
                .collect(),
        })
        .collect();
    page.expired = found.expired_text().trim().replace(
        "(--include-expired lists",
        "(tick \"include expired\" to list",
    );
    let n = found.hits.len();
    page.summary = format!(
        "{n} lot{} of {product} match{}.",
        if n == 1 { "" } else { "s" },
        found
            .customer_name
            .as_ref()
            .map(|c| format!(" {c}'s requirements (tighter windows, product decision rule)"))
            .unwrap_or_default()
    );
    let fields = [
        ("product", &form.product),
        ("where", &form.windows),
        ("status", &form.status),
        ("customer", &form.customer),
        ("from", &form.from),
        ("to", &form.to),
        ("include_expired", &form.include_expired),
    ];
    page.csv_link = format!(
        "/find?{}&format=csv",
        fields
            .iter()
            .map(|(k, v)| format!("{k}={}", encode(v.trim())))
            .collect::<Vec<_>>()
            .join("&")
    );
    pages::page("find.html", &page)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn windows_are_split_and_checked_as_find_does() {
        let w = windows_of("mn=1900..2100, acid_value=..0.5\nviscosity=3..").unwrap();
        assert_eq!(w.len(), 3);
        assert_eq!(w[1].key, "acid_value");
        assert_eq!(w[1].hi, Some(0.5));
        assert!(windows_of("mn=abc").is_err());
        assert!(windows_of("  ").unwrap().is_empty());
    }

    #[test]
    fn query_values_are_percent_encoded() {
        assert_eq!(encode("mn=1900..2100 a/b"), "mn%3D1900..2100%20a%2Fb");
        assert_eq!(encode("PD-2000"), "PD-2000");
    }
}
