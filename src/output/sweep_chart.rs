//! Line charts as hand-written SVG for the sweep report: one x axis (supply multiplier), one
//! y axis from 0, a few series with point markers, an optional horizontal reference line and
//! an optional marked point.
//!
//! Hand-written like the maps in `svg.rs`, not a plotting crate: three small charts of a
//! handful of points each; the text must stay byte-stable, vector and printable inside the
//! HTML, and a plotting crate's SVG backend would still need a font stack to lay out labels.
//! Cost: O(points) per chart.

use std::fmt::Write;

use super::esc;
use super::svg::f1;

/// Canvas size, px.
const W: f64 = 720.0;
const H: f64 = 400.0;
/// Plot area margins, px.
const LEFT: f64 = 92.0;
const RIGHT: f64 = 24.0;
const TOP: f64 = 58.0;
const BOTTOM: f64 = 58.0;

/// One line of points.
pub(crate) struct Series<'a> {
    /// Legend text.
    pub label: &'a str,
    /// (x, y) in data units, ascending x.
    pub points: Vec<(f64, f64)>,
    /// Stroke colour (CSS).
    pub colour: &'static str,
    /// Dashed line (told apart in black-and-white print).
    pub dashed: bool,
}

/// A line chart.
pub(crate) struct LineChart<'a> {
    /// Title above the plot.
    pub title: &'a str,
    /// x axis label, with unit.
    pub x_label: &'a str,
    /// y axis label, with unit.
    pub y_label: &'a str,
    /// The lines.
    pub series: Vec<Series<'a>>,
    /// A horizontal reference line at y, with its label.
    pub hline: Option<(f64, String)>,
    /// A ringed point (x, y) with its label.
    pub mark: Option<(f64, f64, String)>,
    /// A short label written beside each point of the first series (e.g. what limits it),
    /// one per point; empty for none.
    pub point_labels: Vec<String>,
}

/// The 1-2-5 × 10ⁿ step giving about `target` intervals over `[0, max]`, and the axis end (a
/// multiple of the step at or above `max`).
pub(crate) fn nice_axis(max: f64, target: f64) -> (f64, f64) {
    let max = if max.is_finite() && max > 0.0 {
        max
    } else {
        1.0
    };
    let raw = max / target;
    let base = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .into_iter()
        .map(|m| m * base)
        .find(|s| *s >= raw * (1.0 - 1e-9))
        .unwrap_or(10.0 * base);
    let end = (max / step - 1e-9).ceil().max(1.0) * step;
    (step, end)
}

/// A tick label: thousands separated, decimals as the step needs.
pub(crate) fn tick_label(v: f64, step: f64) -> String {
    let decimals = (0..6)
        .find(|&d| {
            let scaled = step * 10f64.powi(d as i32);
            (scaled - scaled.round()).abs() < 1e-6
        })
        .unwrap_or(6);
    let text = super::fixed(v, decimals);
    let (int, frac) = text
        .split_once('.')
        .map_or((text.as_str(), None), |(a, b)| (a, Some(b)));
    let (sign, digits) = int.strip_prefix('-').map_or(("", int), |d| ("-", d));
    let mut grouped = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            grouped.push(',');
        }
        grouped.push(c);
    }
    match frac {
        Some(f) => format!("{sign}{grouped}.{f}"),
        None => format!("{sign}{grouped}"),
    }
}

/// Renders a standalone SVG document (it is also inlined in `sweep.html`).
pub(crate) fn render(c: &LineChart) -> String {
    let finite = |v: f64| if v.is_finite() { v } else { 0.0 };
    let all: Vec<(f64, f64)> = c
        .series
        .iter()
        .flat_map(|s| s.points.iter().map(|&(x, y)| (finite(x), finite(y))))
        .collect();
    let x_max = all.iter().map(|p| p.0).fold(0.0f64, f64::max);
    let mut y_max = all.iter().map(|p| p.1).fold(0.0f64, f64::max);
    if let Some((y, _)) = &c.hline {
        y_max = y_max.max(finite(*y));
    }
    let (x_step, x_end) = nice_axis(x_max, 8.0);
    let (y_step, y_end) = nice_axis(y_max * 1.04, 8.0);
    let (pw, ph) = (W - LEFT - RIGHT, H - TOP - BOTTOM);
    let px = |x: f64| LEFT + finite(x) / x_end * pw;
    let py = |y: f64| TOP + ph - finite(y).max(0.0) / y_end * ph;

    let mut s = String::new();
    let _ = write!(
        s,
        r##"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" width="{w}" height="{h}" role="img" font-family="sans-serif"><title>{t}</title><rect width="{w}" height="{h}" fill="#fff"/><text x="{tx}" y="22" font-size="15" font-weight="bold">{t}</text>"##,
        w = W,
        h = H,
        t = esc(c.title),
        tx = f1(LEFT),
    );
    // Grid and ticks.
    let mut k = 0.0;
    while k <= y_end * (1.0 + 1e-9) {
        let y = py(k);
        let _ = write!(
            s,
            r##"<path d="M{x0} {y}H{x1}" stroke="#ddd"/><text x="{tx}" y="{ty}" font-size="11" text-anchor="end">{l}</text>"##,
            x0 = f1(LEFT),
            x1 = f1(LEFT + pw),
            y = f1(y),
            tx = f1(LEFT - 6.0),
            ty = f1(y + 4.0),
            l = tick_label(k, y_step),
        );
        k += y_step;
    }
    let mut k = 0.0;
    while k <= x_end * (1.0 + 1e-9) {
        let x = px(k);
        let _ = write!(
            s,
            r##"<path d="M{x} {y0}V{y1}" stroke="#000"/><text x="{x}" y="{ty}" font-size="11" text-anchor="middle">{l}</text>"##,
            x = f1(x),
            y0 = f1(TOP + ph),
            y1 = f1(TOP + ph + 5.0),
            ty = f1(TOP + ph + 18.0),
            l = tick_label(k, x_step),
        );
        k += x_step;
    }
    // Axes and labels.
    let _ = write!(
        s,
        r##"<path d="M{l} {t}V{b}H{r}" fill="none" stroke="#000"/><text x="{cx}" y="{xl}" font-size="12" text-anchor="middle">{xlab}</text><text x="18" y="{cy}" font-size="12" text-anchor="middle" transform="rotate(-90 18 {cy})">{ylab}</text>"##,
        l = f1(LEFT),
        t = f1(TOP),
        b = f1(TOP + ph),
        r = f1(LEFT + pw),
        cx = f1(LEFT + pw / 2.0),
        xl = f1(H - 14.0),
        xlab = esc(c.x_label),
        cy = f1(TOP + ph / 2.0),
        ylab = esc(c.y_label),
    );
    if let Some((y, label)) = &c.hline {
        let _ = write!(
            s,
            r##"<path d="M{x0} {y}H{x1}" stroke="#7f7f7f" stroke-dasharray="2 3"/><text x="{tx}" y="{ty}" font-size="11" fill="#555">{l}</text>"##,
            x0 = f1(LEFT),
            x1 = f1(LEFT + pw),
            tx = f1(LEFT + 6.0),
            y = f1(py(*y)),
            ty = f1(py(*y) - 4.0),
            l = esc(label),
        );
    }
    // Series, then the legend in one row under the title.
    let mut lx = LEFT;
    for ser in &c.series {
        let d: Vec<String> = ser
            .points
            .iter()
            .enumerate()
            .map(|(i, &(x, y))| {
                format!(
                    "{}{} {}",
                    if i == 0 { "M" } else { "L" },
                    f1(px(x)),
                    f1(py(y))
                )
            })
            .collect();
        let dash = if ser.dashed {
            r#" stroke-dasharray="7 4""#
        } else {
            ""
        };
        let _ = write!(
            s,
            r##"<path d="{d}" fill="none" stroke="{c}" stroke-width="2"{dash}/>"##,
            d = d.join(""),
            c = ser.colour,
        );
        for &(x, y) in &ser.points {
            let _ = write!(
                s,
                r##"<circle cx="{x}" cy="{y}" r="3.5" fill="{c}"/>"##,
                x = f1(px(x)),
                y = f1(py(y)),
                c = ser.colour,
            );
        }
        let _ = write!(
            s,
            r##"<path d="M{x0} 40H{x1}" stroke="{c}" stroke-width="2"{dash}/><circle cx="{xm}" cy="40" r="3.5" fill="{c}"/><text x="{tx}" y="44" font-size="12">{l}</text>"##,
            x0 = f1(lx),
            x1 = f1(lx + 28.0),
            xm = f1(lx + 14.0),
            tx = f1(lx + 34.0),
            c = ser.colour,
            l = esc(ser.label),
        );
        lx += 34.0 + 7.0 * ser.label.chars().count() as f64 + 24.0;
    }
    if let Some(first) = c.series.first() {
        // Alternate above and below the line so neighbouring labels do not collide.
        for (k, (&(x, y), label)) in first.points.iter().zip(&c.point_labels).enumerate() {
            let (lx, ly) = (px(x), py(y));
            let anchor = if lx > LEFT + pw * 0.8 {
                "end"
            } else {
                "middle"
            };
            let dy = if k % 2 == 0 { -10.0 } else { 18.0 };
            let _ = write!(
                s,
                r##"<text x="{x}" y="{y}" font-size="11" fill="#333" text-anchor="{anchor}" stroke="#fff" stroke-width="3" paint-order="stroke">{l}</text>"##,
                x = f1(lx),
                y = f1(ly + dy),
                l = esc(label),
            );
        }
    }
    if let Some((x, y, label)) = &c.mark {
        let (mx, my) = (px(*x), py(*y));
        let anchor = if mx > LEFT + pw * 0.6 { "end" } else { "start" };
        let tx = if anchor == "end" {
            mx - 10.0
        } else {
            mx + 10.0
        };
        let _ = write!(
            s,
            r##"<circle cx="{x}" cy="{y}" r="8" fill="none" stroke="#c00000" stroke-width="2"/><text x="{tx}" y="{ty}" font-size="12" fill="#c00000" text-anchor="{anchor}">{l}</text>"##,
            x = f1(mx),
            y = f1(my),
            tx = f1(tx),
            ty = f1(my - 12.0),
            l = esc(label),
        );
    }
    s.push_str("</svg>\n");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_axis_covers_the_maximum_with_round_steps() {
        assert_eq!(nice_axis(4.0, 8.0), (0.5, 4.0));
        assert_eq!(nice_axis(2_292_653.9, 5.0), (500_000.0, 2_500_000.0));
        assert_eq!(nice_axis(0.0, 5.0), (0.2, 1.0), "empty data: a unit axis");
        let (step, end) = nice_axis(137.0, 5.0);
        assert_eq!((step, end), (50.0, 150.0));
    }

    #[test]
    fn tick_labels_group_thousands_and_keep_needed_decimals() {
        assert_eq!(tick_label(2_500_000.0, 500_000.0), "2,500,000");
        assert_eq!(tick_label(0.5, 0.5), "0.5");
        assert_eq!(tick_label(0.75, 0.25), "0.75");
        assert_eq!(tick_label(100.0, 50.0), "100");
        assert_eq!(tick_label(0.0, 0.25), "0.00");
    }

    #[test]
    fn text_is_escaped_and_points_are_drawn() {
        let c = LineChart {
            title: "A <b> & \"c\"",
            x_label: "x",
            y_label: "y",
            series: vec![Series {
                label: "s<1>",
                points: vec![(0.5, 1.0), (1.0, 2.0), (2.0, f64::NAN)],
                colour: "#000",
                dashed: true,
            }],
            hline: Some((0.5, "25 % <".into())),
            mark: Some((1.0, 2.0, "here".into())),
            point_labels: vec!["supply".into()],
        };
        let svg = render(&c);
        assert!(svg.starts_with("<svg xmlns=\"http://www.w3.org/2000/svg\""));
        assert!(svg.contains("A &lt;b&gt; &amp; &quot;c&quot;"));
        assert!(svg.contains("s&lt;1&gt;") && svg.contains("25 % &lt;"));
        assert!(!svg.contains("NaN"));
        assert_eq!(svg.matches("r=\"3.5\"").count(), 4, "3 points + legend");
    }
}
