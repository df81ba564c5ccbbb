//! Linegate's cross-crate checks, one binary with a module per area.
//! Each check against an outside source names the source beside it.

mod browser;
mod c_api;
mod classes_audit;
mod classes_e2e;
mod classes_train;
mod confidence;
mod demo;
mod device;
mod device_classes;
mod device_field;
mod drift;
mod drift_parts;
mod features;
mod field;
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

/// Runs the outside check `tests/verify/<script>` with `args` in `dir`: its exit code and
/// its output (stdout then stderr), or `None` after a loud SKIPPED line (a failure in CI)
/// when Python cannot start or the script says (exit 3) that a package it needs is missing.
pub fn python_check(
    what: &str,
    script: &str,
    args: &[&std::ffi::OsStr],
    dir: &std::path::Path,
) -> Option<(Option<i32>, String)> {
    let o = match std::process::Command::new("python3")
        .arg(root().join("tests/verify").join(script))
        .args(args)
        .current_dir(dir)
        .output()
    {
        Ok(o) => o,
        Err(e) => {
            skip_or_fail(what, &e.to_string());
            return None;
        }
    };
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    if o.status.code() == Some(3) {
        skip_or_fail(what, &text);
        return None;
    }
    Some((o.status.code(), text))
}

/// The workspace root.
pub fn root() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("workspace root")
        .to_path_buf()
}
