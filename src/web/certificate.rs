//! `/certificate/<NUMBER>` (the log's entry and its PDF, served only from the path the
//! certificate log names) and `/verify` (an uploaded PDF identified against the log as `resinlot
//! verify` does, in memory, never stored).

use axum::extract::{Multipart, Path, State};
use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::record::certlog::Entry;
use crate::record::integrity::{self, CertVerdict};
use crate::web::pages::{self, PageError};
use crate::web::server::{Shared, UPLOAD_LIMIT};

#[derive(Debug, Serialize)]
struct CertificatePage {
    title: String,
    entry: Entry,
    issued_to: String,
    void: bool,
    /// Every lot the certificate covers, with its page.
    lots: Vec<crate::web::pages::Link>,
    /// Current, superseded or withdrawn (empty for a void number).
    standing: String,
    pdf_link: String,
    supersedes_link: String,
    superseded_by: Vec<String>,
}

/// The log's entry for `number` (exact), or 404.
fn entry_of(config: &crate::web::Config, number: &str) -> Result<(Entry, Vec<Entry>), PageError> {
    let entries = crate::record::certlog::entries(&config.register)?;
    match entries.iter().find(|e| e.number == number) {
        Some(e) => Ok((e.clone(), entries)),
        None => Err(PageError::not_found(format!(
            "No certificate numbered '{number}' is in the certificate log. Check the number on the certificate, or search for the lot."
        ))),
    }
}

/// The certificate's page: what the log says of it, with the PDF download.
pub async fn page(
    State(config): State<Shared>,
    Path(number): Path<String>,
) -> Result<Response, PageError> {
    pages::blocking(move || {
        let (entry, all) = entry_of(&config, &number)?;
        let void = crate::record::certfiles::is_void(&entry);
        let cert = crate::record::certlog::all_certificates(&config.register)?
            .into_iter()
            .find(|c| c.number == entry.number);
        let lot_ids = cert
            .as_ref()
            .map_or_else(|| vec![entry.lot.clone()], |c| c.lots.clone());
        pages::page(
            "certificate.html",
            &CertificatePage {
                title: format!("Certificate {}", entry.number),
                issued_to: if void {
                    "VOID (a file found without its log entry; not a certificate)".to_string()
                } else if entry.customer_name.is_empty() {
                    "internal (QC record)".to_string()
                } else {
                    entry.customer_name.clone()
                },
                void,
                lots: lot_ids
                    .iter()
                    .map(|l| crate::web::pages::Link {
                        href: format!("/lot/{l}"),
                        text: l.clone(),
                    })
                    .collect(),
                standing: match (&cert, void) {
                    (Some(c), false) => c.status.as_str().to_string(),
                    _ => String::new(),
                },
                pdf_link: format!("/certificate/{}/pdf", entry.number),
                supersedes_link: if entry.supersedes.is_empty() {
                    String::new()
                } else {
                    format!("/certificate/{}", entry.supersedes)
                },
                superseded_by: all
                    .iter()
                    .filter(|e| e.supersedes == entry.number)
                    .map(|e| e.number.clone())
                    .collect(),
                entry,
            },
        )
    })
    .await
}

/// True for a plain PDF file name: letters, digits, '-', '_' and '.', no "..", not hidden,
/// ending in `.pdf` (so it can only name a file directly inside the certificates folder).
pub fn plain_pdf_name(name: &str) -> bool {
    name.len() > 4
        && name.ends_with(".pdf")
        && !name.starts_with('.')
        && !name.contains("..")
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
}

/// The certificate's PDF, read from the certificates folder under the file name the log
/// records (never a name from the request), and only when its SHA-256 is still the logged one.
pub async fn pdf(
    State(config): State<Shared>,
    Path(number): Path<String>,
) -> Result<Response, PageError> {
    pages::blocking(move || {
        let (entry, _) = entry_of(&config, &number)?;
        if crate::record::certfiles::is_void(&entry) {
            return Err(PageError::not_found(format!(
                "Certificate number {number} was logged as void; there is no certificate to download."
            )));
        }
        // The log names a plain file in the certificates folder; anything else is refused.
        if !plain_pdf_name(&entry.file) {
            return Err(PageError::internal(format!(
                "The certificate log names the file '{}' for certificate {number}, which is not a plain PDF name. Ask the QC lab to run `resinlot verify`.",
                entry.file
            )));
        }
        let path = config.certificates.join(&entry.file);
        let bytes = std::fs::read(&path).map_err(|e| {
            PageError::internal(format!(
                "Certificate {number} is logged, but its file {} cannot be read ({e}). Ask the QC lab to run `resinlot verify`.",
                entry.file
            ))
        })?;
        if crate::record::trend_file::hex(&Sha256::digest(&bytes)) != entry.sha256 {
            return Err(PageError::new(
                StatusCode::CONFLICT,
                "Certificate file changed",
                format!(
                    "The file {} in the certificates folder no longer has the bytes issued as certificate {number}, so it is not offered. Ask the QC lab to run `resinlot verify` and restore it from backup.",
                    entry.file
                ),
            ));
        }
        Ok((
            [
                (header::CONTENT_TYPE, "application/pdf".to_string()),
                (
                    header::CONTENT_DISPOSITION,
                    format!("attachment; filename=\"{}\"", entry.file),
                ),
            ],
            bytes,
        )
            .into_response())
    })
    .await
}

/// How the verify page shows one verdict: a word, a style and a sentence, in the words of
/// `resinlot verify`. Every verdict of [`CertVerdict`] has an arm here, so a new verdict does
/// not compile until the page knows how to say it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerdictView {
    /// One word in capitals for a problem ("ALTERED"), lower case when all is well.
    pub word: &'static str,
    /// Style: `good` or `bad`.
    pub tone: &'static str,
    /// The sentence.
    pub sentence: String,
    /// The certificate page the verdict refers to, when one is logged.
    pub certificate_link: String,
}

/// The view of `verdict`, in the words of `resinlot verify`.
pub fn verdict_view(verdict: &CertVerdict) -> VerdictView {
    let link = |e: &Entry| format!("/certificate/{}", e.number);
    let to = |e: &Entry| {
        if e.customer_name.is_empty() {
            String::new()
        } else {
            format!(" to {}", e.customer_name)
        }
    };
    match verdict {
        CertVerdict::Withdrawn {
            entry,
            withdrawn_at,
            ..
        } if crate::record::certfiles::is_void(entry) => VerdictView {
            word: "VOID",
            tone: "bad",
            sentence: format!(
                "Number {} was logged as void on {withdrawn_at} (a file found without its log entry); it is not a valid certificate.",
                entry.number
            ),
            certificate_link: link(entry),
        },
        CertVerdict::Genuine { entry } => VerdictView {
            word: "genuine",
            tone: "good",
            sentence: format!(
                "Certificate {} for lot {}{}, issued {}: these are exactly the bytes issued, and the certificate is current.",
                entry.number,
                entry.lot,
                to(entry),
                entry.issued_at
            ),
            certificate_link: link(entry),
        },
        CertVerdict::Superseded {
            entry,
            superseded_by,
            superseded_at,
            reason,
        } => VerdictView {
            word: "SUPERSEDED",
            tone: "bad",
            sentence: format!(
                "Certificate {} for lot {}{}, issued {}, was replaced by certificate {superseded_by} on {superseded_at} ({reason}); ask for {superseded_by}.",
                entry.number,
                entry.lot,
                to(entry),
                entry.issued_at
            ),
            certificate_link: format!("/certificate/{superseded_by}"),
        },
        CertVerdict::Withdrawn {
            entry,
            withdrawn_at,
            reason,
            ..
        } => VerdictView {
            word: "WITHDRAWN",
            tone: "bad",
            sentence: format!(
                "Certificate {} for lot {}{}, issued {}, was withdrawn on {withdrawn_at}: {reason}; the lot must not be used on its strength.",
                entry.number,
                entry.lot,
                to(entry),
                entry.issued_at
            ),
            certificate_link: link(entry),
        },
        CertVerdict::Altered { entry, .. } => VerdictView {
            word: "ALTERED",
            tone: "bad",
            sentence: format!(
                "Its bytes differ from certificate {} as issued on {}.",
                entry.number, entry.issued_at
            ),
            certificate_link: link(entry),
        },
        CertVerdict::Unknown { .. } => VerdictView {
            word: "UNKNOWN",
            tone: "bad",
            sentence: "No certificate with these bytes was issued from this record.".to_string(),
            certificate_link: String::new(),
        },
    }
}

#[derive(Debug, Serialize)]
struct VerifyPage {
    title: &'static str,
    limit_mb: usize,
    file: String,
    sha256: String,
    verdict: Option<VerdictView>,
}

/// The upload form.
pub async fn verify_form() -> Result<Response, PageError> {
    pages::page(
        "verify.html",
        &VerifyPage {
            title: "Verify a certificate",
            limit_mb: UPLOAD_LIMIT / (1024 * 1024),
            file: String::new(),
            sha256: String::new(),
            verdict: None,
        },
    )
}

/// Identifies the uploaded PDF (form field `pdf`) against the log; the bytes stay in memory.
pub async fn verify_upload(
    State(config): State<Shared>,
    mut form: Multipart,
) -> Result<Response, PageError> {
    let too_big = |e: axum::extract::multipart::MultipartError| {
        if e.status() == StatusCode::PAYLOAD_TOO_LARGE {
            PageError::new(
                StatusCode::PAYLOAD_TOO_LARGE,
                "File too large",
                format!(
                    "The upload is larger than {} MB, the most this page accepts. A certificate PDF is far smaller: check that the right file was chosen.",
                    UPLOAD_LIMIT / (1024 * 1024)
                ),
            )
        } else {
            PageError::bad_request(format!("The upload could not be read: {}.", e.body_text()))
        }
    };
    let mut upload = None;
    while let Some(field) = form.next_field().await.map_err(too_big)? {
        if field.name() == Some("pdf") {
            let name = field.file_name().unwrap_or("").to_string();
            let bytes = field.bytes().await.map_err(too_big)?;
            upload = Some((name, bytes));
        }
    }
    let Some((name, bytes)) = upload.filter(|(_, b)| !b.is_empty()) else {
        return Err(PageError::bad_request(
            "No file came with the form. Choose the certificate PDF, then press Verify.",
        ));
    };
    // Only the base name counts (some browsers send a path).
    let name = name
        .rsplit(['/', '\\'])
        .next()
        .unwrap_or_default()
        .to_string();
    pages::blocking(move || {
        let verdict = integrity::verify_certificate_bytes(&bytes, &name, &config.register)?;
        let sha256 = match &verdict {
            CertVerdict::Genuine { entry }
            | CertVerdict::Superseded { entry, .. }
            | CertVerdict::Withdrawn { entry, .. } => entry.sha256.clone(),
            CertVerdict::Altered { sha256, .. } | CertVerdict::Unknown { sha256 } => sha256.clone(),
        };
        pages::page(
            "verify.html",
            &VerifyPage {
                title: "Verify a certificate",
                limit_mb: UPLOAD_LIMIT / (1024 * 1024),
                file: name,
                sha256,
                verdict: Some(verdict_view(&verdict)),
            },
        )
    })
    .await
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_plain_pdf_names_are_served() {
        assert!(plain_pdf_name("T26-101_FW-000004.pdf"));
        for bad in [
            "../specs/x.pdf",
            "a/b.pdf",
            ".pdf",
            "x.PDF",
            "..pdf",
            "x.txt",
            "a..b.pdf",
        ] {
            assert!(!plain_pdf_name(bad), "{bad}");
        }
    }

    #[test]
    fn every_verdict_has_its_words() {
        let e = Entry {
            number: "FW-000004".into(),
            issued_at: "2026-11-30T10:00:00Z".into(),
            lot: "T26-101".into(),
            product: "TP-2000".into(),
            customer: String::new(),
            customer_name: String::new(),
            file: "T26-101_FW-000004.pdf".into(),
            sha256: "ab".into(),
            supersedes: String::new(),
            reason: String::new(),
            ..Entry::default()
        };
        let g = verdict_view(&CertVerdict::Genuine { entry: e.clone() });
        assert_eq!((g.word, g.tone), ("genuine", "good"));
        assert!(g.sentence.contains("for lot T26-101"), "{}", g.sentence);
        let a = verdict_view(&CertVerdict::Altered {
            entry: e,
            sha256: "cd".into(),
        });
        assert_eq!((a.word, a.tone), ("ALTERED", "bad"));
        let u = verdict_view(&CertVerdict::Unknown {
            sha256: "cd".into(),
        });
        assert_eq!(u.word, "UNKNOWN");
        assert!(u.certificate_link.is_empty());
    }
}
