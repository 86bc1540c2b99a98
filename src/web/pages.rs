//! The page templates (tera, compiled into the binary from `templates/web/`, every value
//! HTML-escaped) and the error page every failure becomes: plain words and a status code,
//! never a stack trace.

use std::sync::OnceLock;

use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

use crate::error::{Error, Result};

/// The page templates, by name, as compiled in.
const TEMPLATES: [(&str, &str); 10] = [
    ("base.html", include_str!("../../templates/web/base.html")),
    (
        "search.html",
        include_str!("../../templates/web/search.html"),
    ),
    ("lot.html", include_str!("../../templates/web/lot.html")),
    ("find.html", include_str!("../../templates/web/find.html")),
    (
        "product.html",
        include_str!("../../templates/web/product.html"),
    ),
    (
        "certificate.html",
        include_str!("../../templates/web/certificate.html"),
    ),
    (
        "verify.html",
        include_str!("../../templates/web/verify.html"),
    ),
    (
        "shipments.html",
        include_str!("../../templates/web/shipments.html"),
    ),
    ("login.html", include_str!("../../templates/web/login.html")),
    ("error.html", include_str!("../../templates/web/error.html")),
];

/// The stylesheet every page links (served at `/site.css`, allowed by the CSP as 'self').
pub const STYLESHEET: &str = include_str!("../../templates/web/site.css");

/// The compiled templates, or why they do not compile (a bug in a template).
fn templates() -> &'static std::result::Result<tera::Tera, String> {
    static TERA: OnceLock<std::result::Result<tera::Tera, String>> = OnceLock::new();
    TERA.get_or_init(|| {
        let mut tera = tera::Tera::new();
        tera.autoescape_on([".html"]);
        tera.add_raw_templates(TEMPLATES)
            .map_err(|e| e.to_string())?;
        Ok(tera)
    })
}

/// Checks that the templates compile (done once at start, so a broken template stops the
/// server before it answers anyone).
pub fn check_templates() -> Result<()> {
    templates().as_ref().map(|_| ()).map_err(|e| {
        Error::invalid(
            "templates/web",
            format!("a page template does not compile: {e}"),
            "Report this as a bug in resinlot.",
        )
    })
}

/// Renders page `name` with `context` (a serializable struct) into HTML.
pub fn render<C: Serialize>(name: &str, context: &C) -> std::result::Result<String, PageError> {
    let tera = templates()
        .as_ref()
        .map_err(|e| PageError::internal(format!("the page templates do not compile: {e}")))?;
    let ctx = tera::Context::from_serialize(context)
        .map_err(|e| PageError::internal(format!("page data: {e}")))?;
    tera.render(name, &ctx)
        .map_err(|e| PageError::internal(format!("page {name}: {e}")))
}

/// An HTML page with status `status`.
pub fn html(status: StatusCode, body: String) -> Response {
    (
        status,
        [(header::CONTENT_TYPE, "text/html; charset=utf-8")],
        body,
    )
        .into_response()
}

/// Renders page `name` and answers it with 200 OK.
pub fn page<C: Serialize>(name: &str, context: &C) -> std::result::Result<Response, PageError> {
    Ok(html(StatusCode::OK, render(name, context)?))
}

/// A link shown on a page: where it goes and its text.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Link {
    /// The address (built by the server from record ids, never taken from a request).
    pub href: String,
    /// The text.
    pub text: String,
}

/// A request the server cannot answer with the page asked for; shown as a page in plain words.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PageError {
    /// HTTP status code.
    #[serde(skip)]
    pub status: StatusCode,
    /// The status code as a number, for the page.
    pub code: u16,
    /// Heading.
    pub title: String,
    /// What went wrong and what to do, in plain words.
    pub message: String,
    /// Links worth trying instead (near lot ids).
    pub suggestions: Vec<Link>,
}

impl PageError {
    /// An error page with `status`, `title` and `message`.
    pub fn new(status: StatusCode, title: &str, message: impl Into<String>) -> PageError {
        PageError {
            status,
            code: status.as_u16(),
            title: title.to_string(),
            message: message.into(),
            suggestions: Vec::new(),
        }
    }

    /// 404 Not Found.
    pub fn not_found(message: impl Into<String>) -> PageError {
        PageError::new(StatusCode::NOT_FOUND, "Not found", message)
    }

    /// 400 Bad Request: something typed into a form cannot be used.
    pub fn bad_request(message: impl Into<String>) -> PageError {
        PageError::new(StatusCode::BAD_REQUEST, "Cannot use that", message)
    }

    /// 500: the record could not be read as needed.
    pub fn internal(message: impl Into<String>) -> PageError {
        PageError::new(
            StatusCode::INTERNAL_SERVER_ERROR,
            "The record could not be read",
            message,
        )
    }
}

impl From<Error> for PageError {
    /// Bad input becomes 400 with the library's message (what, where, what to do); a file that
    /// cannot be read becomes 500 naming the file; a shortfall becomes 404.
    fn from(e: Error) -> PageError {
        match &e {
            Error::Invalid { .. } => PageError::bad_request(e.to_string()),
            Error::Io { source, .. } => PageError::internal(format!(
                "{e}: {source}. Ask the QC lab to run `resinlot verify` on the workspace."
            )),
            Error::Shortfall(m) => PageError::not_found(m.clone()),
        }
    }
}

impl IntoResponse for PageError {
    fn into_response(self) -> Response {
        match render("error.html", &self) {
            Ok(body) => html(self.status, body),
            // The error template itself failed: plain text, still in words.
            Err(e) => (
                self.status,
                [(header::CONTENT_TYPE, "text/plain; charset=utf-8")],
                format!("{}: {}\n({})\n", self.title, self.message, e.message),
            )
                .into_response(),
        }
    }
}

/// Runs blocking record work on tokio's blocking pool, so slow disks never stall the
/// server's event loop.
pub async fn blocking<T, F>(f: F) -> std::result::Result<T, PageError>
where
    F: FnOnce() -> std::result::Result<T, PageError> + Send + 'static,
    T: Send + 'static,
{
    tokio::task::spawn_blocking(f)
        .await
        .map_err(|e| PageError::internal(format!("the request's work stopped: {e}")))?
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_template_compiles() {
        check_templates().unwrap();
    }

    #[test]
    fn the_error_page_escapes_what_it_shows() {
        let e = PageError::not_found("lot '<script>alert(1)</script>' is not in the record");
        let body = render("error.html", &e).unwrap();
        assert!(body.contains("&lt;script&gt;"), "{body}");
        assert!(!body.contains("<script>"), "{body}");
    }

    #[test]
    fn library_errors_keep_their_words_and_pick_a_status() {
        let e: PageError = Error::invalid("where", "bad window", "Write key=lo..hi.").into();
        assert_eq!(e.status, StatusCode::BAD_REQUEST);
        assert_eq!(e.message, "where: bad window. Write key=lo..hi.");
        let e: PageError = Error::Shortfall("lot 'X' is not in the record".into()).into();
        assert_eq!(e.status, StatusCode::NOT_FOUND);
    }
}
