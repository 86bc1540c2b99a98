//! Support layer: the injected clock, printing and atomic file writes, TOML reading with
//! file:line:column errors, aligned tables, safe identifiers, the bundled fonts, the PDF file
//! identity (identifier, producer, dates), the visual language of charts and pages, and who runs the command (`audit`). Uses only `error` and outside crates; every other layer may use it.

pub mod audit;
pub mod clock;
pub mod csv_input;
pub mod fonts;
pub mod ids;
pub mod output;
pub mod pdf_meta;
pub mod table;
#[cfg(test)]
pub mod test_rng;
pub mod text;
pub mod tomlfile;
pub mod visual;
