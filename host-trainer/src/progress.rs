//! Progress on stderr for long work, through one module: bars made one way, so every bar
//! looks alike, and progress lines ([`line()`]) for work without a bar, shown where the
//! command line has [`install`]ed its sink. A leaf module: ingest, training and release all
//! report progress, none of them owns the style or decides whether it is shown.

use indicatif::{ProgressBar, ProgressStyle};

/// A bar of `len` steps drawn with the indicatif `template` (the default style if the
/// template does not parse).
pub fn bar(len: u64, template: &str) -> ProgressBar {
    let b = ProgressBar::new(len);
    b.set_style(
        ProgressStyle::with_template(template).unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    b
}

/// [`bar`], redrawn four times a second: for steps that take seconds each, so that the
/// clock and the estimate move between them.
pub fn ticking_bar(len: u64, template: &str) -> ProgressBar {
    let b = bar(len, template);
    b.enable_steady_tick(std::time::Duration::from_millis(250));
    b
}

/// Where library work sends its progress lines: nowhere until the command line installs a
/// sink (it does once, unless `--quiet`), so tests and other callers of the library stay
/// silent without passing anything down.
static SINK: std::sync::OnceLock<fn(&str)> = std::sync::OnceLock::new();

/// Sends every later [`line()`] of this process to `sink` (the command line's: stderr). The
/// first call wins.
pub fn install(sink: fn(&str)) {
    let _ = SINK.set(sink);
}

/// A progress line of long work that has no bar (a solver's rounds, say), made only if a
/// sink is installed.
pub fn line(text: impl FnOnce() -> String) {
    if let Some(sink) = SINK.get() {
        sink(&text());
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use std::sync::Mutex;

    static HEARD: Mutex<Vec<String>> = Mutex::new(Vec::new());

    fn record(line: &str) {
        HEARD.lock().unwrap().push(line.to_string());
    }

    /// Installs a sink that keeps every line, for the tests of this process.
    pub(crate) fn listen() {
        super::install(record);
    }

    /// The lines heard so far that start with `prefix`.
    pub(crate) fn heard(prefix: &str) -> Vec<String> {
        let all = HEARD.lock().unwrap();
        all.iter()
            .filter(|l| l.starts_with(prefix))
            .cloned()
            .collect()
    }

    #[test]
    fn a_line_reaches_the_installed_sink_once() {
        listen();
        super::line(|| "progress test: one line".to_string());
        assert_eq!(heard("progress test:"), ["progress test: one line"]);
    }
}
