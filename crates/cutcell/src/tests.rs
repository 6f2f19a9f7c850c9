//! Unit checks of the whole stage on small inputs.

use crate::test_support::*;
use crate::*;
use octocut_octree::{Domain, Octree};
use octocut_surface::{Aabb, Surface, SurfaceIndex, Vec3};

fn empty_index() -> SurfaceIndex {
    SurfaceIndex::new(Surface {
        tag_names: vec!["none".into()],
        ..Default::default()
    })
}

#[test]
fn uncut_graded_tree_gives_closed_conforming_mesh() {
    // a tree refined around a small sphere but cut by an empty surface: pure hanging-face mesh
    let sphere = SurfaceIndex::new(icosphere(Vec3::splat(0.37), 0.2, 1));
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = refined_tree(d, &sphere, 4);
    tree.check_tiling().unwrap();
    let out = cut_cells(&tree, &empty_index(), &CutOptions::default()).unwrap();
    let c = check_mesh(&out.mesh).unwrap();
    // exact: the leaves tile the unit box
    assert!((c.volume - 1.0).abs() < 1e-12);
    assert_eq!(out.mesh.n_cells(), tree.leaves().len());
    assert_eq!(out.report.cut_leaves, 0);
}

#[test]
fn sphere_volume_and_closure() {
    let s = icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 3);
    let exact = s.enclosed_volume();
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = refined_tree(d, &index, 4);
    let out = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
    let c = check_mesh(&out.mesh).unwrap();
    assert!((c.volume - out.report.fluid_volume).abs() < 1e-9);
    // divergence theorem on the input polyhedron: fluid = box - body (h = 1/16 here)
    let err = (c.volume - (1.0 - exact)).abs();
    // the walls are secants between surface points at most a cell diagonal sqrt(3) h apart:
    // a chord of length L on a sphere of radius R sags L^2 / (8 R) (circle geometry), so the
    // volume error stays below area * 3 h^2 / (8 R) (measured: 2.3e-3 here)
    let (h, r) = (1.0 / 16.0, 0.3);
    let bound = 4.0 * std::f64::consts::PI * r * r * 3.0 * h * h / (8.0 * r);
    assert!(err < bound, "volume error {err} above {bound}");
    // inside
    let opts = CutOptions {
        fluid: FluidSide::Inside,
        ..Default::default()
    };
    let inside = cut_cells(&tree, &index, &opts).unwrap();
    let ci = check_mesh(&inside.mesh).unwrap();
    assert!(
        (ci.volume - exact).abs() < bound,
        "inside volume {} vs {exact}",
        ci.volume
    );
}

#[test]
fn uniform_tree_cube_body_is_exact() {
    let mut s = Surface::unit_cube();
    for v in &mut s.vertices {
        *v = *v * 1.01 + Vec3::splat(0.995);
    }
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::splat(3.0)), 1.0).unwrap();
    let tree = Octree::uniform(d, 2);
    let out = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
    let c = check_mesh(&out.mesh).unwrap();
    // exact: 27 - 1.01^3
    assert!(
        (c.volume - (27.0 - 1.01f64.powi(3))).abs() < 1e-9,
        "{}",
        c.volume
    );
}

#[test]
fn thread_count_does_not_change_output() {
    let s = icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 2);
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    // level 5: enough leaves and faces that the gathered chunks differ in size between the
    // thread counts (`util::gather_chunk`)
    let tree = refined_tree(d, &index, 5);
    let run = |n| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
            .install(|| cut_cells(&tree, &index, &CutOptions::default()).unwrap())
    };
    // the topology's leaf chunks do differ between 1 and 3 threads here
    let chunk = |n| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
            .install(|| crate::util::gather_chunk(tree.leaves().len(), 512, 1 << 17))
    };
    assert!(chunk(1) > chunk(3), "{} leaves", tree.leaves().len());
    let one = run(1);
    for b in [run(2), run(3)] {
        let a = &one;
        assert_eq!(a.mesh.points.len(), b.mesh.points.len());
        assert!(a
            .mesh
            .points
            .iter()
            .zip(&b.mesh.points)
            .all(|(p, q)| p.to_array().map(f64::to_bits) == q.to_array().map(f64::to_bits)));
        assert_eq!(a.mesh.face_vertices, b.mesh.face_vertices);
        assert_eq!(a.mesh.owner, b.mesh.owner);
    }
}

#[test]
fn region_tags_are_copied_and_bad_options_rejected() {
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = Octree::uniform(d, 1);
    let tags: Vec<u16> = (0..8).map(|i| i % 3).collect();
    let out =
        cut_cells_with_regions(&tree, &empty_index(), &CutOptions::default(), Some(&tags)).unwrap();
    assert_eq!(out.mesh.cell_region, tags);
    let untagged = cut_cells(&tree, &empty_index(), &CutOptions::default()).unwrap();
    assert!(untagged
        .mesh
        .cell_region
        .iter()
        .all(|&r| r == octocut_volmesh::NO_REGION));
    let err = cut_cells_with_regions(
        &tree,
        &empty_index(),
        &CutOptions::default(),
        Some(&tags[..3]),
    );
    assert_eq!(
        err.unwrap_err(),
        CutError::RegionCount {
            given: 3,
            leaves: 8
        }
    );
    let bad = CutOptions {
        small_cell_fraction: 1.5,
        ..Default::default()
    };
    assert_eq!(
        cut_cells(&tree, &empty_index(), &bad).unwrap_err(),
        CutError::BadFraction(1.5)
    );
    let far = CutOptions {
        fluid: FluidSide::Point(Vec3::splat(5.0)),
        ..Default::default()
    };
    assert!(matches!(
        cut_cells(&tree, &empty_index(), &far),
        Err(CutError::PointOutsideDomain(_))
    ));
}

#[test]
fn no_small_cut_cell_survives_merging() {
    let s = icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 2);
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = refined_tree(d, &index, 4);
    let unmerged = CutOptions {
        small_cell_fraction: 0.0,
        ..Default::default()
    };
    let a = cut_cells(&tree, &index, &unmerged).unwrap();
    let b = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
    // merging keeps the fluid volume (Quirk 1994: cells are united, not removed)
    let dropped: f64 = b.report.dropped_pieces.iter().map(|p| p.volume).sum();
    assert!((a.report.fluid_volume - b.report.fluid_volume - dropped).abs() < 1e-12);
    assert!(b.report.merged_cells > 0);
    assert_eq!(
        a.mesh.n_cells(),
        b.mesh.n_cells() + b.report.merged_cells + b.report.dropped_pieces.len()
    );
    // every cell of the merged mesh holds at least half of its level's cube
    let m = &b.mesh;
    let mut vol = vec![0.0; m.n_cells()];
    for f in 0..m.n_faces() {
        let v = m.face(f);
        let r = m.points[v[0] as usize];
        let mut fv = 0.0;
        for j in 1..v.len() - 1 {
            fv += r.dot(m.points[v[j] as usize].cross(m.points[v[j + 1] as usize])) / 6.0;
        }
        vol[m.owner[f] as usize] += fv;
        if f < m.n_interior_faces() {
            vol[m.neighbour[f] as usize] -= fv;
        }
    }
    for (c, &v) in vol.iter().enumerate() {
        let full = d.cell_size(m.cell_level[c]).powi(3);
        assert!(v >= 0.5 * full * (1.0 - 1e-9), "cell {c}: {v} of {full}");
    }
    check_mesh(m).unwrap();
}

#[test]
fn sheet_thinner_than_a_cell_is_reported() {
    // a 0.8 x 0.8 x 0.02 plate between grid planes of a uniform h = 1/4 tree
    let mut s = Surface::unit_cube();
    for v in &mut s.vertices {
        *v = Vec3::new(0.1 + 0.8 * v.x, 0.1 + 0.8 * v.y, 0.6 + 0.02 * v.z);
    }
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let out = cut_cells(&Octree::uniform(d, 2), &index, &CutOptions::default()).unwrap();
    check_mesh(&out.mesh).unwrap();
    assert!(out.report.warnings_total > 0);
    assert!(out
        .report
        .warnings
        .iter()
        .all(|w| w.reason.starts_with("feature below cell size")));
    // every warned cell holds part of the plate (z in 0.5..0.75 at this level)
    assert!(out
        .report
        .warnings
        .iter()
        .all(|w| (0.5..0.75).contains(&w.centre[2])));
}

#[test]
fn wall_faces_carry_the_tag_they_lie_on() {
    // a 1.01 cube whose top (z max) triangles carry a second tag
    let mut s = Surface::unit_cube();
    for v in &mut s.vertices {
        *v = *v * 1.01 + Vec3::splat(0.995);
    }
    s.tags[2] = octocut_surface::TagId(1);
    s.tags[3] = octocut_surface::TagId(1);
    s.tag_names = vec!["sides".into(), "top".into()];
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::splat(3.0)), 1.0).unwrap();
    let out = cut_cells(&Octree::uniform(d, 2), &index, &CutOptions::default()).unwrap();
    let m = &out.mesh;
    check_mesh(m).unwrap();
    let area = |name: &str| {
        let p = m.patches.iter().find(|p| p.name == name).unwrap();
        (p.start..p.start + p.count)
            .map(|f| {
                let v = m.face(f as usize);
                let mut n = Vec3::ZERO;
                for j in 0..v.len() {
                    n += m.points[v[j] as usize].cross(m.points[v[(j + 1) % v.len()] as usize]);
                }
                0.5 * n.length()
            })
            .sum::<f64>()
    };
    // exact: the top face has area 1.01^2, the five others 5 * 1.01^2
    let a = 1.01f64 * 1.01;
    assert!((area("top") - a).abs() < 1e-9 * a, "top {}", area("top"));
    assert!(
        (area("sides") - 5.0 * a).abs() < 1e-9 * a,
        "sides {}",
        area("sides")
    );
    assert!(matches!(
        m.patches[0].kind,
        octocut_volmesh::PatchKind::Wall { tag: 0 }
    ));
    assert_eq!(m.patches[2].name, "xmin");
}

#[test]
fn unbalanced_tree_still_gives_a_valid_mesh() {
    // refinement without 2:1 balance: faces carry several levels of hanging vertices
    let s = icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 2);
    let exact = s.enclosed_volume();
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let mut out = Vec::new();
    let mut stack: Vec<octocut_octree::OctKey> = d.base_keys();
    while let Some(k) = stack.pop() {
        let b = d.key_box(k);
        if k.level() < 5 && index.any_triangle_in_box(&b) {
            stack.extend(k.children().into_iter().rev());
        } else {
            out.push(k);
        }
    }
    let tree = Octree::from_sorted_leaves(d, out);
    tree.check_tiling().unwrap();
    let res = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
    let c = check_mesh(&res.mesh).unwrap();
    // divergence theorem over the input polyhedron; h = 1/32 at the surface
    assert!(
        (c.volume - (1.0 - exact)).abs() < 1e-3,
        "{} vs {}",
        c.volume,
        1.0 - exact
    );
}

fn cuboid(lo: Vec3, hi: Vec3) -> Surface {
    let mut s = Surface::unit_cube();
    for v in &mut s.vertices {
        *v = lo + *v * (hi - lo);
    }
    s
}

#[test]
fn faces_in_grid_planes_and_on_the_box_floor_cut_exactly() {
    // flat faces at round coordinates: every face of the body lies in a grid plane (h = 1/8)
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = Octree::uniform(d, 3);
    // A crossing within T_EPS of a grid vertex is clamped to T_EPS (crossing.rs): walls may
    // move by up to T_EPS h (h = 1/8), times the wall area (at most 1.5). Observed: 6e-16 for
    // the floating cube, 5.5e-6 on the floor, 1.1e-5 against three box sides.
    let tol = crate::crossing::T_EPS / 8.0 * 1.5;
    for (lo, hi) in [
        (Vec3::splat(0.25), Vec3::splat(0.75)),
        // resting on the box floor z = 0
        (Vec3::new(0.25, 0.25, 0.0), Vec3::new(0.75, 0.75, 0.5)),
        // touching the box sides x = 1 and y = 0 as well
        (Vec3::new(0.5, 0.0, 0.0), Vec3::new(1.0, 0.5, 0.5)),
    ] {
        let index = SurfaceIndex::new(cuboid(lo, hi));
        let out = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
        let v = out.mesh.validate();
        assert!(v.is_valid(), "{lo} {hi}: {:?}", v.problems);
        let m = check_mesh(&out.mesh).unwrap();
        // exact: unit box minus the cuboid's volume
        let exact = 1.0 - (hi - lo).element_product();
        assert!(
            (m.volume - exact).abs() < tol,
            "{lo} {hi}: {} vs {exact}",
            m.volume
        );
        assert!((out.report.fluid_volume - m.volume).abs() < 1e-12);
        // box sides stay exactly where they were asked
        for p in &out.mesh.points {
            for a in 0..3 {
                assert!(p[a] >= 0.0 && p[a] <= 1.0, "{p}");
            }
        }
    }
}

#[test]
fn surface_through_grid_vertices_stays_valid_and_local() {
    // an octahedron whose six vertices are grid vertices of the uniform tree (h = 1/8)
    let c = Vec3::splat(0.5);
    let r = 0.25;
    let v: Vec<Vec3> = [
        Vec3::X,
        Vec3::NEG_X,
        Vec3::Y,
        Vec3::NEG_Y,
        Vec3::Z,
        Vec3::NEG_Z,
    ]
    .iter()
    .map(|&a| c + r * a)
    .collect();
    let t = [
        [0, 2, 4],
        [2, 1, 4],
        [1, 3, 4],
        [3, 0, 4],
        [2, 0, 5],
        [1, 2, 5],
        [3, 1, 5],
        [0, 3, 5],
    ];
    let s = Surface {
        vertices: v,
        triangles: t.to_vec(),
        tags: vec![octocut_surface::TagId(0); 8],
        tag_names: vec!["octa".into()],
    };
    // exact: the regular octahedron of circumradius r has volume 4/3 r^3
    let exact = 4.0 / 3.0 * r * r * r;
    assert!((s.enclosed_volume() - exact).abs() < 1e-15);
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = Octree::uniform(d, 3);
    let out = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
    let m = check_mesh(&out.mesh).unwrap();
    assert!(out.mesh.validate().is_valid());
    // Each body vertex sits on a grid vertex and each body edge runs through grid vertices:
    // the cells there see corners of the body thinner than the crossing clamp, and one corner
    // tetrahedron (h^3 / 6) may be lost; the volume stays within one cell volume (h = 1/8).
    assert!(
        (m.volume - (1.0 - exact)).abs() < 0.125f64.powi(3),
        "{} vs {}",
        m.volume,
        1.0 - exact
    );
    // only the vertices of faces with ambiguous crossing counts are evaluated one by one,
    // not the whole band of 9^3 grid vertices
    assert!(
        out.report.winding_evaluations < 200,
        "{} winding evaluations",
        out.report.winding_evaluations
    );
}
