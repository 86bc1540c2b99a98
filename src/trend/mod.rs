//! Trend layer: one product's lot-to-lot trend (I-MR, run rules, capability, viscosity–Mn),
//! its control chart, its PDF report and its text. May use `record` (read-only queries), `spec`
//! (labels, units and windows), `stats`, `support` and `error`.

pub mod chart;
pub mod product;
pub mod report;
pub mod text;
pub mod viscosity_chart;
