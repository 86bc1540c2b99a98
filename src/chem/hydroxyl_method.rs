//! Hydroxyl-value methods and the acidity correction each one's raw result needs: a per-method
//! table (add the acid value, none, or subtract it), each row with the source it rests on.

use serde::Serialize;

/// How the sample's acid value enters a raw hydroxyl-value result.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum AcidityCorrection {
    /// The method measures OHV − AV (the sample's acid is back-titrated with the reagent
    /// acid): OHV = raw + AV.
    Add,
    /// The result is the hydroxyl value as it stands (no acid interference, or entered
    /// already corrected).
    #[default]
    None,
    /// The method measures OHV + AV (the sample's acid is titrated with the hydroxyl
    /// derivative): OHV = raw − AV.
    Subtract,
}

impl From<bool> for AcidityCorrection {
    /// The historical flag: `true` meant "raw acetylation result, add the acid value".
    fn from(raw_acetylation: bool) -> Self {
        if raw_acetylation {
            AcidityCorrection::Add
        } else {
            AcidityCorrection::None
        }
    }
}

impl AcidityCorrection {
    /// The factor of AV in OHV = raw + c·AV: +1, 0 or −1.
    pub fn sign(self) -> f64 {
        match self {
            AcidityCorrection::Add => 1.0,
            AcidityCorrection::None => 0.0,
            AcidityCorrection::Subtract => -1.0,
        }
    }

    /// True when the acid value is needed to correct the entered result.
    pub fn applies(self) -> bool {
        self != AcidityCorrection::None
    }

    /// The spec-file spelling: "add", "none" or "subtract".
    pub fn name(self) -> &'static str {
        match self {
            AcidityCorrection::Add => "add",
            AcidityCorrection::None => "none",
            AcidityCorrection::Subtract => "subtract",
        }
    }

    /// Parses the spec-file spelling.
    pub fn parse(text: &str) -> Option<AcidityCorrection> {
        match text.trim().to_ascii_lowercase().as_str() {
            "add" => Some(AcidityCorrection::Add),
            "none" => Some(AcidityCorrection::None),
            "subtract" => Some(AcidityCorrection::Subtract),
            _ => None,
        }
    }
}

/// One row of the method table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MethodRow {
    /// The method's designation, without edition year ("ISO 4629-2").
    pub designation: &'static str,
    /// What its raw result measures, in words ("OHV − AV").
    pub measures: &'static str,
    /// The correction a raw result needs.
    pub correction: AcidityCorrection,
    /// Where that comes from (what was checked, what is from memory).
    pub source: &'static str,
}

/// The hydroxyl-value methods resinlot knows, with the correction of their raw results.
///
/// Sources (README, "Formulas and their sources", repeats them): the scopes and summaries of
/// the standards as published by ISO, DIN and ASTM and their catalogue pages; the correction
/// itself follows from the titration principle each summary describes (first principles) where
/// the formula's text was not at hand, and says so.
pub const METHODS: &[MethodRow] = &[
    MethodRow {
        designation: "ISO 4629-1",
        measures: "OHV − AV",
        correction: AcidityCorrection::Add,
        source: "ISO 4629-1:2016 (acetylation without catalyst, acetic acid titrated with \
                 KOH; reagents as published): the sample's acid is titrated with the acetic \
                 acid, so the blank difference is OHV − AV (first principles); the + AV term \
                 of its formula from memory",
    },
    MethodRow {
        designation: "ISO 4629-2",
        measures: "OHV − AV",
        correction: AcidityCorrection::Add,
        source: "ISO 4629-2:2016 abstract (catalysed acetylation, acetic acid titrated with \
                 alcoholic KOH) and its normative reference to ISO 2114 for the acid value; \
                 the + AV term of its formula from memory",
    },
    MethodRow {
        designation: "DIN 53240-1",
        measures: "OHV − AV",
        correction: AcidityCorrection::Add,
        source: "DIN 53240-1 summary (acetylation without catalyst, titration of the acetic \
                 acid); OHZ = 28.05·(blank − sample)/m + SZ as quoted for DIN 53240 in \
                 secondary literature",
    },
    MethodRow {
        designation: "DIN 53240-2",
        measures: "OHV − AV",
        correction: AcidityCorrection::Add,
        source: "DIN 53240-2 summary (catalysed acetylation, hydrolysis, acetic acid titrated \
                 with alcoholic KOH; the same principle as ISO 4629-2); + AV from memory",
    },
    MethodRow {
        designation: "ASTM D4274",
        measures: "OHV − AV",
        correction: AcidityCorrection::Add,
        source: "ASTM D4274 scope (methods A–E: acetic, phthalic or pyromellitic anhydride \
                 esterification, back-titration with base); the acidity correction (add the \
                 acid number, ASTM D4662) from memory",
    },
    MethodRow {
        designation: "ASTM E222",
        measures: "OHV − AV",
        correction: AcidityCorrection::Add,
        source: "ASTM E222 scope (acetic anhydride acetylation, back-titration); the acidity \
                 correction from memory",
    },
    MethodRow {
        designation: "ASTM E1899",
        measures: "OHV + AV",
        correction: AcidityCorrection::Subtract,
        source: "ASTM E1899-08 §1.1.1 (recommended for neutral products; acidic species \
                 interfere unless shown not to) and its principle (the TSI carbamate is \
                 titrated as an acid with tetrabutylammonium hydroxide): carboxylic acids \
                 titrate with it, so the result is OHV + AV (first principles); validate on \
                 acidic samples as the standard requires",
    },
];

/// Looks a method up in [`METHODS`]: case and spacing are ignored, and an edition year or a
/// method letter after the designation ("ISO 4629-2:2016", "ASTM D4274 method A",
/// "ASTM E1899-16") still matches.
pub fn lookup(method: &str) -> Option<&'static MethodRow> {
    let norm = |s: &str| {
        s.split_whitespace()
            .collect::<Vec<_>>()
            .join(" ")
            .to_ascii_uppercase()
    };
    let m = norm(method);
    METHODS.iter().find(|row| {
        let d = norm(row.designation);
        m == d
            || m.strip_prefix(&d).is_some_and(|rest| {
                rest.starts_with(':')
                    || rest.starts_with(' ')
                    || (rest.starts_with('-') && rest[1..].chars().all(|c| c.is_ascii_digit()))
            })
    })
}

/// The correction of a raw result by `method`: its row of [`METHODS`], or add (acetylation,
/// the historical meaning of a raw result) when no method is named. A named method that is
/// not in the table is refused, placed at "hydroxyl method".
pub fn raw_correction(method: Option<&str>) -> crate::error::Result<AcidityCorrection> {
    match method {
        None => Ok(AcidityCorrection::Add),
        Some(m) => lookup(m).map(|r| r.correction).ok_or_else(|| {
            crate::error::Error::invalid(
                "hydroxyl method",
                format!("'{}' is not in resinlot's table of hydroxyl methods", m.escape_debug()),
                format!(
                    "Name one of {}, or leave the method out for an acetylation method (the acid value is added).",
                    known()
                ),
            )
        }),
    }
}

/// The designations of [`METHODS`], for messages.
pub fn known() -> String {
    METHODS
        .iter()
        .map(|r| r.designation)
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn acetylation_methods_add_and_the_isocyanate_method_subtracts() {
        // The table's rows (sources in METHODS): acetylation and anhydride methods measure
        // OHV − AV, ASTM E1899 measures OHV + AV.
        for m in [
            "ISO 4629-1",
            "ISO 4629-2",
            "iso  4629-2:2016",
            "DIN 53240-2",
            "ASTM D4274 method A",
            "ASTM E222",
        ] {
            assert_eq!(lookup(m).unwrap().correction, AcidityCorrection::Add, "{m}");
        }
        assert_eq!(
            lookup("ASTM E1899-16").unwrap().correction,
            AcidityCorrection::Subtract
        );
        assert_eq!(lookup("ASTM E1899").unwrap().measures, "OHV + AV");
        // A different part or a different standard does not match by prefix.
        assert!(lookup("ISO 4629-21").is_none());
        assert!(lookup("DIN 53240-3").is_none());
        assert!(lookup("ISO 2114").is_none());
        assert!(known().contains("ASTM E1899"));
    }

    #[test]
    fn raw_correction_defaults_to_acetylation_and_refuses_unknown_methods() {
        assert_eq!(raw_correction(None).unwrap(), AcidityCorrection::Add);
        assert_eq!(
            raw_correction(Some("astm e1899")).unwrap(),
            AcidityCorrection::Subtract
        );
        let e = raw_correction(Some("ISO 9999")).unwrap_err().to_string();
        assert!(
            e.starts_with("hydroxyl method: 'ISO 9999'") && e.contains("ISO 4629-2"),
            "{e}"
        );
    }

    #[test]
    fn signs_names_and_the_old_flag() {
        assert_eq!(AcidityCorrection::from(true), AcidityCorrection::Add);
        assert_eq!(AcidityCorrection::from(false), AcidityCorrection::None);
        for c in [
            AcidityCorrection::Add,
            AcidityCorrection::None,
            AcidityCorrection::Subtract,
        ] {
            assert_eq!(AcidityCorrection::parse(c.name()), Some(c));
        }
        assert_eq!(AcidityCorrection::Subtract.sign(), -1.0);
        assert!(!AcidityCorrection::None.applies());
        assert!(AcidityCorrection::parse("yes").is_none());
    }
}
