//! Small shared helpers: a fast deterministic hasher for integer keys and a union-find.
//!
//! The hasher is the multiply-rotate scheme of the Firefox/rustc "Fx" hash followed by a
//! splitmix64 finaliser (Steele, Lea, Flood 2014); it is deterministic (no random seed), so hash
//! map iteration never decides an output order here anyway. The union-find (Tarjan 1975) always
//! keeps the smaller index as the root, so components are named by their first member.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

/// Multiply-rotate hasher for integer keys.
#[derive(Default, Clone, Copy)]
pub struct FxHasher {
    h: u64,
}

impl FxHasher {
    #[inline]
    fn add(&mut self, x: u64) {
        self.h = (self.h.rotate_left(5) ^ x).wrapping_mul(0x51_7c_c1_b7_27_22_0a_95);
    }
}

impl Hasher for FxHasher {
    fn write(&mut self, bytes: &[u8]) {
        for c in bytes.chunks(8) {
            let mut b = [0u8; 8];
            b[..c.len()].copy_from_slice(c);
            self.add(u64::from_le_bytes(b));
        }
    }
    #[inline]
    fn write_u32(&mut self, x: u32) {
        self.add(x as u64)
    }
    #[inline]
    fn write_u64(&mut self, x: u64) {
        self.add(x)
    }
    #[inline]
    fn write_u128(&mut self, x: u128) {
        self.add(x as u64);
        self.add((x >> 64) as u64);
    }
    #[inline]
    fn finish(&self) -> u64 {
        let mut z = self.h;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58476d1ce4e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d049bb133111eb);
        z ^ (z >> 31)
    }
}

pub type FxMap<K, V> = HashMap<K, V, BuildHasherDefault<FxHasher>>;

/// Disjoint sets over `0..n` with the smallest member as root.
#[derive(Clone, Debug)]
pub struct UnionFind {
    parent: Vec<u32>,
}

impl UnionFind {
    pub fn new(n: usize) -> Self {
        UnionFind {
            parent: (0..n as u32).collect(),
        }
    }

    /// Resets to `n` singletons, reusing the buffer.
    pub fn reset(&mut self, n: usize) {
        self.parent.clear();
        self.parent.extend(0..n as u32);
    }

    #[inline]
    pub fn find(&mut self, mut x: u32) -> u32 {
        while self.parent[x as usize] != x {
            let g = self.parent[self.parent[x as usize] as usize];
            self.parent[x as usize] = g;
            x = g;
        }
        x
    }

    /// Joins the sets of `a` and `b`; returns the new root (the smaller of the two roots).
    #[inline]
    pub fn union(&mut self, a: u32, b: u32) -> u32 {
        let ra = self.find(a);
        let rb = self.find(b);
        let (lo, hi) = if ra < rb { (ra, rb) } else { (rb, ra) };
        self.parent[hi as usize] = lo;
        lo
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    #[test]
    fn union_find_keeps_smallest_root() {
        let mut u = UnionFind::new(5);
        u.union(3, 4);
        u.union(4, 1);
        assert_eq!(u.find(3), 1);
        assert_eq!(u.find(0), 0);
        let mut m: FxMap<u128, u32> = FxMap::default();
        m.insert(1 << 70, 3);
        assert_eq!(m[&(1 << 70)], 3);
    }
}
