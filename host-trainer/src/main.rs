//! `linegate`: the command line. Parses flags, runs the command, prints the error chain
//! and picks the exit code: 0 success, 1 a check ran and failed (not separable, audit
//! failed, blob corrupt or not matching), 2 usage, input or output error.

#![forbid(unsafe_code)]
// The command line prints and picks exit codes; it shares the library's other rules.
#![warn(
    rust_2018_idioms,
    unused_qualifications,
    clippy::dbg_macro,
    clippy::todo,
    clippy::unimplemented,
    clippy::mem_forget,
    clippy::unwrap_used,
    clippy::panic,
    clippy::cast_lossless
)]
#![cfg_attr(test, allow(clippy::unwrap_used, clippy::panic))]
#![allow(clippy::result_large_err)]

use host_trainer::cli;
use std::io::IsTerminal;
use std::process::ExitCode;

fn main() -> ExitCode {
    // The parquet crate can panic on a damaged page; the reader catches that and reports
    // the file, row group and column as a damaged file, so the crate's own panic message
    // would only read as a crash. Every other panic is reported as before.
    let report = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        if !info
            .location()
            .is_some_and(|l| l.file().contains("/parquet-"))
        {
            report(info);
        }
    }));
    let parsed = cli::settings::parse();
    match cli::run(&parsed.cli, parsed.settings) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            let failed = e.downcast_ref::<cli::CheckFailed>().is_some();
            let tag = if std::io::stderr().is_terminal() {
                "\x1b[31merror\x1b[0m"
            } else {
                "error"
            };
            // `-q` silences reports, never the reason for a non-zero exit.
            eprintln!("{tag}: {}", cli::shown(&e.to_string()));
            for cause in e.chain().skip(1) {
                eprintln!("  caused by: {}", cli::shown(&cause.to_string()));
            }
            ExitCode::from(if failed { 1 } else { 2 })
        }
    }
}
