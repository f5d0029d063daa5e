//! `[access]` for `scheme = "arbitration"`.

use super::{Access, R};
use crate::line::IdleState;
use crate::spec::{AccessSpec, ArbitrationSpec};

pub const KEYS: &[&str] = &["id_bits", "idle_bits", "sample_point"];

pub fn validate(c: &Access) -> R<AccessSpec> {
    let (v, a) = (c.v, c.a);
    // A released driver must read as recessive everywhere: the undriven line
    // must be a defined state at every receiver.
    for n in c.nodes {
        if n.transceiver.receiver.idle_state() == IdleState::Undefined {
            return Err(v
                .err(
                    a.scheme.span(),
                    "access.scheme",
                    format!(
                        "bitwise arbitration needs a line that reads recessive when undriven, but the {} receiver of \"{}\" reads an idle line as undefined",
                        n.transceiver.receiver.name, n.name
                    ),
                )
                .with_hint("use receivers with a failsafe threshold (receiver = \"type2\")"));
        }
    }
    let id_bits = a.id_bits.as_ref().map(|x| *x.get_ref()).unwrap_or(11);
    if !(1..=32).contains(&id_bits) {
        let span = a
            .id_bits
            .as_ref()
            .map(|x| x.span())
            .unwrap_or(c.span.clone());
        return Err(v.err(span, "access.id_bits", "id_bits must lie between 1 and 32"));
    }
    let idle_bits = a.idle_bits.as_ref().map(|x| *x.get_ref()).unwrap_or(11);
    if idle_bits == 0 {
        let span = a
            .idle_bits
            .as_ref()
            .map(|x| x.span())
            .unwrap_or(c.span.clone());
        return Err(v.err(span, "access.idle_bits", "idle_bits must be at least 1"));
    }
    let sample_point = a
        .sample_point
        .as_ref()
        .map(|x| *x.get_ref())
        .unwrap_or(0.75);
    if !(sample_point > 0.0 && sample_point < 1.0) {
        let span = a
            .sample_point
            .as_ref()
            .map(|x| x.span())
            .unwrap_or(c.span.clone());
        return Err(v.err(
            span,
            "access.sample_point",
            "sample_point is a fraction of the bit: 0 < sample_point < 1",
        ));
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
    Ok(AccessSpec::Arbitration(ArbitrationSpec {
        id_bits,
        idle_bits,
        sample_point,
    }))
}
