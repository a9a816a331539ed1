//! The audit report as one self-contained HTML page.

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

/// A minimal table of the cells.
pub fn render(a: &Audit, c: &Circuit, p: &Provenance) -> String {
    let mut h = String::new();
    h.push_str("<!DOCTYPE html><html><head><meta charset=\"utf-8\"><title>");
    h.push_str(&escape(&c.title));
    h.push_str("</title></head><body><h1>");
    h.push_str(&escape(&c.title));
    h.push_str("</h1><p>");
    h.push_str(&escape(&a.recommendation_reason));
    h.push_str("</p><table><tr><th>method</th><th>rtol</th><th>max error</th><th>steps</th><th>meets target</th></tr>");
    for cell in &a.cells {
        h.push_str(&format!(
            "<tr><td>{}</td><td>{:e}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            cell.settings.method.as_str(),
            cell.settings.tolerances.rtol,
            cell.max_error
                .map_or("failed".to_string(), |e| format!("{e:.3e}")),
            cell.stats.steps,
            cell.meets_target
        ));
    }
    h.push_str(&format!(
        "</table><p>{} sha256 {}</p></body></html>\n",
        escape(p.file),
        p.sha256
    ));
    h
}
