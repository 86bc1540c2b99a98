//! Issuing certificates: render in parallel, write each PDF and its JSON data companion
//! atomically (never overwriting), then record them in the certificate log with their SHA-256.

use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::certificate::companion;
use crate::certificate::model::{Certificate, Site, SITE_FILE};
use crate::certificate::render::{FontPool, Templates};
use crate::error::{Error, Result};
use crate::record::certfiles::{self, Listing};
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

/// Writes `bytes` to `path` unless a file of identical bytes is already there (a filing
/// repeated after an interruption); any other file of that name is never replaced.
fn write_once(path: &Path, bytes: &[u8]) -> Result<()> {
    if std::fs::symlink_metadata(path).is_ok_and(|m| m.is_file())
        && std::fs::read(path).is_ok_and(|b| b == bytes)
    {
        return Ok(());
    }
    crate::support::output::write_atomic(path, bytes, false)
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
    /// The JSON data companion, when the log can record its SHA-256 (layout v3).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub json_path: Option<PathBuf>,
    /// SHA-256 of the JSON data companion.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub json_sha256: Option<String>,
}

/// Certificate numbers for one run, following every number already used (issue #13, item 8).
#[derive(Debug, Clone, PartialEq)]
pub struct Numbering {
    prefix: String,
    next: u64,
}

impl Numbering {
    /// The number `k` places after the next free one: `prefix` and six or more digits.
    pub fn nth(&self, k: usize) -> String {
        format!("{}{:06}", self.prefix, self.next + k as u64)
    }
}

/// A certificate to issue and who it is for.
pub struct Pending {
    /// The certificate.
    pub certificate: Certificate,
    /// Customer file stem; empty for an internal certificate.
    pub customer: String,
    /// Reason, for a reissue.
    pub reason: String,
    /// Purchase order, as given (empty for none or an internal certificate).
    pub po: String,
    /// Quantity shipped, as given.
    pub quantity: String,
}

impl Issuer {
    /// Loads the site file and templates (before any record is written, so a template error
    /// leaves everything untouched). Without template files the built-in templates are used
    /// ([`Issuer::notice`] says so); without a site file the site is the placeholder one. A
    /// site whose fields are placeholders is refused (exit 2), naming the file to edit or create.
    pub fn new(templates_dir: &Path, out: &Path) -> Result<Issuer> {
        let templates = Templates::load(templates_dir)?;
        let site_path = templates_dir.join(SITE_FILE);
        let site = if site_path.is_file() {
            Site::load(&site_path)?
        } else {
            Site::placeholder()
        };
        site.check_filled_in(&site_path)?;
        Ok(Issuer {
            site,
            templates,
            fonts: FontPool::bundled(),
            out: out.to_path_buf(),
        })
    }

    /// The note to print once when the built-in templates stand in for a missing folder.
    pub fn notice(&self) -> Option<String> {
        self.templates.notice()
    }

    /// File name of a certificate: lot id and certificate number.
    pub fn file_name(cert: &Certificate) -> String {
        format!("{}_{}.pdf", cert.lot.id, cert.number)
    }

    /// The numbering of the next certificates, under the log's lock: after the highest number
    /// the log has used and the highest any certificate file (issued or pending) in the output
    /// folder holds, so that a number is never issued twice, not even after an interrupted
    /// issue left a file unlogged (issue #13, item 8). Refuses (exit 2) when the log is missing
    /// while certificate files exist: numbering would start again at 000001 (item 9).
    pub fn numbering(&self, log: &Log) -> Result<Numbering> {
        let prefix = &self.site.certificate_prefix;
        let listing = Listing::read(&self.out)?;
        if log.is_new() && listing.certificate_count() > 0 {
            return Err(Error::invalid(
                log.path().display().to_string(),
                format!(
                    "the certificate log is missing, but {} certificate file(s) are in {}: numbering would start again at 000001 and repeat issued numbers",
                    listing.certificate_count(),
                    self.out.display()
                ),
                "Restore the certificate log from backup (`resinlot verify` then checks it against the files); nothing was written.",
            ));
        }
        Ok(Numbering {
            prefix: prefix.clone(),
            next: log
                .highest_number(prefix)
                .max(listing.highest_number(prefix))
                + 1,
        })
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
            let name = Self::file_name(&p.certificate);
            for path in [
                self.out.join(&name),
                self.out.join(companion::file_name(&name)),
            ] {
                // symlink_metadata: a dangling symbolic link is in the way too (issue #13, item 7).
                if std::fs::symlink_metadata(&path).is_ok() {
                    return Err(Error::invalid(
                    path.display().to_string(),
                    "a file of this name already exists and is never overwritten",
                    "Move the stray file aside (certificate numbers are never reused) and run again.",
                ));
                }
            }
        }
        Ok(())
    }

    /// Writes the JSON data companion of `p` (filed as `name`) when `log` can record its
    /// SHA-256, and returns its path and SHA-256. A log in a layout before v3 has no column for
    /// it, so no companion is written there (`resinlot upgrade` adds the column).
    fn write_companion(
        &self,
        log: &Log,
        p: &Pending,
        name: &str,
    ) -> Result<Option<(PathBuf, String)>> {
        if !log.has_column("json_sha256") {
            return Ok(None);
        }
        let bytes = companion::to_bytes(&p.certificate, name);
        let path = self.out.join(companion::file_name(name));
        write_once(&path, &bytes)?;
        Ok(Some((
            path,
            crate::record::trend_file::hex(&Sha256::digest(&bytes)),
        )))
    }

    /// Writes each rendered internal certificate to its pending part (fsync'd, never
    /// replacing a file) before its trend row is appended: `rows[i]` is the product and row
    /// sequence number certificate `i` certifies (issue #13, item 7). On an error the parts
    /// written so far are removed again, and nothing else was written. Returns the parts' names.
    pub fn stage(
        &self,
        pending: &[Pending],
        rendered: &[crate::certificate::render::Rendered],
        rows: &[(String, usize)],
    ) -> Result<Vec<String>> {
        let mut parts: Vec<String> = Vec::new();
        if pending.is_empty() {
            return Ok(parts);
        }
        let result = (|| -> Result<()> {
            for ((p, r), (product, seq)) in pending.iter().zip(rendered).zip(rows) {
                let name = certfiles::part_name(&Self::file_name(&p.certificate), product, *seq);
                let path = self.out.join(&name);
                let mut f = std::fs::OpenOptions::new()
                    .write(true)
                    .create_new(true)
                    .open(&path)
                    .map_err(|e| Error::io(&path, "creating", e))?;
                parts.push(name);
                std::io::Write::write_all(&mut f, &r.pdf)
                    .and_then(|()| f.sync_all())
                    .map_err(|e| Error::io(&path, "writing", e))?;
            }
            std::fs::File::open(&self.out)
                .and_then(|d| d.sync_all())
                .map_err(|e| Error::io(&self.out, "syncing folder", e))
        })();
        if let Err(e) = result {
            for name in &parts {
                let _ = std::fs::remove_file(self.out.join(name));
            }
            return Err(e);
        }
        Ok(parts)
    }

    /// Files the parts written by [`Issuer::stage`] once their rows are appended: each is
    /// linked to its final name and logged, then the part is removed
    /// ([`certfiles::finish`]). The caller holds the log's lock and the trend files' locks.
    pub fn file_staged(
        &self,
        log: &mut Log,
        pending: &[Pending],
        rendered: &[crate::certificate::render::Rendered],
        parts: &[String],
        issued_at: &str,
    ) -> Result<Vec<Issued>> {
        let mut out = Vec::new();
        for ((p, r), part) in pending.iter().zip(rendered).zip(parts) {
            let name = Self::file_name(&p.certificate);
            let sha = crate::record::trend_file::hex(&Sha256::digest(&r.pdf));
            // The companion goes first: the log row that names its SHA-256 comes after it.
            let json = self.write_companion(log, p, &name)?;
            let e = Entry {
                json_sha256: json.as_ref().map(|j| j.1.clone()).unwrap_or_default(),
                ..entry(p, &name, &sha, issued_at)
            };
            certfiles::finish(log, &self.out, part, &e)?;
            out.push(Issued {
                certificate_number: p.certificate.number.clone(),
                path: self.out.join(&name),
                sha256: sha,
                json_path: json.as_ref().map(|j| j.0.clone()),
                json_sha256: json.map(|j| j.1),
            });
        }
        Ok(out)
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
        // Every log row is checked first (a purchase order in a log written before layout v3 is
        // refused naming `resinlot upgrade`), so a refusal leaves no unlogged file behind.
        let rows: Vec<Vec<Entry>> = pending
            .iter()
            .zip(rendered)
            .map(|(p, r)| {
                let sha = crate::record::trend_file::hex(&Sha256::digest(&r.pdf));
                entries(p, &Self::file_name(&p.certificate), &sha, issued_at)
            })
            .collect();
        log.check_rows(&rows.concat())?;
        let mut out = Vec::new();
        for ((p, r), rows) in pending.iter().zip(rendered).zip(&rows) {
            let path = self.out.join(Self::file_name(&p.certificate));
            crate::support::output::write_atomic(&path, &r.pdf, false)?;
            if html {
                crate::support::output::write_atomic(
                    &path.with_extension("html"),
                    r.html.as_bytes(),
                    false,
                )?;
            }
            let name = Self::file_name(&p.certificate);
            let json = self.write_companion(log, p, &name)?;
            let json_sha = json.as_ref().map(|j| j.1.clone()).unwrap_or_default();
            let rows: Vec<Entry> = rows
                .iter()
                .map(|e| Entry {
                    json_sha256: json_sha.clone(),
                    ..e.clone()
                })
                .collect();
            log.append_all(&rows)?;
            out.push(Issued {
                certificate_number: p.certificate.number.clone(),
                path,
                sha256: rows[0].sha256.clone(),
                json_path: json.as_ref().map(|j| j.0.clone()),
                json_sha256: json.map(|j| j.1),
            });
        }
        Ok(out)
    }
}

/// The log rows of pending certificate `p`: one per lot, all with its number (issue #16).
fn entries(p: &Pending, file: &str, sha: &str, issued_at: &str) -> Vec<Entry> {
    let first = entry(p, file, sha, issued_at);
    if p.certificate.lots.len() < 2 {
        return vec![first];
    }
    p.certificate
        .lots
        .iter()
        .map(|l| Entry {
            lot: l.id.clone(),
            ..first.clone()
        })
        .collect()
}

/// The log entry of pending certificate `p` (its first lot), filed as `file` with SHA-256
/// `sha`.
fn entry(p: &Pending, file: &str, sha: &str, issued_at: &str) -> Entry {
    Entry {
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
        file: file.to_string(),
        sha256: sha.to_string(),
        supersedes: p
            .certificate
            .supersedes
            .as_ref()
            .map(|s| s.number.clone())
            .unwrap_or_default(),
        reason: p.reason.clone(),
        po: p.po.clone(),
        quantity: p.quantity.clone(),
        json_sha256: String::new(),
    }
}
