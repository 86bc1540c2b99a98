//! Typed notes of a lot decision: what each note says is a kind, and the wording recorded in
//! the trend file's `notes` column is made and recognised here, in one place.
//!
//! The trend file keeps notes as text joined by "; " (its format does not change); a note read
//! back from the record is typed again with [`LotNote::parse`], which knows the same wordings
//! the constructors write. Text this module did not write is kept as [`NoteKind::Other`].

use std::fmt;

/// What a note is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum NoteKind {
    /// A measured property has no reading.
    NotMeasured,
    /// A reading was corrected to the spec temperature by Andrade's equation.
    TemperatureCorrected,
    /// The value is the mean of replicates within the repeatability limit.
    Replicates,
    /// The replicates' range exceeds the repeatability limit.
    RepeatabilityExceeded,
    /// A decided value is not a plain pass (its verdict in words).
    NotPassed,
    /// A note from the results file's `notes` column (issue #15), kept as the lab wrote it.
    Lab,
    /// Any other text (notes written before notes were typed, or by hand).
    Other,
}

impl NoteKind {
    /// True for notes a certificate of analysis repeats: a result corrected to the spec
    /// temperature says so on the certificate.
    pub fn on_certificate(self) -> bool {
        self == NoteKind::TemperatureCorrected
    }
}

/// One note of a lot decision: its kind and the words recorded.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LotNote {
    /// What the note is about.
    pub kind: NoteKind,
    /// The recorded wording.
    pub text: String,
}

const NOT_MEASURED: &str = " was not measured";
const MEASURED_AT: &str = ": measured at ";
const BY_ANDRADE: &str = " °C by Andrade's equation (B = ";
const RANGE_OF: &str = ": range of ";
const EXCEEDS: &str = " exceeds the repeatability limit ";
const MEAN_OF: &str = ": mean of ";
const REPLICATES_RANGE: &str = " replicates (range ";
const LAB: &str = "lab note: ";
const VERDICT_WORDS: [&str; 3] = ["conditional pass", "conditional fail", "fail"];

impl LotNote {
    fn new(kind: NoteKind, text: String) -> LotNote {
        LotNote { kind, text }
    }

    /// "`label` was not measured".
    pub fn not_measured(label: &str) -> LotNote {
        LotNote::new(NoteKind::NotMeasured, format!("{label}{NOT_MEASURED}"))
    }

    /// A reading measured at `measured_c` °C and corrected to `spec_c` °C with Andrade's
    /// coefficient `b_k` (kelvin).
    pub fn temperature_corrected(label: &str, measured_c: f64, spec_c: f64, b_k: f64) -> LotNote {
        LotNote::new(
            NoteKind::TemperatureCorrected,
            format!(
                "{label}{MEASURED_AT}{measured_c} °C, corrected to {spec_c}{BY_ANDRADE}{b_k} K)"
            ),
        )
    }

    /// `n` replicates whose `range` exceeds the repeatability `limit` (written as decided).
    pub fn repeatability_exceeded(
        label: &str,
        n: usize,
        range: impl fmt::Display,
        limit: impl fmt::Display,
    ) -> LotNote {
        LotNote::new(
            NoteKind::RepeatabilityExceeded,
            format!("{label}{RANGE_OF}{n} replicates {range}{EXCEEDS}{limit}"),
        )
    }

    /// The mean of `n` replicates with their `range`.
    pub fn replicates(label: &str, n: usize, range: impl fmt::Display) -> LotNote {
        LotNote::new(
            NoteKind::Replicates,
            format!("{label}{MEAN_OF}{n}{REPLICATES_RANGE}{range})"),
        )
    }

    /// A decided value that is not a plain pass: "`label` `reported` `unit`: `words`", where
    /// `words` is the verdict in words ([`crate::spec::decision::Verdict::words`]).
    pub fn not_passed(label: &str, reported: &str, unit: &str, words: &str) -> LotNote {
        LotNote::new(
            NoteKind::NotPassed,
            format!("{label} {reported} {unit}: {words}"),
        )
    }

    /// A note the lab wrote in the results file: "lab note: `text`".
    pub fn lab(text: &str) -> LotNote {
        LotNote::new(NoteKind::Lab, format!("{LAB}{text}"))
    }

    /// Types a note read back from the record, by the wordings above.
    pub fn parse(text: &str) -> LotNote {
        let kind = if text.starts_with(LAB) {
            NoteKind::Lab
        } else if text.contains(MEASURED_AT) && text.contains(BY_ANDRADE) && text.ends_with(" K)") {
            NoteKind::TemperatureCorrected
        } else if text.contains(RANGE_OF) && text.contains(EXCEEDS) {
            NoteKind::RepeatabilityExceeded
        } else if text.contains(MEAN_OF) && text.contains(REPLICATES_RANGE) && text.ends_with(')') {
            NoteKind::Replicates
        } else if text.ends_with(NOT_MEASURED) {
            NoteKind::NotMeasured
        } else if VERDICT_WORDS
            .iter()
            .any(|w| text.ends_with(&format!(": {w}")))
        {
            NoteKind::NotPassed
        } else {
            NoteKind::Other
        };
        LotNote::new(kind, text.to_string())
    }

    /// The trend file's `notes` cell: the notes' words joined by "; " (read back by
    /// [`LotNote::parse_cell`]).
    pub fn cell(notes: &[LotNote]) -> String {
        notes
            .iter()
            .map(|n| n.text.as_str())
            .collect::<Vec<_>>()
            .join("; ")
    }

    /// Types every note of a recorded `notes` cell (notes joined by "; ").
    pub fn parse_cell(cell: &str) -> Vec<LotNote> {
        cell.split("; ")
            .filter(|n| !n.is_empty())
            .map(LotNote::parse)
            .collect()
    }
}

/// A note serialises as its words, as notes were written before they were typed.
impl serde::Serialize for LotNote {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.serialize_str(&self.text)
    }
}

impl fmt::Display for LotNote {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.text)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // The wordings below are those lot::evaluate records today (fixture text, first principles).

    #[test]
    fn constructors_write_the_recorded_wording() {
        assert_eq!(
            LotNote::temperature_corrected("Viscosity", 75.0, 80.0, 5200.0).text,
            "Viscosity: measured at 75 °C, corrected to 80 °C by Andrade's equation (B = 5200 K)"
        );
        assert_eq!(
            LotNote::not_measured("Acid value").text,
            "Acid value was not measured"
        );
        assert_eq!(
            LotNote::replicates("Acid value", 2, "0.04").text,
            "Acid value: mean of 2 replicates (range 0.04)"
        );
        assert_eq!(
            LotNote::repeatability_exceeded("Acid value", 2, "0.40", "0.2").text,
            "Acid value: range of 2 replicates 0.40 exceeds the repeatability limit 0.2"
        );
        assert_eq!(
            LotNote::not_passed("Mn", "1890", "g/mol", "conditional fail").text,
            "Mn 1890 g/mol: conditional fail"
        );
    }

    #[test]
    fn parse_gives_back_the_kind() {
        for n in [
            LotNote::temperature_corrected("Viscosity at 80 °C", 78.5, 80.0, 4100.5),
            LotNote::not_measured("Colour"),
            LotNote::replicates("Hydroxyl value", 3, "0.6"),
            LotNote::repeatability_exceeded("Hydroxyl value", 3, "1.9", "1.0"),
            LotNote::not_passed("Acid value", "1.02", "mg KOH/g", "fail"),
            LotNote::not_passed("Mn", "2104", "g/mol", "conditional pass"),
        ] {
            assert_eq!(LotNote::parse(&n.text), n, "{}", n.text);
        }
        assert_eq!(LotNote::parse("checked by hand").kind, NoteKind::Other);
    }

    #[test]
    fn only_temperature_corrections_go_on_the_certificate() {
        let cell = "Acid value: mean of 2 replicates (range 0.04); \
                    Viscosity: measured at 75 °C, corrected to 80 °C by Andrade's equation (B = 5200 K)";
        let on: Vec<LotNote> = LotNote::parse_cell(cell)
            .into_iter()
            .filter(|n| n.kind.on_certificate())
            .collect();
        assert_eq!(on.len(), 1);
        assert!(on[0].text.starts_with("Viscosity: measured at 75 °C"));
        assert!(LotNote::parse_cell("").is_empty());
        assert_eq!(LotNote::cell(&LotNote::parse_cell(cell)), cell);
        assert_eq!(
            serde_json::to_string(&LotNote::not_measured("Colour")).unwrap(),
            "\"Colour was not measured\""
        );
    }
}
