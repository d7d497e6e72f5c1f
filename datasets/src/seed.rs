//! Independent random streams derived from `(seed, stream, index)`, so that an
//! asset's data does not depend on the order (or thread) in which assets are
//! generated.

use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;

/// The fleet plan (case assignment).
pub(crate) const PLAN: u64 = 1;
/// A site's weather, demand and supply.
pub(crate) const SITE: u64 = 2;
/// One asset's pump spread and measurement noise.
pub(crate) const ASSET: u64 = 3;

/// SplitMix64 finaliser (Steele, Lea & Flood 2014), used to decorrelate seeds.
fn splitmix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The generator of stream `stream`, item `index`, for fleet seed `seed`.
pub(crate) fn stream_rng(seed: u64, stream: u64, index: u64) -> Xoshiro256PlusPlus {
    Xoshiro256PlusPlus::seed_from_u64(splitmix(splitmix(splitmix(seed) ^ stream) ^ index))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::Rng;

    #[test]
    fn streams_differ_and_repeat() {
        let a: u64 = stream_rng(1, ASSET, 0).random();
        let b: u64 = stream_rng(1, ASSET, 1).random();
        let c: u64 = stream_rng(1, SITE, 0).random();
        let a2: u64 = stream_rng(1, ASSET, 0).random();
        assert_eq!(a, a2);
        assert_ne!(a, b);
        assert_ne!(a, c);
    }
}
