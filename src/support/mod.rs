//! Support layer: the injected clock, printing and atomic file writes, TOML reading with
//! file:line:column errors, aligned tables, safe identifiers, the bundled fonts, the PDF file
//! identity (identifier, producer, dates) and the visual language of charts and pages. Uses only `error` and outside crates; every other layer may use it.

pub mod clock;
pub mod csv_input;
pub mod fonts;
pub mod ids;
pub mod output;
pub mod pdf_meta;
pub mod table;
pub mod text;
pub mod tomlfile;
pub mod visual;
