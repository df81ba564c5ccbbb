//! Helpers the test modules share: run `linegate`, check its exit code,
//! write inputs, make the demo.
// Not every helper is used by every build of the modules.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

/// Runs `linegate` in `dir` with stdin closed. `timeout` is a hang guard only (the
/// commands finish in well under a second): it turns a hang into exit 124 instead of a
/// stuck test.
pub fn linegate(args: &[&str], dir: &Path) -> Output {
    Command::new("timeout")
        .arg("120")
        .arg(env!("CARGO_BIN_EXE_linegate"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()
        .expect("run linegate")
}

/// Asserts the exit code, showing what the tool wrote to stderr if it differs; returns
/// that stderr.
pub fn exits(o: &Output, code: i32) -> String {
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert_eq!(o.status.code(), Some(code), "{err}");
    err
}

/// `cmd --model demo/model.json --train demo/train-synthetic.csv` and then `extra`: the
/// release commands run on the demo's model and training log.
pub fn on_demo<'a>(cmd: &'a str, extra: &[&'a str]) -> Vec<&'a str> {
    let mut a = vec![
        cmd,
        "--model",
        "demo/model.json",
        "--train",
        "demo/train-synthetic.csv",
    ];
    a.extend_from_slice(extra);
    a
}

/// Writes `bytes` to `dir/name` and returns the path.
pub fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

/// Writes the demo into `d/demo`.
pub fn demo(d: &Path) {
    exits(&linegate(&["-q", "demo", "--out-dir", "demo"], d), 0);
}
