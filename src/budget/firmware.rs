//! Checks of the firmware's enable timing and of auto-direction parts.
//!
//! A UART receiver samples each bit in its middle (common practice: 16×
//! oversampling, the majority of samples 7, 8 and 9). An enable that turns
//! the output valid half a bit or more into the start bit, or releases it
//! half a bit or more before the last stop bit ends, loses that bit's
//! sample point: the character is received wrong (a framing error when it
//! is the stop bit). The run counts such frames in `uart.cut_frames`.

use super::checks::{warn, BudgetWarning};
use crate::line::{IdleState, LineModel};
use crate::spec::Spec;
use crate::units::format_seconds;

pub fn warnings(spec: &Spec, line: &LineModel, out: &mut Vec<BudgetWarning>) {
    let half = spec.frame.time_of_halves(1);
    let bit = spec.frame.bit_time();
    for node in &spec.nodes {
        let t = &node.transceiver;
        if let Some(lead) = t.enable_lead {
            // The slowest part turns valid latest.
            let late = t.enable_range.max.0.saturating_sub(lead.0);
            if late >= half.0 {
                warn(
                    out,
                    "start-bit-cut",
                    Some(&node.name),
                    format!(
                        "enable_lead {} is {} shorter than the enable time ({}): the output turns valid after the first bit's sample point, so every frame it sends is received wrong",
                        format_seconds(lead.as_secs_f64()),
                        format_seconds(late as f64 / 1e12),
                        format_seconds(t.enable_range.max.as_secs_f64())
                    ),
                );
            }
        }
        if t.release_after_stop <= -(half.0 as i64) {
            warn(
                out,
                "stop-bit-cut",
                Some(&node.name),
                format!(
                    "release_after_stop {} releases the enable {} before the last stop bit ends (half a bit is {}): every frame it sends ends in a framing error at every receiver; release at the end of transmission, not when the transmit register empties",
                    format_seconds(t.release_after_stop as f64 / 1e12),
                    format_seconds(t.release_after_stop.unsigned_abs() as f64 / 1e12),
                    format_seconds(half.as_secs_f64())
                ),
            );
        }
        if t.auto_direction {
            let slow: Vec<&str> = (0..spec.nodes.len())
                .filter(|&i| {
                    line.idle_state(spec, i) == IdleState::Undefined || line.settled.settle[i].is_some_and(|s| s > bit)
                })
                .map(|i| spec.nodes[i].name.as_str())
                .collect();
            if !slow.is_empty() {
                warn(
                    out,
                    "auto-direction-unsettled",
                    Some(&node.name),
                    format!(
                        "an auto-direction driver leaves its recessive bits to the bias, which does not bring the line to a defined idle within a bit ({}) at {}: its frames are received wrong there",
                        format_seconds(bit.as_secs_f64()),
                        super::text::names(&slow)
                    ),
                );
            }
        }
    }
}
