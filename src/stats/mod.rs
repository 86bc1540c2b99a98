//! Lot-to-lot statistics: I-MR control limits, Nelson run rules, capability, normality, log–log fit;
//! the shared numerics: distributions (normal, chi-square, Student t) and straight-line fits; bisection.
//!
//! Pure functions over `&[f64]` in manufacture order; no I/O. Results derive `Serialize`.
//! May use `error` only; every other layer may use it.

pub mod capability;
pub mod dist;
pub mod imr;
pub mod normality;
pub mod regression;
pub mod rules;
pub mod solve;
#[cfg(test)]
mod testdata;

pub use capability::{capability, capability_from_moments, Capability, Side, SpecWindow};
pub use imr::{imr_limits, mean_and_sd, moving_ranges, Limits};
pub use normality::{anderson_darling, Normality};
pub use regression::{fit_line, fit_weighted, log_log_fit, LineFit, LogLogFit};
pub use rules::{nelson_signals, nelson_signals_into, RuleSet, Signal};
