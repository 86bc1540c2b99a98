//! Record layer: the hash-chained trend files, the certificate log, the heads file, integrity checks and
//! quarantine, read-only queries, and workspace folders. The only layer that appends to the
//! record. May use `lot`, `spec`, `chem`, `support` and `error`.

pub mod answer;
pub mod append;
pub mod certfiles;
pub mod certlog;
pub mod find;
pub mod frozen;
pub mod heads;
pub mod index;
pub mod integrity;
pub mod layout;
pub mod lifecycle;
pub mod lines;
pub mod query;
pub mod scan;
pub mod shipments;
pub mod table_cache;
pub mod trend_file;
pub mod upgrade;
pub mod workspace;
