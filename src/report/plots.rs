//! The report's figures: plain chart descriptions drawn into inline SVG strings, and the min-max
//! decimation that keeps every plotted series small without hiding step-to-step alternation.

use plotters::prelude::*;

/// Reduces `(t, v)` to at most two points per bucket: each bucket's smallest and largest finite value,
/// in time order, so a waveform that alternates from step to step still alternates after decimation.
/// Series with no more than `2 * buckets` points are returned as they are (non-finite points dropped).
pub fn decimate_min_max(t: &[f64], v: &[f64], buckets: usize) -> (Vec<f64>, Vec<f64>) {
    let n = t.len().min(v.len());
    let finite = |j: usize| t[j].is_finite() && v[j].is_finite();
    if buckets == 0 || n <= 2 * buckets {
        let keep: Vec<usize> = (0..n).filter(|&j| finite(j)).collect();
        return (
            keep.iter().map(|&j| t[j]).collect(),
            keep.iter().map(|&j| v[j]).collect(),
        );
    }
    let mut ot = Vec::with_capacity(2 * buckets);
    let mut ov = Vec::with_capacity(2 * buckets);
    for b in 0..buckets {
        let lo = b * n / buckets;
        let hi = ((b + 1) * n / buckets).min(n);
        let mut lowest: Option<usize> = None;
        let mut highest: Option<usize> = None;
        for j in lo..hi {
            if !finite(j) {
                continue;
            }
            if lowest.is_none_or(|k| v[j] < v[k]) {
                lowest = Some(j);
            }
            if highest.is_none_or(|k| v[j] > v[k]) {
                highest = Some(j);
            }
        }
        let (Some(a), Some(b)) = (lowest, highest) else {
            continue;
        };
        let (first, second) = if a <= b { (a, b) } else { (b, a) };
        ot.push(t[first]);
        ov.push(v[first]);
        if second != first {
            ot.push(t[second]);
            ov.push(v[second]);
        }
    }
    (ot, ov)
}

/// A colour of the report's palette (chosen to stay distinguishable with the common colour-vision
/// deficiencies; every series also has its own marker and legend entry).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Colour(pub u8, pub u8, pub u8);

impl Colour {
    pub fn hex(self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }
    fn rgb(self) -> RGBColor {
        RGBColor(self.0, self.1, self.2)
    }
}

pub const INK: Colour = Colour(34, 34, 34);

/// A point marker drawn at each sample of a series.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    None,
    Circle,
    Triangle,
    Square,
    Cross,
    Diamond,
}

/// One plotted series.
#[derive(Debug, Clone)]
pub struct Series {
    pub name: String,
    pub points: Vec<(f64, f64)>,
    pub colour: Colour,
    pub line: bool,
    pub marker: Marker,
    pub width: u32,
}

/// A complete description of one chart.
#[derive(Debug, Clone)]
pub struct Chart {
    pub x_label: String,
    pub y_label: String,
    pub log_x: bool,
    pub log_y: bool,
    pub series: Vec<Series>,
    /// Horizontal reference lines (label, y).
    pub hlines: Vec<(String, f64)>,
    /// Vertical reference lines (label, x).
    pub vlines: Vec<(String, f64)>,
    /// Highlighted points (label, point).
    pub marks: Vec<(String, (f64, f64))>,
    /// Forces the x range (in data units) when set.
    pub x_range: Option<(f64, f64)>,
    /// Makes the y range symmetric about zero.
    pub symmetric_y: bool,
    pub width: u32,
    pub height: u32,
}

impl Chart {
    pub fn new(x_label: &str, y_label: &str) -> Chart {
        Chart {
            x_label: x_label.to_string(),
            y_label: y_label.to_string(),
            log_x: false,
            log_y: false,
            series: Vec::new(),
            hlines: Vec::new(),
            vlines: Vec::new(),
            marks: Vec::new(),
            x_range: None,
            symmetric_y: false,
            width: 1100,
            height: 380,
        }
    }
}

const FONT: &str = "sans-serif";

fn to_axis(x: f64, log: bool) -> Option<f64> {
    let y = if log {
        if x > 0.0 {
            x.log10()
        } else {
            return None;
        }
    } else {
        x
    };
    y.is_finite().then_some(y)
}

fn padded(lo: f64, hi: f64, log: bool) -> (f64, f64) {
    if !(lo.is_finite() && hi.is_finite()) || lo > hi {
        return (-1.0, 1.0);
    }
    let span = hi - lo;
    if log {
        if span < 1.0 {
            let mid = 0.5 * (lo + hi);
            return (mid - 0.6, mid + 0.6);
        }
        return (lo - 0.08 * span, hi + 0.08 * span);
    }
    if span <= f64::EPSILON * lo.abs().max(hi.abs()).max(f64::MIN_POSITIVE) {
        let d = if lo == 0.0 { 1.0 } else { 0.1 * lo.abs() };
        return (lo - d, hi + d);
    }
    (lo - 0.05 * span, hi + 0.05 * span)
}

/// A tick label: a decade as 1e-5, anything else with three significant digits.
pub fn tick(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e4).contains(&a) {
        let decimals = (3 - a.log10().floor() as i32).clamp(0, 6) as usize;
        let s = format!("{v:.decimals$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        let s = format!("{v:.2e}");
        match s.split_once('e') {
            Some((m, e)) => {
                let m = m.trim_end_matches('0').trim_end_matches('.');
                format!("{m}e{e}")
            }
            None => s,
        }
    }
}

/// A log-axis tick (at log10 of the value): decades as 1e-5; between decades only on short axes.
fn log_tick(v: f64, decades_only: bool) -> String {
    if (v - v.round()).abs() < 1e-9 {
        format!("1e{}", v.round() as i64)
    } else if decades_only {
        String::new()
    } else {
        tick(10f64.powf(v))
    }
}

type DrawResult = Result<(), Box<dyn std::error::Error>>;

/// Draws `chart` as an SVG document (without a namespace URL, for inline use in HTML).
pub fn svg(chart: &Chart) -> Option<String> {
    let mut buf = String::new();
    let drawn = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        let mut out = String::new();
        let r = draw(chart, &mut out);
        (r.is_ok(), out)
    }));
    match drawn {
        Ok((true, out)) => buf.push_str(&out),
        _ => return None,
    }
    Some(buf.replace(" xmlns=\"http://www.w3.org/2000/svg\"", ""))
}

fn draw(chart: &Chart, out: &mut String) -> DrawResult {
    let (lx, ly) = (chart.log_x, chart.log_y);
    let mut series: Vec<(Series, Vec<(f64, f64)>)> = Vec::new();
    let (mut x0, mut x1, mut y0, mut y1) = (
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    );
    let mut grow = |x: f64, y: f64| {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    };
    for s in &chart.series {
        let pts: Vec<(f64, f64)> = s
            .points
            .iter()
            .filter_map(|&(x, y)| Some((to_axis(x, lx)?, to_axis(y, ly)?)))
            .collect();
        for &(x, y) in &pts {
            grow(x, y);
        }
        series.push((s.clone(), pts));
    }
    let marks: Vec<(String, (f64, f64))> = chart
        .marks
        .iter()
        .filter_map(|(l, (x, y))| Some((l.clone(), (to_axis(*x, lx)?, to_axis(*y, ly)?))))
        .collect();
    for (_, (x, y)) in &marks {
        grow(*x, *y);
    }
    let hlines: Vec<(String, f64)> = chart
        .hlines
        .iter()
        .filter_map(|(l, y)| Some((l.clone(), to_axis(*y, ly)?)))
        .collect();
    for (_, y) in &hlines {
        y0 = y0.min(*y);
        y1 = y1.max(*y);
    }
    if let Some((a, b)) = chart.x_range {
        if let (Some(a), Some(b)) = (to_axis(a, lx), to_axis(b, lx)) {
            if a < b {
                x0 = a;
                x1 = b;
            }
        }
    }
    let (mut ya, mut yb) = padded(y0, y1, ly);
    if chart.symmetric_y && !ly {
        let m = ya.abs().max(yb.abs()) * 1.1;
        ya = -m;
        yb = m;
    }
    let (xa, xb) = if chart.x_range.is_some() && x0 < x1 {
        (x0, x1)
    } else {
        padded(x0, x1, lx)
    };
    let vlines: Vec<(String, f64)> = chart
        .vlines
        .iter()
        .filter_map(|(l, x)| Some((l.clone(), to_axis(*x, lx)?)))
        .filter(|(_, x)| *x >= xa && *x <= xb)
        .collect();

    let root = SVGBackend::with_string(out, (chart.width, chart.height)).into_drawing_area();
    root.fill(&WHITE)?;
    let mut c = ChartBuilder::on(&root)
        .margin_top(14)
        .margin_right(28)
        .margin_left(10)
        .margin_bottom(6)
        .x_label_area_size(58)
        .y_label_area_size(96)
        .build_cartesian_2d(xa..xb, ya..yb)?;
    let (xd, yd) = (xb - xa >= 2.0, yb - ya >= 2.0);
    let xf = move |v: &f64| if lx { log_tick(*v, xd) } else { tick(*v) };
    let yf = move |v: &f64| if ly { log_tick(*v, yd) } else { tick(*v) };
    c.configure_mesh()
        .x_desc(chart.x_label.as_str())
        .y_desc(chart.y_label.as_str())
        .x_labels(8)
        .y_labels(7)
        .x_label_formatter(&xf)
        .y_label_formatter(&yf)
        .label_style((FONT, 18).into_font().color(&INK.rgb()))
        .axis_desc_style((FONT, 19).into_font().color(&INK.rgb()))
        .bold_line_style(RGBColor(222, 222, 222))
        .light_line_style(RGBColor(244, 244, 244))
        .axis_style(INK.rgb())
        .draw()?;
    let small = (FONT, 17).into_font().color(&INK.rgb());
    for (label, y) in &hlines {
        c.draw_series(LineSeries::new(
            vec![(xa, *y), (xb, *y)],
            RGBColor(90, 90, 90).stroke_width(2),
        ))?;
        c.draw_series(std::iter::once(
            EmptyElement::at((xa, *y)) + Text::new(label.clone(), (6, -18), small.clone()),
        ))?;
    }
    for (label, x) in &vlines {
        c.draw_series(LineSeries::new(
            vec![(*x, ya), (*x, yb)],
            RGBColor(150, 150, 150).stroke_width(1),
        ))?;
        if !label.is_empty() {
            c.draw_series(std::iter::once(
                EmptyElement::at((*x, yb)) + Text::new(label.clone(), (4, 4), small.clone()),
            ))?;
        }
    }
    for (s, pts) in &series {
        let col = s.colour.rgb();
        if s.line && pts.len() > 1 {
            c.draw_series(LineSeries::new(
                pts.iter().copied(),
                col.stroke_width(s.width.max(1)),
            ))?;
        }
        draw_markers(&mut c, pts, s.marker, col)?;
    }
    for (label, p) in &marks {
        let right = (p.0 - xa) / (xb - xa) > 0.7;
        let dx = if right { -120 } else { 12 };
        c.draw_series(std::iter::once(
            EmptyElement::at(*p)
                + Circle::new((0, 0), 10, INK.rgb().stroke_width(2))
                + Text::new(label.clone(), (dx, -26), small.clone()),
        ))?;
    }
    root.present()?;
    Ok(())
}

fn draw_markers<DB: DrawingBackend>(
    c: &mut ChartContext<
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    pts: &[(f64, f64)],
    marker: Marker,
    col: RGBColor,
) -> DrawResult
where
    DB::ErrorType: 'static,
{
    let style = col.filled();
    let p = pts.iter().copied();
    match marker {
        Marker::None => {}
        Marker::Circle => {
            c.draw_series(p.map(|q| Circle::new(q, 4, style)))?;
        }
        Marker::Triangle => {
            c.draw_series(p.map(|q| TriangleMarker::new(q, 6, style)))?;
        }
        Marker::Square => {
            c.draw_series(
                p.map(|q| EmptyElement::at(q) + Rectangle::new([(-4, -4), (4, 4)], style)),
            )?;
        }
        Marker::Cross => {
            c.draw_series(p.map(|q| Cross::new(q, 5, col.stroke_width(2))))?;
        }
        Marker::Diamond => {
            c.draw_series(p.map(|q| {
                EmptyElement::at(q) + Polygon::new(vec![(0, -6), (6, 0), (0, 6), (-6, 0)], style)
            }))?;
        }
    }
    Ok(())
}

/// A small inline swatch of a series' colour and marker, for HTML legends.
pub fn swatch(colour: Colour, marker: Marker, line: bool) -> String {
    let c = colour.hex();
    let mut s = String::from(
        "<svg class=\"sw\" width=\"34\" height=\"14\" viewBox=\"0 0 34 14\" aria-hidden=\"true\">",
    );
    if line {
        s.push_str(&format!(
            "<line x1=\"1\" y1=\"7\" x2=\"33\" y2=\"7\" stroke=\"{c}\" stroke-width=\"3\"/>"
        ));
    }
    match marker {
        Marker::None => {}
        Marker::Circle => s.push_str(&format!(
            "<circle cx=\"17\" cy=\"7\" r=\"4\" fill=\"{c}\"/>"
        )),
        Marker::Triangle => s.push_str(&format!(
            "<polygon points=\"17,1 23,12 11,12\" fill=\"{c}\"/>"
        )),
        Marker::Square => s.push_str(&format!(
            "<rect x=\"13\" y=\"3\" width=\"8\" height=\"8\" fill=\"{c}\"/>"
        )),
        Marker::Cross => s.push_str(&format!(
            "<path d=\"M12 2 L22 12 M22 2 L12 12\" stroke=\"{c}\" stroke-width=\"2\"/>"
        )),
        Marker::Diamond => s.push_str(&format!(
            "<polygon points=\"17,1 23,7 17,13 11,7\" fill=\"{c}\"/>"
        )),
    }
    s.push_str("</svg>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_series_pass_through_without_non_finite_points() {
        let (t, v) = decimate_min_max(&[0.0, 1.0, 2.0], &[1.0, f64::NAN, 3.0], 10);
        assert_eq!(t, vec![0.0, 2.0]);
        assert_eq!(v, vec![1.0, 3.0]);
    }

    #[test]
    fn degenerate_charts_still_draw() {
        let mut c = Chart::new("t", "v");
        c.log_y = true;
        c.series.push(Series {
            name: "x".into(),
            points: vec![(1.0, 0.0), (f64::NAN, 1.0)],
            colour: INK,
            line: true,
            marker: Marker::Circle,
            width: 1,
        });
        let s = svg(&c).expect("an empty log chart draws");
        assert!(s.contains("<svg") && !s.contains("http://"));
    }
}
