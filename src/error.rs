//! Typed errors of the library: every message says what is wrong, where, and how to fix it.

use std::path::{Path, PathBuf};

/// Errors raised by resinlot's library code.
///
/// `Invalid` and `Io` are input or environment problems (exit code 2);
/// `Shortfall` is a check that ran and fell short (exit code 1).
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Bad input: a file, a line, a field or a flag that cannot be used as given.
    #[error("{place}: {problem}. {fix}")]
    Invalid {
        /// Where: a file with line and column, a flag, a lot id.
        place: String,
        /// What is wrong.
        problem: String,
        /// What to do about it.
        fix: String,
    },
    /// A file could not be read or written.
    #[error("{}: {action} failed", path.display())]
    Io {
        /// The file or folder concerned.
        path: PathBuf,
        /// What was being done ("reading", "writing", ...).
        action: &'static str,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// A check ran to completion and the answer is "no" (unknown lot, altered certificate...).
    #[error("{0}")]
    Shortfall(String),
}

impl Error {
    /// Builds an [`Error::Invalid`].
    pub fn invalid(
        place: impl Into<String>,
        problem: impl Into<String>,
        fix: impl Into<String>,
    ) -> Self {
        Error::Invalid {
            place: place.into(),
            problem: problem.into(),
            fix: fix.into(),
        }
    }

    /// Builds an [`Error::Io`] for `path`.
    pub fn io(path: &Path, action: &'static str, source: std::io::Error) -> Self {
        Error::Io {
            path: path.to_path_buf(),
            action,
            source,
        }
    }

    /// Places an [`Error::Invalid`] somewhere else: `place` receives the old place and returns
    /// the new one (a command names the flag, a caller adds the file and line). Other errors
    /// pass through unchanged.
    pub fn at(self, place: impl FnOnce(&str) -> String) -> Self {
        match self {
            Error::Invalid {
                place: old,
                problem,
                fix,
            } => Error::Invalid {
                place: place(&old),
                problem,
                fix,
            },
            other => other,
        }
    }

    /// The process exit code this error maps to: 1 for a shortfall, 2 otherwise.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Shortfall(_) => 1,
            _ => 2,
        }
    }
}

/// Result alias for the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Checks that `value` is finite and not negative; `place` names the input.
pub fn non_negative(place: &str, value: f64) -> Result<f64> {
    if !value.is_finite() {
        return Err(Error::invalid(
            place,
            format!("{value} is not a finite number"),
            "Enter a plain decimal number such as 12.5.",
        ));
    }
    if value < 0.0 {
        return Err(Error::invalid(
            place,
            format!("{value} is negative"),
            "Enter a value of zero or more.",
        ));
    }
    Ok(value)
}

/// Checks that `value` is finite and within `lo..=hi`, the physically sensible range of the
/// input (`unit` is printed with the bounds); `place` names the input.
pub fn within(place: &str, value: f64, lo: f64, hi: f64, unit: &str) -> Result<f64> {
    if !value.is_finite() || value < lo || value > hi {
        // Formatted only for a refusal: this runs for every value of every lot.
        let unit = if unit.is_empty() {
            String::new()
        } else {
            format!(" {unit}")
        };
        return Err(Error::invalid(
            place,
            format!("{value}{unit} is outside the range {lo} to {hi}{unit} that resinlot accepts"),
            format!("Enter a value from {lo} to {hi}{unit}."),
        ));
    }
    Ok(value)
}

/// Checks that `value` is finite and strictly positive; `place` names the input.
pub fn positive(place: &str, value: f64) -> Result<f64> {
    non_negative(place, value)?;
    if value == 0.0 {
        return Err(Error::invalid(
            place,
            "the value is zero",
            "Enter a value greater than zero.",
        ));
    }
    Ok(value)
}

#[cfg(test)]
mod tests {
    use super::Error;

    #[test]
    fn at_moves_only_invalid_errors() {
        let e = Error::invalid("av", "negative", "Enter a value.").at(|p| format!("--{p}"));
        assert_eq!(e.to_string(), "--av: negative. Enter a value.");
        let e = Error::Shortfall("no".into()).at(|_| "x".into());
        assert_eq!(e.to_string(), "no");
    }

    #[test]
    fn within_refuses_non_finite_and_out_of_range() {
        assert_eq!(super::within("t", 25.0, -40.0, 300.0, "°C").unwrap(), 25.0);
        for bad in [f64::NAN, f64::INFINITY, -41.0, 300.5] {
            let e = super::within("t", bad, -40.0, 300.0, "°C").unwrap_err();
            assert!(e.to_string().contains("from -40 to 300 °C"), "{e}");
        }
    }
}
