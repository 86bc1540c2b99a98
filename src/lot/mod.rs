//! Lot layer: intake of lab results files and the evaluation of one lot against its spec.
//! May use `spec`, `chem`, `support` and `error`; writes nothing.

pub mod disposition;
pub mod evaluate;
pub mod intake;
pub mod note;
