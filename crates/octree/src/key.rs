//! Compact octree keys ordered along the Morton (Z) curve.
//!
//! A key packs a leaf's level (0 = base cell, at most [`MAX_DEPTH`]) and its anchor (minimum
//! corner) on the finest integer grid of the whole forest into one `u128`: the Morton interleave
//! of the anchor's three 31-bit coordinates above 5 level bits. Sorting keys sorts leaves along
//! the Z curve with every ancestor just before its descendants (Sundar, Sampath, Biros 2008,
//! "Bottom-up construction and 2:1 balance refinement of linear octrees in parallel").
//! Invariant: the anchor is a multiple of the leaf's edge `1 << (MAX_DEPTH - level)`.

/// Levels below a base cell: the finest leaf has edge `base_size / 2^MAX_DEPTH`.
pub const MAX_DEPTH: u8 = 21;
/// Bits of one anchor coordinate (base cells per axis up to `2^(COORD_BITS - MAX_DEPTH)`).
pub const COORD_BITS: u32 = 31;

/// One leaf or node of the forest: 16 bytes.
///
/// ```
/// use octocut_octree::{OctKey, MAX_DEPTH};
/// let root = OctKey::new([0, 0, 0], 0);
/// let kids = root.children();
/// assert!(root < kids[0] && kids[0] < kids[7]);
/// assert_eq!(kids[7].anchor(), [1 << (MAX_DEPTH - 1); 3]);
/// assert_eq!(kids[7].parent(), root);
/// assert!(root.is_ancestor_of(&kids[3]));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
#[repr(transparent)]
pub struct OctKey(pub u128);

const _: () = assert!(std::mem::size_of::<OctKey>() == 16);

impl OctKey {
    /// The key of the node at `level` whose minimum corner is `anchor` (finest-grid units).
    #[inline]
    pub fn new(anchor: [u32; 3], level: u8) -> OctKey {
        debug_assert!(level <= MAX_DEPTH);
        debug_assert!(anchor.iter().all(|&a| a < (1u32 << COORD_BITS)));
        debug_assert!(anchor.iter().all(|&a| a & (Self::edge_at(level) - 1) == 0));
        OctKey((interleave(anchor) << 5) | level as u128)
    }

    #[inline]
    pub fn level(self) -> u8 {
        (self.0 & 31) as u8
    }

    /// The Morton code of the anchor.
    #[inline]
    pub fn morton(self) -> u128 {
        self.0 >> 5
    }

    #[inline]
    pub fn anchor(self) -> [u32; 3] {
        deinterleave(self.morton())
    }

    /// Edge length in finest-grid units at `level`.
    #[inline]
    pub const fn edge_at(level: u8) -> u32 {
        1u32 << (MAX_DEPTH - level)
    }

    /// Edge length in finest-grid units.
    #[inline]
    pub fn edge(self) -> u32 {
        Self::edge_at(self.level())
    }

    #[inline]
    pub fn parent(self) -> OctKey {
        let l = self.level();
        debug_assert!(l > 0);
        let e = Self::edge_at(l - 1);
        let a = self.anchor().map(|c| c & !(e - 1));
        OctKey::new(a, l - 1)
    }

    /// The eight children in Morton order (child `i` has offset bit 0 = x, bit 1 = y, bit 2 = z).
    #[inline]
    pub fn children(self) -> [OctKey; 8] {
        let l = self.level() + 1;
        let h = Self::edge_at(l);
        let a = self.anchor();
        std::array::from_fn(|i| {
            OctKey::new(
                [
                    a[0] + h * (i as u32 & 1),
                    a[1] + h * ((i as u32 >> 1) & 1),
                    a[2] + h * ((i as u32 >> 2) & 1),
                ],
                l,
            )
        })
    }

    /// True when `other` lies strictly inside `self`'s cube at a deeper level.
    #[inline]
    pub fn is_ancestor_of(&self, other: &OctKey) -> bool {
        let l = self.level();
        if other.level() <= l {
            return false;
        }
        let e = self.edge();
        let a = self.anchor();
        let b = other.anchor();
        (0..3).all(|i| b[i] & !(e - 1) == a[i])
    }

    /// The last finest-level descendant's Morton code (the end of this node's Z-curve range).
    #[inline]
    pub fn last_descendant_morton(self) -> u128 {
        let shift = 3 * (MAX_DEPTH - self.level()) as u32;
        self.morton() | ((1u128 << shift) - 1)
    }
}

#[inline]
fn part1by2(x: u64) -> u64 {
    // spreads the low 21 bits of x to every third bit
    let mut x = x & 0x1f_ffff;
    x = (x | x << 32) & 0x1f00000000ffff;
    x = (x | x << 16) & 0x1f0000ff0000ff;
    x = (x | x << 8) & 0x100f00f00f00f00f;
    x = (x | x << 4) & 0x10c30c30c30c30c3;
    x = (x | x << 2) & 0x1249249249249249;
    x
}

#[inline]
fn compact1by2(x: u64) -> u64 {
    let mut x = x & 0x1249249249249249;
    x = (x ^ (x >> 2)) & 0x10c30c30c30c30c3;
    x = (x ^ (x >> 4)) & 0x100f00f00f00f00f;
    x = (x ^ (x >> 8)) & 0x1f0000ff0000ff;
    x = (x ^ (x >> 16)) & 0x1f00000000ffff;
    x = (x ^ (x >> 32)) & 0x1f_ffff;
    x
}

/// Morton interleave of three 31-bit coordinates (x in the lowest bit of each triple).
#[inline]
pub fn interleave(a: [u32; 3]) -> u128 {
    let lo = |c: u32| part1by2((c & 0x1f_ffff) as u64);
    let hi = |c: u32| part1by2((c >> 21) as u64);
    let low = lo(a[0]) | lo(a[1]) << 1 | lo(a[2]) << 2;
    let high = hi(a[0]) | hi(a[1]) << 1 | hi(a[2]) << 2;
    (low as u128) | (high as u128) << 63
}

/// Inverse of [`interleave`].
#[inline]
pub fn deinterleave(m: u128) -> [u32; 3] {
    let low = (m & ((1u128 << 63) - 1)) as u64;
    let high = (m >> 63) as u64;
    std::array::from_fn(|i| (compact1by2(low >> i) | compact1by2(high >> i) << 21) as u32)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn interleave_round_trips_and_orders() {
        let cases = [
            [0, 0, 0],
            [1, 2, 3],
            [(1 << 31) - 1, 5, 1 << 30],
            [123456789, 987654321, 2_000_000_000],
        ];
        for c in cases {
            assert_eq!(deinterleave(interleave(c)), c);
        }
        // bit-by-bit reference interleave
        let reference = |a: [u32; 3]| {
            let mut m = 0u128;
            for b in 0..31 {
                for (i, &c) in a.iter().enumerate() {
                    m |= (((c >> b) & 1) as u128) << (3 * b + i as u32);
                }
            }
            m
        };
        for c in cases {
            assert_eq!(interleave(c), reference(c));
        }
    }
}
