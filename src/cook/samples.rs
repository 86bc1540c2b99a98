//! In-process samples of a cook (CSV): elapsed time, acid value and optional readings.
//!
//! Columns: `elapsed_min,acid_value` (required) and `temperature_c,viscosity,hydroxyl_value,
//! sampled_at` (optional, any order). Lines starting with `#` are comments. Every error names
//! the file, the line and the field.

use std::path::Path;

use serde::Serialize;

use crate::error::{Error, Result};

/// One in-process sample.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Sample {
    /// Line of the file the sample came from (1-based, counting the header).
    pub line: u64,
    /// Minutes since the reference time of the cook (e.g. start of the hold at temperature).
    pub elapsed_min: f64,
    /// Acid value in mg KOH/g.
    pub acid_value: f64,
    /// Batch temperature in °C at sampling.
    pub temperature_c: Option<f64>,
    /// Viscosity in the lab's unit (e.g. mPa·s at the method's temperature).
    pub viscosity: Option<f64>,
    /// Hydroxyl value in mg KOH/g.
    pub hydroxyl_value: Option<f64>,
    /// Clock time of sampling as written (ISO 8601, e.g. 2026-03-14T06:30).
    pub sampled_at: Option<String>,
}

/// A non-fatal finding about the samples (e.g. an acid value that rose).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Warning {
    /// File and line.
    pub place: String,
    /// What was noticed.
    pub message: String,
}

/// The samples of one file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Samples {
    /// File name as given.
    pub file: String,
    /// Samples in file order (time order is enforced).
    pub samples: Vec<Sample>,
    /// Non-fatal findings.
    pub warnings: Vec<Warning>,
}

const REQUIRED: [&str; 2] = ["elapsed_min", "acid_value"];
const OPTIONAL: [&str; 4] = ["temperature_c", "viscosity", "hydroxyl_value", "sampled_at"];

/// Reads and validates a samples file.
pub fn load(path: &Path) -> Result<Samples> {
    let meta = std::fs::metadata(path).map_err(|e| Error::io(path, "reading", e))?;
    if meta.len() > 16 << 20 {
        return Err(Error::invalid(
            path.display().to_string(),
            format!(
                "the file is {} bytes; a cook's samples file is a few kilobytes",
                meta.len()
            ),
            "Check that this is the samples file of one cook.",
        ));
    }
    let text = crate::spec::read_text(path)?;
    parse(&path.display().to_string(), &text)
}

/// Parses samples CSV text; `file` names it in messages.
///
/// The steps: the header is checked (`columns`), each row is read (`read_row`) and checked
/// against the previous one (`check_order`), and an empty file is refused.
pub fn parse(file: &str, text: &str) -> Result<Samples> {
    let mut rdr = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .flexible(false)
        .from_reader(text.as_bytes());
    let headers = rdr
        .headers()
        .map_err(|e| crate::support::csv_input::error(file, &e))?
        .iter()
        .map(str::to_string)
        .collect::<Vec<_>>();
    let cols = columns(file, text, &headers)?;
    let mut samples: Vec<Sample> = Vec::new();
    let mut warnings = Vec::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| crate::support::csv_input::error(file, &e))?;
        let sample = read_row(file, &rec, &cols)?;
        if let Some(prev) = samples.last() {
            check_order(file, prev, &sample, &mut warnings)?;
        }
        samples.push(sample);
    }
    if samples.is_empty() {
        return Err(Error::invalid(
            file,
            "the file has no samples",
            "Add one line per in-process sample below the header.",
        ));
    }
    Ok(Samples {
        file: file.to_string(),
        samples,
        warnings,
    })
}

/// Where each column is in the file's header.
struct Columns {
    /// `elapsed_min` and `acid_value`, in that order.
    required: [usize; 2],
    temperature_c: Option<usize>,
    viscosity: Option<usize>,
    hydroxyl_value: Option<usize>,
    sampled_at: Option<usize>,
}

/// Checks the header: every column known, both required columns present.
fn columns(file: &str, text: &str, headers: &[String]) -> Result<Columns> {
    // The header is the first line that is neither blank nor a comment.
    let header_line = text
        .lines()
        .position(|l| {
            let l = l.trim();
            !l.is_empty() && !l.starts_with('#')
        })
        .map_or(1, |i| i + 1);
    for h in headers {
        if !REQUIRED.contains(&h.as_str()) && !OPTIONAL.contains(&h.as_str()) {
            return Err(Error::invalid(
                format!("{file}:{header_line}"),
                format!("unknown column '{h}'"),
                format!(
                    "Use only the columns {} (required) and {} (optional).",
                    REQUIRED.join(", "),
                    OPTIONAL.join(", ")
                ),
            ));
        }
    }
    let col = |name: &str| headers.iter().position(|h| h == name);
    let mut required = [0usize; 2];
    for (k, name) in REQUIRED.iter().enumerate() {
        required[k] = col(name).ok_or_else(|| {
            Error::invalid(
                format!("{file}:{header_line}"),
                format!("the header has no '{name}' column"),
                "The first non-comment line must name the columns, e.g. elapsed_min,acid_value.",
            )
        })?;
    }
    Ok(Columns {
        required,
        temperature_c: col("temperature_c"),
        viscosity: col("viscosity"),
        hydroxyl_value: col("hydroxyl_value"),
        sampled_at: col("sampled_at"),
    })
}

/// Reads one row: the required numbers, then temperature, viscosity, hydroxyl value and
/// sampling time, each error naming the line and field.
fn read_row(file: &str, rec: &csv::StringRecord, cols: &Columns) -> Result<Sample> {
    let line = rec.position().map_or(0, csv::Position::line);
    let place = |field: &str| format!("{file}:{line}, field {field}");
    let number = |i: usize, field: &str| -> Result<Option<f64>> {
        let cell = rec.get(i).unwrap_or("");
        if cell.is_empty() {
            return Ok(None);
        }
        let v: f64 = cell.parse().map_err(|_| {
            Error::invalid(
                place(field),
                format!("'{cell}' is not a number"),
                "Write a plain decimal number with a point, e.g. 12.5.",
            )
        })?;
        crate::error::non_negative(&place(field), v).map(Some)
    };
    let required = |i: usize, field: &str| -> Result<f64> {
        number(i, field)?.ok_or_else(|| {
            Error::invalid(
                place(field),
                "the value is missing",
                "Every sample needs its elapsed time and acid value.",
            )
        })
    };
    let elapsed_min = required(cols.required[0], "elapsed_min")?;
    let acid_value = required(cols.required[1], "acid_value")?;
    let opt = |c: Option<usize>, field: &str| c.map_or(Ok(None), |i| number(i, field));
    let temperature_c = match cols.temperature_c {
        Some(i) => temperature_cell(rec.get(i).unwrap_or(""), &place("temperature_c"))?,
        None => None,
    };
    let viscosity = opt(cols.viscosity, "viscosity")?;
    if viscosity == Some(0.0) {
        return Err(Error::invalid(
            place("viscosity"),
            "the viscosity is zero",
            "Leave the cell empty when no viscosity was measured.",
        ));
    }
    let hydroxyl_value = opt(cols.hydroxyl_value, "hydroxyl_value")?;
    let sampled_at = match cols.sampled_at {
        Some(i) if !rec.get(i).unwrap_or("").is_empty() => {
            let cell = rec.get(i).unwrap_or("");
            if parse_time(cell).is_none() {
                return Err(Error::invalid(
                    place("sampled_at"),
                    format!("'{cell}' is not a date and time"),
                    "Write ISO 8601 local time such as 2026-03-14T06:30 or 2026-03-14 06:30.",
                ));
            }
            Some(cell.to_string())
        }
        _ => None,
    };
    Ok(Sample {
        line,
        elapsed_min,
        acid_value,
        temperature_c,
        viscosity,
        hydroxyl_value,
        sampled_at,
    })
}

/// A batch temperature cell (°C): empty is none; it must be a number above absolute zero.
fn temperature_cell(cell: &str, place: &str) -> Result<Option<f64>> {
    if cell.is_empty() {
        return Ok(None);
    }
    let v: f64 = cell.parse().map_err(|_| {
        Error::invalid(
            place,
            format!("'{cell}' is not a number"),
            "Write the batch temperature in °C, e.g. 220.",
        )
    })?;
    if !v.is_finite() || v <= -crate::cook::kinetics::KELVIN_OFFSET {
        return Err(Error::invalid(
            place,
            format!("{v} °C is not a possible temperature"),
            "Write the batch temperature in °C, e.g. 220.",
        ));
    }
    Ok(Some(v))
}

/// Time must rise from one sample to the next (an error); an acid value that rises is a warning.
fn check_order(
    file: &str,
    prev: &Sample,
    next: &Sample,
    warnings: &mut Vec<Warning>,
) -> Result<()> {
    let place = |field: &str| format!("{file}:{}, field {field}", next.line);
    if next.elapsed_min <= prev.elapsed_min {
        return Err(Error::invalid(
            place("elapsed_min"),
            format!(
                "{} min is not later than the previous sample ({} min, line {})",
                next.elapsed_min, prev.elapsed_min, prev.line
            ),
            "List the samples in the order they were taken, each with a later time.",
        ));
    }
    if next.acid_value > prev.acid_value {
        warnings.push(Warning {
            place: place("acid_value"),
            message: format!(
                "the acid value rose from {} to {} mg KOH/g; check the titration (the point is kept)",
                prev.acid_value, next.acid_value
            ),
        });
    }
    Ok(())
}

fn parse_time(s: &str) -> Option<chrono::NaiveDateTime> {
    if let Ok(t) = chrono::DateTime::parse_from_rfc3339(s) {
        return Some(t.naive_local());
    }
    [
        "%Y-%m-%dT%H:%M:%S",
        "%Y-%m-%dT%H:%M",
        "%Y-%m-%d %H:%M:%S",
        "%Y-%m-%d %H:%M",
    ]
    .iter()
    .find_map(|f| chrono::NaiveDateTime::parse_from_str(s, f).ok())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_required_and_optional_columns() {
        let text = "# a comment\nelapsed_min,acid_value,viscosity,temperature_c,sampled_at\n0,30.5,,220,2026-03-14T06:00\n60,12.0,850,220.5,\n";
        let s = parse("c.csv", text).unwrap();
        assert_eq!(s.samples.len(), 2);
        assert_eq!(s.samples[0].line, 3);
        assert_eq!(s.samples[0].viscosity, None);
        assert_eq!(s.samples[1].viscosity, Some(850.0));
        assert_eq!(s.samples[1].temperature_c, Some(220.5));
        assert!(s.warnings.is_empty());
    }

    #[test]
    fn time_going_backwards_names_line_and_field() {
        let err = parse("c.csv", "elapsed_min,acid_value\n0,30\n60,20\n50,15\n")
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("c.csv:4, field elapsed_min"), "{err}");
    }

    #[test]
    fn rising_acid_value_is_a_warning() {
        let s = parse("c.csv", "elapsed_min,acid_value\n0,30\n60,31\n").unwrap();
        assert_eq!(s.warnings.len(), 1);
        assert!(s.warnings[0].place.starts_with("c.csv:3"));
    }

    #[test]
    fn bad_cells_are_refused() {
        for (text, want) in [
            (
                "elapsed_min,acid_value\n0,abc\n",
                "c.csv:2, field acid_value",
            ),
            ("elapsed_min,acid_value\n0,-1\n", "negative"),
            (
                "# c\nelapsed_min,acid_value,colour\n0,1,red\n",
                "c.csv:2: unknown column 'colour'",
            ),
            ("elapsed_min\n0\n", "no 'acid_value' column"),
            ("elapsed_min,acid_value\n", "no samples"),
            ("elapsed_min,acid_value\n0,1,2\n", "c.csv:2"),
            (
                "elapsed_min,acid_value,sampled_at\n0,1,yesterday\n",
                "field sampled_at",
            ),
        ] {
            let err = parse("c.csv", text).unwrap_err().to_string();
            assert!(err.contains(want), "{text:?}: {err}");
        }
    }
}
