//! A union-find over `0..n` (Tarjan 1975) that always keeps the smaller index as the root, so
//! components are named by their first member (deterministic whatever the thread count), and
//! [`gather_chunk`], the chunk size of the stage's gathered parallel maps, [`mix`] (the
//! surface crate's hash) for the stage's small open-addressing tables, and
//! [`counting_sort_by`], a stable sort of ids by an integer key (LSD radix sort, 16-bit
//! digits), and [`scatter`], parallel writes of distinct slots.

use rayon::prelude::*;

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

    /// The root of every element, in the parent buffer. Roots are the smallest member of their
    /// set and every parent is smaller than its child ([`UnionFind::union`] hangs the larger root
    /// under the smaller, path halving only moves a link up), so one increasing pass resolves all.
    ///
    /// ```ignore
    /// let mut uf = UnionFind::new(4);
    /// uf.union(3, 1);
    /// assert_eq!(uf.into_roots(), vec![0, 1, 2, 1]);
    /// ```
    pub fn into_roots(self) -> Vec<u32> {
        let mut p = self.parent;
        for x in 0..p.len() {
            let q = p[x] as usize;
            debug_assert!(q <= x);
            p[x] = p[q];
        }
        p
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

/// Items per task of a chunked parallel map whose per-chunk outputs are gathered afterwards:
/// about 8 tasks per thread, between `min` and `max`. Large chunks keep each output vector
/// large enough to be its own mapping, returned to the system when the gather frees it (peak
/// memory); the outputs never depend on the chunk size.
pub(crate) fn gather_chunk(n: usize, min: usize, max: usize) -> usize {
    (n / (8 * rayon::current_num_threads().max(1))).clamp(min, max)
}

/// `out[k] = v` for every `(k, v) = f(i)`, `i` in `0..n`, in parallel, into an output of
/// `n_out` zeros. Every `k` must come at most once (a permutation or part of one), so the
/// result never depends on the order of the writes.
///
/// ```ignore
/// assert_eq!(scatter(3, 3, |i| (2 - i, i as u32 * 10)), vec![20, 10, 0]);
/// ```
pub(crate) fn scatter(
    n_out: usize,
    n: usize,
    f: impl Fn(usize) -> (usize, u32) + Sync,
) -> Vec<u32> {
    use std::sync::atomic::{AtomicU32, Ordering};
    let out: Vec<AtomicU32> = (0..n_out)
        .into_par_iter()
        .map(|_| AtomicU32::new(0))
        .collect();
    (0..n).into_par_iter().with_min_len(4096).for_each(|i| {
        let (k, v) = f(i);
        out[k].store(v, Ordering::Relaxed);
    });
    out.into_par_iter().map(AtomicU32::into_inner).collect()
}

pub(crate) use octocut_surface::hash::mix;

/// `ids` reordered by `key(id)` (at most `max_key`), keeping the given order among equal keys:
/// a least-significant-digit radix sort with 16-bit digits, each digit one stable counting
/// sort (one histogram, one prefix sum, one scatter; common practice). The counts hold at most
/// 65,536 entries whatever `max_key` is, and a key of up to 16 bits takes one pass, up to 32
/// bits two.
///
/// ```ignore
/// assert_eq!(counting_sort_by(&[0, 1, 2, 3], 70_000, |i| [70_000, 5, 70_000, 0][i as usize]),
///            vec![3, 1, 0, 2]);
/// ```
pub(crate) fn counting_sort_by(ids: &[u32], max_key: u32, key: impl Fn(u32) -> u32) -> Vec<u32> {
    const DIGIT: u32 = 16;
    let bits = (u32::BITS - max_key.leading_zeros()).max(1);
    let mut cur = ids.to_vec();
    let mut out = vec![0u32; ids.len()];
    let mut shift = 0;
    while shift < bits {
        let width = (bits - shift).min(DIGIT);
        let mask = (1u32 << width) - 1;
        let digit = |i: u32| ((key(i) >> shift) & mask) as usize;
        let mut start = vec![0u32; mask as usize + 2];
        for &i in &cur {
            start[digit(i) + 1] += 1;
        }
        for k in 1..start.len() {
            start[k] += start[k - 1];
        }
        for &i in &cur {
            let s = &mut start[digit(i)];
            out[*s as usize] = i;
            *s += 1;
        }
        std::mem::swap(&mut cur, &mut out);
        shift += width;
    }
    cur
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
    }

    #[test]
    fn roots_in_one_pass_equal_find() {
        // reference: `find` on every element (the definition of a set's root)
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for _ in 0..20 {
            let n = rng.random_range(1..300u32);
            let mut u = UnionFind::new(n as usize);
            for _ in 0..rng.random_range(0..2 * n) {
                let (a, b) = (rng.random_range(0..n), rng.random_range(0..n));
                u.union(a, b);
                // path halving between unions, as the callers' finds do
                u.find(rng.random_range(0..n));
            }
            let mut r = u.clone();
            let want: Vec<u32> = (0..n).map(|x| r.find(x)).collect();
            assert_eq!(u.into_roots(), want);
        }
    }

    #[test]
    fn counting_sort_is_the_stable_sort() {
        // reference: std's `sort_by_key`, documented as stable; keys of one digit, of two
        // digits (above 2^16) and up to u32::MAX
        let ids: Vec<u32> = (0..5000u32).map(|i| (i * 7919) % 5000).collect();
        for max_key in [0u32, 1, 36, 65_535, 65_536, 3 << 20, u32::MAX - 1, u32::MAX] {
            // few distinct keys (so stability is tested), spread over 0..=max_key: fractions
            // of max_key and values just below it
            let key = |i: u32| {
                let k = (mix(i as u64) % 122) as u32;
                if k % 2 == 0 {
                    max_key / (1 + k / 2)
                } else {
                    max_key.saturating_sub(k / 2)
                }
            };
            let mut want = ids.clone();
            want.sort_by_key(|&i| key(i)); // std's sort_by_key is stable
            assert!(ids.iter().all(|&i| key(i) <= max_key));
            assert_eq!(
                counting_sort_by(&ids, max_key, key),
                want,
                "max_key {max_key}"
            );
        }
    }

    #[test]
    fn scatter_equals_serial_writes() {
        // reference: the serial loop out[k] = v over a permutation of part of the slots
        let n_out = 50_000;
        let idx = |i: usize| (i * 7919) % n_out;
        let mut want = vec![0u32; n_out];
        for i in 0..40_000 {
            want[idx(i)] = i as u32 + 1;
        }
        assert_eq!(scatter(n_out, 40_000, |i| (idx(i), i as u32 + 1)), want);
    }
}
