//! Linegate's cross-crate checks, one binary with a module per area.
//! Each check against an outside source names the source beside it.

mod browser;
mod c_api;
mod confidence;
mod demo;
mod device;
mod features;
mod house;
mod images;
mod quantisation;
mod reference;
mod sheets;
mod signal_layouts;
mod signing;
mod soft_margin;
mod values;
mod verifier;

/// Prints a loud SKIPPED line, or fails when running in CI (CI=true), where every tool must be present.
pub fn skip_or_fail(what: &str, why: &str) {
    if std::env::var("CI").is_ok_and(|v| v == "true") {
        panic!("{what} could not run in CI: {why}");
    }
    eprintln!("\n======== SKIPPED: {what}: {why} ========\n");
}

/// The workspace root.
pub fn root() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("workspace root")
        .to_path_buf()
}
