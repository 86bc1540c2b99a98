//! resinlot: QC lab tool for polyester resins, from titrations to certificates and trends.
//!
//! Domain modules know nothing of the command line; `cli` and `cmd` sit on top of them.

pub mod analysis;
pub mod chart;
pub mod chemistry;
pub mod cli;
pub mod clock;
pub mod cmd;
pub mod error;
pub mod output;
pub mod recipe;
pub mod stats;
pub mod table;
pub mod tomlfile;

pub use error::{Error, Result};
