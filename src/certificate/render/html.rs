//! HTML step: the certificate template rendered with tera 2, autoescaped.

use std::path::{Path, PathBuf};

use crate::certificate::model::Certificate;
use crate::error::{Error, Result};

/// File name of the certificate template inside the templates folder.
pub const CERTIFICATE_TEMPLATE: &str = "certificate.html.tera";
/// File name of the stylesheet the template includes.
pub const STYLESHEET: &str = "certificate.css";

/// The certificate templates, loaded from one templates folder only.
#[derive(Debug)]
pub struct Templates {
    tera: tera::Tera,
    dir: PathBuf,
}

impl Templates {
    /// Loads `certificate.html.tera` and `certificate.css` from `dir`. Nothing outside `dir`
    /// is read: an `{% include %}` of any other name fails as an unknown template.
    pub fn load(dir: &Path) -> Result<Templates> {
        let mut tera = tera::Tera::new();
        // Escape HTML in every value printed by the certificate template (its name does not
        // end in ".html", tera's default suffix list).
        tera.autoescape_on([".html.tera", ".html"]);
        for name in [STYLESHEET, CERTIFICATE_TEMPLATE] {
            let path = dir.join(name);
            let text =
                std::fs::read_to_string(&path).map_err(|e| Error::io(&path, "reading", e))?;
            tera.add_raw_template(name, &text)
                .map_err(|e| template_error(dir, &e))?;
        }
        Ok(Templates {
            tera,
            dir: dir.to_path_buf(),
        })
    }

    /// Renders the certificate template with every field of `cert` at top level.
    pub fn render(&self, cert: &Certificate) -> Result<String> {
        let context = tera::Context::from_serialize(cert).map_err(|e| {
            Error::invalid(
                "certificate data",
                format!("cannot be passed to the template: {e}"),
                "Report this as a bug in resinlot.",
            )
        })?;
        self.tera
            .render(CERTIFICATE_TEMPLATE, &context)
            .map_err(|e| template_error(&self.dir, &e))
    }
}

/// Renders `cert` with the templates in `templates_dir` (loads them on every call; use
/// [`Templates`] to render many).
pub fn render_html(templates_dir: &Path, cert: &Certificate) -> Result<String> {
    Templates::load(templates_dir)?.render(cert)
}

/// Turns a tera error into `file:line:column: message` with a fix.
fn template_error(dir: &Path, err: &tera::Error) -> Error {
    let report = match err.kind() {
        tera::ErrorKind::SyntaxError(r) | tera::ErrorKind::RenderingError(r) => Some(r),
        _ => None,
    };
    match report {
        Some(r) => {
            let file = if r.filename().is_empty() {
                CERTIFICATE_TEMPLATE
            } else {
                r.filename()
            };
            let span = r.span();
            Error::invalid(
                format!(
                    "{}:{}:{}",
                    dir.join(file).display(),
                    span.start_line,
                    span.start_col + 1
                ),
                r.message().trim_end_matches('.').to_string(),
                "Fix the template: the variables available are listed in the comment at the top of \
                 certificate.html.tera.",
            )
        }
        None => Error::invalid(
            dir.join(CERTIFICATE_TEMPLATE).display().to_string(),
            err.to_string().trim_end_matches('.').to_string(),
            "Fix the template: its variables are listed in the comment at its top.",
        ),
    }
}
