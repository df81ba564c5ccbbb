//! Progress bars on stderr for long work: one way to make them, so every bar looks alike.
//! A leaf module: ingest, training and release all draw bars, none of them owns the style.

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
