//! `/product/<CODE>`: a product's trend as `resinlot trend` computes it over every lot: the
//! I-MR chart of each property (inline SVG from the project's chart module), control limits
//! and capability, the run-rule signals newest first, and the viscosity–Mn plot (`trend::viscosity_chart`).

use axum::extract::{Path, State};
use axum::response::Response;
use serde::Serialize;

use crate::spec::keys;
use crate::spec::SpecSet;
use crate::stats::RuleSet;
use crate::trend::product::{self, Baseline, Selection, TrendRequest};
use crate::web::pages::{self, PageError};
use crate::web::server::Shared;

/// One signal of the table.
#[derive(Debug, Serialize)]
struct SignalLine {
    rule: u8,
    lot: String,
    href: String,
    manufactured: String,
    description: &'static str,
}

/// One property's section of the page.
#[derive(Debug, Serialize)]
struct PropertySection {
    key: String,
    heading: String,
    /// The I-MR chart, SVG made by `trend::chart` from record values (lot ids are safe ids and
    /// plotters escapes its text), placed in the page as it is.
    chart_svg: String,
    figures: Vec<(String, String)>,
    signals: Vec<SignalLine>,
    warnings: Vec<String>,
}

#[derive(Debug, Serialize)]
struct ProductPage {
    title: String,
    product: String,
    product_name: String,
    overview: String,
    properties: Vec<PropertySection>,
    viscosity_svg: String,
    viscosity_text: String,
}

/// The product page, or 404 for a product the record does not hold.
pub async fn page(
    State(config): State<Shared>,
    Path(code): Path<String>,
) -> Result<Response, PageError> {
    pages::blocking(move || {
        let page = build(&config, &code)?;
        pages::page("product.html", &page)
    })
    .await
}

fn build(config: &crate::web::Config, code: &str) -> Result<ProductPage, PageError> {
    let path = crate::record::trend_file::path_for(&config.register, code);
    if !crate::support::ids::is_product_code(code) || !path.is_file() {
        return Err(PageError::not_found(format!(
            "The record holds no lots of product '{code}'. The products with lots are listed on the first page."
        )));
    }
    let specs = SpecSet::load(&config.specs)?;
    let keys = crate::record::query::trend_keys(&path)?;
    let columns = product::columns_for(&keys, None);
    let (_, lots) = crate::record::query::current_table(&path, &columns, false)?;
    let lots = std::sync::Arc::new(product::select(lots, &Selection::default()));
    if lots.len() < 2 {
        return Err(PageError::not_found(format!(
            "Product {code} has {} lot in the record; a trend needs at least two.",
            lots.len()
        )));
    }
    let spec = product::spec_for(&specs, code, &lots);
    let trends = product::property_trends(&TrendRequest {
        product: code,
        columns: &columns,
        lots: &lots,
        spec,
        property: None,
        baseline: &Baseline::All,
        rules: RuleSet::parse("all", "rules")?,
    })?;
    let mut properties = Vec::new();
    for t in &trends {
        let svg = crate::trend::chart::imr_svg(&crate::trend::chart::ChartInput::of_trend(t))?;
        let mut signals: Vec<SignalLine> = t
            .signals
            .iter()
            .map(|s| SignalLine {
                rule: s.rule,
                lot: s.lot.clone(),
                href: format!("/lot/{}", s.lot),
                manufactured: s.manufactured.clone(),
                description: s.description,
            })
            .collect();
        signals.reverse();
        properties.push(PropertySection {
            key: t.property.clone(),
            heading: format!(
                "{}{}: {} lots from {} to {}",
                t.label,
                if t.unit.is_empty() {
                    String::new()
                } else {
                    format!(", {}", t.unit)
                },
                t.n,
                t.date_from,
                t.date_to
            ),
            chart_svg: String::from_utf8_lossy(&svg).into_owned(),
            figures: crate::trend::text::detail_pairs(t),
            signals,
            warnings: t.warnings.clone(),
        });
    }
    let visc = product::viscosity_check_of(&lots, &columns);
    let viscosity_svg = match &visc {
        Some(v) => {
            let unit = spec
                .and_then(|s| s.property(keys::VISCOSITY))
                .map_or(String::new(), |p| p.unit.clone());
            let svg = crate::trend::viscosity_chart::viscosity_svg(code, &unit, v)?;
            String::from_utf8_lossy(&svg).into_owned()
        }
        None => String::new(),
    };
    Ok(ProductPage {
        title: format!("Product {code}"),
        product: code.to_string(),
        product_name: spec.map(|s| s.name.clone()).unwrap_or_default(),
        overview: crate::trend::text::summary(code, &trends, visc.as_ref(), false),
        properties,
        viscosity_svg,
        viscosity_text: crate::trend::text::visc_text(visc.as_ref())
            .trim()
            .to_string(),
    })
}
