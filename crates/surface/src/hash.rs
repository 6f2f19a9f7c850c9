//! A 64-bit integer hash for the stages' open-addressing tables and bucket keys.
//!
//! [`mix`] is the finalizer of SplitMix64 (Steele, Lea, Flood 2014, "Fast splittable
//! pseudorandom number generators"): a bijection of `u64` in which every input bit affects every
//! output bit, so low bits of the result are usable as a table index. Fixed constants: results
//! never depend on the run, the platform or the thread count.
//!
//! ```
//! use octocut_surface::hash::mix;
//! assert_ne!(mix(1) & 1023, mix(2) & 1023);
//! assert_eq!(mix(7), mix(7));
//! ```

/// SplitMix64's finalizer of `z`.
#[inline]
pub fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}
