//! Certificate layer: the certificate as data, building it from the record, numbering and
//! issuing it, and rendering it (tera HTML, printpdf PDF). May use `record`, `lot`, `spec`,
//! `support` and `error`.

pub mod build;
pub mod issue;
pub mod model;
pub mod render;
