//! Reports of an audit: its [`document`] of typed sections, [`markdown`] (the sections in
//! order), a self-contained [`html`] page with SVG charts placed by section
//! ([`margin_bins_svg`], [`rounding_svg`], [`bars_svg`], [`sweep_svg`],
//! [`trade_off_svg`]), and [`json`] for machines. A model of several classes:
//! [`class_document`], [`class_html`] (with [`class_margins_svg`]), [`class_json`]. The drift test's document:
//! [`drift_markdown`], [`drift_html`], [`cusum_svg`].

mod classes;
mod document;
mod drift;
mod html;
mod json;
mod markdown;
mod numbers;
mod operating;
mod settings;
mod svg;

pub use classes::{class_document, class_html, class_json, class_margins_svg};
pub use document::{Document, Part, Section};
pub use drift::{cusum_svg, drift_html, drift_markdown};
pub use html::html;
pub use json::json;
pub use markdown::{document, markdown};
pub use svg::{bars_svg, margin_bins_svg, rounding_svg, sweep_svg, trade_off_svg};
