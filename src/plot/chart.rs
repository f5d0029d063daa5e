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
}

const W: f64 = 960.0;
const H: f64 = 560.0;
const LEFT: f64 = 96.0;
const TOP: f64 = 64.0;
const BOTTOM: f64 = 64.0;

impl Chart {
    pub fn render(&self) -> String {
        let legend: Vec<&Series> = self.series.iter().filter(|s| !s.background).collect();
        let any_failed = self.series.iter().any(|s| s.failed.iter().any(|&f| f));
        let legend_w = legend
            .iter()
            .map(|s| text_width(&s.name, 12.0))
            .chain(any_failed.then(|| text_width(&self.failed_label, 12.0)))
            .fold(0.0, f64::max)
            .min(260.0);
        let right = 40.0 + if legend.is_empty() && !any_failed { 0.0 } else { legend_w + 48.0 };
        let (pw, ph) = (W - LEFT - right, H - TOP - BOTTOM);
        let px = |x: f64| LEFT + self.x.frac(x) * pw;
        let py = |y: f64| TOP + (1.0 - self.y.frac(y)) * ph;
        let mut svg = Svg::new(W, H);
        svg.text(LEFT, 26.0, &self.title, r#"font-size="16" font-weight="bold""#);
        svg.text(LEFT, 46.0, &self.subtitle, r##"fill="#555""##);
        // Grid and ticks.
        for (v, label) in self.x.ticks() {
            let x = px(v);
            svg.line(x, TOP, x, TOP + ph, r##"stroke="#e4e4e4""##);
            svg.text(x, TOP + ph + 18.0, &label, r#"text-anchor="middle" class="x-tick""#);
        }
        for (v, label) in self.y.ticks() {
            let y = py(v);
            svg.line(LEFT, y, LEFT + pw, y, r##"stroke="#e4e4e4""##);
            svg.text(LEFT - 8.0, y + 4.0, &label, r#"text-anchor="end" class="y-tick""#);
        }
        svg.rect(LEFT, TOP, pw, ph, r##"fill="none" stroke="#444""##);
        svg.text(LEFT + pw / 2.0, H - 18.0, &self.x_label, r#"text-anchor="middle" class="x-label""#);
        svg.raw(&format!(
            r#"<text x="18" y="{:.1}" transform="rotate(-90 18 {:.1})" text-anchor="middle" class="y-label">{}</text>"#,
            TOP + ph / 2.0,
            TOP + ph / 2.0,
            super::esc(&self.y_label)
        ));
        // Series: background first, emphasis last.
        let mut order: Vec<&Series> = self.series.iter().collect();
        order.sort_by_key(|s| (!s.background, s.emphasis));
        let mut colour = 0;
        let colours: Vec<(String, &str)> = legend
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
        for s in order {
            let pts: Vec<(f64, f64)> =
                s.points.iter().filter(|(x, y)| x.is_finite() && y.is_finite()).map(|&(x, y)| (px(x), py(y))).collect();
            let c = colour_of(s);
            let width = if s.emphasis {
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
                        svg.raw(&format!(
                            r##"<circle class="failed" cx="{x:.2}" cy="{y:.2}" r="7" fill="none" stroke="#d00000" stroke-width="2"/>"##
                        ));
                    }
                }
            }
            svg.raw("</g>");
        }
        // Legend.
        let lx = LEFT + pw + 20.0;
        let mut ly = TOP + 8.0;
        for (name, c) in &colours {
            svg.line(lx, ly, lx + 22.0, ly, &format!(r#"stroke="{c}" stroke-width="2.4""#));
            svg.text(lx + 28.0, ly + 4.0, name, r#"class="legend""#);
            ly += 18.0;
        }
        if any_failed {
            svg.raw(&format!(
                r##"<circle cx="{:.2}" cy="{ly:.2}" r="6" fill="none" stroke="#d00000" stroke-width="2"/>"##,
                lx + 11.0
            ));
            svg.text(lx + 28.0, ly + 4.0, &self.failed_label, r#"class="legend""#);
        }
        svg.finish(&self.title, "")
    }
}
