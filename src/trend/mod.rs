//! Trend layer: one product's lot-to-lot trend (I-MR, run rules, capability, viscosity–Mn),
//! its control chart and its PDF report. May use `record` (read-only queries), `stats`,
//! `support` and `error`.

pub mod chart;
pub mod product;
pub mod report;
