//! HTML step: the certificate template rendered with tera 2, autoescaped, once per page.

use std::path::{Path, PathBuf};

use crate::certificate::model::{Certificate, SITE_FILE};
use crate::certificate::render::layout::{whole, Page};
use crate::error::{Error, Result};

/// File name of the certificate template inside the templates folder.
pub const CERTIFICATE_TEMPLATE: &str = "certificate.html.tera";
/// File name of the stylesheet the template includes.
pub const STYLESHEET: &str = "certificate.css";

/// The shipped certificate template, used when no templates folder exists.
const BUILT_IN_TEMPLATE: &str = include_str!("../../../templates/certificate.html.tera");
/// The shipped stylesheet, used when no templates folder exists.
const BUILT_IN_STYLESHEET: &str = include_str!("../../../templates/certificate.css");

/// The certificate templates, loaded from one templates folder only, or the built-in ones
/// when that folder does not exist.
#[derive(Debug)]
pub struct Templates {
    tera: tera::Tera,
    dir: PathBuf,
    built_in: bool,
    paged: bool,
    builtin_family: bool,
}

impl Templates {
    /// Loads `certificate.html.tera` and `certificate.css` from `dir`. Nothing outside `dir`
    /// is read: an `{% include %}` of any other name fails as an unknown template. The
    /// built-in templates (the shipped ones) are used instead, and [`Templates::notice`] says
    /// so, when `dir` does not exist or holds the site file but neither template file; any
    /// other folder must hold both files.
    pub fn load(dir: &Path) -> Result<Templates> {
        let mut tera = tera::Tera::new();
        // Escape HTML in every value printed by the certificate template (its name does not
        // end in ".html", tera's default suffix list).
        tera.autoescape_on([".html.tera", ".html"]);
        let has = |name: &str| dir.join(name).exists();
        let mut paged = false;
        let mut both = String::new();
        let built_in =
            !dir.exists() || (has(SITE_FILE) && !has(STYLESHEET) && !has(CERTIFICATE_TEMPLATE));
        for (name, shipped) in [
            (STYLESHEET, BUILT_IN_STYLESHEET),
            (CERTIFICATE_TEMPLATE, BUILT_IN_TEMPLATE),
        ] {
            let text = if built_in {
                shipped.to_string()
            } else {
                let path = dir.join(name);
                std::fs::read_to_string(&path).map_err(|e| Error::io(&path, "reading", e))?
            };
            if name == CERTIFICATE_TEMPLATE {
                paged = prints_page_rows(&text);
            }
            both.push_str(&text);
            tera.add_raw_template(name, &text)
                .map_err(|e| template_error(dir, &e))?;
        }
        Ok(Templates {
            tera,
            dir: dir.to_path_buf(),
            built_in,
            paged,
            builtin_family: names_builtin_family(&both),
        })
    }

    /// True when the certificate template prints `page.rows` (it lays out one page of a
    /// paginated certificate); a template from before issue #17 prints every row, and its
    /// long certificates are left to the HTML engine's own page breaks.
    pub fn paged(&self) -> bool {
        self.paged
    }

    /// True when the template or stylesheet may select one of printpdf's built-in faces by
    /// name (Times, Helvetica, Arial, Courier, Symbol, Zapf Dingbats, or a generic family):
    /// only then are those faces registered for the layout (issue #20).
    pub fn names_builtin_family(&self) -> bool {
        self.builtin_family
    }

    /// A one-line notice when the built-in templates stand in for a missing folder.
    pub fn notice(&self) -> Option<String> {
        self.built_in.then(|| {
            format!(
                "note: {} holds no certificate template; certificates use the built-in template and stylesheet (put certificate.html.tera and certificate.css there, or give --templates DIR, for your own)",
                self.dir.display()
            )
        })
    }

    /// Renders the whole certificate as one HTML document (every row, note and the closing
    /// block under one head), as written beside the PDF with `--html`.
    pub fn render(&self, cert: &Certificate) -> Result<String> {
        self.render_page(cert, &whole(cert))
    }

    /// Renders one page: every field of `cert` at top level and `page` saying what the page
    /// holds (see [`Page`]).
    pub fn render_page(&self, cert: &Certificate, page: &Page) -> Result<String> {
        let bug = |e: tera::Error| {
            Error::invalid(
                "certificate data",
                format!("cannot be passed to the template: {e}"),
                "Report this as a bug in resinlot.",
            )
        };
        let mut context = tera::Context::from_serialize(cert).map_err(bug)?;
        context.insert("page", page);
        self.tera
            .render(CERTIFICATE_TEMPLATE, &context)
            .map_err(|e| template_error(&self.dir, &e))
    }
}

/// True when `template` uses `page.rows` outside its `{# ... #}` comments.
fn prints_page_rows(template: &str) -> bool {
    let mut rest = template;
    let mut code = String::new();
    while let Some(at) = rest.find("{#") {
        code.push_str(&rest[..at]);
        rest = rest[at..]
            .find("#}")
            .map_or("", |end| &rest[at + end + 2..]);
    }
    code.push_str(rest);
    code.contains("page.rows")
}

/// True when `text` mentions, in any case and anywhere (comments, wording), a family name
/// that printpdf 0.12 maps to one of its built-in faces, or a generic family (`serif`,
/// `sans-serif`, `monospace`), or sets no `font-family` at all. Erring towards true only
/// costs time: the built-in faces are then registered as printpdf does.
fn names_builtin_family(text: &str) -> bool {
    let lower = text.to_ascii_lowercase();
    const NAMES: [&str; 8] = [
        "times",
        "helvetica",
        "arial",
        "courier",
        "symbol",
        "zapf",
        "serif",
        "monospace",
    ];
    NAMES.iter().any(|n| lower.contains(n)) || !lower.contains("font-family")
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_family_names_are_found_in_any_case_issue_20() {
        let shipped = format!("{BUILT_IN_STYLESHEET}{BUILT_IN_TEMPLATE}");
        assert!(!names_builtin_family(&shipped));
        // No family set anywhere: the layout's default is a generic family.
        assert!(names_builtin_family("<p>{{ number }}</p>"));
        assert!(!names_builtin_family(
            "body { font-family: \"DejaVu Sans\"; }"
        ));
        for css in [
            "body { font-family: Helvetica; }",
            "td { font-family: \"Times New Roman\", serif }",
            "p { font-family: 'Courier New' }",
            "h1 { font-family: ARIAL }",
            "b { font-family: \"DejaVu Sans\", sans-serif }",
            "pre { font-family: monospace }",
            "i { font-family: Symbol }",
            "u { font-family: ZapfDingbats }",
        ] {
            assert!(names_builtin_family(css), "{css}");
        }
    }

    #[test]
    fn page_rows_in_comments_do_not_count() {
        assert!(prints_page_rows("{% for row in page.rows %}"));
        assert!(!prints_page_rows("{# page.rows #}{% for row in rows %}"));
        assert!(prints_page_rows(
            "{# note #}{{ page.rows | length }}{# more #}"
        ));
        assert!(!prints_page_rows("{# unterminated page.rows"));
    }
}
