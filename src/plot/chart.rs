//! A line chart: several series of (x, y) points, axes with units, a legend,
//! and a marker for points that fail a requirement.

use super::axis::Axis;
use super::{text_width, Svg, PALETTE};

#[derive(Clone, Debug)]
pub struct Series {
    pub name: String,
    pub points: Vec<(f64, f64)>,
    /// Per point: fails a requirement (drawn with a red ring).
    pub failed: Vec<bool>,
    /// Drawn thin and grey, without a legend entry.
    pub background: bool,
    /// Drawn thick.
    pub emphasis: bool,
    /// Draw a marker at every point.
    pub markers: bool,
    /// Per point: fails another requirement than the one on the plotted
    /// metric (drawn with a grey square).
    pub failed_other: Vec<bool>,
    /// Mark the last point: where the series' own data ends.
    pub end_marker: bool,
}

impl Series {
    /// A plain line.
    pub fn line(name: String, points: Vec<(f64, f64)>) -> Series {
        Series {
            name,
            points,
            failed: Vec::new(),
            background: false,
            emphasis: false,
            markers: false,
            failed_other: Vec::new(),
            end_marker: false,
        }
    }
}

/// A requirement drawn on the chart: a vertical line at `x`, a horizontal
/// one at `y`, or with both the corner of the region it forbids (above `y`
/// and right of `x`, shaded).
#[derive(Clone, Debug)]
pub struct Guide {
    pub x: Option<f64>,
    pub y: Option<f64>,
    pub label: String,
}

#[derive(Clone, Debug)]
pub struct Chart {
    pub title: String,
    pub subtitle: String,
    pub x_label: String,
    pub y_label: String,
    pub x: Axis,
    pub y: Axis,
    pub series: Vec<Series>,
    /// Legend text for the failure marker, when some point fails.
    pub failed_label: String,
    /// Legend text for the marker of points failing another requirement.
    pub failed_other_label: String,
    /// Legend text for end markers, when a series has one.
    pub end_label: String,
    pub guides: Vec<Guide>,
}

const GUIDE: &str = "#8b0000";

const W: f64 = 960.0;
/// The plot area's height; the legend adds rows below it.
const PLOT_H: f64 = 430.0;
const TOP: f64 = 64.0;
const RIGHT: f64 = 24.0;

/// A legend entry's swatch.
enum Swatch {
    Line(String, f64, bool),
    Ring,
    Square,
    Cross,
}

impl Chart {
    pub fn render(&self) -> String {
        // Room for the longest y tick label at the left; the plot takes the
        // whole width, and the legend flows in rows beneath it.
        let y_ticks = self.y.ticks();
        let tick_w = y_ticks.iter().map(|(_, l)| text_width(l, 12.0)).fold(0.0, f64::max);
        let left = (tick_w + 44.0).max(72.0);
        let (pw, ph) = (W - left - RIGHT, PLOT_H);
        let px = |x: f64| left + self.x.frac(x) * pw;
        let py = |y: f64| TOP + (1.0 - self.y.frac(y)) * ph;
        // Legend entries.
        let shown: Vec<&Series> = self.series.iter().filter(|s| !s.background).collect();
        let mut colour = 0;
        let colours: Vec<(String, &str)> = shown
            .iter()
            .map(|s| {
                let c = if s.emphasis { "#000000" } else { PALETTE[colour % (PALETTE.len() - 1)] };
                if !s.emphasis {
                    colour += 1;
                }
                (s.name.clone(), c)
            })
            .collect();
        let colour_of = |s: &Series| colours.iter().find(|(n, _)| *n == s.name).map_or("#bbbbbb", |(_, c)| c);
        let mut entries: Vec<(Swatch, String)> = shown
            .iter()
            .map(|s| (Swatch::Line(colour_of(s).to_owned(), if s.emphasis { 2.6 } else { 2.0 }, false), s.name.clone()))
            .collect();
        if self.series.iter().any(|s| s.failed.iter().any(|&f| f)) {
            entries.push((Swatch::Ring, self.failed_label.clone()));
        }
        if self.series.iter().any(|s| s.failed_other.iter().any(|&f| f)) {
            entries.push((Swatch::Square, self.failed_other_label.clone()));
        }
        if self.series.iter().any(|s| s.end_marker && !s.background) {
            entries.push((Swatch::Cross, self.end_label.clone()));
        }
        for g in &self.guides {
            entries.push((Swatch::Line(GUIDE.to_owned(), 1.6, true), g.label.clone()));
        }
        let mut placed = Vec::with_capacity(entries.len());
        let (mut ex, mut row) = (left, 0usize);
        for (sw, label) in entries {
            let w = 30.0 + text_width(&label, 12.0) + 22.0;
            if ex + w > W - RIGHT && ex > left {
                ex = left;
                row += 1;
            }
            placed.push((ex, row, sw, label));
            ex += w;
        }
        let legend_top = TOP + ph + 62.0;
        let rows = if placed.is_empty() { 0 } else { row + 1 };
        let height = legend_top + rows as f64 * 20.0 + 12.0;
        let mut svg = Svg::new(W, height);
        svg.text(left, 26.0, &self.title, r#"font-size="16" font-weight="bold""#);
        svg.text(left, 46.0, &self.subtitle, r##"fill="#555""##);
        // Grid and ticks.
        for (v, label) in self.x.ticks() {
            let x = px(v);
            svg.line(x, TOP, x, TOP + ph, r##"stroke="#e4e4e4""##);
            svg.text(x, TOP + ph + 18.0, &label, r#"text-anchor="middle" class="x-tick""#);
        }
        for (v, label) in y_ticks {
            let y = py(v);
            svg.line(left, y, left + pw, y, r##"stroke="#e4e4e4""##);
            svg.text(left - 8.0, y + 4.0, &label, r#"text-anchor="end" class="y-tick""#);
        }
        svg.rect(left, TOP, pw, ph, r##"fill="none" stroke="#444""##);
        svg.text(left + pw / 2.0, TOP + ph + 40.0, &self.x_label, r#"text-anchor="middle" class="x-label""#);
        svg.raw(&format!(
            r#"<text x="16" y="{:.1}" transform="rotate(-90 16 {:.1})" text-anchor="middle" class="y-label">{}</text>"#,
            TOP + ph / 2.0,
            TOP + ph / 2.0,
            super::esc(&self.y_label)
        ));
        // Requirements under the data.
        for g in &self.guides {
            let dash = format!(r#"stroke="{GUIDE}" stroke-width="1.6" stroke-dasharray="6,4""#);
            svg.raw(&format!(r#"<g class="requirement" data-label="{}">"#, super::esc(&g.label)));
            let label_attrs = format!(r#"font-size="11" fill="{GUIDE}" class="requirement-label""#);
            match (g.x.map(&px), g.y.map(&py)) {
                (Some(x), Some(y)) => {
                    svg.rect(x, TOP, left + pw - x, y - TOP, &format!(r#"fill="{GUIDE}" opacity="0.06""#));
                    svg.line(x, TOP, x, y, &dash);
                    svg.line(x, y, left + pw, y, &dash);
                    svg.text(x + 4.0, y - 5.0, &g.label, &label_attrs);
                }
                (Some(x), None) => {
                    svg.line(x, TOP, x, TOP + ph, &dash);
                    svg.text(x + 4.0, TOP + 14.0, &g.label, &label_attrs);
                }
                (None, Some(y)) => {
                    svg.line(left, y, left + pw, y, &dash);
                    svg.text(left + 6.0, y - 5.0, &g.label, &label_attrs);
                }
                (None, None) => {}
            }
            svg.raw("</g>");
        }
        // Series: background first, emphasis last.
        let mut order: Vec<&Series> = self.series.iter().collect();
        order.sort_by_key(|s| (!s.background, s.emphasis));
        for s in order {
            let pts: Vec<(f64, f64)> =
                s.points.iter().filter(|(x, y)| x.is_finite() && y.is_finite()).map(|&(x, y)| (px(x), py(y))).collect();
            let c = colour_of(s);
            let width: f64 = if s.emphasis {
                2.6
            } else if s.background {
                0.8
            } else {
                1.6
            };
            svg.raw(&format!(r#"<g class="series" data-name="{}">"#, super::esc(&s.name)));
            svg.polyline(&pts, &format!(r#"stroke="{c}" stroke-width="{width}""#));
            if s.markers {
                for (i, &(x, y)) in pts.iter().enumerate() {
                    svg.raw(&format!(r#"<circle cx="{x:.2}" cy="{y:.2}" r="3.2" fill="{c}"/>"#));
                    if s.failed.get(i).copied().unwrap_or(false) {
                        svg.raw(&ring(x, y, "failed"));
                    } else if s.failed_other.get(i).copied().unwrap_or(false) {
                        svg.raw(&square(x, y, "failed-other"));
                    }
                }
            }
            if s.end_marker {
                if let Some(&(x, y)) = pts.last() {
                    svg.raw(&cross(x, y, c, width.max(1.4), "sample-end"));
                }
            }
            svg.raw("</g>");
        }
        // Legend.
        for (x, row, sw, label) in placed {
            let y = legend_top + row as f64 * 20.0;
            match sw {
                Swatch::Line(c, w, dashed) => {
                    let dash = if dashed { r#" stroke-dasharray="6,4""# } else { "" };
                    svg.line(x, y, x + 22.0, y, &format!(r#"stroke="{c}" stroke-width="{w}"{dash}"#));
                }
                Swatch::Ring => svg.raw(&ring(x + 11.0, y, "legend-mark")),
                Swatch::Square => svg.raw(&square(x + 11.0, y, "legend-mark")),
                Swatch::Cross => svg.raw(&cross(x + 11.0, y, "#333", 1.6, "legend-mark")),
            }
            svg.text(x + 28.0, y + 4.0, &label, r#"class="legend""#);
        }
        svg.finish(&self.title, "")
    }
}

fn ring(x: f64, y: f64, class: &str) -> String {
    format!(
        r##"<circle class="{class}" cx="{x:.2}" cy="{y:.2}" r="7" fill="none" stroke="#d00000" stroke-width="2"/>"##
    )
}

fn square(x: f64, y: f64, class: &str) -> String {
    format!(
        r##"<rect class="{class}" x="{:.2}" y="{:.2}" width="11" height="11" fill="none" stroke="#777" stroke-width="1.5"/>"##,
        x - 5.5,
        y - 5.5
    )
}

fn cross(x: f64, y: f64, colour: &str, width: f64, class: &str) -> String {
    format!(
        r#"<path class="{class}" d="M{:.2},{:.2} L{:.2},{:.2} M{:.2},{:.2} L{:.2},{:.2}" stroke="{colour}" stroke-width="{width:.1}"/>"#,
        x - 4.0,
        y - 4.0,
        x + 4.0,
        y + 4.0,
        x - 4.0,
        y + 4.0,
        x + 4.0,
        y - 4.0
    )
}
