//! Pictures as SVG text: the bus timing diagram, latency percentile curves
//! and sweep charts. No I/O: every function returns the document.

pub mod axis;
pub mod chart;
pub mod latency;
pub mod size;
pub mod sweep;
pub mod timing;

use std::fmt::Write;

/// Text escaped for XML content and attribute values.
pub fn esc(s: &str) -> String {
    quick_xml::escape::escape(s).into_owned()
}

/// A small SVG document builder: elements are appended as text.
pub struct Svg {
    body: String,
    width: f64,
    height: f64,
}

impl Svg {
    pub fn new(width: f64, height: f64) -> Self {
        Svg { body: String::new(), width, height }
    }

    /// Append raw markup (already escaped).
    pub fn raw(&mut self, s: &str) {
        self.body.push_str(s);
        self.body.push('\n');
    }

    pub fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, attrs: &str) {
        let _ = writeln!(
            self.body,
            r#"<rect x="{x:.2}" y="{y:.2}" width="{:.2}" height="{:.2}" {attrs}/>"#,
            w.max(0.0),
            h.max(0.0)
        );
    }

    pub fn line(&mut self, x1: f64, y1: f64, x2: f64, y2: f64, attrs: &str) {
        let _ = writeln!(self.body, r#"<line x1="{x1:.2}" y1="{y1:.2}" x2="{x2:.2}" y2="{y2:.2}" {attrs}/>"#);
    }

    pub fn text(&mut self, x: f64, y: f64, text: &str, attrs: &str) {
        let _ = writeln!(self.body, r#"<text x="{x:.2}" y="{y:.2}" {attrs}>{}</text>"#, esc(text));
    }

    pub fn polyline(&mut self, points: &[(f64, f64)], attrs: &str) {
        if points.is_empty() {
            return;
        }
        let mut p = String::with_capacity(points.len() * 14);
        for (x, y) in points {
            let _ = write!(p, "{x:.2},{y:.2} ");
        }
        let _ = writeln!(self.body, r#"<polyline points="{}" fill="none" {attrs}/>"#, p.trim_end());
    }

    pub fn finish(self, title: &str, defs: &str) -> String {
        format!(
            concat!(
                r#"<?xml version="1.0" encoding="UTF-8"?>"#,
                "\n",
                r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="DejaVu Sans, Helvetica, Arial, sans-serif" font-size="12">"#,
                "\n<title>{title}</title>\n<defs>{defs}</defs>\n",
                r#"<rect x="0" y="0" width="{w}" height="{h}" fill="white"/>"#,
                "\n{body}</svg>\n"
            ),
            w = self.width,
            h = self.height,
            title = esc(title),
            defs = defs,
            body = self.body
        )
    }
}

/// Rough width in pixels of `text` at `size` px (for fitting labels).
pub fn text_width(text: &str, size: f64) -> f64 {
    text.chars().count() as f64 * size * 0.6
}

/// Colours for series, chosen to stay apart for common colour-vision deficiencies (Okabe and Ito, 2008).
pub const PALETTE: [&str; 8] = ["#0072b2", "#e69f00", "#009e73", "#cc79a7", "#56b4e9", "#d55e00", "#f0e442", "#000000"];
