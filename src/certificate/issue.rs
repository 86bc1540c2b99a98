//! Issuing certificates: render in parallel, write each PDF atomically (never overwriting),
//! then record it in the certificate log with its SHA-256.

use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::certificate::model::{Certificate, Site, SITE_FILE};
use crate::certificate::render::{FontPool, Templates};
use crate::error::{Error, Result};
use crate::record::certlog::{Entry, Log};

/// Everything needed to render and file certificates.
pub struct Issuer {
    /// The issuing site.
    pub site: Site,
    templates: Templates,
    fonts: FontPool,
    /// Folder the PDFs go to.
    pub out: PathBuf,
}

/// One issued certificate.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Issued {
    /// Certificate number.
    pub certificate_number: String,
    /// Where the PDF was written.
    pub path: PathBuf,
    /// SHA-256 of the PDF.
    pub sha256: String,
}

/// A certificate to issue and who it is for.
pub struct Pending {
    /// The certificate.
    pub certificate: Certificate,
    /// Customer file stem; empty for an internal certificate.
    pub customer: String,
    /// Reason, for a reissue.
    pub reason: String,
}

impl Issuer {
    /// Loads the site file and templates (before any record is written, so a template error
    /// leaves everything untouched).
    pub fn new(templates_dir: &Path, out: &Path) -> Result<Issuer> {
        Ok(Issuer {
            site: Site::load(&templates_dir.join(SITE_FILE))?,
            templates: Templates::load(templates_dir)?,
            fonts: FontPool::bundled(),
            out: out.to_path_buf(),
        })
    }

    /// File name of a certificate: lot id and certificate number.
    pub fn file_name(cert: &Certificate) -> String {
        format!("{}_{}.pdf", cert.lot.id, cert.number)
    }

    /// Renders every certificate (in parallel) and returns the bytes, in order.
    pub fn render(&self, pending: &[Pending]) -> Result<Vec<crate::certificate::render::Rendered>> {
        use rayon::prelude::*;
        pending
            .par_iter()
            .map(|p| {
                crate::certificate::render::render_one(&self.templates, &self.fonts, &p.certificate)
            })
            .collect()
    }

    /// Checks, before anything is recorded, that every certificate can be filed: the output
    /// folder exists or can be made and takes files, and no target file exists yet.
    pub fn check_targets(&self, pending: &[Pending]) -> Result<()> {
        if pending.is_empty() {
            return Ok(());
        }
        std::fs::create_dir_all(&self.out)
            .map_err(|e| Error::io(&self.out, "creating folder", e))?;
        tempfile::tempfile_in(&self.out)
            .map_err(|e| Error::io(&self.out, "writing a file in", e))?;
        for p in pending {
            let path = self.out.join(Self::file_name(&p.certificate));
            if path.exists() {
                return Err(Error::invalid(
                    path.display().to_string(),
                    "a file of this name already exists and is never overwritten",
                    "Move the stray file aside (certificate numbers are never reused) and run again.",
                ));
            }
        }
        Ok(())
    }

    /// Writes rendered certificates and records them in the log (which must be locked by the
    /// caller for the whole numbering-to-append span).
    pub fn file(
        &self,
        log: &mut Log,
        pending: &[Pending],
        rendered: &[crate::certificate::render::Rendered],
        html: bool,
        issued_at: &str,
    ) -> Result<Vec<Issued>> {
        let mut out = Vec::new();
        for (p, r) in pending.iter().zip(rendered) {
            let name = Self::file_name(&p.certificate);
            let path = self.out.join(&name);
            crate::support::output::write_atomic(&path, &r.pdf, false)?;
            if html {
                crate::support::output::write_atomic(
                    &path.with_extension("html"),
                    r.html.as_bytes(),
                    false,
                )?;
            }
            let sha = crate::record::trend_file::hex(&Sha256::digest(&r.pdf));
            log.append(&Entry {
                number: p.certificate.number.clone(),
                issued_at: issued_at.to_string(),
                lot: p.certificate.lot.id.clone(),
                product: p.certificate.product.code.clone(),
                customer: p.customer.clone(),
                customer_name: p
                    .certificate
                    .customer
                    .as_ref()
                    .map(|c| c.name.clone())
                    .unwrap_or_default(),
                file: name,
                sha256: sha.clone(),
                supersedes: p
                    .certificate
                    .supersedes
                    .as_ref()
                    .map(|s| s.number.clone())
                    .unwrap_or_default(),
                reason: p.reason.clone(),
            })?;
            out.push(Issued {
                certificate_number: p.certificate.number.clone(),
                path,
                sha256: sha,
            });
        }
        Ok(out)
    }
}
