//! The `linegate` command and library, end to end: one test binary, a module per area.
//! Run one area with e.g. `cargo test -p host-trainer --test all project::`.

mod audit_parts;
mod classes;
mod classes_release;
mod cli;
mod common;
mod compare;
mod exports;
mod field_errors;
mod field_scoring;
mod generate;
mod holdout;
mod hostile;
mod integrity;
mod keys;
mod malformed;
mod outputs;
mod parquet;
mod project;
mod release;
mod sheets;
mod signal_inputs;
mod signal_layouts;
mod signals;
mod values;
