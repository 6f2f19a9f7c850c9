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
    for lv in 3..7 {
        let t = refined_tree(d, &index, lv);
        let o = cut_cells(&t, &index, &CutOptions::default()).unwrap();
        eprintln!(
            "level {lv}: err {:e} cells {} area {} vs {}",
            o.report.fluid_volume - (1.0 - exact),
            o.report.cells,
            o.report.wall_area,
            index.surface().area()
        );
    }
    assert!(err < 2e-3, "volume error {err}");
    // inside
    let opts = CutOptions {
        fluid: FluidSide::Inside,
        ..Default::default()
    };
    let inside = cut_cells(&tree, &index, &opts).unwrap();
    let ci = check_mesh(&inside.mesh).unwrap();
    assert!(
        (ci.volume - exact).abs() < 2e-3,
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
    let tree = refined_tree(d, &index, 4);
    let run = |n| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
            .install(|| cut_cells(&tree, &index, &CutOptions::default()).unwrap())
    };
    let (a, b) = (run(1), run(2));
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

#[test]
#[ignore]
fn debug_cube_walls() {
    let (centre, a, rx, ry) = (Vec3::new(0.5, 0.49, 0.51), 0.45, 0.4, 0.7);
    let s = rotated_cube(centre, a, rx, ry);
    let rot = glam::DMat3::from_rotation_y(ry) * glam::DMat3::from_rotation_x(rx);
    let dist = |p: Vec3| {
        let q = rot.transpose() * (p - centre);
        let d = q.abs() - Vec3::splat(0.5 * a);
        (d.max(Vec3::ZERO).length() + d.max_element().min(0.0)).abs()
    };
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = refined_tree(d, &index, 4);
    let out = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
    let m = &out.mesh;
    let h = 1.0 / 16.0;
    let mut bad = std::collections::BTreeSet::new();
    let (mut nbad, mut ns) = (0, 0);
    for p in &m.patches {
        if !matches!(p.kind, octocut_volmesh::PatchKind::Wall { .. }) {
            continue;
        }
        for f in p.start..p.start + p.count {
            let v = m.face(f as usize);
            let c0 = m.points[v[0] as usize];
            for j in 0..v.len() {
                let a0 = m.points[v[j] as usize];
                let b0 = m.points[v[(j + 1) % v.len()] as usize];
                for q in [a0, 0.5 * (a0 + b0), (c0 + a0 + b0) / 3.0] {
                    ns += 1;
                    if dist(q) > 0.05 * h {
                        nbad += 1;
                        bad.insert(m.owner[f as usize]);
                    }
                }
            }
        }
    }
    eprintln!(
        "{} bad cells of {}, {nbad} of {ns} samples",
        bad.len(),
        m.n_cells()
    );
    for &c in bad.iter().take(4) {
        eprintln!("cell {c} level {}", m.cell_level[c as usize]);
        for f in 0..m.n_faces() {
            if m.owner[f] == c || (f < m.n_interior_faces() && m.neighbour[f] == c) {
                let wall = f >= m.n_interior_faces()
                    && m.patches.iter().any(|p| {
                        matches!(p.kind, octocut_volmesh::PatchKind::Wall { .. })
                            && (p.start as usize..(p.start + p.count) as usize).contains(&f)
                    });
                let v = m.face(f);
                let s: Vec<String> = v
                    .iter()
                    .map(|&q| {
                        let p = m.points[q as usize];
                        format!(
                            "({:.4},{:.4},{:.4})d={:.3}",
                            p.x / h,
                            p.y / h,
                            p.z / h,
                            dist(p) / h
                        )
                    })
                    .collect();
                eprintln!("  {} {}", if wall { "W" } else { "F" }, s.join(" "));
            }
        }
    }
}
