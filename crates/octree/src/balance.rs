//! 2:1 balance of a linear octree forest, generalised to `n` transition layers.
//!
//! Method: level-by-level ripple on the sorted leaf array, finest level first (the level-wise
//! "ripple" variant of linear balance; Sundar, Sampath, Biros 2008, "Bottom-up construction and
//! 2:1 balance refinement of linear octrees in parallel", and Isaac, Burstedde, Ghattas 2012,
//! "Low-cost parallel algorithms for 2:1 octree balance"). A leaf at level `l` with parent `P`
//! requires every leaf overlapping `P` grown by `n` cells of level `l-1` to be at level `>= l-1`
//! (with `n = 1` this is exactly face/edge/corner 2:1; face mode grows along the axes only).
//! Since coarser leaves are unions of level `l-2` boxes, one lookup per level-`l-2` box around
//! the grandparent decides; offending leaves are split minimally. A pass only creates leaves of
//! levels `< l`, so one sweep from the finest level to level 2 suffices.
//!
//! Invariants: the result tiles the same box, refines the input (never coarsens), is the coarsest
//! such tree (so balance is idempotent), and is identical at any thread count: lookups run in
//! fixed-size chunks and all requests are sorted before they are applied.

use crate::domain::Domain;
use crate::key::{OctKey, MAX_DEPTH};
use crate::spec::{BalanceMode, OctreeError, MAX_TRANSITION_LAYERS};
use rayon::prelude::*;

/// Leaves per parallel work item (fixed, so results never depend on the thread count).
const CHUNK: usize = 1 << 14;

/// The coarsest refinement of `leaves` (sorted, tiling `domain`) that satisfies the balance rule.
///
/// ```
/// use octocut_octree::{balance, BalanceMode, Domain, OctKey, Octree};
/// use octocut_surface::{Aabb, Vec3};
/// let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
/// // one corner refined three levels deep
/// let mut leaves: Vec<OctKey> = Octree::uniform(d, 1).into_leaves();
/// let c = leaves.remove(0).children()[0];
/// leaves.splice(0..0, c.parent().children().into_iter().flat_map(|k| if k == c { k.children().to_vec() } else { vec![k] }));
/// let b = balance(&d, leaves, BalanceMode::Full, 1).unwrap();
/// assert!(Octree::from_sorted_leaves(d, b).check_tiling().is_ok());
/// ```
pub fn balance(
    domain: &Domain,
    mut leaves: Vec<OctKey>,
    mode: BalanceMode,
    layers: u32,
) -> Result<Vec<OctKey>, OctreeError> {
    if layers == 0 || layers > MAX_TRANSITION_LAYERS {
        return Err(OctreeError::BadLayers {
            got: layers,
            max: MAX_TRANSITION_LAYERS,
        });
    }
    if leaves.len() > u32::MAX as usize {
        return Err(OctreeError::TooManyLeaves {
            limit: u32::MAX as u64,
        });
    }
    let n = layers as i32;
    let table = Table::new(&offsets(mode, n), n);
    let ext = domain.grid_extent();
    let mut count = [0u64; MAX_DEPTH as usize + 1];
    for c in leaves
        .par_chunks(CHUNK)
        .map(level_histogram)
        .collect::<Vec<_>>()
    {
        for l in 0..count.len() {
            count[l] += c[l];
        }
    }
    let mut scratch_req: Vec<(u32, u64)> = Vec::new();
    let mut spare: Vec<OctKey> = Vec::new();
    for l in (2..=MAX_DEPTH).rev() {
        if count[l as usize] == 0 || count[..=(l - 2) as usize].iter().all(|&c| c == 0) {
            continue;
        }
        // only leaves of level <= l-2 can be too coarse: look them up in a much smaller array
        let coarse: Vec<(Vec<OctKey>, Vec<u32>)> = leaves
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(ci, chunk)| {
                let mut k = Vec::new();
                let mut i = Vec::new();
                for (j, key) in chunk.iter().enumerate() {
                    if key.level() + 2 <= l {
                        k.push(*key);
                        i.push((ci * CHUNK + j) as u32);
                    }
                }
                (k, i)
            })
            .collect();
        let mut coarse_keys = Vec::with_capacity(coarse.iter().map(|c| c.0.len()).sum());
        let mut coarse_idx = Vec::with_capacity(coarse_keys.capacity());
        for (k, i) in coarse {
            coarse_keys.extend_from_slice(&k);
            coarse_idx.extend_from_slice(&i);
        }
        if coarse_keys.is_empty() {
            continue;
        }
        let ctx = Pass {
            coarse_keys: &coarse_keys,
            coarse_idx: &coarse_idx,
            level: l,
            table: &table,
            ext,
        };
        let parts: Vec<Vec<(u32, u64)>> = leaves
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(_, chunk)| ctx.scan(chunk))
            .collect();
        scratch_req.clear();
        for p in parts {
            scratch_req.extend(p);
        }
        if scratch_req.is_empty() {
            continue;
        }
        scratch_req.par_sort_unstable();
        scratch_req.dedup();
        // the rebuilt array goes into a reused buffer (no fresh pages each pass)
        let (removed, added) = apply(&leaves, &scratch_req, l - 1, &mut spare);
        std::mem::swap(&mut leaves, &mut spare);
        for (lv, c) in removed.iter().enumerate() {
            count[lv] -= c;
        }
        for (lv, c) in added.iter().enumerate() {
            count[lv] += c;
        }
    }
    leaves.shrink_to_fit();
    Ok(leaves)
}

fn level_histogram(c: &[OctKey]) -> [u64; MAX_DEPTH as usize + 1] {
    let mut h = [0u64; MAX_DEPTH as usize + 1];
    for k in c {
        h[k.level() as usize] += 1;
    }
    h
}

/// Offsets (in parent-size cells) of the boxes a parent's neighbourhood covers.
fn offsets(mode: BalanceMode, n: i32) -> Vec<[i32; 3]> {
    let mut v = Vec::new();
    for z in -n..=n {
        for y in -n..=n {
            for x in -n..=n {
                let nz = (x != 0) as u32 + (y != 0) as u32 + (z != 0) as u32;
                let keep = match mode {
                    BalanceMode::Full => nz > 0,
                    BalanceMode::Face => nz == 1,
                };
                if keep {
                    v.push([x, y, z]);
                }
            }
        }
    }
    v
}

/// For every mask of children of a grandparent `G` that hold level-`l` leaves, the level-`l-2`
/// boxes `M` around `G` to look up and, for each, which of its 8 children (level `l-1` boxes)
/// lie in the required neighbourhoods. Depends only on the mode and the layer count.
struct Table {
    /// `M` offsets in units of `G`'s edge.
    moff: Vec<[i32; 3]>,
    start: Vec<u32>,
    /// `(index into moff, children bit set)`.
    entries: Vec<(u8, u8)>,
}

impl Table {
    fn new(offsets: &[[i32; 3]], n: i32) -> Table {
        let r = (n + 2) / 2;
        let mut moff = Vec::new();
        for z in -r..=r {
            for y in -r..=r {
                for x in -r..=r {
                    if (x, y, z) != (0, 0, 0) {
                        moff.push([x, y, z]);
                    }
                }
            }
        }
        let mut start = vec![0u32];
        let mut entries = Vec::new();
        for mask in 0..256u32 {
            // required level l-1 cells, in G-local coordinates (G covers 0..2 on each axis)
            let mut req = std::collections::BTreeSet::new();
            for c in 0..8 {
                if mask & (1 << c) != 0 {
                    let cc = [c & 1, (c >> 1) & 1, (c >> 2) & 1];
                    for o in offsets {
                        req.insert([cc[0] + o[0], cc[1] + o[1], cc[2] + o[2]]);
                    }
                }
            }
            for (mi, m) in moff.iter().enumerate() {
                let mut bits = 0u8;
                for c in 0..8 {
                    let cell = [
                        2 * m[0] + (c & 1),
                        2 * m[1] + ((c >> 1) & 1),
                        2 * m[2] + ((c >> 2) & 1),
                    ];
                    if req.contains(&cell) {
                        bits |= 1 << c;
                    }
                }
                if bits != 0 {
                    entries.push((mi as u8, bits));
                }
            }
            start.push(entries.len() as u32);
        }
        Table {
            moff,
            start,
            entries,
        }
    }
}

struct Pass<'a> {
    /// The leaves of level `<= l-2`, sorted, and their indices in the leaf array.
    coarse_keys: &'a [OctKey],
    coarse_idx: &'a [u32],
    level: u8,
    table: &'a Table,
    ext: [u32; 3],
}

impl Pass<'_> {
    /// Requests `(index of a too-coarse leaf, Morton offset of the level l-1 box it must expose)`
    /// from the level-`l` leaves of one chunk.
    fn scan(&self, chunk: &[OctKey]) -> Vec<(u32, u64)> {
        let l = self.level;
        let ge = OctKey::edge_at(l - 2);
        let pe = OctKey::edge_at(l - 1);
        let shift = 3 * (MAX_DEPTH - (l - 1)) as u32;
        let t = self.table;
        let mut fingers = vec![0usize; t.moff.len()];
        let mut out = Vec::new();
        let mut flush = |g: [u32; 3], mask: u8| {
            let es =
                &t.entries[t.start[mask as usize] as usize..t.start[mask as usize + 1] as usize];
            for &(mi, bits) in es {
                let m = t.moff[mi as usize];
                let mut ma = [0u32; 3];
                let mut outside = false;
                for ax in 0..3 {
                    let v = g[ax] as i64 + m[ax] as i64 * ge as i64;
                    outside |= v < 0 || v >= self.ext[ax] as i64;
                    ma[ax] = v as u32;
                }
                if outside {
                    continue;
                }
                let probe = OctKey::new(ma, MAX_DEPTH);
                if self.coarse_keys[0] > probe {
                    continue;
                }
                let c = last_le(self.coarse_keys, probe, fingers[mi as usize]);
                fingers[mi as usize] = c;
                let qk = self.coarse_keys[c];
                // the coarse leaf holds M when M's anchor lies in its Morton range
                if probe.morton() <= qk.last_descendant_morton() {
                    let q = self.coarse_idx[c] as usize;
                    let qm = qk.morton();
                    for c in 0..8u32 {
                        if bits & (1 << c) != 0 {
                            let na = [
                                ma[0] + pe * (c & 1),
                                ma[1] + pe * ((c >> 1) & 1),
                                ma[2] + pe * ((c >> 2) & 1),
                            ];
                            // the box's Morton offset inside leaf q, in level l-1 cells
                            let rel = (OctKey::new(na, l - 1).morton() - qm) >> shift;
                            out.push((q as u32, rel as u64));
                        }
                    }
                }
            }
        };
        let mut cur: Option<([u32; 3], u8)> = None;
        for k in chunk {
            if k.level() != l {
                continue;
            }
            let a = k.anchor();
            let g = a.map(|c| c & !(ge - 1));
            let pc = ((a[0] & pe != 0) as u8)
                | ((a[1] & pe != 0) as u8) << 1
                | ((a[2] & pe != 0) as u8) << 2;
            match &mut cur {
                Some((cg, mask)) if *cg == g => *mask |= 1 << pc,
                _ => {
                    if let Some((cg, mask)) = cur {
                        flush(cg, mask);
                    }
                    cur = Some((g, 1 << pc));
                }
            }
        }
        if let Some((cg, mask)) = cur {
            flush(cg, mask);
        }
        out
    }
}

/// Index of the last key `<= probe`, searched by galloping from `hint`. `keys[0] <= probe`.
#[inline]
pub(crate) fn last_le(keys: &[OctKey], probe: OctKey, hint: usize) -> usize {
    let len = keys.len();
    let h = hint.min(len - 1);
    let (mut lo, mut hi); // invariant: keys[lo] <= probe, keys[hi] > probe or hi == len
    let mut step = 1;
    if keys[h] <= probe {
        lo = h;
        loop {
            let c = h + step;
            if c >= len {
                hi = len;
                break;
            }
            if keys[c] <= probe {
                lo = c;
                step *= 2;
            } else {
                hi = c;
                break;
            }
        }
    } else {
        hi = h;
        loop {
            if step > h {
                lo = 0;
                break;
            }
            let c = h - step;
            if keys[c] <= probe {
                lo = c;
                break;
            }
            hi = c;
            step *= 2;
        }
    }
    while hi - lo > 1 {
        let mid = lo + (hi - lo) / 2;
        if keys[mid] <= probe {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    lo
}

/// Replaces each requested leaf by its minimal refinement exposing the requested boxes.
/// Fills `out` with the new leaves; returns the per-level counts removed and added.
fn apply(
    leaves: &[OctKey],
    req: &[(u32, u64)],
    target: u8,
    out: &mut Vec<OctKey>,
) -> (Vec<u64>, Vec<u64>) {
    // split the requests into groups of one leaf, then into parallel slices at group boundaries
    let mut bounds = vec![0usize];
    let step = req.len().div_ceil(64).max(1);
    let mut i = step;
    while i < req.len() {
        while i < req.len() && req[i].0 == req[i - 1].0 {
            i += 1;
        }
        if i < req.len() {
            bounds.push(i);
        }
        i += step;
    }
    bounds.push(req.len());
    let parts: Vec<(Vec<(u32, u32)>, Vec<OctKey>)> = bounds
        .par_windows(2)
        .map(|w| {
            let r = &req[w[0]..w[1]];
            let mut groups = Vec::new();
            let mut keys = Vec::new();
            let mut s = 0;
            let mut reqs: Vec<OctKey> = Vec::new();
            while s < r.len() {
                let mut e = s;
                while e < r.len() && r[e].0 == r[s].0 {
                    e += 1;
                }
                reqs.clear();
                let q = leaves[r[s].0 as usize];
                let shift = 3 * (MAX_DEPTH - target) as u32;
                reqs.extend(r[s..e].iter().map(|x| {
                    OctKey(((q.morton() + ((x.1 as u128) << shift)) << 5) | target as u128)
                }));
                let before = keys.len();
                split_into(leaves[r[s].0 as usize], &reqs, target, &mut keys);
                groups.push((r[s].0, (keys.len() - before) as u32));
                s = e;
            }
            (groups, keys)
        })
        .collect();
    let extra: usize = parts.iter().map(|p| p.1.len() - p.0.len()).sum();
    out.clear();
    out.reserve_exact(leaves.len() + extra);
    let mut removed = vec![0u64; MAX_DEPTH as usize + 1];
    let mut added = vec![0u64; MAX_DEPTH as usize + 1];
    let mut next = 0usize;
    for (groups, keys) in &parts {
        let mut k = 0usize;
        for &(idx, cnt) in groups {
            out.extend_from_slice(&leaves[next..idx as usize]);
            removed[leaves[idx as usize].level() as usize] += 1;
            for key in &keys[k..k + cnt as usize] {
                added[key.level() as usize] += 1;
            }
            out.extend_from_slice(&keys[k..k + cnt as usize]);
            k += cnt as usize;
            next = idx as usize + 1;
        }
    }
    out.extend_from_slice(&leaves[next..]);
    (removed, added)
}

/// Appends the coarsest refinement of `node` in which every box of `reqs` (sorted, inside
/// `node`, level `target`) is covered by leaves of level `>= target`.
fn split_into(node: OctKey, reqs: &[OctKey], target: u8, out: &mut Vec<OctKey>) {
    if reqs.is_empty() || node.level() >= target {
        out.push(node);
        return;
    }
    let mut rest = reqs;
    for c in node.children() {
        let end = c.last_descendant_morton();
        let k = rest.partition_point(|r| r.morton() <= end);
        split_into(c, &rest[..k], target, out);
        rest = &rest[k..];
    }
}

/// Brute-force check of the balance rule with `layers` transition layers: returns the first pair
/// of leaves `(i, j)` where leaf `j` lies too close to the finer leaf `i`. Quadratic; for tests.
pub fn find_violation(
    domain: &Domain,
    leaves: &[OctKey],
    mode: BalanceMode,
    layers: u32,
) -> Option<(usize, usize)> {
    let _ = domain;
    let n = layers as i64;
    for (i, a) in leaves.iter().enumerate() {
        let la = a.level();
        if la < 2 {
            continue;
        }
        // the parent grown by n parent-size cells
        let p = a.parent();
        let pa = p.anchor().map(|c| c as i64);
        let pe = p.edge() as i64;
        for (j, b) in leaves.iter().enumerate() {
            if b.level() + 2 > la {
                continue;
            }
            let ba = b.anchor().map(|c| c as i64);
            let be = b.edge() as i64;
            // per axis: overlap of the open intervals with the grown parent, and whether that axis
            // needed growing (face mode allows one grown axis)
            let mut grown_axes = 0;
            let mut hit = true;
            for ax in 0..3 {
                let (lo, hi) = (pa[ax] - n * pe, pa[ax] + pe + n * pe);
                if !(ba[ax] < hi && ba[ax] + be > lo) {
                    hit = false;
                    break;
                }
                if !(ba[ax] < pa[ax] + pe && ba[ax] + be > pa[ax]) {
                    grown_axes += 1;
                }
            }
            if hit && (mode == BalanceMode::Full || grown_axes <= 1) {
                return Some((i, j));
            }
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tree::Octree;
    use octocut_surface::{Aabb, Vec3};

    fn refine_corner(d: &Domain, depth: u8) -> Vec<OctKey> {
        // refine toward the point (0.3, 0.3, 0.3) of the unit box
        let mut leaves = d.base_keys();
        for _ in 0..depth {
            let mut next = Vec::new();
            for k in leaves {
                let b = d.key_box(k);
                if b.contains_point(Vec3::splat(0.3)) {
                    next.extend(k.children());
                } else {
                    next.push(k);
                }
            }
            leaves = next;
        }
        leaves
    }

    #[test]
    fn last_le_matches_binary_search() {
        let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
        let keys = Octree::uniform(d, 2).into_leaves();
        for (i, k) in keys.iter().enumerate() {
            let probe = OctKey::new(k.anchor(), MAX_DEPTH);
            for hint in [0, 5, 63, i] {
                assert_eq!(last_le(&keys, probe, hint), i);
            }
        }
    }

    #[test]
    fn point_refinement_balances_to_brute_force_rule() {
        let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)), 1.0).unwrap();
        let leaves = refine_corner(&d, 6);
        assert!(find_violation(&d, &leaves, BalanceMode::Full, 1).is_some());
        for (mode, layers) in [
            (BalanceMode::Full, 1),
            (BalanceMode::Face, 1),
            (BalanceMode::Full, 2),
            (BalanceMode::Face, 3),
        ] {
            let b = balance(&d, leaves.clone(), mode, layers).unwrap();
            let t = Octree::from_sorted_leaves(d, b.clone());
            t.check_tiling().unwrap();
            assert_eq!(
                find_violation(&d, &b, mode, layers),
                None,
                "{mode:?} {layers}"
            );
            // idempotent
            assert_eq!(balance(&d, b.clone(), mode, layers).unwrap(), b);
            // coarsest: undoing any one split (merging 8 siblings) breaks the rule or the input
            let original: std::collections::HashSet<OctKey> = leaves.iter().copied().collect();
            let mut i = 0;
            while i + 8 <= b.len() {
                let p = if b[i].level() > 0 {
                    Some(b[i].parent())
                } else {
                    None
                };
                if let Some(p) = p {
                    if b[i..i + 8]
                        .iter()
                        .all(|k| k.level() == b[i].level() && k.parent() == p)
                        && b[i..i + 8].iter().all(|k| !original.contains(k))
                    {
                        let mut merged = b[..i].to_vec();
                        merged.push(p);
                        merged.extend_from_slice(&b[i + 8..]);
                        assert!(find_violation(&d, &merged, mode, layers).is_some());
                        i += 8;
                        continue;
                    }
                }
                i += 1;
            }
        }
    }
}
