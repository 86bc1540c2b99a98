//! Certificate rendering: data model -> tera template -> HTML -> PDF, one certificate or many.
//!
//! The HTML step reads the lab's templates (`certificate.html.tera`, `certificate.css`) from a
//! templates folder at run time (or the built-in ones), so wording and layout change without
//! recompiling. The PDF step lays the HTML out with printpdf's HTML engine using the bundled
//! DejaVu fonts only, one page at a time when the certificate runs to several ([`layout`]),
//! then stamps the footer (certificate number, page x of y) and, for a lot that is not
//! released, the NOT RELEASED marking onto every page with printpdf's own operations.

mod engine;
mod html;
pub mod layout;
mod pdf;

pub use html::{render_html, Templates, CERTIFICATE_TEMPLATE, STYLESHEET};
pub use pdf::{render_pdf, FontPool, BANNER_BOTTOM_MM};

use std::path::Path;

use rayon::prelude::*;

use crate::certificate::model::Certificate;
use crate::error::Result;

/// A rendered certificate: the HTML (for `--html` and e-mail bodies) and the PDF bytes.
#[derive(Debug, Clone)]
pub struct Rendered {
    /// The HTML the PDF was laid out from.
    pub html: String,
    /// The finished PDF file.
    pub pdf: Vec<u8>,
}

/// Renders one certificate with already-loaded templates and fonts.
pub fn render_one(templates: &Templates, fonts: &FontPool, cert: &Certificate) -> Result<Rendered> {
    let html = templates.render(cert)?;
    let pdf = render_pdf(templates, &html, cert, fonts)?;
    Ok(Rendered { html, pdf })
}

/// Renders many certificates in parallel (rayon), loading the templates once and sharing one
/// font pool. Results keep the order of `certs`; the first error stops the batch.
pub fn render_batch(
    templates_dir: &Path,
    certs: &[Certificate],
    fonts: &FontPool,
) -> Result<Vec<Rendered>> {
    let templates = Templates::load(templates_dir)?;
    certs
        .par_iter()
        .map(|cert| render_one(&templates, fonts, cert))
        .collect()
}
