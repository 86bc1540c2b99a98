//! Web layer: `resinlot serve`, a small read-only web server over the record for customer
//! service and QA (issue #21). Server-rendered pages (tera templates in `templates/web/`,
//! compiled in), no JavaScript; every request reads the record as it stands, through the same
//! query code as the command line (`record::answer`, `record::find`, `record::query`,
//! `trend::product`, `record::integrity`, `record::shipments`). It opens record files for reading only.
//!
//! May use every layer below `cmd` (`trend`, `certificate`, `record`, `spec`, `lot`, `support`,
//! `error`); knows nothing of the command line. `cmd::serve` turns flags into a [`Config`].

pub mod access;
pub mod certificate;
pub mod find;
pub mod lot;
pub mod pages;
pub mod product;
pub mod search;
pub mod server;
pub mod shipments;

pub use server::{run, Config};
