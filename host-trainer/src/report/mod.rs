//! Human reports of an audit: [`markdown`], and a self-contained [`html`] page with SVG
//! charts ([`margin_svg`], [`bars_svg`]).

mod html;
mod markdown;
mod svg;

pub use html::html;
pub use markdown::markdown;
pub use svg::{bars_svg, margin_svg};
