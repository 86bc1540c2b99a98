//! The integration tests as one test binary (issue #12), so the suite links once: one module
//! per area, sharing `common` (temp workspace with the fixtures, the binary, PDF text).

mod common;

mod audit;
mod bad_input;
mod certificate_content;
mod certificate_faults;
mod certificate_render;
mod certify;
mod cook;
mod demo_command;
mod demo_data;
mod demo_safety;
mod dry_run_stream;
mod endgroup;
mod find_across;
mod flags;
mod intake_scale;
mod lifecycle;
mod lookup;
mod old_registers;
mod parsers_never_panic;
mod record;
mod record_anchors;
mod record_faults;
mod record_tail;
mod release;
mod serve;
mod serve_browser;
mod shipments;
mod trend;
