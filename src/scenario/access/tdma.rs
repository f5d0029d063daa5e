//! `[access]` for `scheme = "tdma"`.

use super::{Access, R};
use crate::spec::{AccessSpec, Drift, Slot, TdmaSpec};
use crate::units::Picos;

pub const KEYS: &[&str] = &[
    "timekeeper",
    "beacon_bits",
    "slot_length",
    "slots",
    "guard",
    "drift_ppm",
    "clock_ppm",
    "compensate",
    "holdover",
    "faults",
];

/// Most beacon periods a node may run on its own clock.
pub const MAX_HOLDOVER: u32 = 1_000_000;

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    let tk_raw = c.required(&a.timekeeper, "timekeeper", "timekeeper = \"<node name>\"")?;
    let timekeeper = c.find(tk_raw, "access.timekeeper")?;
    let guard_raw = c.required(&a.guard, "guard", "guard = \"50 ns\"")?;
    let guard = v.time(guard_raw, "access.guard")?;
    let equal = a.slot_length.as_ref().map(|l| v.time(l, "access.slot_length")).transpose()?;
    let slots = match (&a.slots, &a.order) {
        (Some(_), Some(o)) => {
            return Err(v.err(o.span(), "access.order", "give slots or order, not both"));
        }
        (Some(list), None) => {
            if list.get_ref().is_empty() {
                return Err(v.err(list.span(), "access.slots", "the cycle has no slots: list at least one"));
            }
            let mut out = Vec::new();
            for (i, s) in list.get_ref().iter().enumerate() {
                let key = format!("access.slots[{i}]");
                let raw = s.get_ref();
                let owner = c.find(&raw.node, &format!("{key}.node"))?;
                let length = match (&raw.length, equal) {
                    (Some(l), _) => v.time(l, &format!("{key}.length"))?,
                    (None, Some(l)) => l,
                    (None, None) => {
                        return Err(v.err(
                            s.span(),
                            &key,
                            "a slot needs a length: give length here or access.slot_length",
                        ))
                    }
                };
                out.push((owner, length, s.span(), key));
            }
            out
        }
        (None, _) => {
            let length = equal.ok_or_else(|| {
                v.err(c.span.clone(), "access.slot_length", "tdma needs slot_length (equal slots) or a slots list")
            })?;
            // By default every node that has traffic gets one slot, in position order.
            let order = if a.order.is_some() {
                c.order(None, "slot order")?
            } else {
                c.order(None, "slot order")?.into_iter().filter(|&n| !c.nodes[n].traffic.is_empty()).collect()
            };
            if order.is_empty() {
                return Err(v.err(
                    c.span.clone(),
                    "access.order",
                    "no node has traffic, so the cycle would have no slots",
                ));
            }
            order
                .into_iter()
                .map(|n| {
                    (
                        n,
                        length,
                        a.slot_length.as_ref().map(|l| l.span()).unwrap_or(c.span.clone()),
                        "access.slot_length".to_owned(),
                    )
                })
                .collect()
        }
    };
    let owners: Vec<usize> = slots.iter().map(|s| s.0).collect();
    c.all_senders_in(&owners, "slot list")?;
    let spread = a.drift_ppm.as_ref().map(|d| *d.get_ref()).unwrap_or(0.0);
    if !(0.0..=10_000.0).contains(&spread) {
        let span = a.drift_ppm.as_ref().map(|d| d.span()).unwrap_or(c.span.clone());
        return Err(v.err(span, "access.drift_ppm", "drift_ppm must lie between 0 and 10000"));
    }
    let mut drift = vec![if spread > 0.0 { Drift::Within(spread) } else { Drift::Fixed(0.0) }; c.nodes.len()];
    if let Some(map) = &a.clock_ppm {
        for (name, ppm) in map.get_ref() {
            let id = c.names.iter().position(|n| n == name).ok_or_else(|| {
                v.err(map.span(), &format!("access.clock_ppm.{name}"), format!("no node is called \"{name}\""))
            })?;
            if !ppm.is_finite() || ppm.abs() > 10_000.0 {
                return Err(v.err(
                    map.span(),
                    &format!("access.clock_ppm.{name}"),
                    "a clock error must lie within ±10000 ppm",
                ));
            }
            drift[id] = Drift::Fixed(*ppm);
        }
    }
    for (owner, length, span, key) in &slots {
        let en = c.nodes[*owner].transceiver.enable_time;
        // A fast clock shortens the slot in true time: keep room for the worst drift.
        let ppm = match drift[*owner] {
            Drift::Fixed(p) => p.max(0.0),
            Drift::Within(p) => p,
        };
        let nominal = guard + en + c.longest_data_frame_of(*owner);
        let needed = Picos((nominal.0 as f64 * (1.0 + ppm * 1e-6)).ceil() as u64);
        if *length < needed {
            return Err(v
                .err(
                    span.clone(),
                    key,
                    format!(
                        "the slot of \"{}\" ({length}) cannot hold guard + enable + the longest data frame ({needed})",
                        c.names[*owner]
                    ),
                )
                .with_hint("lengthen the slot, shorten the guard or the payload"));
        }
    }
    let beacon_bits = c.control_bits(&a.beacon_bits, "beacon_bits")?;
    // The whole cycle (beacon slot and data slots) must fit the supported time.
    let beacon = u128::from(guard.0)
        + u128::from(c.nodes[timekeeper].transceiver.enable_range.max.0)
        + u128::from(c.frame.control_time(beacon_bits).0);
    let cycle = slots.iter().fold(beacon, |acc, s| acc + u128::from(s.1 .0));
    if cycle > u128::from(crate::scenario::check::MAX_TIME.0) {
        let span = a.slots.as_ref().map(|l| l.span()).or(a.slot_length.as_ref().map(|l| l.span()));
        let key = if a.slots.is_some() { "access.slots" } else { "access.slot_length" };
        return Err(v.err(
            span.unwrap_or(c.span.clone()),
            key,
            format!(
                "the cycle (beacon slot and {} slots) would last {:.4e} s, longer than the supported 10^6 s",
                slots.len(),
                cycle as f64 / 1e12
            ),
        ));
    }
    let faults = c.faults(super::NODE_FAULTS)?;
    Ok(AccessSpec::Tdma(TdmaSpec {
        holdover: c.count(&a.holdover, "holdover", 0, MAX_HOLDOVER)?.unwrap_or(0),
        node_faults: faults.nodes,
        timekeeper,
        beacon_bits,
        slots: slots.into_iter().map(|(owner, length, _, _)| Slot { owner, length }).collect(),
        guard,
        drift,
        compensate: a.compensate.as_ref().is_some_and(|x| *x.get_ref()),
    }))
}
