//! The chart of a `size` search: the binding requirement's metric at every
//! value tried, the requirement as a line, failing points marked.

use super::axis::{Axis, Scale};
use super::chart::{Chart, Guide, Series};

/// One value tried: the key's value (a number in the range's unit), the
/// metric measured there, and whether every requirement held.
pub struct Tried {
    pub x: f64,
    pub y: f64,
    pub pass: bool,
}

/// `metric` against `key` over the points tried, with the requirement `required`.
pub fn chart(key: &str, x_unit: Option<String>, metric: &str, op: &str, required: f64, tried: &[Tried]) -> Chart {
    let mut pts: Vec<&Tried> = tried.iter().filter(|t| t.x.is_finite() && t.y.is_finite()).collect();
    pts.sort_by(|a, b| a.x.total_cmp(&b.x));
    let y_unit = crate::check::dimension_of(metric).map(|d| crate::sweep::axis::base_unit(d).to_owned());
    let with_unit = |k: &str, u: &Option<String>| match u {
        Some(u) => format!("{k} [{u}]"),
        None => k.to_owned(),
    };
    let ys = pts.iter().map(|t| t.y).chain(std::iter::once(required));
    let shown = crate::check::show(metric, required);
    Chart {
        title: format!("{metric} against {key}"),
        subtitle: format!("{} values tried by bisection; requirement {metric} {op} {shown}", pts.len()),
        x_label: with_unit(key, &x_unit),
        y_label: with_unit(metric, &y_unit),
        x: Axis::fit(pts.iter().map(|t| t.x), Scale::Linear, x_unit.clone(), false),
        y: Axis::fit(ys, Scale::Linear, y_unit, true),
        series: vec![Series {
            name: format!("measured {metric}"),
            points: pts.iter().map(|t| (t.x, t.y)).collect(),
            failed: pts.iter().map(|t| !t.pass).collect(),
            background: false,
            emphasis: true,
            markers: true,
            failed_other: Vec::new(),
            end_marker: false,
        }],
        failed_label: "a value where some requirement fails".into(),
        failed_other_label: String::new(),
        end_label: String::new(),
        guides: vec![Guide {
            x: None,
            y: Some(required),
            label: format!("requirement: {} {shown}", super::sweep::op_symbol(op)),
        }],
    }
}
