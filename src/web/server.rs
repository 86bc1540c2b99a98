//! The server: its settings, the routes, and what every response carries (security headers,
//! the token check, body limits).

use std::net::SocketAddr;
use std::path::PathBuf;
use std::sync::Arc;

use axum::extract::{DefaultBodyLimit, Request, State};
use axum::http::{header, HeaderValue, Method, StatusCode};
use axum::middleware::{self, Next};
use axum::response::{IntoResponse, Redirect, Response};
use axum::routing::get;
use axum::{Form, Router};

use crate::error::{Error, Result};
use crate::web::access;
use crate::web::pages::{self, PageError};

/// Largest certificate PDF `/verify` accepts (issue #21: uploads up to 20 MB).
pub const UPLOAD_LIMIT: usize = 20 * 1024 * 1024;
/// Largest body any other request may carry (the login form is a few dozen bytes).
pub const FORM_LIMIT: usize = 16 * 1024;

/// Content-Security-Policy of every response: nothing but this site's own stylesheet, inline
/// SVG and form posts to this site; no script at all, no framing.
pub const CSP: &str = "default-src 'none'; style-src 'self'; img-src 'self'; \
                       form-action 'self'; frame-ancestors 'none'; base-uri 'none'";

/// What the server serves, and to whom.
#[derive(Debug, Clone)]
pub struct Config {
    /// Address to listen on (port 0: any free port, announced at start).
    pub bind: SocketAddr,
    /// The register folder (trend files, certificate log), read only.
    pub register: PathBuf,
    /// The specs folder (products, customers), read only.
    pub specs: PathBuf,
    /// The certificates folder, from which logged PDFs are served, read only.
    pub certificates: PathBuf,
    /// The access token; required for every page when set (and required to bind off loopback).
    pub token: Option<String>,
}

/// The shared state of the handlers.
pub type Shared = Arc<Config>;

/// Serves until the process is stopped. `announce` is called with the address actually
/// bound (useful with port 0) once the server accepts connections.
pub fn run(config: Config, announce: impl FnOnce(SocketAddr)) -> Result<()> {
    access::check_bind(config.bind, config.token.is_some())?;
    pages::check_templates()?;
    for (flag, dir) in [("--register", &config.register), ("--specs", &config.specs)] {
        if !dir.is_dir() {
            return Err(Error::invalid(
                format!("{flag} {}", dir.display()),
                "is not a folder",
                "Start the server in the workspace (the folder holding specs/ and register/), \
                 or name the folders with --specs and --register.",
            ));
        }
    }
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_io()
        .build()
        .map_err(|e| Error::io(&config.register, "starting the web server", e))?;
    let bind = config.bind;
    runtime.block_on(async move {
        let listener = tokio::net::TcpListener::bind(bind).await.map_err(|e| {
            Error::invalid(
                format!("--bind {bind}"),
                format!("cannot listen there: {e}"),
                "Choose another port (or address), or stop the program that uses it.",
            )
        })?;
        let addr = listener
            .local_addr()
            .map_err(|e| Error::io(&config.register, "reading the bound address", e))?;
        let app = router(Arc::new(config));
        announce(addr);
        axum::serve(listener, app)
            .await
            .map_err(|e| Error::io(std::path::Path::new("(server)"), "serving", e))
    })
}

/// Every route of the site.
pub fn router(state: Shared) -> Router {
    Router::new()
        .route("/", get(crate::web::search::page))
        .route("/lot/{lot}", get(crate::web::lot::page))
        .route("/find", get(crate::web::find::page))
        .route("/product/{code}", get(crate::web::product::page))
        .route("/shipments", get(crate::web::shipments::page))
        .route("/certificate/{number}", get(crate::web::certificate::page))
        .route(
            "/certificate/{number}/pdf",
            get(crate::web::certificate::pdf),
        )
        .route(
            "/verify",
            get(crate::web::certificate::verify_form)
                .post(crate::web::certificate::verify_upload)
                .layer(DefaultBodyLimit::max(UPLOAD_LIMIT)),
        )
        .route("/login", get(login_form).post(login))
        .route("/site.css", get(stylesheet))
        .fallback(not_found)
        .layer(DefaultBodyLimit::max(FORM_LIMIT))
        .layer(middleware::from_fn_with_state(state.clone(), guard))
        .with_state(state)
}

/// Checks the token (when one is set) and adds the security headers to every response.
async fn guard(State(config): State<Shared>, request: Request, next: Next) -> Response {
    let open = matches!(request.uri().path(), "/login" | "/site.css");
    let allowed = match &config.token {
        None => true,
        Some(token) => {
            open || request
                .headers()
                .get_all(header::COOKIE)
                .iter()
                .filter_map(|v| v.to_str().ok())
                .filter_map(|h| access::cookie_value(h, access::COOKIE))
                .any(|v| access::same_secret(v, token))
        }
    };
    let mut response = if !allowed {
        login_page(StatusCode::UNAUTHORIZED, false)
    } else if !matches!(*request.method(), Method::GET | Method::HEAD | Method::POST) {
        PageError::new(
            StatusCode::METHOD_NOT_ALLOWED,
            "Read only",
            "This server only shows the record; it never changes it.",
        )
        .into_response()
    } else {
        as_page(next.run(request).await).await
    };
    let h = response.headers_mut();
    h.insert("content-security-policy", HeaderValue::from_static(CSP));
    h.insert(
        "x-content-type-options",
        HeaderValue::from_static("nosniff"),
    );
    h.insert("x-frame-options", HeaderValue::from_static("DENY"));
    h.insert("referrer-policy", HeaderValue::from_static("no-referrer"));
    h.insert(header::CACHE_CONTROL, HeaderValue::from_static("no-store"));
    response
}

/// Turns a bare error answer (axum's own text for a request it could not read: a malformed
/// form or query, a body over the limit) into an error page in plain words.
async fn as_page(response: Response) -> Response {
    let status = response.status();
    let is_html = response
        .headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.starts_with("text/html"));
    if is_html || !(status.is_client_error() || status.is_server_error()) {
        return response;
    }
    let text = axum::body::to_bytes(response.into_body(), FORM_LIMIT)
        .await
        .map(|b| String::from_utf8_lossy(&b).trim().to_string())
        .unwrap_or_default();
    let message = if status == StatusCode::PAYLOAD_TOO_LARGE {
        format!(
            "The upload is larger than {} MB, the most this page accepts. A certificate PDF is far smaller: check that the right file was chosen.",
            UPLOAD_LIMIT / (1024 * 1024)
        )
    } else if text.is_empty() {
        "The request could not be answered.".to_string()
    } else {
        format!("The request could not be read: {text}.")
    };
    PageError::new(status, "Cannot answer that", message).into_response()
}

#[derive(serde::Serialize)]
struct LoginPage {
    title: &'static str,
    wrong: bool,
}

fn login_page(status: StatusCode, wrong: bool) -> Response {
    match pages::render(
        "login.html",
        &LoginPage {
            title: "Access token",
            wrong,
        },
    ) {
        Ok(body) => pages::html(status, body),
        Err(e) => e.into_response(),
    }
}

async fn login_form() -> Response {
    login_page(StatusCode::OK, false)
}

/// The login form's field.
#[derive(serde::Deserialize)]
struct LoginForm {
    token: String,
}

/// Checks the token typed in and, when right, keeps it in an HttpOnly cookie.
async fn login(State(config): State<Shared>, Form(form): Form<LoginForm>) -> Response {
    match &config.token {
        Some(token) if access::same_secret(form.token.trim(), token) => {
            let mut r = Redirect::to("/").into_response();
            if let Ok(v) = HeaderValue::from_str(&access::set_cookie(token)) {
                r.headers_mut().insert(header::SET_COOKIE, v);
            }
            r
        }
        Some(_) => login_page(StatusCode::UNAUTHORIZED, true),
        None => Redirect::to("/").into_response(),
    }
}

async fn stylesheet() -> Response {
    (
        [(header::CONTENT_TYPE, "text/css; charset=utf-8")],
        pages::STYLESHEET,
    )
        .into_response()
}

async fn not_found() -> PageError {
    PageError::not_found("There is no such page. Start from the search box on the first page.")
}
