//! Top-down refinement of the forest by the criteria of a [`RefineSpec`], then balance.
//!
//! Method: recursive subdivision of each base cell (the classic top-down octree build, e.g.
//! Samet 1990, "The Design and Analysis of Spatial Data Structures"), where each node carries the
//! ids of the triangles overlapping it and children keep the parent's triangles that overlap
//! them by the exact separating-axis test (Akenine-Moller 2001), and likewise the gap prisms. A
//! node is split when one criterion asks: a triangle whose tag size wants a finer level, a normal
//! spread above the feature angle (toward the tag's finest level), a gap prism, or a size region
//! near enough. Triangles and prisms that cannot ask for anything below a child are dropped from
//! its list. Subtrees are built in parallel and concatenated in Morton order.
//!
//! Invariants: every leaf crossed by a tag's surface has an edge at most the tag's size, every
//! leaf overlapping a region at most the region's size, and the result does not depend on the
//! thread count (each subtree's leaves depend only on that subtree).

use crate::balance::balance;
use crate::domain::Domain;
use crate::feature::FeatureTest;
use crate::gap::{find_gaps, GapPrism};
use crate::key::{OctKey, MAX_DEPTH};
use crate::region::SizeRegion;
use crate::spec::{LevelPlan, OctreeError, RefineSpec};
use crate::tree::Octree;
use octocut_surface::tribox::triangle_box_overlap;
use octocut_surface::{Aabb, SurfaceIndex, Vec3};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};

/// Counts of a refinement run.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct RefineStats {
    /// Leaves after the criteria, before balance.
    pub leaves_refined: u64,
    /// Leaves after balance.
    pub leaves: u64,
    /// Leaves per level after balance.
    pub leaves_per_level: Vec<u64>,
    /// Triangles that found a facing sheet across a gap.
    pub gap_prisms: u64,
}

/// A refined, balanced forest with its level plan.
#[derive(Clone, Debug)]
pub struct Refined {
    pub tree: Octree,
    pub plan: LevelPlan,
    pub stats: RefineStats,
}

/// Refines the forest over `domain` by `spec` toward the surface of `index`, then balances it.
pub fn refine(
    domain: &Domain,
    index: &SurfaceIndex,
    spec: &RefineSpec,
) -> Result<Refined, OctreeError> {
    let plan = LevelPlan::new(domain, index.surface(), spec)?;
    let (leaves, gap_prisms) =
        refine_leaves(domain, index, spec, &plan, MAX_DEPTH, spec.max_leaves)?;
    let leaves_refined = leaves.len() as u64;
    let leaves = balance(domain, leaves, spec.balance, spec.transition_layers)?;
    if let Some(limit) = spec.max_leaves {
        if leaves.len() as u64 > limit {
            return Err(OctreeError::TooManyLeaves { limit });
        }
    }
    let mut per = vec![0u64; MAX_DEPTH as usize + 1];
    for k in &leaves {
        per[k.level() as usize] += 1;
    }
    while per.len() > 1 && per[per.len() - 1] == 0 {
        per.pop();
    }
    let stats = RefineStats {
        leaves_refined,
        leaves: leaves.len() as u64,
        leaves_per_level: per,
        gap_prisms,
    };
    Ok(Refined {
        tree: Octree::from_sorted_leaves(*domain, leaves),
        plan,
        stats,
    })
}

/// The leaves the criteria ask for, before balance (sorted, tiling the domain), with the plan.
pub fn refine_unbalanced(
    domain: &Domain,
    index: &SurfaceIndex,
    spec: &RefineSpec,
) -> Result<(Vec<OctKey>, LevelPlan), OctreeError> {
    let plan = LevelPlan::new(domain, index.surface(), spec)?;
    let (leaves, _) = refine_leaves(domain, index, spec, &plan, MAX_DEPTH, spec.max_leaves)?;
    Ok((leaves, plan))
}

/// For each leaf, the index of the first region of `regions` holding its centre.
pub fn leaf_regions(tree: &Octree, regions: &[SizeRegion]) -> Vec<Option<u16>> {
    tree.leaves()
        .par_iter()
        .map(|k| {
            let c = tree.domain.key_box(*k).center();
            regions
                .iter()
                .position(|r| r.shape.contains(c))
                .map(|i| i.min(u16::MAX as usize) as u16)
        })
        .collect()
}

struct Region {
    region: SizeRegion,
    /// Boxes outside this cannot ask for anything.
    reach: Aabb,
    level: u8,
}

/// Everything the recursion reads.
struct Ctx<'a> {
    domain: &'a Domain,
    tris: Vec<[Vec3; 3]>,
    tbox: Vec<Aabb>,
    /// Surface level per triangle.
    tlevel: Vec<u8>,
    /// max(surface level, feature level) per triangle.
    need: Vec<u8>,
    normals: Vec<Vec3>,
    feature: Option<FeatureTest>,
    regions: Vec<Region>,
    prisms: Vec<GapPrism>,
    limit: u64,
    count: AtomicU64,
    abort: AtomicBool,
}

#[derive(Default)]
struct Scratch {
    t: [Vec<u32>; 8],
    p: [Vec<u32>; 8],
}

/// The leaves the criteria ask for (unbalanced), every level capped at `cap`, and the number of
/// gap prisms.
pub(crate) fn refine_leaves(
    domain: &Domain,
    index: &SurfaceIndex,
    spec: &RefineSpec,
    plan: &LevelPlan,
    cap: u8,
    limit: Option<u64>,
) -> Result<(Vec<OctKey>, u64), OctreeError> {
    let s = index.surface();
    let nt = s.triangles.len();
    let tag_need: Vec<u8> = (0..plan.tag_level.len())
        .map(|i| {
            plan.tag_level[i]
                .max(plan.tag_feature_level[i].unwrap_or(0))
                .min(cap)
        })
        .collect();
    let tris: Vec<[Vec3; 3]> = (0..nt).map(|t| s.corners(t)).collect();
    let tlevel: Vec<u8> = s
        .tags
        .iter()
        .map(|g| {
            plan.tag_level
                .get(g.0 as usize)
                .copied()
                .unwrap_or(0)
                .min(cap)
        })
        .collect();
    let need: Vec<u8> = s
        .tags
        .iter()
        .map(|g| tag_need.get(g.0 as usize).copied().unwrap_or(0))
        .collect();
    let prisms = match &spec.gap {
        Some(g) => {
            let coarsest = (0..plan.tag_level.len())
                .filter(|&i| plan.tag_level[i] > 0)
                .map(|i| domain.cell_size(plan.tag_level[i]))
                .fold(0.0f64, f64::max);
            let width = g.max_width.unwrap_or(
                g.cells as f64
                    * if coarsest > 0.0 {
                        coarsest
                    } else {
                        domain.base_size
                    },
            );
            let mut p = find_gaps(index, domain, g.cells, width, plan.gap_level.unwrap_or(0));
            for q in &mut p {
                q.level = q.level.min(cap);
            }
            p
        }
        None => Vec::new(),
    };
    let regions = spec
        .regions
        .iter()
        .zip(&plan.region_level)
        .map(|(r, &l)| Region {
            region: r.clone(),
            reach: r.shape.bounds().inflated(r.grow_distance.unwrap_or(0.0)),
            level: l.min(cap),
        })
        .collect();
    let ctx = Ctx {
        domain,
        tbox: tris.iter().map(|t| Aabb::from_points(*t)).collect(),
        normals: (0..nt)
            .map(|t| s.area_normal(t).normalize_or_zero())
            .collect(),
        tris,
        tlevel,
        need,
        feature: spec.feature_angle_deg.map(FeatureTest::new),
        regions,
        prisms,
        limit: limit.unwrap_or(u64::MAX),
        count: AtomicU64::new(0),
        abort: AtomicBool::new(false),
    };
    let nprisms = ctx.prisms.len() as u64;
    let items = ctx.frontier();
    let parts: Vec<Vec<OctKey>> = items
        .into_par_iter()
        .map_init(
            || {
                (0..=MAX_DEPTH)
                    .map(|_| Scratch::default())
                    .collect::<Vec<_>>()
            },
            |scratch, (key, t, p)| {
                let mut out = Vec::new();
                let l = key.level() as usize;
                ctx.dfs(key, &t, &p, &mut scratch[l..], &mut out);
                ctx.add(out.len() as u64 % 4096);
                out
            },
        )
        .collect();
    if ctx.abort.load(Ordering::Relaxed) {
        return Err(OctreeError::TooManyLeaves { limit: ctx.limit });
    }
    let total: usize = parts.iter().map(Vec::len).sum();
    let mut leaves = Vec::with_capacity(total);
    for p in parts {
        leaves.extend_from_slice(&p);
    }
    Ok((leaves, nprisms))
}

type Item = (OctKey, Vec<u32>, Vec<u32>);

impl Ctx<'_> {
    fn add(&self, n: u64) {
        if self.count.fetch_add(n, Ordering::Relaxed) + n > self.limit {
            self.abort.store(true, Ordering::Relaxed);
        }
    }

    /// The base cells with their triangle and prism lists, split further (breadth first, by a
    /// rule that depends only on the data) so that the parallel tasks are many and small.
    fn frontier(&self) -> Vec<Item> {
        let d = self.domain;
        let mut lists: Vec<(u32, u32, bool)> = Vec::new(); // (base cell linear index, id, is prism)
        let cell = |p: Vec3, ax: usize| {
            (((p[ax] - d.origin[ax]) / d.base_size).floor().max(0.0) as u32).min(d.counts[ax] - 1)
        };
        let push_range = |b: &Aabb, id: u32, prism: bool, lists: &mut Vec<(u32, u32, bool)>| {
            let lo = [cell(b.min, 0), cell(b.min, 1), cell(b.min, 2)];
            let hi = [cell(b.max, 0), cell(b.max, 1), cell(b.max, 2)];
            for z in lo[2]..=hi[2] {
                for y in lo[1]..=hi[1] {
                    for x in lo[0]..=hi[0] {
                        lists.push((x + d.counts[0] * (y + d.counts[1] * z), id, prism));
                    }
                }
            }
        };
        let bounds = d.bounds();
        for t in 0..self.tris.len() {
            if self.need[t] > 0 && self.tbox[t].intersects(&bounds) {
                push_range(&self.tbox[t], t as u32, false, &mut lists);
            }
        }
        for (i, p) in self.prisms.iter().enumerate() {
            if p.level > 0 && p.bounds.intersects(&bounds) {
                push_range(&p.bounds, i as u32, true, &mut lists);
            }
        }
        lists.sort_unstable();
        let e = OctKey::edge_at(0);
        let mut items: Vec<Item> = d
            .base_keys()
            .into_iter()
            .map(|k| (k, Vec::new(), Vec::new()))
            .collect();
        let pos = |k: OctKey| {
            let a = k.anchor();
            (a[0] / e + d.counts[0] * (a[1] / e + d.counts[1] * (a[2] / e))) as usize
        };
        let mut slot = vec![0usize; items.len()];
        for (i, it) in items.iter().enumerate() {
            slot[pos(it.0)] = i;
        }
        for (c, id, prism) in lists {
            let it = &mut items[slot[c as usize]];
            let b = d.key_box(it.0);
            if prism {
                if self.prisms[id as usize].overlaps(&b) {
                    it.2.push(id);
                }
            } else if triangle_box_overlap(&self.tris[id as usize], &b) {
                it.1.push(id);
            }
        }
        // split while the tasks are few, then split the heavy ones
        let total = self.tris.len().max(1);
        let heavy = (total / 128).max(2048);
        for round in 0..MAX_DEPTH {
            let few = items.len() < 256;
            if !few && items.iter().all(|it| it.1.len() <= heavy) {
                break;
            }
            let parts: Vec<(bool, Vec<Item>)> = items
                .into_par_iter()
                .map_init(Scratch::default, |scratch, (k, t, p)| {
                    let split = (few || t.len() > heavy) && self.wants(k, &d.key_box(k), &t, &p);
                    if !split {
                        return (false, vec![(k, t, p)]);
                    }
                    self.fill(k, &t, &p, scratch);
                    let kids = k.children();
                    let v = (0..8)
                        .map(|i| (kids[i], scratch.t[i].clone(), scratch.p[i].clone()))
                        .collect();
                    (true, v)
                })
                .collect();
            let changed = parts.iter().any(|p| p.0);
            let next: Vec<Item> = parts.into_iter().flat_map(|p| p.1).collect();
            items = next;
            if !changed || round > 12 {
                break;
            }
        }
        items
    }

    /// Does node `k` (box `b`) need splitting?
    fn wants(&self, k: OctKey, b: &Aabb, tris: &[u32], prisms: &[u32]) -> bool {
        let l = k.level();
        if l >= MAX_DEPTH {
            return false;
        }
        if tris.iter().any(|&t| self.tlevel[t as usize] > l) || !prisms.is_empty() {
            return true;
        }
        if !tris.is_empty() {
            if let Some(f) = &self.feature {
                if f.spread_exceeds(&self.normals, tris.iter().copied()) {
                    return true;
                }
            }
        }
        let edge = self.domain.cell_size(l);
        for r in &self.regions {
            if l < r.level && r.reach.intersects(b) {
                if let Some(s) = r.region.size_for_box(b, self.domain.base_size) {
                    if edge > s * (1.0 + 1e-12) {
                        return true;
                    }
                }
            }
        }
        false
    }

    /// Fills `sc` with the children's triangle and prism lists.
    fn fill(&self, k: OctKey, tris: &[u32], prisms: &[u32], sc: &mut Scratch) {
        let cl = k.level() + 1;
        let kids = k.children();
        let boxes: [Aabb; 8] = std::array::from_fn(|i| self.domain.key_box(kids[i]));
        let mid = boxes[0].max;
        for i in 0..8 {
            sc.t[i].clear();
            sc.p[i].clear();
        }
        for &t in tris {
            if self.need[t as usize] <= cl {
                continue;
            }
            let tb = &self.tbox[t as usize];
            let mut sides = [0u8; 3]; // bit 0: low half, bit 1: high half
            for ax in 0..3 {
                sides[ax] = (tb.min[ax] <= mid[ax]) as u8 | ((tb.max[ax] >= mid[ax]) as u8) << 1;
            }
            let single = sides.iter().all(|&s| s != 3);
            for (i, b) in boxes.iter().enumerate() {
                let ok = (0..3).all(|ax| sides[ax] & (1 << ((i >> ax) & 1)) != 0);
                if ok && (single || triangle_box_overlap(&self.tris[t as usize], b)) {
                    sc.t[i].push(t);
                }
            }
        }
        for &p in prisms {
            let pr = &self.prisms[p as usize];
            if pr.level <= cl {
                continue;
            }
            for (i, b) in boxes.iter().enumerate() {
                if pr.overlaps(b) {
                    sc.p[i].push(p);
                }
            }
        }
    }

    fn dfs(
        &self,
        k: OctKey,
        tris: &[u32],
        prisms: &[u32],
        scratch: &mut [Scratch],
        out: &mut Vec<OctKey>,
    ) {
        if self.abort.load(Ordering::Relaxed) {
            return;
        }
        let b = self.domain.key_box(k);
        if !self.wants(k, &b, tris, prisms) {
            out.push(k);
            if out.len() % 4096 == 0 {
                self.add(4096);
            }
            return;
        }
        let (this, deeper) = scratch.split_first_mut().expect("depth below MAX_DEPTH");
        self.fill(k, tris, prisms, this);
        for (i, c) in k.children().into_iter().enumerate() {
            self.dfs(c, &this.t[i], &this.p[i], deeper, out);
        }
    }
}
