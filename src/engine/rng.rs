//! Per-node random streams.
//!
//! Every node owns independent streams, one per purpose (traffic source,
//! access-scheme decisions, timing draws). A stream is ChaCha8 keyed by the
//! scenario seed, with the stream number taken from a 64-bit FNV-1a hash of
//! the node name and the purpose. A stream therefore depends only on
//! (seed, node name, purpose): adding, removing or re-ordering other nodes,
//! or changing their traffic, leaves it unchanged, on every platform.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

/// The random generator used everywhere in the engine.
pub type Stream = ChaCha8Rng;

/// FNV-1a, 64-bit (Fowler–Noll–Vo; offset basis 0xcbf29ce484222325, prime 0x100000001b3).
fn fnv1a(parts: &[&[u8]]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for (i, part) in parts.iter().enumerate() {
        if i > 0 {
            // A separator byte that cannot occur in UTF-8 keeps ("ab","c") apart from ("a","bc").
            h ^= 0xff;
            h = h.wrapping_mul(0x0100_0000_01b3);
        }
        for b in part.iter() {
            h ^= u64::from(*b);
            h = h.wrapping_mul(0x0100_0000_01b3);
        }
    }
    h
}

/// The stream for `purpose` at the node called `node`.
pub fn stream(seed: u64, node: &str, purpose: &str) -> Stream {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(fnv1a(&[node.as_bytes(), purpose.as_bytes()]));
    rng
}

/// Seed of replication `k` derived from a base seed (SplitMix64 finaliser),
/// so replications are independent but reproducible.
pub fn replication_seed(base: u64, k: u64) -> u64 {
    mix64(base.wrapping_add(k.wrapping_mul(0x9e37_79b9_7f4a_7c15)))
}

/// The SplitMix64 output function (Steele, Lea and Flood, 2014): a 64-bit
/// value scrambled so that nearby inputs give unrelated outputs.
pub fn mix64(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::Rng;

    #[test]
    fn fnv1a_reference_vectors() {
        // Published FNV-1a 64-bit test vectors (Noll, FNV reference page): "" and "a".
        assert_eq!(fnv1a(&[b""]), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a(&[b"a"]), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a(&[b"foobar"]), 0x8594_4171_f739_67e8);
    }

    #[test]
    fn streams_depend_only_on_seed_name_and_purpose() {
        let a: u64 = stream(7, "card01", "traffic/0").random();
        let b: u64 = stream(7, "card01", "traffic/0").random();
        let c: u64 = stream(7, "card02", "traffic/0").random();
        let d: u64 = stream(8, "card01", "traffic/0").random();
        let e: u64 = stream(7, "card01", "access").random();
        assert_eq!(a, b);
        assert_ne!(a, c);
        assert_ne!(a, d);
        assert_ne!(a, e);
    }
}
