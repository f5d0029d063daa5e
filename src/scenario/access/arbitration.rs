//! `[access]` for `scheme = "arbitration"`.

use super::{Access, R};
use crate::spec::{AccessSpec, ArbitrationSpec};

pub const KEYS: &[&str] = &["id_bits", "idle_bits", "sample_point", "faults"];

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    let id_bits = a.id_bits.as_ref().map(|x| *x.get_ref()).unwrap_or(11);
    if !(1..=32).contains(&id_bits) {
        let span = a.id_bits.as_ref().map(|x| x.span()).unwrap_or(c.span.clone());
        return Err(v.err(span, "access.id_bits", "id_bits must lie between 1 and 32"));
    }
    let idle_bits = a.idle_bits.as_ref().map(|x| *x.get_ref()).unwrap_or(11);
    if idle_bits == 0 {
        let span = a.idle_bits.as_ref().map(|x| x.span()).unwrap_or(c.span.clone());
        return Err(v.err(span, "access.idle_bits", "idle_bits must be at least 1"));
    }
    if !crate::scenario::validate::fits_time(c.frame, u64::from(idle_bits)) {
        let span = a.idle_bits.as_ref().map(|x| x.span()).unwrap_or(c.span.clone());
        return Err(v.err(span, "access.idle_bits", "the idle time would last longer than 10^6 s at this bit rate"));
    }
    let sample_point = a.sample_point.as_ref().map(|x| *x.get_ref()).unwrap_or(0.75);
    if !(0.05..=0.95).contains(&sample_point) {
        let span = a.sample_point.as_ref().map(|x| x.span()).unwrap_or(c.span.clone());
        return Err(v.err(span, "access.sample_point", "sample_point is a fraction of the bit between 0.05 and 0.95"));
    }
    for n in c.nodes {
        for t in &n.traffic {
            match t.id {
                None => {
                    return Err(v.err(
                        a.scheme.span(),
                        "traffic.id",
                        format!("every traffic source of \"{}\" needs an identifier (traffic id = ...) under bitwise arbitration", n.name),
                    ))
                }
                Some(id) if id >= 1u64 << id_bits => {
                    return Err(v.err(
                        a.scheme.span(),
                        "traffic.id",
                        format!("identifier {id} of \"{}\" does not fit in {id_bits} bits", n.name),
                    ))
                }
                Some(_) => {}
            }
        }
    }
    let node_faults = c.faults(super::NODE_FAULTS)?.nodes;
    Ok(AccessSpec::Arbitration(ArbitrationSpec { id_bits, idle_bits, sample_point, node_faults }))
}
