//! The audit report as one self-contained HTML page: `model` takes plain data from the audit,
//! `render` writes the page and `plots` draws the inline SVG figures.

pub mod model;
pub mod plots;
pub mod render;

use crate::audit::results::Provenance;
use crate::audit::Audit;
use crate::circuit::Circuit;

/// Escapes text for HTML element content and attribute values.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// The audit report: one self-contained page (inline CSS and SVG, no scripts, no external files).
pub fn render(a: &Audit, c: &Circuit, p: &Provenance) -> String {
    render::page(&model::build(a, c, p))
}
