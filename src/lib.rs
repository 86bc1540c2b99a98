//! resinlot: QC lab tool for polyester resins, from titrations to certificates and trends.
//!
//! The layers, each a folder, from the bottom up; a layer uses only those below it:
//!
//! | layer | holds |
//! |---|---|
//! | [`error`] | the typed errors and exit-code mapping of the library |
//! | [`support`] | clock, atomic writes and the output guard, TOML and CSV input, printable text, tables, ids, fonts, PDF identity |
//! | [`stats`] | I-MR, run rules, capability, distributions, regression: the numerics |
//! | [`chem`] | end-group analysis, recipes, water balance, Carothers and Stockmayer gel points, hydroxyl methods |
//! | [`spec`] | product specs, revisions, customers, the decision rule |
//! | [`lot`] | lab results intake, one lot evaluated against its spec |
//! | [`record`] | trend files, certificate log, integrity, queries, workspaces |
//! | [`certificate`] | certificate model, building from the record, issue, HTML/PDF rendering |
//! | [`trend`] | one product's trend, the I-MR chart, the PDF trend report |
//! | [`cook`] | in-process kinetics, end point, Arrhenius, correction additions |
//! | [`cmd`] | the command line: one file per command, which only orchestrates |

#![warn(missing_docs)]

pub mod certificate;
pub mod chem;
pub mod cmd;
pub mod cook;
pub mod error;
pub mod lot;
pub mod record;
pub mod spec;
pub mod stats;
pub mod support;
pub mod trend;

pub use error::{Error, Result};
