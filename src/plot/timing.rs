//! The bus timing diagram: one lane per node with its driver occupancies,
//! frames, data symbols (when the zoom allows), enable and release edges,
//! and the intervals where its receiver input floats or is contended; a bus
//! lane above with the line's occupancy, the contention overlaps and the
//! gaps between one driver turning off and the next one enabling.

use std::fmt::Write;

use super::axis::{nice_step, trim};
use super::{esc, text_width, Svg};
use crate::units;
use crate::wave::timing::Recording;
use crate::wave::Level;

const W: f64 = 1400.0;
const LEFT: f64 = 160.0;
const RIGHT: f64 = 30.0;
const BUS_TOP: f64 = 58.0;
const BUS_H: f64 = 44.0;

const ENABLE_FILL: &str = "#d6e4f5";
const ENABLE_STROKE: &str = "#3f6fae";
const DATA_FILL: &str = "#2b65ad";
/// Control frames (polls, tokens, beacons, empty replies): violet, well apart
/// from the green and orange of the enable and release marks.
const CONTROL_FILL: &str = "#8a6fc0";
const CONTENTION: &str = "#d7191c";
const ENABLE_EDGE: &str = "#1a9850";
const RELEASE_EDGE: &str = "#e66101";
/// The enable held on after the last bit by firmware (`release_after_stop`).
const HOLD_FILL: &str = "#f3d9a4";

/// Lane height for `n` nodes: roomy for a few, compact for many.
fn lane_height(n: usize) -> f64 {
    match n {
        0..=6 => 44.0,
        7..=16 => 28.0,
        _ => 20.0,
    }
}

/// A time-axis unit for a window span: (seconds per unit, symbol).
fn time_unit(span_s: f64, end_s: f64) -> (f64, &'static str) {
    const UNITS: [(f64, &str); 5] = [(1e-12, "ps"), (1e-9, "ns"), (1e-6, "µs"), (1e-3, "ms"), (1.0, "s")];
    // The unit that suits the span, moved up while labels would need more than four digits before the point.
    let mut i = UNITS.iter().position(|(scale, _)| span_s < scale * 2000.0).unwrap_or(4);
    while i < 4 && end_s / UNITS[i].0 >= 9_999.5 {
        i += 1;
    }
    UNITS[i]
}

/// Lanes above which idle lanes are hidden unless asked for.
pub const IDLE_LANES_SHOWN_UP_TO: usize = 12;

/// What the diagram is of, beside the recording.
pub struct Diagram<'a> {
    pub names: &'a [String],
    pub scenario: &'a str,
    pub bit_rate: f64,
    /// Wire delay between two nodes' positions, in ps (for the gap at a responder).
    pub delay_ps: &'a dyn Fn(usize, usize) -> u64,
    /// Hide the lanes of nodes that never drive in the window: `None` for
    /// the default (hidden above [`IDLE_LANES_SHOWN_UP_TO`] lanes).
    pub hide_idle: Option<bool>,
}

pub fn render(rec: &Recording, d: &Diagram) -> String {
    let names = d.names;
    let (scenario, bit_rate) = (d.scenario, d.bit_rate);
    let (a, b) = rec.window;
    let span = (b - a).max(1) as f64;
    let pw = W - LEFT - RIGHT;
    let px = |t: u64| LEFT + (t.saturating_sub(a)).min(b - a) as f64 / span * pw;
    let drives: Vec<bool> = (0..names.len()).map(|i| rec.occupancies.iter().any(|o| o.node == i)).collect();
    let hide = d.hide_idle.unwrap_or(names.len() > IDLE_LANES_SHOWN_UP_TO);
    let shown: Vec<usize> = (0..names.len()).filter(|&i| !hide || drives[i]).collect();
    let hidden = names.len() - shown.len();
    let n = shown.len();
    let lh = lane_height(n);
    let lanes_top = BUS_TOP + BUS_H + 14.0;
    let axis_y = lanes_top + lh * n as f64 + 6.0;
    let legend_y = axis_y + 62.0;
    let height = legend_y + 62.0;
    let mut svg = Svg::new(W, height);
    let fmt = |ps: u64| units::format_seconds(ps as f64 / 1e12);
    // Times on the axis count from the window's start, stated once above.
    let (unit_s, unit_name) = time_unit(span / 1e12, span / 1e12);
    let at = |ps: u64| format!("{} {unit_name}", trim(ps.saturating_sub(a) as f64 / 1e12 / unit_s));
    svg.text(LEFT, 24.0, &format!("Bus timing: {scenario}"), r#"font-size="16" font-weight="bold""#);
    let lanes = if hidden > 0 {
        format!("{} of {} nodes drive in the window ({} idle lanes hidden)", n, names.len(), hidden)
    } else {
        format!("{} nodes", names.len())
    };
    svg.raw(&format!(
        r##"<text x="{LEFT:.2}" y="42.00" fill="#555" class="window-start" data-start-ps="{a}">{}</text>"##,
        esc(&format!(
            "t = 0 at {} of simulated time · window {} long · {lanes} · symbols are a stand-in pattern; every edge time is exact",
            fmt(a),
            fmt(b - a)
        ))
    ));
    // Time grid.
    let step_ps = (nice_step(span * 1e-12, 10) * 1e12).max(1.0);
    let first = (a as f64 / step_ps).ceil() as u64;
    let mut k = first;
    while (k as f64 * step_ps) <= b as f64 + 0.5 {
        let t = (k as f64 * step_ps).round() as u64;
        let x = px(t);
        svg.line(x, BUS_TOP - 4.0, x, axis_y, r##"stroke="#ececec""##);
        svg.line(x, axis_y, x, axis_y + 5.0, r##"stroke="#444""##);
        let label = at(t);
        svg.text(x, axis_y + 18.0, &label, r#"text-anchor="middle" class="tick""#);
        k += 1;
    }
    svg.line(LEFT, axis_y, LEFT + pw, axis_y, r##"stroke="#444""##);
    svg.text(
        LEFT + pw / 2.0,
        axis_y + 36.0,
        &format!("time since the window's start (t = 0 at {})", fmt(a)),
        r#"text-anchor="middle" class="x-label""#,
    );

    bus_lane(&mut svg, rec, names, d.delay_ps, &px, &fmt);
    for (row, &i) in shown.iter().enumerate() {
        let y0 = lanes_top + lh * row as f64;
        node_lane(&mut svg, rec, i, &names[i], row, y0, lh, bit_rate, &px, span, pw);
    }
    let hold = rec.occupancies.iter().any(|o| o.frames.iter().map(|f| f.e).max().is_some_and(|e| o.release > e));
    legend(&mut svg, legend_y, hold);
    let defs = concat!(
        r##"<pattern id="float" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">"##,
        r##"<rect width="6" height="6" fill="#fff6d5"/><line x1="0" y1="0" x2="0" y2="6" stroke="#b08900" stroke-width="1.6"/></pattern>"##,
        r##"<pattern id="tail" width="5" height="5" patternUnits="userSpaceOnUse" patternTransform="rotate(-45)">"##,
        r##"<rect width="5" height="5" fill="#eef3fa"/><line x1="0" y1="0" x2="0" y2="5" stroke="#a9bfdc" stroke-width="1"/></pattern>"##
    );
    svg.finish(&format!("Bus timing: {scenario}"), defs)
}

fn bus_lane(
    svg: &mut Svg,
    rec: &Recording,
    names: &[String],
    delay_ps: &dyn Fn(usize, usize) -> u64,
    px: &dyn Fn(u64) -> f64,
    fmt: &dyn Fn(u64) -> String,
) {
    let (y0, h) = (BUS_TOP, BUS_H);
    svg.text(LEFT - 10.0, y0 + h / 2.0 + 4.0, "line", r#"text-anchor="end" font-weight="bold""#);
    svg.rect(LEFT, y0, W - LEFT - RIGHT, h, r##"fill="#fafafa" stroke="#ccc""##);
    // Occupancy count over time, each driver at its own position.
    let mut steps: Vec<(u64, i32)> = Vec::new();
    for o in &rec.occupancies {
        steps.push((o.a, 1));
        steps.push((o.b, -1));
    }
    steps.sort_by_key(|&(t, d)| (t, d));
    let mut count = 0;
    for i in 0..steps.len() {
        count += steps[i].1;
        let (t0, t1) = (steps[i].0, steps.get(i + 1).map_or(steps[i].0, |s| s.0));
        if t1 > t0 && count > 0 {
            let fill = if count > 1 { CONTENTION } else { ENABLE_STROKE };
            svg.rect(
                px(t0),
                y0 + 6.0,
                px(t1) - px(t0),
                h - 26.0,
                &format!(r#"fill="{fill}" opacity="0.55" class="occupied""#),
            );
        }
    }
    for c in &rec.contentions {
        let (x0, x1) = (px(c.t), px(c.t + c.overlap));
        let w = (x1 - x0).max(2.0);
        svg.raw(&format!(
            r#"<rect class="contention" data-t-ps="{}" x="{x0:.2}" y="{y0:.2}" width="{w:.2}" height="{h:.2}" fill="{CONTENTION}" opacity="0.8"/>"#,
            c.t
        ));
        let label = format!("overlap {}", fmt(c.overlap));
        if text_width(&label, 10.0) + 4.0 < w {
            svg.text(x0 + w / 2.0, y0 + 10.0, &label, r#"text-anchor="middle" font-size="10" fill="white""#);
        }
    }
    // The hand-over as the new driver sees it: from the moment the latest
    // other driver's signal stops arriving at its position (that driver's
    // off time plus the wire delay between them) to its own enable. Positive:
    // a gap (the line floats there); negative: an overlap (contention there).
    let mut occ: Vec<_> = rec.occupancies.iter().collect();
    occ.sort_by_key(|o| (o.a, o.node));
    let mut latest_off: Vec<Option<u64>> = vec![None; names.len()];
    let mut last_label_end = f64::NEG_INFINITY;
    for o in occ {
        let seen = (0..names.len())
            .filter(|&p| p != o.node)
            .filter_map(|p| latest_off[p].map(|off| (off + delay_ps(p, o.node), off, p)))
            .max();
        // A hand-over only: this node did not drive after that other one turned off.
        let own_last = latest_off[o.node];
        if let Some((ends_here, _, p)) = seen.filter(|&(_, off, _)| own_last.is_none_or(|mine| mine < off)) {
            {
                let gap = o.a as i128 - ends_here as i128;
                let (from, to) = (ends_here.min(o.a), ends_here.max(o.a));
                let (x0, x1) = (px(from), px(to));
                let ym = y0 + h - 7.0;
                let colour = if gap < 0 { CONTENTION } else { "#333" };
                svg.raw(&format!(
                    r##"<path class="gap" data-gap-ps="{gap}" data-from="{}" data-at="{}" d="M{x0:.2},{:.2} V{ym:.2} H{x1:.2} V{:.2}" fill="none" stroke="{colour}" stroke-width="1"/>"##,
                    esc(&names[p]),
                    esc(&names[o.node]),
                    ym - 4.0,
                    ym - 4.0
                ));
                let label = if gap < 0 {
                    format!("overlap {} at {}", fmt(gap.unsigned_abs() as u64), names[o.node])
                } else {
                    format!("{} at {}", fmt(gap as u64), names[o.node])
                };
                let lw = text_width(&label, 10.0);
                let centre = (x0 + x1) / 2.0;
                if centre - lw / 2.0 > last_label_end + 4.0 {
                    svg.text(
                        centre,
                        ym - 6.0,
                        &label,
                        &format!(r#"text-anchor="middle" font-size="10" fill="{colour}" class="gap-label""#),
                    );
                    last_label_end = centre + lw / 2.0;
                }
            }
        }
        latest_off[o.node] = Some(latest_off[o.node].map_or(o.b, |t| t.max(o.b)));
    }
}

#[allow(clippy::too_many_arguments)]
fn node_lane(
    svg: &mut Svg,
    rec: &Recording,
    i: usize,
    name: &str,
    row: usize,
    y0: f64,
    lh: f64,
    bit_rate: f64,
    px: &dyn Fn(u64) -> f64,
    span: f64,
    pw: f64,
) {
    let font = if lh < 24.0 { 11.0 } else { 12.0 };
    let stripe = if row.is_multiple_of(2) { "#ffffff" } else { "#f4f6f8" };
    svg.raw(&format!(r#"<g class="lane" data-node="{}">"#, esc(name)));
    svg.rect(LEFT, y0, W - LEFT - RIGHT, lh, &format!(r#"fill="{stripe}""#));
    svg.text(LEFT - 10.0, y0 + lh / 2.0 + font / 3.0, name, &format!(r#"text-anchor="end" font-size="{font}""#));
    let pad = (lh * 0.12).max(2.0);
    let (top, bot) = (y0 + pad, y0 + lh - pad);
    // Receiver input undefined: floating (hatched) or contended (red).
    for (t0, t1, l) in rec.spans(&rec.rx[i]) {
        let (x0, x1) = (px(t0), px(t1));
        match l {
            Level::Floating => svg.rect(x0, y0, (x1 - x0).max(0.6), lh, r#"fill="url(#float)" class="floating""#),
            Level::Contended => svg.rect(
                x0,
                y0,
                (x1 - x0).max(1.5),
                lh,
                &format!(r#"fill="{CONTENTION}" opacity="0.35" class="rx-contended""#),
            ),
            _ => {}
        }
    }
    let symbol_px = pw / (span * 1e-12 * bit_rate);
    for o in rec.occupancies.iter().filter(|o| o.node == i) {
        let (xa, xr, xb) = (px(o.a), px(o.release), px(o.b));
        svg.rect(
            xa,
            top,
            (xr - xa).max(0.8),
            bot - top,
            &format!(r#"fill="{ENABLE_FILL}" stroke="{ENABLE_STROKE}" stroke-width="0.8" class="enable-span""#),
        );
        svg.rect(
            xr,
            top,
            xb - xr,
            bot - top,
            r##"fill="url(#tail)" stroke="#a9bfdc" stroke-width="0.6" stroke-dasharray="2,2" class="disable-tail""##,
        );
        // Firmware hold: the enable kept on after the last bit (release_after_stop > 0).
        if let Some(last) = o.frames.iter().map(|f| f.e).max().filter(|&e| o.release > e) {
            let xl = px(last);
            svg.rect(xl, top, (xr - xl).max(0.6), bot - top, &format!(r#"fill="{HOLD_FILL}" class="hold""#));
        }
        for f in &o.frames {
            let (xs, xe) = (px(f.s), px(f.e));
            let fill = if matches!(f.kind, "data") { DATA_FILL } else { CONTROL_FILL };
            let stroke =
                if f.corrupted { format!(r#" stroke="{CONTENTION}" stroke-width="2""#) } else { String::new() };
            svg.raw(&format!(
                r#"<rect class="frame" data-kind="{}" x="{xs:.2}" y="{:.2}" width="{:.2}" height="{:.2}" fill="{fill}"{stroke}/>"#,
                f.kind,
                top + 1.5,
                (xe - xs).max(0.8),
                bot - top - 3.0
            ));
            // Name the frame: inside it when the symbols are not drawn,
            // otherwise a control frame (a poll, a token, an empty reply)
            // is named just above, so a reply without data is told from one with.
            let label = f.kind.replace('-', " ");
            if symbol_px < 3.0 && xe - xs > text_width(&label, 10.0) + 6.0 && lh >= 20.0 {
                svg.text(
                    (xs + xe) / 2.0,
                    y0 + lh / 2.0 + 3.5,
                    &label,
                    r#"text-anchor="middle" font-size="10" fill="white" class="frame-label""#,
                );
            } else if f.kind != "data" && xe - xs > text_width(&label, 9.0) && lh >= 20.0 {
                svg.text(
                    xs + 2.0,
                    top + 0.5,
                    &label,
                    &format!(r#"font-size="9" fill="{CONTROL_FILL}" class="frame-label""#),
                );
            }
        }
        // Data symbols, where each is at least 3 px wide.
        if symbol_px >= 3.0 {
            let (hi, lo) = (top + 3.0, bot - 3.0);
            let mut pts: Vec<(f64, f64)> = Vec::new();
            let flush = |pts: &mut Vec<(f64, f64)>, svg: &mut Svg| {
                svg.polyline(pts, r#"stroke="white" stroke-width="1.2" class="symbols""#);
                pts.clear();
            };
            for (t0, t1, l) in rec.spans(&rec.line[i]) {
                if t1 <= o.a || t0 >= o.b {
                    continue;
                }
                let (x0, x1) = (px(t0.max(o.a)), px(t1.min(o.b)));
                match l {
                    Level::High | Level::Low => {
                        let y = if l == Level::High { hi } else { lo };
                        pts.push((x0, y));
                        pts.push((x1, y));
                    }
                    _ => flush(&mut pts, svg),
                }
            }
            flush(&mut pts, svg);
        }
        let (wa, wb) = rec.window;
        let mut edge = |t: u64, class: &str, colour: &str, up: bool| {
            if t < wa || t > wb {
                return;
            }
            let x = px(t);
            // Smaller marks on narrow occupancies, so they do not hide them.
            let half = ((xb - xa) / 4.0).clamp(1.5, 3.5);
            let (yb, tip) = if up { (bot + pad, bot + pad - 2.0 * half) } else { (top - pad, top - pad + 2.0 * half) };
            let mut d = String::new();
            let _ = write!(d, "M{:.2},{yb:.2} L{:.2},{tip:.2} L{:.2},{yb:.2} Z", x - half, x, x + half);
            svg.raw(&format!(r#"<path class="{class}" data-t-ps="{t}" d="{d}" fill="{colour}"/>"#));
        };
        edge(o.a, "edge-enable", ENABLE_EDGE, true);
        edge(o.release, "edge-release", RELEASE_EDGE, false);
    }
    svg.raw("</g>");
}

fn legend(svg: &mut Svg, y: f64, hold: bool) {
    let rect = |attrs: &str| format!(r#"<rect x="{{x}}" y="{{y}}" width="18" height="12" {attrs}/>"#);
    let rows: [Vec<(String, &str)>; 2] = [
        vec![
            (rect(&format!(r#"fill="{ENABLE_FILL}" stroke="{ENABLE_STROKE}""#)), "enable asserted"),
            (
                rect(r##"fill="url(#tail)" stroke="#a9bfdc" stroke-dasharray="2,2""##),
                "disable time (output turning off)",
            ),
            (rect(&format!(r#"fill="{DATA_FILL}""#)), "data frame"),
            (rect(&format!(r#"fill="{CONTROL_FILL}""#)), "control frame (named above it)"),
            (rect(&format!(r#"fill="white" stroke="{CONTENTION}" stroke-width="2""#)), "corrupted at a receiver"),
        ],
        vec![
            (
                format!(
                    r#"<g transform="translate({{x}} {{y}})"><path d="M0,12 L4,4 L8,12 Z" fill="{ENABLE_EDGE}"/><path d="M10,0 L14,8 L18,0 Z" fill="{RELEASE_EDGE}"/></g>"#
                ),
                "enable / release edge",
            ),
            (rect(r#"fill="url(#float)""#), "receiver input floating (no driver, no failsafe)"),
            (rect(&format!(r#"fill="{CONTENTION}" opacity="0.8""#)), "two drivers at once (contention)"),
            (rect(r##"fill="none" stroke="#333""##), "hand-over seen at the new driver (red: overlap)"),
        ],
    ];
    let mut rows = rows;
    if hold {
        rows[0].insert(1, (rect(&format!(r#"fill="{HOLD_FILL}""#)), "firmware hold after the last bit"));
    }
    for (k, row) in rows.iter().enumerate() {
        let ry = y + 22.0 * k as f64;
        let mut x = LEFT;
        for (swatch, label) in row {
            svg.raw(&swatch.replace("{x}", &format!("{x:.1}")).replace("{y}", &format!("{:.1}", ry - 9.0)));
            svg.text(x + 24.0, ry + 1.0, label, r#"font-size="11""#);
            x += 30.0 + text_width(label, 11.0);
        }
    }
}
