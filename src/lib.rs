//! resinlot: QC lab tool for polyester resins, from titrations to certificates and trends.
//!
//! Domain modules know nothing of the command line; `cli` and `cmd` sit on top of them.

pub mod analysis;
pub mod certificate;
pub mod certlog;
pub mod chart;
pub mod chemistry;
pub mod cli;
pub mod clock;
pub mod cmd;
pub mod coa;
pub mod cook_chart;
pub mod correction;
pub mod customer;
pub mod decision;
pub mod error;
pub mod evaluate;
pub mod fonts;
pub mod ids;
pub mod intake;
pub mod integrity;
pub mod issue;
pub mod kinetics;
pub mod output;
pub mod query;
pub mod recipe;
pub mod register;
pub mod render;
pub mod samples;
pub mod spec;
pub mod stats;
pub mod table;
pub mod tomlfile;
pub mod trend_report;
pub mod trending;
pub mod workspace;

pub use error::{Error, Result};
