//! Flags shared by several commands (the workspace folders, the lock wait, the product) and the
//! typed value parsers for dates, lot statuses and reaction orders, so that every command
//! names and checks them the same way.

use std::path::{Path, PathBuf};

use chrono::NaiveDate;

use crate::error::{Error, Result};
use crate::lot::evaluate::Status;

/// Help heading under which the workspace folders are listed.
const WORKSPACE: &str = "Workspace folders";

/// `--specs DIR`: the product specs with their recipes/ and customers/.
#[derive(Debug, Clone, clap::Args)]
pub struct SpecsFolder {
    /// Folder holding the product specs, with recipes/ and customers/ below it. Default: specs.
    #[arg(
        long = "specs",
        help_heading = WORKSPACE,
        hide_default_value = true,
        default_value = "specs",
        value_name = "DIR"
    )]
    pub specs: PathBuf,
}

/// `--register DIR`: the trend files and the certificate log.
#[derive(Debug, Clone, clap::Args)]
pub struct RegisterFolder {
    /// Folder holding the trend files (one CSV per product) and the certificate log.
    /// Default: register.
    #[arg(
        long = "register",
        help_heading = WORKSPACE,
        hide_default_value = true,
        default_value = "register",
        value_name = "DIR"
    )]
    pub register: PathBuf,
}

/// `--templates DIR`: the certificate template, its style sheet and the site file.
#[derive(Debug, Clone, clap::Args)]
pub struct TemplatesFolder {
    /// Folder holding certificate.html.tera, certificate.css and site.toml. Default: templates.
    #[arg(
        long = "templates",
        help_heading = WORKSPACE,
        hide_default_value = true,
        default_value = "templates",
        value_name = "DIR"
    )]
    pub templates: PathBuf,
}

/// `--certificates DIR`: where certificates are issued (the one name in every command; the
/// older spellings `--out` and `--certificates-dir` still work).
#[derive(Debug, Clone, clap::Args)]
pub struct CertificatesFolder {
    /// Folder the certificate PDFs are issued to and checked in. Default: certificates.
    #[arg(
        long = "certificates",
        help_heading = WORKSPACE,
        visible_alias = "out",
        alias = "certificates-dir",
        hide_default_value = true,
        default_value = "certificates",
        value_name = "DIR"
    )]
    pub certificates: PathBuf,
}

/// `--lock-timeout SECONDS`: how long to wait for another process writing the same record.
#[derive(Debug, Clone, clap::Args)]
pub struct Locking {
    /// Seconds to wait for another resinlot process writing the same trend file or
    /// certificate log. Default: 30.
    #[arg(
        long = "lock-timeout",
        help_heading = WORKSPACE,
        hide_default_value = true,
        default_value_t = 30,
        value_name = "SECONDS"
    )]
    pub lock_timeout: u64,
}

macro_rules! folder_deref {
    ($t:ty, $field:ident) => {
        impl std::ops::Deref for $t {
            type Target = Path;
            fn deref(&self) -> &Path {
                &self.$field
            }
        }
    };
}
folder_deref!(SpecsFolder, specs);
folder_deref!(RegisterFolder, register);
folder_deref!(TemplatesFolder, templates);
folder_deref!(CertificatesFolder, certificates);

/// The product, given either way: `trend PD-2000` or `trend --product PD-2000`.
#[derive(Debug, Clone, clap::Args)]
pub struct ProductArg {
    /// Product code, e.g. PD-2000 (or give it with --product).
    #[arg(
        value_name = "PRODUCT",
        value_parser = product_code,
        required_unless_present = "product_flag"
    )]
    pub product_given: Option<String>,
    /// Product code, e.g. PD-2000 (or give it as the first argument).
    #[arg(
        long = "product",
        value_name = "CODE",
        value_parser = product_code,
        conflicts_with = "product_given"
    )]
    pub product_flag: Option<String>,
}

impl ProductArg {
    /// The product code, whichever way it was given (clap requires one of the two).
    pub fn code(&self) -> &str {
        self.product_given
            .as_deref()
            .or(self.product_flag.as_deref())
            .unwrap_or_default()
    }

    /// The product's trend file in `register`, refused (naming the product as `place`, e.g.
    /// `--product`) when the register holds none.
    pub fn trend_file(&self, register: &Path, place: &str) -> Result<PathBuf> {
        let path = crate::record::trend_file::path_for(register, self.code());
        if !path.is_file() {
            return Err(Error::invalid(
                format!("{place} '{}'", self.code()),
                format!("no trend file {} exists", path.display()),
                "Check the product code; lots appear once `resinlot release` has recorded them.",
            ));
        }
        Ok(path)
    }
}

/// The record folders an output must never land in (see
/// [`crate::support::output::check_destination`]).
pub fn record_folders<'a>(
    specs: &'a Path,
    register: &'a Path,
    certificates: &'a Path,
) -> [&'a Path; 3] {
    [specs, register, certificates]
}

/// Names the flag behind each domain field in an error's place: the domain says "acid value",
/// the command line reads "acid value (--av)". `flags` pairs field names with flags; other
/// places and other errors pass through unchanged.
pub fn name_flags(e: Error, flags: &[(&str, &str)]) -> Error {
    e.at(
        |place| match flags.iter().find(|(field, _)| *field == place) {
            Some((field, flag)) => format!("{field} ({flag})"),
            None => place.to_string(),
        },
    )
}

// The value parsers below answer clap, which prints "invalid value 'X' for '--flag'" and
// then their message: what is wrong with the value and what to give instead.

/// clap value parser: a product code (a safe id that is not one of the register's own names).
pub fn product_code(text: &str) -> Result<String, String> {
    if crate::support::ids::is_product_code(text) {
        Ok(text.to_string())
    } else {
        Err(
            "not a usable product code. Give the code as in the spec file (letters, digits, \
             '-', '_', '.'), e.g. PD-2000"
                .into(),
        )
    }
}

/// Checks a lot id given on the command line (`certify`, `lookup`): a safe id, so it can name
/// files and trend-file rows. Not a clap value parser, so the refusal reads like the other
/// refusals of the command (`lot '...'`).
pub fn check_lot_id(lot: &str) -> Result<()> {
    if crate::support::ids::is_safe_id(lot) {
        Ok(())
    } else {
        Err(Error::invalid(
            format!("lot '{lot}'"),
            "not a usable lot id",
            "Lot ids are letters, digits, '-', '_' or '.'.",
        ))
    }
}

/// clap value parser: a calendar date written YYYY-MM-DD.
pub fn date(text: &str) -> Result<NaiveDate, String> {
    NaiveDate::parse_from_str(text, "%Y-%m-%d")
        .map_err(|_| "not a date. Write dates as YYYY-MM-DD".into())
}

/// clap value parser: a lot status (released, on_hold, rejected, incomplete).
pub fn status(text: &str) -> Result<Status, String> {
    Status::parse(text)
        .ok_or_else(|| "not a lot status. Use released, on_hold, rejected or incomplete".into())
}

/// clap value parser: a reaction order for the cook fit, 2, 2.5 or 3.
pub fn reaction_order(text: &str) -> Result<f64, String> {
    match text.trim() {
        "2" | "2.0" => Ok(2.0),
        "2.5" => Ok(2.5),
        "3" | "3.0" => Ok(3.0),
        _ => Err(
            "not a reaction order resinlot fits. Use 2 (external acid catalyst), 2.5 \
                  (apparent) or 3 (self-catalysed)"
                .into(),
        ),
    }
}

/// Parses `--gel-margin`: a plain number is Δp, the minority-group extent (0 < Δp < 1); a
/// number followed by `av` (e.g. `1.5av`) is an acid-value margin in mg KOH/g above the acid
/// value at the statistical gel point.
pub fn gel_margin(text: &str) -> Result<crate::chem::gel::GelMargin, String> {
    use crate::chem::gel::GelMargin;
    let t = text.trim().to_ascii_lowercase();
    let (number, in_av) = match t.strip_suffix("av") {
        Some(n) => (n.trim(), true),
        None => (t.as_str(), false),
    };
    let usage = "give an extent of reaction such as 0.005, or an acid value such as 1.5av";
    let v: f64 = number
        .parse()
        .map_err(|_| format!("'{text}' is not a margin; {usage}"))?;
    if !v.is_finite() || v < 0.0 {
        return Err(format!("'{text}' is not a margin of zero or more; {usage}"));
    }
    if in_av {
        crate::chem::ranges::group_value("--gel-margin", v).map_err(|e| e.to_string())?;
        Ok(GelMargin::AcidValue(v))
    } else if v >= 1.0 {
        Err(format!(
            "{v} is an extent of reaction of 1 or more, so every state would be near the gel point; {usage}"
        ))
    } else {
        Ok(GelMargin::Extent(v))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gel_margins() {
        use crate::chem::gel::GelMargin;
        assert_eq!(gel_margin("0.01").unwrap(), GelMargin::Extent(0.01));
        assert_eq!(gel_margin("1.5AV").unwrap(), GelMargin::AcidValue(1.5));
        assert_eq!(gel_margin(" 2 av").unwrap(), GelMargin::AcidValue(2.0));
        for bad in ["", "x", "-0.1", "1", "nan", "5000av", "inf"] {
            assert!(gel_margin(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn typed_values() {
        assert_eq!(date("2026-11-30").unwrap().to_string(), "2026-11-30");
        assert!(date("30/11/2026").is_err());
        assert_eq!(status("on_hold").unwrap(), Status::OnHold);
        assert!(status("held").is_err());
        assert_eq!(reaction_order("2.5").unwrap(), 2.5);
        assert!(reaction_order("4").is_err());
        assert!(product_code("PD-2000").is_ok());
        assert!(product_code("../register/PD-2000").is_err());
        assert!(product_code("certificates").is_err());
        assert!(check_lot_id("PD2-26-0412").is_ok());
        let dir = tempfile::tempdir().unwrap();
        let product = ProductArg {
            product_given: None,
            product_flag: Some("PD-2000".into()),
        };
        let e = product
            .trend_file(dir.path(), "--product")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("--product 'PD-2000'") && e.contains("no trend file"),
            "{e}"
        );
        std::fs::write(dir.path().join("PD-2000.csv"), "").unwrap();
        assert!(product.trend_file(dir.path(), "--product").is_ok());
        let e = check_lot_id("../x").unwrap_err().to_string();
        assert!(
            e.contains("lot '../x'") && e.contains("not a usable lot id"),
            "{e}"
        );
    }
}
