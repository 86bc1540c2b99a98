//! Specification layer: product specs and their revisions, customer overlays, property keys and
//! the decision rule (ASTM E29 rounding, ILAC-G8 verdicts). May use `chem`, `support` and
//! `error`; knows nothing of lots on file, the record or the command line.

pub mod customer;
pub mod decision;
pub mod keys;
pub mod product;
pub mod units;

pub use product::*;
