//! Octree stage: tiling, 2:1 balance, criteria and determinism, checked against brute force and
//! analytic geometry on small trees.

use glam::DVec3 as Vec3;
use octocut_octree::{
    balance, estimate, estimate_with_budget, leaf_regions, refine, refine_unbalanced, BalanceMode,
    Domain, GapSpec, OctKey, Octree, OctreeError, RefineSpec, RegionShape, SizeRegion, SurfaceRule,
    TagSel, DIRECTIONS, MAX_DEPTH,
};
use octocut_surface::{Aabb, Surface, SurfaceIndex};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

// ---------- generators ----------

fn uv_sphere(n: usize, c: Vec3, r: f64, tag: &str) -> Surface {
    octocut_surface::shapes::uv_sphere(c, r, 2 * n as u32, n as u32, tag)
}

/// The closed box `[lo, hi]` as 12 outward triangles.
fn block(lo: Vec3, hi: Vec3, tag: &str) -> Surface {
    let mut s = Surface::unit_cube();
    for v in &mut s.vertices {
        *v = lo + *v * (hi - lo);
    }
    s.tag_names = vec![tag.to_string()];
    s
}

fn random_soup(seed: u64, n: usize, lo: f64, hi: f64) -> Surface {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let tris: Vec<[Vec3; 3]> = (0..n)
        .map(|_| {
            let c = Vec3::new(
                rng.random_range(lo..hi),
                rng.random_range(lo..hi),
                rng.random_range(lo..hi),
            );
            let mut v = || {
                c + 0.2
                    * Vec3::new(
                        rng.random_range(-1.0..1.0),
                        rng.random_range(-1.0..1.0),
                        rng.random_range(-1.0..1.0),
                    )
            };
            [v(), v(), v()]
        })
        .collect();
    Surface::from_soup(&tris, "soup")
}

fn unit_domain(base: f64, lo: f64, hi: f64) -> Domain {
    Domain::new(Aabb::new(Vec3::splat(lo), Vec3::splat(hi)), base).unwrap()
}

fn surf_rule(tag: TagSel, size: f64) -> SurfaceRule {
    SurfaceRule {
        tag,
        size,
        finest_size: None,
    }
}

// ---------- independent brute-force checks ----------

/// Closed boxes of two leaves touch or overlap (face, edge or corner adjacency when disjoint).
fn touching(a: OctKey, b: OctKey) -> bool {
    let (aa, ae, ba, be) = (a.anchor(), a.edge() as u64, b.anchor(), b.edge() as u64);
    (0..3).all(|i| (aa[i] as u64) <= ba[i] as u64 + be && (ba[i] as u64) <= aa[i] as u64 + ae)
}

/// Axes on which the two boxes' interiors overlap.
fn overlap_axes(a: OctKey, b: OctKey) -> usize {
    let (aa, ae, ba, be) = (a.anchor(), a.edge() as u64, b.anchor(), b.edge() as u64);
    (0..3)
        .filter(|&i| (aa[i] as u64) < ba[i] as u64 + be && (ba[i] as u64) < aa[i] as u64 + ae)
        .count()
}

/// Common practice (2:1 balance): touching leaves differ by at most one level. Face mode only
/// compares leaves sharing a face patch (interiors overlap on two axes).
fn brute_21(leaves: &[OctKey], mode: BalanceMode) -> Result<(), String> {
    for (i, a) in leaves.iter().enumerate() {
        for b in &leaves[i + 1..] {
            if (a.level() as i32 - b.level() as i32).abs() > 1 && touching(*a, *b) {
                if mode == BalanceMode::Full || overlap_axes(*a, *b) >= 2 {
                    return Err(format!(
                        "{a:?} (level {}) touches {b:?} (level {})",
                        a.level(),
                        b.level()
                    ));
                }
            }
        }
    }
    Ok(())
}

/// Transition layers: no leaf two or more levels coarser than leaf `a` reaches into `a` grown by
/// `n` cells of the next coarser level (`2 n` edges of `a`).
fn brute_layers(leaves: &[OctKey], n: u64) -> Result<(), String> {
    for a in leaves {
        let (aa, ae) = (a.anchor().map(|c| c as i64), a.edge() as i64);
        let g = 2 * n as i64 * ae;
        for b in leaves {
            if b.level() + 2 > a.level() {
                continue;
            }
            let (ba, be) = (b.anchor().map(|c| c as i64), b.edge() as i64);
            if (0..3).all(|i| ba[i] < aa[i] + ae + g && ba[i] + be > aa[i] - g) {
                return Err(format!("{b:?} is within {n} layers of {a:?}"));
            }
        }
    }
    Ok(())
}

/// Every input leaf is kept or refined (the output never coarsens).
fn refines(input: &Octree, out: &[OctKey]) -> bool {
    out.iter().all(|k| {
        let i = input.locate(k.anchor()).unwrap();
        input.leaves()[i as usize].level() <= k.level()
    })
}

// ---------- domain ----------

#[test]
fn domain_grows_symmetrically_to_whole_base_cells() {
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    for _ in 0..200 {
        let lo = Vec3::new(
            rng.random_range(-5.0..5.0),
            rng.random_range(-5.0..5.0),
            rng.random_range(-5.0..5.0),
        );
        let e = Vec3::new(
            rng.random_range(0.1..4.0),
            rng.random_range(0.1..4.0),
            rng.random_range(0.1..4.0),
        );
        let base = rng.random_range(0.05..2.0);
        let req = Aabb::new(lo, lo + e);
        let d = Domain::new(req, base).unwrap();
        let b = d.bounds();
        for ax in 0..3 {
            let n = d.counts[ax] as f64;
            // the fewest whole base cells holding the extent
            assert!(n * base >= e[ax] * (1.0 - 1e-9) && (n - 1.0) * base < e[ax]);
            // grown by the same amount on both sides (centre kept)
            assert!((b.center()[ax] - req.center()[ax]).abs() < 1e-9 * (1.0 + lo[ax].abs()));
        }
        assert!(b.min.cmple(req.min + 1e-9).all() && b.max.cmpge(req.max - 1e-9).all());
    }
    assert!(Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 0.0).is_err());
    assert!(Domain::new(Aabb::new(Vec3::ONE, Vec3::ZERO), 1.0).is_err());
}

// ---------- surface criterion, tiling, 2:1 ----------

#[test]
fn surface_sizes_per_tag_are_met_and_the_tree_tiles_and_balances() {
    // two tags: a sphere at size 1/8 and a block at size 1/32 (of a base cell of edge 2)
    let mut s = uv_sphere(12, Vec3::new(-0.4, 0.0, 0.0), 0.45, "ball");
    s.append(block(
        Vec3::new(0.3, -0.2, -0.2),
        Vec3::new(0.6, 0.2, 0.3),
        "brick",
    ));
    let index = SurfaceIndex::new(s);
    let d = unit_domain(2.0, -1.0, 1.0);
    let mut spec = RefineSpec::default();
    spec.surface.push(surf_rule(TagSel::All, 0.25));
    spec.surface
        .push(surf_rule(TagSel::Name("ball".into()), 2.0 / 16.0));
    spec.surface
        .push(surf_rule(TagSel::Name("brick".into()), 2.0 / 64.0));
    let r = refine(&d, &index, &spec).unwrap();
    r.tree.check_tiling().unwrap();
    assert_eq!(r.plan.tag_level, vec![4, 6]); // exact: 2 / 2^4 = 1/8, 2 / 2^6 = 1/32
    let surface = index.surface();
    let mut hits = Vec::new();
    let mut at_size = [false; 2];
    for k in r.tree.leaves() {
        let b = d.key_box(*k);
        index.triangles_in_box(&b, &mut hits);
        for &t in &hits {
            let tag = surface.tags[t as usize].0 as usize;
            let size = [2.0 / 16.0, 2.0 / 64.0][tag];
            assert!(
                b.extent().x <= size * (1.0 + 1e-12),
                "leaf {k:?} crossed by tag {tag} is too big"
            );
            at_size[tag] |= b.extent().x == size;
        }
    }
    // the sizes are reached, not exceeded by a wide margin (a check that can fail both ways)
    assert_eq!(at_size, [true, true]);
    brute_21(r.tree.leaves(), BalanceMode::Full).unwrap();
    assert!(r.stats.leaves > r.stats.leaves_refined);
}

#[test]
fn balance_is_idempotent_never_coarsens_and_holds_for_random_soups() {
    for seed in 0..4u64 {
        let index = SurfaceIndex::new(random_soup(seed, 6, 0.1, 0.9));
        let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)), 1.0).unwrap();
        let mut spec = RefineSpec::default();
        spec.surface.push(surf_rule(TagSel::All, 1.0 / 32.0));
        let (raw, _) = refine_unbalanced(&d, &index, &spec).unwrap();
        let raw_tree = Octree::from_sorted_leaves(d, raw.clone());
        raw_tree.check_tiling().unwrap();
        for (mode, layers) in [
            (BalanceMode::Full, 1),
            (BalanceMode::Face, 1),
            (BalanceMode::Full, 2),
        ] {
            let b = balance(&d, raw.clone(), mode, layers).unwrap();
            Octree::from_sorted_leaves(d, b.clone())
                .check_tiling()
                .unwrap();
            assert!(refines(&raw_tree, &b));
            assert_eq!(
                balance(&d, b.clone(), mode, layers).unwrap(),
                b,
                "idempotent"
            );
            brute_21(&b, mode).unwrap();
            if mode == BalanceMode::Full {
                brute_layers(&b, layers as u64).unwrap();
            }
        }
        // the unbalanced tree really violates 2:1 (so the checks above can fail)
        assert!(brute_21(&raw, BalanceMode::Full).is_err());
    }
}

#[test]
fn transition_layers_grade_sizes_away_from_walls() {
    let index = SurfaceIndex::new(uv_sphere(8, Vec3::splat(0.5), 0.07, "ball"));
    let d = unit_domain(1.0, 0.0, 1.0);
    let mut counts = Vec::new();
    for layers in 1..=3u32 {
        let mut spec = RefineSpec {
            transition_layers: layers,
            ..Default::default()
        };
        spec.surface.push(surf_rule(TagSel::All, 1.0 / 64.0));
        let r = refine(&d, &index, &spec).unwrap();
        r.tree.check_tiling().unwrap();
        brute_layers(r.tree.leaves(), layers as u64).unwrap();
        if layers == 1 {
            // plain 2:1 does not give two layers (so the check above can fail)
            assert!(brute_layers(r.tree.leaves(), 2).is_err());
        }
        counts.push(r.tree.leaves().len());
    }
    // more layers, strictly more leaves
    assert!(counts[0] < counts[1] && counts[1] < counts[2], "{counts:?}");
    let spec = RefineSpec {
        transition_layers: 9,
        ..Default::default()
    };
    assert!(matches!(
        refine(&d, &index, &spec),
        Err(OctreeError::BadLayers { .. })
    ));
}

// ---------- regions ----------

#[test]
fn regions_bound_the_size_of_every_leaf_they_overlap() {
    let index = SurfaceIndex::new(Surface::default());
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)), 1.0).unwrap();
    let mut spec = RefineSpec::default();
    let boxr = SizeRegion::new(
        "box",
        RegionShape::Box {
            min: Vec3::new(0.1, 0.1, 0.1),
            max: Vec3::new(0.4, 0.3, 0.9),
        },
        1.0 / 16.0,
    );
    let sph = SizeRegion::new(
        "ball",
        RegionShape::Sphere {
            center: Vec3::new(1.5, 0.5, 0.5),
            radius: 0.2,
        },
        1.0 / 32.0,
    );
    let cyl = SizeRegion::new(
        "pipe",
        RegionShape::Cylinder {
            a: Vec3::new(0.6, 0.2, 0.2),
            b: Vec3::new(1.2, 0.8, 0.7),
            radius: 0.08,
        },
        1.0 / 32.0,
    );
    spec.regions = vec![boxr, sph, cyl];
    let r = refine(&d, &index, &spec).unwrap();
    r.tree.check_tiling().unwrap();
    brute_21(r.tree.leaves(), BalanceMode::Full).unwrap();
    let tags = leaf_regions(&r.tree, &spec.regions);
    let mut seen = [false; 3];
    for (k, tag) in r.tree.leaves().iter().zip(&tags) {
        let b = d.key_box(*k);
        let edge = b.extent().x;
        // exact: open boxes overlap when their open intervals overlap on every axis
        let in_box =
            b.min.cmplt(Vec3::new(0.4, 0.3, 0.9)).all() && b.max.cmpgt(Vec3::splat(0.1)).all();
        // exact: point-box distance below the radius
        let in_ball = b.distance_squared(Vec3::new(1.5, 0.5, 0.5)) < 0.04;
        // sampled: the centre or a corner lies inside the cylinder
        let mut in_pipe = false;
        for c in 0..9 {
            let p = if c == 8 {
                b.center()
            } else {
                Vec3::new(
                    [b.min.x, b.max.x][c & 1],
                    [b.min.y, b.max.y][(c >> 1) & 1],
                    [b.min.z, b.max.z][c >> 2],
                )
            };
            let (a, e) = (Vec3::new(0.6, 0.2, 0.2), Vec3::new(1.2, 0.8, 0.7));
            let u = (e - a).normalize();
            let t = (p - a).dot(u);
            in_pipe |= t > 0.0 && t < (e - a).length() && ((p - a) - t * u).length() < 0.08;
        }
        if in_box {
            assert!(edge <= 1.0 / 16.0);
        }
        if in_ball {
            assert!(edge <= 1.0 / 32.0);
        }
        if in_pipe {
            assert!(edge <= 1.0 / 32.0);
        }
        // the region tag is the first region holding the centre
        if let Some(t) = tag {
            seen[*t as usize] = true;
            assert!(spec.regions[*t as usize].shape.contains(b.center()));
        }
    }
    assert_eq!(seen, [true; 3]);
    // outside every region and its neighbourhood the tree stays coarse
    assert!(r.tree.leaves().iter().any(|k| k.level() <= 3));
}

#[test]
fn region_grading_grows_the_size_linearly() {
    let index = SurfaceIndex::new(Surface::default());
    let d = unit_domain(1.0, 0.0, 1.0);
    let mut reg = SizeRegion::new(
        "slab",
        RegionShape::Box {
            min: Vec3::new(0.0, 0.0, 0.0),
            max: Vec3::new(0.1, 1.0, 1.0),
        },
        1.0 / 128.0,
    );
    reg.grow_distance = Some(0.5);
    let spec = RefineSpec {
        regions: vec![reg],
        ..Default::default()
    };
    let r = refine(&d, &index, &spec).unwrap();
    for k in r.tree.leaves() {
        let b = d.key_box(*k);
        let dist = (b.min.x - 0.1).max(0.0);
        if dist < 0.5 {
            // exact: size(d) = s + (base - s) d / g
            let want = 1.0 / 128.0 + (1.0 - 1.0 / 128.0) * dist / 0.5;
            assert!(b.extent().x <= want * (1.0 + 1e-12), "{k:?} at {dist}");
        }
    }
}

// ---------- gaps ----------

#[test]
fn a_gap_between_parallel_plates_holds_the_requested_cells() {
    // two slabs facing each other across the gap 0 < z < w
    let w = 0.06;
    let mut s = block(Vec3::new(0.1, 0.1, 0.2), Vec3::new(0.9, 0.9, 0.4), "floor");
    s.append(block(
        Vec3::new(0.25, 0.25, 0.4 + w),
        Vec3::new(0.75, 0.75, 0.6),
        "body",
    ));
    let index = SurfaceIndex::new(s);
    let d = unit_domain(1.0, 0.0, 1.0);
    let cells = 4;
    let mut spec = RefineSpec::default();
    spec.surface.push(surf_rule(TagSel::All, 1.0 / 16.0));
    let count_across = |tree: &Octree, x: f64, y: f64| {
        // leaves whose interior the vertical segment through the gap crosses
        let mut n = 0;
        let steps = 2000;
        let mut last = None;
        for i in 1..steps {
            let z = 0.4 + w * i as f64 / steps as f64;
            let g = [
                (x / d.unit()) as u32,
                (y / d.unit()) as u32,
                (z / d.unit()) as u32,
            ];
            let leaf = tree.locate(g).unwrap();
            if Some(leaf) != last {
                n += 1;
                last = Some(leaf);
            }
        }
        n
    };
    let coarse = refine(&d, &index, &spec).unwrap();
    // surface size alone leaves the gap with fewer cells (so the check below can fail)
    assert!(count_across(&coarse.tree, 0.5, 0.5) < cells);
    spec.gap = Some(GapSpec {
        cells: cells as u32,
        finest_size: 1.0 / 1024.0,
        max_width: None,
    });
    let r = refine(&d, &index, &spec).unwrap();
    assert!(r.stats.gap_prisms > 0);
    r.tree.check_tiling().unwrap();
    for (x, y) in [(0.5, 0.5), (0.3, 0.3), (0.7, 0.4), (0.26, 0.74)] {
        let n = count_across(&r.tree, x, y);
        assert!(n >= cells, "{n} cells across the gap at ({x}, {y})");
    }
    // away from the gap the tree is not refined by it: the floor's far corner keeps the surface size
    let far = r
        .tree
        .locate([
            (0.12 / d.unit()) as u32,
            (0.12 / d.unit()) as u32,
            (0.41 / d.unit()) as u32,
        ])
        .unwrap();
    assert!(r.tree.leaves()[far as usize].level() <= 5);
}

// ---------- features ----------

#[test]
fn sharp_edges_refine_to_the_finest_size() {
    let index = SurfaceIndex::new(block(Vec3::splat(0.3), Vec3::splat(0.7), "b"));
    let d = unit_domain(1.0, 0.0, 1.0);
    let mut spec = RefineSpec {
        feature_angle_deg: Some(30.0),
        ..Default::default()
    };
    spec.surface.push(SurfaceRule {
        tag: TagSel::All,
        size: 1.0 / 8.0,
        finest_size: Some(1.0 / 64.0),
    });
    let r = refine(&d, &index, &spec).unwrap();
    let mut hits = Vec::new();
    let mut coarse_face = false;
    for k in r.tree.leaves() {
        let b = d.key_box(*k);
        index.triangles_in_box(&b, &mut hits);
        let normals: Vec<Vec3> = hits
            .iter()
            .map(|&t| index.surface().area_normal(t as usize).normalize())
            .collect();
        // exact: the cube's face normals are 90 degrees apart, so two distinct normals = an edge
        let edge = normals.iter().any(|n| n.dot(normals[0]) < 0.5);
        if edge {
            assert!(b.extent().x <= 1.0 / 64.0 + 1e-15, "{k:?} holds an edge");
        } else if !hits.is_empty() {
            coarse_face |= b.extent().x > 1.0 / 64.0;
        }
    }
    assert!(
        coarse_face,
        "flat faces must stay coarser than the finest size"
    );
}

// ---------- determinism ----------

#[test]
fn results_do_not_depend_on_the_thread_count() {
    let run = |threads: usize, seed: u64| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let mut s = random_soup(seed, 30, 0.2, 1.8);
            s.append(uv_sphere(10, Vec3::new(1.0, 0.5, 0.5), 0.3, "ball"));
            let index = SurfaceIndex::new(s);
            let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)), 0.5).unwrap();
            let mut spec = RefineSpec {
                feature_angle_deg: Some(40.0),
                transition_layers: 2,
                ..Default::default()
            };
            spec.surface.push(SurfaceRule {
                tag: TagSel::All,
                size: 1.0 / 32.0,
                finest_size: Some(1.0 / 128.0),
            });
            spec.regions.push(SizeRegion::new(
                "r",
                RegionShape::Sphere {
                    center: Vec3::new(0.3, 0.3, 0.3),
                    radius: 0.2,
                },
                1.0 / 64.0,
            ));
            spec.gap = Some(GapSpec {
                cells: 3,
                finest_size: 1.0 / 256.0,
                max_width: Some(0.2),
            });
            let r = refine(&d, &index, &spec).unwrap();
            let (raw, _) = refine_unbalanced(&d, &index, &spec).unwrap();
            (
                r.tree.into_leaves(),
                balance(&d, raw, BalanceMode::Face, 3).unwrap(),
            )
        })
    };
    for seed in [11, 12] {
        let one = run(1, seed);
        let two = run(2, seed);
        assert!(one.0.len() > 10_000);
        assert_eq!(one, two);
    }
}

// ---------- neighbours ----------

#[test]
fn neighbours_match_brute_force_in_all_26_directions() {
    for (seed, balanced) in [(3u64, true), (4, false)] {
        let index = SurfaceIndex::new(random_soup(seed, 3, 0.2, 0.8));
        let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)), 1.0).unwrap();
        let mut spec = RefineSpec::default();
        spec.surface.push(surf_rule(TagSel::All, 1.0 / 32.0));
        let tree = if balanced {
            refine(&d, &index, &spec).unwrap().tree
        } else {
            Octree::from_sorted_leaves(d, refine_unbalanced(&d, &index, &spec).unwrap().0)
        };
        let leaves = tree.leaves();
        assert!(leaves.len() > 500);
        let mut got = Vec::new();
        for (i, a) in leaves.iter().enumerate() {
            let (aa, ae) = (a.anchor().map(|c| c as i64), a.edge() as i64);
            for (di, dir) in DIRECTIONS.iter().enumerate() {
                tree.neighbours(i as u32, *dir, &mut got);
                // brute force: leaves overlapping the same-size box across `dir` that touch `a`
                let r: [i64; 3] = std::array::from_fn(|ax| aa[ax] + dir[ax] as i64 * ae);
                let want: Vec<u32> = (0..leaves.len() as u32)
                    .filter(|&j| {
                        let b = leaves[j as usize];
                        let (ba, be) = (b.anchor().map(|c| c as i64), b.edge() as i64);
                        (0..3).all(|ax| ba[ax] < r[ax] + ae && ba[ax] + be > r[ax])
                            && touching(*a, b)
                    })
                    .collect();
                assert_eq!(got, want, "leaf {i} dir {dir:?}");
                if di < 6 {
                    let mut f = Vec::new();
                    tree.face_neighbours(i as u32, di as u8, &mut f);
                    assert_eq!(f, want);
                }
            }
        }
    }
    assert_eq!(DIRECTIONS.len(), 26);
    assert!(DIRECTIONS.iter().all(|d| d.iter().any(|&c| c != 0)));
}

#[test]
fn locate_finds_the_leaf_holding_each_cell() {
    let index = SurfaceIndex::new(random_soup(9, 4, 0.2, 0.8));
    let d = unit_domain(1.0, 0.0, 1.0);
    let mut spec = RefineSpec::default();
    spec.surface.push(surf_rule(TagSel::All, 1.0 / 32.0));
    let tree = refine(&d, &index, &spec).unwrap().tree;
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let ext = d.grid_extent();
    for _ in 0..2000 {
        let g = [
            rng.random_range(0..ext[0]),
            rng.random_range(0..ext[1]),
            rng.random_range(0..ext[2]),
        ];
        let i = tree.locate(g).unwrap();
        let k = tree.leaves()[i as usize];
        let (a, e) = (k.anchor(), k.edge());
        assert!((0..3).all(|ax| a[ax] <= g[ax] && g[ax] < a[ax] + e));
        assert_eq!(
            tree.locate_from(g, rng.random_range(0..tree.leaves().len() as u32)),
            Some(i)
        );
    }
    assert_eq!(tree.locate([ext[0], 0, 0]), None);
}

// ---------- estimate and limits ----------

#[test]
fn estimate_is_exact_when_small_and_close_when_extrapolated() {
    let index = SurfaceIndex::new(uv_sphere(24, Vec3::splat(0.5), 0.3, "ball"));
    let d = unit_domain(1.0, 0.0, 1.0);
    let mut spec = RefineSpec::default();
    spec.surface.push(surf_rule(TagSel::All, 1.0 / 128.0));
    let actual = refine(&d, &index, &spec).unwrap().stats.leaves;
    assert_eq!(estimate(&d, &index, &spec).unwrap().leaves, actual);
    let e = estimate_with_budget(&d, &index, &spec, 2_000).unwrap();
    assert!(!e.exact && e.measured_level < 7);
    let ratio = e.leaves as f64 / actual as f64;
    assert!(
        (0.5..2.0).contains(&ratio),
        "estimate {} for {actual}",
        e.leaves
    );
    assert!(e.memory_bytes >= 16 * e.leaves);
}

#[test]
fn too_many_leaves_is_a_clear_error() {
    let index = SurfaceIndex::new(uv_sphere(12, Vec3::splat(0.5), 0.3, "ball"));
    let d = unit_domain(1.0, 0.0, 1.0);
    let mut spec = RefineSpec {
        max_leaves: Some(1000),
        ..Default::default()
    };
    spec.surface.push(surf_rule(TagSel::All, 1.0 / 256.0));
    let err = refine(&d, &index, &spec).unwrap_err();
    assert_eq!(err, OctreeError::TooManyLeaves { limit: 1000 });
    assert!(err.to_string().contains("more than 1000 leaves"));
    // sizes below the finest level clamp to MAX_DEPTH in the plan
    spec.surface[0].size = 1e-12;
    spec.max_leaves = Some(10);
    let plan = octocut_octree::LevelPlan::new(&d, index.surface(), &spec).unwrap();
    assert_eq!(plan.max_level, MAX_DEPTH);
}

// ---------- configuration ----------

#[test]
fn spec_round_trips_through_json_and_defaults_fill_in() {
    let mut spec = RefineSpec {
        feature_angle_deg: Some(30.0),
        transition_layers: 2,
        ..Default::default()
    };
    spec.surface.push(SurfaceRule {
        tag: TagSel::Name("wing".into()),
        size: 0.1,
        finest_size: Some(0.01),
    });
    spec.surface.push(surf_rule(TagSel::All, 0.5));
    spec.regions.push(SizeRegion {
        name: "pipe".into(),
        shape: RegionShape::Cylinder {
            a: Vec3::ZERO,
            b: Vec3::X,
            radius: 0.2,
        },
        size: 0.05,
        grow_distance: Some(1.0),
    });
    spec.gap = Some(GapSpec {
        cells: 3,
        finest_size: 0.001,
        max_width: None,
    });
    let j = serde_json::to_string(&spec).unwrap();
    assert_eq!(serde_json::from_str::<RefineSpec>(&j).unwrap(), spec);
    assert_eq!(
        serde_json::from_str::<RefineSpec>("{}").unwrap(),
        RefineSpec::default()
    );
}
