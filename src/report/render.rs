//! The page: the report model written as one HTML document with inline CSS and inline SVG figures.

use super::escape;
use super::model::{CellView, Curve, Model, Status, TimePlot, REFERENCE_COLOUR};
use super::plots::{self, Chart, Colour, Marker, Series};
use std::fmt::Write;

/// A number for the page: three significant digits, "n/a" when not finite.
pub fn num(x: f64) -> String {
    if !x.is_finite() {
        return "n/a".into();
    }
    if x == 0.0 {
        return "0".into();
    }
    let s = format!("{x:.2e}");
    match s.split_once('e') {
        Some((m, e)) => {
            let m = if m.contains('.') {
                m.trim_end_matches('0').trim_end_matches('.')
            } else {
                m
            };
            format!("{m}e{e}")
        }
        None => s,
    }
}

fn window_time(x: f64) -> String {
    if x.is_finite() {
        plots::tick(x)
    } else {
        "n/a".into()
    }
}

fn opt_num(x: Option<f64>) -> String {
    x.map_or("n/a".into(), num)
}

/// Plain decimal for small counts and ratios (orders, damping): two decimals, "n/a" when not finite.
fn dec(x: f64) -> String {
    if x.is_finite() {
        if x.abs() >= 1e4 || (x != 0.0 && x.abs() < 1e-2) {
            num(x)
        } else {
            format!("{x:.2}")
        }
    } else {
        "n/a".into()
    }
}

const CSS: &str = r#"
:root{--ink:#222;--mute:#5c5c5c;--rule:#d4d4d4;--paper:#fff;--band:#f4f2ee}
*{box-sizing:border-box}
body{margin:0;background:var(--band);color:var(--ink);font-family:system-ui,sans-serif;font-size:15px;line-height:1.45}
main{max-width:1180px;margin:0 auto;padding:18px 22px 40px;background:var(--paper)}
h1{font-size:1.6em;margin:.2em 0 .1em}
h2{font-size:1.25em;margin:1.6em 0 .5em;padding-bottom:.2em;border-bottom:2px solid var(--ink)}
h3{font-size:1.02em;margin:1.1em 0 .3em}
.sub{color:var(--mute);margin:0 0 .8em}
nav{font-size:.92em;margin:.4em 0 1em}
nav a{color:var(--ink);margin-right:1em}
code,.mono{font-family:ui-monospace,monospace;font-size:.92em}
table{border-collapse:collapse;margin:.4em 0 .8em}
th,td{border:1px solid var(--rule);padding:4px 8px;text-align:left;vertical-align:top}
th{background:#efefef;font-weight:600}
td.n{text-align:right;font-variant-numeric:tabular-nums}
.verdict{border:2px solid var(--ink);padding:10px 14px;margin:.6em 0}
.verdict .headline{font-size:1.2em;font-weight:700;margin:0 0 .3em}
.facts{display:grid;grid-template-columns:max-content 1fr;gap:3px 16px;margin:.5em 0}
.facts dt{font-weight:600}
.facts dd{margin:0}
.warn{border-left:5px solid #b35c00;background:#fff4e5;padding:6px 10px}
.pill{display:inline-block;padding:0 6px;border-radius:3px;font-size:.88em;font-weight:600;border:1px solid #0000}
.st-pass{background:#cfe3f7;border-color:#1f5f9e}
.st-noted{background:#d6efe8;border-color:#1f7a63}
.st-fail{background:#fbdcb8;border-color:#9a5200}
.st-flag{background:#efd2e8;border-color:#8a2f72;background-image:repeating-linear-gradient(45deg,#0000 0 6px,#ffffff88 6px 9px)}
.st-run{background:#e2e2e2;border-color:#555;border-style:dashed}
table.matrix td.cell{min-width:128px;border-width:2px}
table.matrix td.cell .err{font-weight:700;font-variant-numeric:tabular-nums}
table.matrix td.cell .work,table.matrix td.cell .fl{font-size:.85em}
table.matrix td.rec{outline:3px solid var(--ink);outline-offset:-5px}
.legend{display:flex;flex-wrap:wrap;gap:4px 18px;font-size:.9em;margin:.2em 0 .4em}
.legend span{white-space:nowrap}
svg.sw{vertical-align:middle;margin-right:4px}
figure{margin:.6em 0 1.2em;break-inside:avoid;page-break-inside:avoid}
figure svg.plot{display:block;max-width:100%;height:auto;border:1px solid var(--rule)}
figcaption{font-weight:600;margin:.2em 0}
.note{color:var(--mute);font-size:.9em}
table.ev{margin:0}
table.ev td,table.ev th{padding:2px 6px;font-size:.86em;border-color:#e4e4e4}
table.ev td.n{white-space:nowrap}
tr.evrow>td{border-top:none;padding-top:0}
table.flags{width:100%}
table.flags td.n{white-space:nowrap}
table.ev th{font-weight:500;color:var(--mute)}
.cmd{white-space:pre-wrap;word-break:break-all;background:#f3f3f3;padding:6px 8px;border:1px solid var(--rule)}
@media print{
 body{background:#fff;font-size:11pt}
 main{max-width:none;padding:0}
 nav{display:none}
 h2{break-after:avoid;page-break-after:avoid}
 table,figure{break-inside:avoid;page-break-inside:avoid}
 *{-webkit-print-color-adjust:exact;print-color-adjust:exact}
}
"#;

/// The whole page.
pub fn page(m: &Model) -> String {
    let mut h = String::with_capacity(1 << 20);
    h.push_str("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">");
    h.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">");
    let _ = write!(
        h,
        "<title>ringtrue audit: {}</title><style>{CSS}</style></head><body><main>",
        escape(&m.title)
    );
    let _ = write!(
        h,
        "<h1>{}</h1><p class=\"sub\">ringtrue audit of circuit <code>{}</code> from <code>{}</code></p>",
        escape(&m.title),
        escape(&m.circuit),
        escape(&m.provenance.file)
    );
    h.push_str(
        "<nav><a href=\"#verdict\">Verdict</a><a href=\"#flags\">Flags</a><a href=\"#matrix\">Settings matrix</a>\
         <a href=\"#work\">Work and precision</a><a href=\"#waves\">Waveforms</a><a href=\"#errors\">Error in time</a>\
         <a href=\"#poles\">Poles</a><a href=\"#provenance\">Provenance</a></nav>",
    );
    verdict(&mut h, m);
    flags(&mut h, m);
    matrix(&mut h, m);
    work(&mut h, m);
    waves(&mut h, m);
    errors(&mut h, m);
    poles(&mut h, m);
    provenance(&mut h, m);
    h.push_str("</main></body></html>\n");
    h
}

fn cell_name(c: &CellView) -> String {
    let mut s = format!("{} at rtol {}", escape(&c.method), num(c.rtol));
    if !c.group.is_empty() {
        let _ = write!(s, " ({})", escape(&c.group));
    }
    s
}

fn pill(s: Status) -> String {
    format!("<span class=\"pill {}\">{}</span>", s.class(), s.label())
}

fn verdict(h: &mut String, m: &Model) {
    h.push_str("<section id=\"verdict\"><h2>1. Verdict at a glance</h2><div class=\"verdict\">");
    match m.recommendation.and_then(|i| m.cells.get(i)) {
        Some(c) => {
            let _ = write!(h, "<p class=\"headline\">Recommended: {}</p>", cell_name(c));
        }
        None => h.push_str(
            "<p class=\"headline\">No setting is recommended: no cell meets the target.</p>",
        ),
    }
    let _ = write!(h, "<p>{}</p>", escape(&m.reason));
    h.push_str("</div><dl class=\"facts\">");
    let _ = write!(
        h,
        "<dt>Target</dt><dd>max error ≤ {} of each watched signal's peak</dd>",
        num(m.target)
    );
    let _ = write!(
        h,
        "<dt>Reference</dt><dd><code>{}</code>, error bound {} of peak</dd>",
        escape(&m.reference_kind),
        num(m.error_bound)
    );
    if let Some(c) = m.recommendation.and_then(|i| m.cells.get(i)) {
        let _ = write!(
            h,
            "<dt>Recommended cell</dt><dd>max error {}, {} Newton iterations, {} steps ({} rejected)</dd>",
            opt_num(c.max_error),
            c.newton,
            c.steps,
            c.rejected
        );
    }
    let pass = m
        .cells
        .iter()
        .filter(|c| matches!(c.status, Status::Pass | Status::PassNoted))
        .count();
    let _ = write!(
        h,
        "<dt>Cells passing</dt><dd>{pass} of {}</dd><dt>Cells by outcome</dt><dd>",
        m.cells.len()
    );
    for (s, n) in &m.status_counts {
        let _ = write!(h, "{} {n} &nbsp; ", pill(*s));
    }
    h.push_str("</dd><dt>Flags by kind</dt><dd>");
    let parts: Vec<String> = m
        .flag_counts
        .iter()
        .map(|(k, n)| format!("<code>{}</code> {n}", escape(k)))
        .collect();
    h.push_str(&parts.join(", "));
    h.push_str("</dd></dl>");
    if let Some(w) = &m.reference_warning {
        let _ = write!(
            h,
            "<p class=\"warn\"><strong>Reference warning:</strong> {}</p>",
            escape(w)
        );
    }
    h.push_str("</section>");
}

fn flags(h: &mut String, m: &Model) {
    h.push_str("<section id=\"flags\"><h2>2. Flags and their evidence</h2>");
    if m.flags.is_empty() {
        h.push_str("<p>No cell was flagged.</p></section>");
        return;
    }
    let u = m.time_unit;
    let ts = super::model::time_unit(m.provenance.stop).0;
    let _ = write!(
        h,
        "<table class=\"flags\"><tr><th>#</th><th>cell</th><th>kind</th><th>signal</th><th>window ({u})</th><th>severity</th></tr>"
    );
    for f in &m.flags {
        let kind = if f.disqualifies {
            format!(
                "<code>{}</code><br><span class=\"note\">disqualifies</span>",
                escape(&f.kind)
            )
        } else {
            format!(
                "<code>{}</code><br><span class=\"note\">noted only</span>",
                escape(&f.kind)
            )
        };
        let mut cell = format!("{} at rtol {}", escape(&f.method), num(f.rtol));
        if !f.group.is_empty() {
            let _ = write!(cell, " ({})", escape(&f.group));
        }
        let zoom = match f.zoom {
            Some(z) => format!("<br><a href=\"#zoom-{z}\">zoom</a>"),
            None => String::new(),
        };
        let _ = write!(
            h,
            "<tr><td class=\"n\">{}</td><td>{cell}</td><td>{kind}</td><td><code>{}</code></td><td class=\"n\">{} – {}{zoom}</td><td class=\"n\">{}</td></tr><tr class=\"evrow\"><td></td><td colspan=\"5\">",
            f.number,
            escape(&f.signal),
            window_time(f.t_start * ts),
            window_time(f.t_end * ts),
            num(f.severity)
        );
        if f.evidence.is_empty() {
            h.push_str("<span class=\"note\">none given</span>");
        } else {
            // Three name/value pairs a row keeps long evidence lists short.
            h.push_str("<table class=\"ev\"><tr>");
            for _ in 0..f.evidence.len().min(3) {
                h.push_str("<th>name</th><th>value</th>");
            }
            h.push_str("</tr>");
            for row in f.evidence.chunks(3) {
                h.push_str("<tr>");
                for e in row {
                    let _ = write!(
                        h,
                        "<td><code>{}</code></td><td class=\"n\">{}</td>",
                        escape(&e.name),
                        escape(&e.value)
                    );
                }
                h.push_str("</tr>");
            }
            h.push_str("</table>");
        }
        h.push_str("</td></tr>");
    }
    h.push_str("</table></section>");
}

fn matrix(h: &mut String, m: &Model) {
    h.push_str("<section id=\"matrix\"><h2>3. Settings matrix</h2>");
    h.push_str("<p class=\"note\">Each cell: outcome, max error relative to the signal peak, and work (Newton iterations / accepted steps). The recommended cell has a heavy frame. Outcomes: ");
    let legend: Vec<String> = Status::ALL
        .iter()
        .map(|s| format!("{} {}", pill(*s), s.explanation()))
        .collect();
    h.push_str(&legend.join("; "));
    h.push_str(".</p>");
    if m.matrix.is_empty() {
        h.push_str("<p>The audit has no cells.</p></section>");
        return;
    }
    for g in &m.matrix {
        if !g.label.is_empty() {
            let _ = write!(h, "<h3>{}</h3>", escape(&g.label));
        }
        h.push_str("<table class=\"matrix\"><tr><th>method \\ rtol</th>");
        for r in &m.rtols {
            let _ = write!(h, "<th>{}</th>", num(*r));
        }
        h.push_str("</tr>");
        for (method, row) in &g.rows {
            let _ = write!(h, "<tr><th>{}</th>", escape(method));
            for idx in row {
                match idx.and_then(|i| m.cells.get(i)) {
                    None => h.push_str("<td class=\"note\">not in plan</td>"),
                    Some(c) => {
                        let rec = if c.recommended { " rec" } else { "" };
                        let _ = write!(
                            h,
                            "<td class=\"cell {}{rec}\"><div><strong>{}</strong>{}</div>",
                            c.status.class(),
                            c.status.label(),
                            if c.recommended { " · recommended" } else { "" }
                        );
                        match &c.failure {
                            Some(f) => {
                                let _ = write!(h, "<div class=\"work\">{}</div>", escape(f));
                            }
                            None => {
                                let _ =
                                    write!(h, "<div class=\"err\">{}</div>", opt_num(c.max_error));
                            }
                        }
                        let _ = write!(
                            h,
                            "<div class=\"work\">{} Newton / {} steps</div>",
                            c.newton, c.steps
                        );
                        if !c.flag_kinds.is_empty() {
                            let kinds: Vec<String> =
                                c.flag_kinds.iter().map(|k| escape(k)).collect();
                            let _ =
                                write!(h, "<div class=\"fl\">flags: {}</div>", kinds.join(", "));
                        }
                        h.push_str("</td>");
                    }
                }
            }
            h.push_str("</tr>");
        }
        h.push_str("</table>");
    }
    h.push_str("</section>");
}

fn legend(h: &mut String, items: &[(String, Colour, Marker, bool)]) {
    h.push_str("<div class=\"legend\">");
    for (name, c, mk, line) in items {
        let _ = write!(
            h,
            "<span>{}{}</span>",
            plots::swatch(*c, *mk, *line),
            escape(name)
        );
    }
    h.push_str("</div>");
}

fn figure(h: &mut String, kind: &str, id: Option<&str>, caption: &str, svg: Option<String>) {
    let id = id.map_or(String::new(), |i| format!(" id=\"{i}\""));
    let _ = write!(
        h,
        "<figure data-figure=\"{kind}\"{id}><figcaption>{caption}</figcaption>"
    );
    match svg {
        Some(s) => {
            let s = s.replacen(
                "<svg ",
                &format!(
                    "<svg class=\"plot\" data-figure=\"{kind}\" role=\"img\" aria-label=\"{caption}\" "
                ),
                1,
            );
            h.push_str(&s);
        }
        None => h.push_str("<p class=\"note\">This figure could not be drawn.</p>"),
    }
}

fn work(h: &mut String, m: &Model) {
    h.push_str("<section id=\"work\"><h2>4. Work and precision</h2>");
    h.push_str("<p class=\"note\">Log-log: each method's cells (one point per tolerance setting), the target as a horizontal line, and the recommended cell ringed. Lower and further left is better.</p>");
    let mut items: Vec<(String, Colour, Marker, bool)> = m
        .methods
        .iter()
        .map(|x| (x.name.clone(), x.colour, x.marker, true))
        .collect();
    items.push((
        format!("target {}", num(m.target)),
        Colour(90, 90, 90),
        Marker::None,
        true,
    ));
    for (kind, xl, pick) in [
        (
            "work-precision-steps",
            "accepted steps",
            (|c: &CellView| c.steps as f64) as fn(&CellView) -> f64,
        ),
        (
            "work-precision-cpu",
            "cpu seconds",
            (|c: &CellView| c.cpu_seconds.max(1e-7)) as fn(&CellView) -> f64,
        ),
    ] {
        let mut ch = Chart::new(xl, "max error / peak");
        ch.log_x = true;
        ch.log_y = true;
        for x in &m.methods {
            let mut pts: Vec<(f64, f64, f64)> = x
                .cells
                .iter()
                .filter_map(|&i| m.cells.get(i))
                .filter_map(|c| Some((c.rtol, pick(c), c.max_error?)))
                .collect();
            pts.sort_by(|a, b| b.0.total_cmp(&a.0));
            ch.series.push(Series {
                name: x.name.clone(),
                points: pts.iter().map(|p| (p.1, p.2)).collect(),
                colour: x.colour,
                line: true,
                marker: x.marker,
                width: 2,
            });
        }
        ch.hlines
            .push((format!("target {}", num(m.target)), m.target));
        if let Some(c) = m.recommendation.and_then(|i| m.cells.get(i)) {
            if let Some(e) = c.max_error {
                ch.marks.push(("recommended".into(), (pick(c), e)));
            }
        }
        let caption = format!("Max error against {xl}");
        figure(h, kind, None, &caption, plots::svg(&ch));
        legend(h, &items);
        h.push_str("</figure>");
    }
    h.push_str("<table><tr><th>method</th><th>theoretical order</th><th>observed order</th></tr>");
    for x in &m.methods {
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            escape(&x.name),
            x.theoretical_order,
            x.observed_order.map_or("n/a".into(), dec)
        );
    }
    h.push_str("</table></section>");
}

fn curve_items(curves: &[Curve], line: bool) -> Vec<(String, Colour, Marker, bool)> {
    curves
        .iter()
        .map(|c| {
            let mk = if line { Marker::None } else { c.marker };
            (c.name.clone(), c.colour, mk, true)
        })
        .collect()
}

fn time_chart(p: &TimePlot, unit: &str, y_label: &str, log_y: bool, markers: bool) -> Chart {
    let mut ch = Chart::new(&format!("time ({unit})"), y_label);
    ch.log_y = log_y;
    ch.x_range = p.window;
    for c in &p.curves {
        ch.series.push(Series {
            name: c.name.clone(),
            points: c.points.clone(),
            colour: c.colour,
            line: true,
            marker: if markers { c.marker } else { Marker::None },
            width: if c.colour == REFERENCE_COLOUR { 3 } else { 2 },
        });
    }
    // The reference is drawn last so that a wrong method shows beside it rather than under it.
    if let Some(pos) = ch.series.iter().position(|s| s.colour == REFERENCE_COLOUR) {
        let r = ch.series.remove(pos);
        ch.series.push(Series { width: 1, ..r });
    }
    ch
}

fn shown_setting(m: &Model) -> String {
    let mut s = format!("rtol {} ({})", num(m.shown_rtol), escape(&m.shown_why));
    if !m.shown_group.is_empty() {
        let _ = write!(s, ", {}", escape(&m.shown_group));
    }
    s
}

fn waves(h: &mut String, m: &Model) {
    h.push_str("<section id=\"waves\"><h2>5. Waveforms</h2>");
    let _ = write!(
        h,
        "<p class=\"note\">The reference against each method at {}. Long runs are reduced to each interval's minimum and maximum, so step-to-step alternation stays visible.</p>",
        shown_setting(m)
    );
    if m.waveforms.is_empty() {
        h.push_str("<p>No watched signals.</p>");
    }
    for p in &m.waveforms {
        let ch = time_chart(p, m.time_unit, &p.signal, false, false);
        figure(h, "waveform", None, &escape(&p.title), plots::svg(&ch));
        legend(h, &curve_items(&p.curves, true));
        if !p.note.is_empty() {
            let _ = write!(h, "<p class=\"note\">{}</p>", escape(&p.note));
        }
        h.push_str("</figure>");
    }
    if !m.zooms.is_empty() {
        h.push_str("<h3>Flagged windows</h3>");
        for (z, p) in m.zooms.iter().enumerate() {
            let ch = time_chart(p, m.time_unit, &p.signal, false, true);
            let id = format!("zoom-{z}");
            figure(
                h,
                "flag-zoom",
                Some(&id),
                &escape(&p.title),
                plots::svg(&ch),
            );
            legend(h, &curve_items(&p.curves, false));
            if !p.note.is_empty() {
                let _ = write!(h, "<p class=\"note\">{}</p>", escape(&p.note));
            }
            h.push_str("</figure>");
        }
        let drawn = m.flags.iter().filter(|f| f.zoom.is_some()).count();
        if drawn < m.flags.len() {
            let _ = write!(
                h,
                "<p class=\"note\">{} further flagged windows are listed in the flag table only.</p>",
                m.flags.len() - drawn
            );
        }
    }
    h.push_str("</section>");
}

fn errors(h: &mut String, m: &Model) {
    h.push_str("<section id=\"errors\"><h2>6. Error against time</h2>");
    let _ = write!(
        h,
        "<p class=\"note\">|cell − reference| relative to the signal's peak, log scale, at {}; values below {} are drawn at {}. The target is the horizontal line.</p>",
        shown_setting(m),
        num(m.error_floor),
        num(m.error_floor)
    );
    for p in &m.errors {
        let mut ch = time_chart(p, m.time_unit, "|error| / peak", true, false);
        ch.hlines
            .push((format!("target {}", num(m.target)), m.target));
        figure(h, "error-time", None, &escape(&p.title), plots::svg(&ch));
        legend(h, &curve_items(&p.curves, true));
        if !p.note.is_empty() {
            let _ = write!(h, "<p class=\"note\">{}</p>", escape(&p.note));
        }
        h.push_str("</figure>");
    }
    h.push_str("</section>");
}

fn poles(h: &mut String, m: &Model) {
    h.push_str("<section id=\"poles\"><h2>7. Poles</h2>");
    if m.poles.is_empty() {
        h.push_str("<p>The circuit's poles could not be computed (or it has none).</p></section>");
        return;
    }
    h.push_str("<p class=\"note\">Natural frequencies s = re + j·im of the circuit linearized at its start state.</p>");
    let mut ch = Chart::new("re (1/s)", "im (rad/s)");
    ch.symmetric_y = true;
    ch.height = 420;
    ch.series.push(Series {
        name: "pole".into(),
        points: m.poles.iter().map(|p| (p.re, p.im)).collect(),
        colour: Colour(0, 94, 184),
        line: false,
        marker: Marker::Cross,
        width: 2,
    });
    ch.vlines.push((String::new(), 0.0));
    ch.hlines.push((String::new(), 0.0));
    let lo = m.poles.iter().map(|p| p.re).fold(0.0f64, f64::min);
    let hi = m.poles.iter().map(|p| p.re).fold(0.0f64, f64::max);
    let span = (hi - lo).max(1e-30);
    ch.x_range = Some((lo - 0.08 * span, hi + 0.08 * span));
    figure(h, "poles", None, "s-plane", plots::svg(&ch));
    legend(
        h,
        &[("pole".into(), Colour(0, 94, 184), Marker::Cross, false)],
    );
    h.push_str("</figure>");
    h.push_str("<table><tr><th>#</th><th>re (1/s)</th><th>im (rad/s)</th><th>frequency (Hz)</th><th>damping ratio</th><th>Q</th><th>time constant (s)</th></tr>");
    for (i, p) in m.poles.iter().enumerate() {
        let _ = write!(
            h,
            "<tr><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            i + 1,
            num(p.re),
            num(p.im),
            num(p.hz),
            dec(p.damping),
            p.q.map_or("∞ (undamped)".into(), dec),
            p.tau.map_or("∞ (undamped)".into(), num)
        );
    }
    h.push_str("</table></section>");
}

fn provenance(h: &mut String, m: &Model) {
    let p = &m.provenance;
    h.push_str("<section id=\"provenance\"><h2>8. Provenance</h2><dl class=\"facts\">");
    let rows = [
        ("tool", format!("ringtrue {}", escape(&p.version))),
        ("circuit file", format!("<code>{}</code>", escape(&p.file))),
        ("circuit title", escape(&p.title)),
        ("sha256", format!("<code>{}</code>", escape(&p.sha256))),
        ("created", escape(&p.created)),
        ("threads", p.threads.to_string()),
        ("stop time", format!("{} s", num(p.stop))),
    ];
    for (k, v) in rows {
        let _ = write!(h, "<dt>{k}</dt><dd>{v}</dd>");
    }
    h.push_str("</dl><h3>Plan</h3><table><tr><th>setting</th><th>values</th></tr>");
    for (k, v) in &p.plan {
        let _ = write!(
            h,
            "<tr><td><code>{}</code></td><td>{}</td></tr>",
            escape(k),
            escape(v)
        );
    }
    let _ = write!(
        h,
        "</table><h3>Reproduce</h3><div class=\"cmd mono\">{}</div></section>",
        escape(&p.command)
    );
}
