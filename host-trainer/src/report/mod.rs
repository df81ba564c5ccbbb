//! Reports of an audit: [`markdown`], a self-contained [`html`] page with SVG charts
//! ([`margin_bins_svg`], [`rounding_svg`], [`bars_svg`], [`sweep_svg`],
//! [`trade_off_svg`]), and [`json`] for machines.

mod html;
mod json;
mod markdown;
mod numbers;
mod operating;
mod settings;
mod svg;

pub use html::html;
pub use json::json;
pub use markdown::markdown;
pub use svg::{bars_svg, margin_bins_svg, rounding_svg, sweep_svg, trade_off_svg};
