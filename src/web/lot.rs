//! `/lot/<LOT>`: what `resinlot lookup` says about a lot, as a page.

use axum::extract::{Path, State};
use axum::response::Response;
use serde::Serialize;

use crate::record::answer::{self, LotAnswer};
use crate::spec::SpecSet;
use crate::web::pages::{self, Link, PageError};
use crate::web::server::Shared;

/// What the lot page shows.
#[derive(Debug, Serialize)]
struct LotPage {
    title: String,
    answer: LotAnswer,
    /// The lot's certificates with their page links (same order as `answer.certificates`).
    certificate_links: Vec<String>,
    product_link: String,
}

/// The lot page, or 404 with the near lot ids.
pub async fn page(
    State(config): State<Shared>,
    Path(lot): Path<String>,
) -> Result<Response, PageError> {
    pages::blocking(move || {
        let answer = lot_answer(&config, &lot)?;
        pages::page(
            "lot.html",
            &LotPage {
                title: format!("Lot {}", answer.lot),
                certificate_links: answer
                    .certificates
                    .iter()
                    .map(|c| format!("/certificate/{}", c.number))
                    .collect(),
                product_link: format!("/product/{}", answer.product),
                answer,
            },
        )
    })
    .await
}

/// The answer for `lot`, read from the record now.
pub fn lot_answer(config: &crate::web::Config, lot: &str) -> Result<LotAnswer, PageError> {
    if !crate::support::ids::is_safe_id(lot) {
        return Err(PageError::not_found(format!(
            "'{lot}' is not a lot id: lot ids are letters, digits, '-', '_' or '.'."
        )));
    }
    let Some(rec) = answer::load(&config.register, lot)? else {
        return Err(unknown_lot(config, lot)?);
    };
    let specs = if config.specs.is_dir() {
        Some(SpecSet::load(&config.specs)?)
    } else {
        None
    };
    let today = crate::support::clock::now()?.date_naive();
    Ok(answer::answer(&rec, rec.spec(specs.as_ref()), today))
}

/// The 404 page for a lot the record does not hold, with links to the nearest ids.
pub fn unknown_lot(config: &crate::web::Config, lot: &str) -> Result<PageError, PageError> {
    let near = crate::record::query::suggestions(&config.register, lot, 3)?;
    let mut e = PageError::not_found(format!(
        "Lot '{lot}' is not in the record. {}",
        answer::not_found_hint(&near)
    ));
    e.suggestions = near
        .iter()
        .map(|l| Link {
            href: format!("/lot/{l}"),
            text: l.clone(),
        })
        .collect();
    Ok(e)
}
