//! Certificate layer: the certificate as data, building it from the record, numbering and
//! issuing it, rendering it (tera HTML, printpdf PDF) and its JSON data companion. May use `record`, `lot`, `spec`,
//! `support` and `error`.

pub mod build;
pub mod companion;
pub mod issue;
pub mod model;
pub mod render;
