//! `/`: one search box. A lot id goes to its lot page, a certificate number to its certificate
//! page, a purchase order to its certificate (or to the shipments on it when there are
//! several); a near miss lists the nearest lot ids.

use axum::extract::{Query, State};
use axum::response::{IntoResponse, Redirect, Response};
use serde::{Deserialize, Serialize};

use crate::web::pages::{self, Link, PageError};
use crate::web::server::Shared;

/// The search box's field.
#[derive(Debug, Default, Deserialize)]
pub struct SearchQuery {
    /// What was typed: a lot id, a certificate number or a purchase order.
    #[serde(default)]
    pub q: String,
}

#[derive(Debug, Serialize)]
struct SearchPage {
    title: &'static str,
    q: String,
    products: Vec<Link>,
}

/// Where a search for `q` leads, read from the record now.
#[derive(Debug, Clone, PartialEq)]
pub enum Answer {
    /// A lot id in a trend file.
    Lot(String),
    /// A certificate number in the certificate log.
    Certificate(String),
    /// A purchase order on more than one customer certificate (reissues, or several
    /// deliveries on one order): the shipments on it.
    Order(String),
    /// Nothing matched.
    Nothing,
}

/// Looks `q` up: first as a certificate number in the log (exact), then as a lot id in the
/// trend files (exact, as `lookup` does), then as the purchase order of customer certificates
/// (exact, as `shipments --po` does).
pub fn resolve(config: &crate::web::Config, q: &str) -> Result<Answer, PageError> {
    if q.is_empty() {
        return Ok(Answer::Nothing);
    }
    if crate::support::ids::is_safe_id(q) {
        if crate::record::certlog::entries(&config.register)?
            .iter()
            .any(|e| e.number == q)
        {
            return Ok(Answer::Certificate(q.to_string()));
        }
        if crate::record::query::find_lot(&config.register, q)?.is_some() {
            return Ok(Answer::Lot(q.to_string()));
        }
    }
    let certs = crate::record::certlog::all_certificates(&config.register)?;
    let on_order = crate::record::shipments::shipments(
        &certs,
        &crate::record::shipments::Query {
            po: Some(q),
            ..Default::default()
        },
        &[],
    );
    Ok(match on_order.as_slice() {
        [] => Answer::Nothing,
        [one] => Answer::Certificate(one.number.clone()),
        _ => Answer::Order(q.to_string()),
    })
}

/// The first page: the search box, or where the search leads.
pub async fn page(
    State(config): State<Shared>,
    Query(query): Query<SearchQuery>,
) -> Result<Response, PageError> {
    pages::blocking(move || {
        let q = query.q.trim().to_string();
        if !q.is_empty() {
            match resolve(&config, &q)? {
                Answer::Lot(l) => return Ok(Redirect::to(&format!("/lot/{l}")).into_response()),
                Answer::Certificate(n) => {
                    return Ok(Redirect::to(&format!("/certificate/{n}")).into_response())
                }
                Answer::Order(po) => {
                    return Ok(Redirect::to(&format!(
                        "/shipments?po={}",
                        crate::web::find::encode(&po)
                    ))
                    .into_response())
                }
                Answer::Nothing if crate::support::ids::is_safe_id(&q) => {
                    return Err(crate::web::lot::unknown_lot(&config, &q)?)
                }
                Answer::Nothing => {
                    return Err(PageError::not_found(format!(
                        "Nothing in the record is called '{q}'. Type a lot id (as on the drum label), a certificate number or a customer's purchase order."
                    )))
                }
            }
        }
        let products = crate::record::query::trend_files(&config.register)?
            .iter()
            .filter_map(|p| p.file_stem().map(|s| s.to_string_lossy().to_string()))
            .map(|code| Link {
                href: format!("/product/{code}"),
                text: code,
            })
            .collect();
        pages::page(
            "search.html",
            &SearchPage {
                title: "Search the record",
                q,
                products,
            },
        )
    })
    .await
}
