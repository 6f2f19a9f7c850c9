//! Reference checks of the cut-cell stage against analytic volumes and areas and against the
//! exact volume of the input polyhedron (divergence theorem over its triangles).

use glam::DVec3 as Vec3;
use octocut_cutcell::test_support::{check_mesh, icosphere, refined_tree, rotated_cube, torus};
use octocut_cutcell::{cut_cells, CutOptions, CutOutput, FluidSide};
use octocut_octree::Domain;
use octocut_surface::{Aabb, Surface, SurfaceIndex};
use octocut_volmesh::PatchKind;
use rand::{RngExt, SeedableRng};
use std::f64::consts::PI;

fn unit_domain() -> Domain {
    Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap()
}

fn mesh(s: &Surface, level: u8, opts: &CutOptions) -> (CutOutput, f64) {
    let index = SurfaceIndex::new(s.clone());
    let tree = refined_tree(unit_domain(), &index, level);
    let out = cut_cells(&tree, &index, opts).unwrap();
    let c = check_mesh(&out.mesh).unwrap_or_else(|e| panic!("invalid mesh at level {level}: {e}"));
    // the mesh's own volume (divergence theorem) is the reported fluid volume
    assert!((c.volume - out.report.fluid_volume).abs() < 1e-9 * (1.0 + c.volume));
    (out, c.volume)
}

/// Observed orders log2(e_i / e_{i+1}) of an error sequence over halving cell sizes.
fn orders(e: &[f64]) -> Vec<f64> {
    e.windows(2)
        .map(|w| (w[0].abs() / w[1].abs()).log2())
        .collect()
}

fn volume_convergence(
    name: &str,
    s: &Surface,
    analytic_body: f64,
    levels: [u8; 3],
    opts: &CutOptions,
) -> Vec<f64> {
    // exact: divergence theorem over the input triangles
    let body = s.enclosed_volume();
    let mut errs = Vec::new();
    for lv in levels {
        let (out, v) = mesh(s, lv, opts);
        let e = v - (1.0 - body);
        eprintln!(
            "{name} level {lv}: fluid {v:.8} polyhedron ref {:.8} analytic ref {:.8} error {e:.3e} cells {} cut {} merged {} warnings {}",
            1.0 - body,
            1.0 - analytic_body,
            out.report.cells,
            out.report.cut_cells,
            out.report.merged_cells,
            out.report.warnings_total
        );
        errs.push(e);
    }
    let o = orders(&errs);
    eprintln!("{name}: observed volume orders {o:?}");
    o
}

/// Mean observed order over the two halvings, and the worst single step.
fn check_order(name: &str, o: &[f64], mean_min: f64) {
    let mean = o.iter().sum::<f64>() / o.len() as f64;
    assert!(
        mean >= mean_min && o.iter().all(|&x| x >= 1.0),
        "{name}: orders {o:?} below {mean_min}"
    );
}

#[test]
fn sphere_volume_converges_second_order() {
    let r = 0.3;
    let s = icosphere(Vec3::new(0.51, 0.48, 0.5), r, 3);
    // exact: sphere 4/3 pi r^3 (for scale; the polyhedron is the reference)
    let o = volume_convergence(
        "sphere",
        &s,
        4.0 / 3.0 * PI * r.powi(3),
        [4, 5, 6],
        &CutOptions::default(),
    );
    // observed (this run): orders 2.00, 1.97
    check_order("sphere", &o, 1.8);
}

#[test]
fn torus_volume_converges_second_order() {
    let (big, small) = (0.28, 0.1);
    let t = torus(Vec3::new(0.5, 0.49, 0.51), big, small, 48, 24);
    // the 15 degree facet ridges of this torus polyhedron are resolved as features
    let opts = CutOptions {
        feature_angle_deg: 10.0,
        ..Default::default()
    };
    // exact: Pappus, torus volume 2 pi^2 R r^2 (for scale)
    let o = volume_convergence(
        "torus",
        &t,
        2.0 * PI * PI * big * small * small,
        [4, 5, 6],
        &opts,
    );
    check_order("torus", &o, 1.8);
}

#[test]
fn rotated_cube_volume_converges_second_order() {
    let a = 0.45;
    let c = rotated_cube(Vec3::new(0.5, 0.49, 0.51), a, 0.4, 0.7);
    // exact: cube a^3 (rotation keeps volume)
    let o = volume_convergence("cube", &c, a.powi(3), [4, 5, 6], &CutOptions::default());
    // the walls follow the flat facets, edges and corners exactly except where a corner or an
    // edge tip pokes through a face between grid vertices, so the error is no smooth O(h^2)
    // term and the step orders scatter (observed errors 6.3e-6, 2.4e-8, 6.9e-8): asserted is
    // that every level stays within the second-order envelope of the coarsest one,
    // |e_l| <= 1.5 |e_4| 4^-(l - 4)
    let mut e = o.iter().scan(0.0, |acc, x| {
        *acc += x;
        Some(*acc)
    });
    for l in 1..=2 {
        let gained = e.next().unwrap();
        assert!(
            gained >= 2.0 * l as f64 - 1.5f64.log2(),
            "cube: error at level {} only {gained:.2} halvings below level 4 (orders {o:?})",
            4 + l
        );
    }
}

#[test]
fn sphere_wetted_area_converges() {
    let r = 0.3;
    let s = icosphere(Vec3::new(0.51, 0.48, 0.5), r, 3);
    // facet ridges (about 6 degrees here) resolved as features so the walls follow the facets
    let opts = CutOptions {
        feature_angle_deg: 3.0,
        ..Default::default()
    };
    let mut e = Vec::new();
    for lv in [4, 5, 6] {
        let (out, _) = mesh(&s, lv, &opts);
        let w = out.report.wall_area;
        // exact: sphere area 4 pi r^2 (for scale); reference: the polyhedron's own area
        eprintln!(
            "sphere area level {lv}: {w:.7} polyhedron {:.7} analytic {:.7}",
            s.area(),
            4.0 * PI * r * r
        );
        e.push(w - s.area());
    }
    let o = orders(&e);
    eprintln!("sphere area orders {o:?}");
    check_order("sphere area", &o, 1.8);
}

/// Unsigned distance from `p` to the surface of the rotated cube (box signed distance, common
/// practice).
fn cube_distance(p: Vec3, centre: Vec3, a: f64, rx: f64, ry: f64) -> f64 {
    let rot = glam::DMat3::from_rotation_y(ry) * glam::DMat3::from_rotation_x(rx);
    let q = rot.transpose() * (p - centre);
    let d = q.abs() - Vec3::splat(0.5 * a);
    (d.max(Vec3::ZERO).length() + d.max_element().min(0.0)).abs()
}

#[test]
fn rotated_cube_walls_follow_edges_and_corners() {
    let (centre, a, rx, ry) = (Vec3::new(0.5, 0.49, 0.51), 0.45, 0.4, 0.7);
    let s = rotated_cube(centre, a, rx, ry);
    for lv in [4u8, 5] {
        let h = 1.0 / (1u32 << lv) as f64;
        let (out, _) = mesh(&s, lv, &CutOptions::default());
        let m = &out.mesh;
        let mut worst: f64 = 0.0;
        let (mut n, mut far) = (0usize, 0usize);
        for p in &m.patches {
            if !matches!(p.kind, PatchKind::Wall { .. }) {
                continue;
            }
            for f in p.start..p.start + p.count {
                let v = m.face(f as usize);
                let c0 = m.points[v[0] as usize];
                // samples: vertices, edge midpoints and fan-triangle centroids
                for j in 0..v.len() {
                    let a0 = m.points[v[j] as usize];
                    let b0 = m.points[v[(j + 1) % v.len()] as usize];
                    for q in [a0, 0.5 * (a0 + b0), (c0 + a0 + b0) / 3.0] {
                        let d = cube_distance(q, centre, a, rx, ry);
                        worst = worst.max(d);
                        far += (d > 0.05 * h) as usize;
                        n += 1;
                    }
                }
            }
        }
        let share = far as f64 / n as f64;
        eprintln!(
            "cube walls level {lv}: {n} samples, {:.2} % beyond 0.05 h, worst {:.4} h",
            100.0 * share,
            worst / h
        );
        // required: every sample within 0.05 h (one-sided Hausdorff distance of the walls to
        // the cube); observed worst 0.032 h at level 4 and 0.042 h at level 5, where a cube
        // corner just outside a cell pokes through the face between its vertices
        assert!(
            far == 0 && worst <= 0.05 * h,
            "level {lv}: {:.2} % of wall samples beyond 0.05 h, worst {:.4} h",
            100.0 * share,
            worst / h
        );
    }
}

#[test]
fn prism_edges_through_grid_edges_are_exact() {
    // a square prism standing through the whole box, turned about z: its four vertical edges
    // poke through many grid edges between two fluid vertices and pierce every z face
    let (side, turn, centre) = (0.37, 0.6, Vec3::new(0.5, 0.49, 0.5));
    let mut s = Surface::unit_cube();
    let rot = glam::DMat3::from_rotation_z(turn);
    for p in &mut s.vertices {
        let q = (*p - Vec3::splat(0.5)) * Vec3::new(side, side, 1.3);
        *p = centre + rot * q;
    }
    let rot_t = rot.transpose();
    // outside: fluid pokes nowhere; inside: fluid pokes through edges between solid vertices
    for (lv, fluid) in [4u8, 5].into_iter().flat_map(|l| [(l, false), (l, true)]) {
        let h = 1.0 / (1u32 << lv) as f64;
        let opts = CutOptions {
            fluid: if fluid {
                FluidSide::Inside
            } else {
                FluidSide::Outside
            },
            ..Default::default()
        };
        let (out, v) = mesh(&s, lv, &opts);
        // exact: the prism's part inside the box is side^2 (the prism spans z); the box rest
        let want = if fluid {
            side * side
        } else {
            1.0 - side * side
        };
        eprintln!("prism level {lv} inside {fluid}: fluid {v:.12} exact {want:.12}");
        assert!((v - want).abs() < 1e-9, "level {lv}: fluid {v} vs {want}");
        // every wall vertex on a side of the prism (box signed distance, common practice)
        let m = &out.mesh;
        let mut worst: f64 = 0.0;
        for p in &m.patches {
            if !matches!(p.kind, PatchKind::Wall { .. }) {
                continue;
            }
            for f in p.start..p.start + p.count {
                for &q in m.face(f as usize) {
                    let l = rot_t * (m.points[q as usize] - centre);
                    let d = (l.x.abs().max(l.y.abs()) - 0.5 * side).abs();
                    worst = worst.max(d);
                }
            }
        }
        eprintln!(
            "prism level {lv} inside {fluid}: worst wall vertex {:.3e} h",
            worst / h
        );
        // the cut runs in a grid frame shifted by under 1e-6 h (see `grid_shift`)
        assert!(
            worst <= 2e-6 * h,
            "level {lv}: a wall vertex {:.3e} h off",
            worst / h
        );
    }
}

fn sphere_level5(s: &Surface) -> f64 {
    mesh(s, 5, &CutOptions::default()).1
}

#[test]
fn dirty_spheres_mesh_and_keep_their_volume() {
    let clean = icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 3);
    let reference = sphere_level5(&clean);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    // 3 % of the facets removed
    let mut holes = clean.clone();
    let keep: Vec<bool> = (0..holes.triangles.len())
        .map(|_| rng.random::<f64>() >= 0.03)
        .collect();
    let mut k = keep.iter();
    holes.triangles.retain(|_| *k.next().unwrap());
    holes.tags.truncate(holes.triangles.len());
    // 5 % of the facets flipped
    let mut flipped = clean.clone();
    for t in &mut flipped.triangles {
        if rng.random::<f64>() < 0.05 {
            t.swap(1, 2);
        }
    }
    // every facet twice
    let mut doubled = clean.clone();
    doubled.append(clean.clone());
    for (name, s, tol) in [
        ("holes", &holes, 2e-3),
        ("flipped", &flipped, 2e-3),
        ("doubled", &doubled, 1e-9),
    ] {
        let v = sphere_level5(s);
        eprintln!("{name}: fluid {v:.7} clean {reference:.7}");
        assert!(
            (v - reference).abs() <= tol,
            "{name}: {v} vs clean {reference}"
        );
    }
    // two overlapping spheres: union volume V1 + V2 - lens (spherical caps, handbook formula)
    let (r1, r2, dist) = (0.25, 0.2, 0.3);
    let c1 = Vec3::new(0.36, 0.5, 0.49);
    let mut two = icosphere(c1, r1, 4);
    two.append(icosphere(c1 + Vec3::new(dist, 0.0, 0.0), r2, 4));
    let lens = PI
        * (r1 + r2 - dist).powi(2)
        * (dist * dist + 2.0 * dist * r2 - 3.0 * r2 * r2 + 2.0 * dist * r1 + 6.0 * r1 * r2
            - 3.0 * r1 * r1)
        / (12.0 * dist);
    let union = 4.0 / 3.0 * PI * (r1.powi(3) + r2.powi(3)) - lens;
    let (out, v) = mesh(&two, 5, &CutOptions::default());
    eprintln!(
        "overlap: fluid {v:.6}, 1 - analytic union {:.6}, warnings {}",
        1.0 - union,
        out.report.warnings_total
    );
    // tolerance: the facet sag of the subdivided spheres plus the O(h^2) cut error
    assert!(
        (v - (1.0 - union)).abs() < 2e-3,
        "overlap: {v} vs {}",
        1.0 - union
    );
}

#[test]
fn inside_and_point_fluid_regions() {
    let r = 0.2;
    let a = icosphere(Vec3::new(0.28, 0.5, 0.5), r, 3);
    let b = icosphere(Vec3::new(0.73, 0.5, 0.5), 0.15, 3);
    let (va, vb) = (a.enclosed_volume(), b.enclosed_volume());
    let mut two = a.clone();
    two.append(b.clone());
    // interior of both bodies
    let (_, vin) = mesh(
        &two,
        5,
        &CutOptions {
            fluid: FluidSide::Inside,
            ..Default::default()
        },
    );
    // exact: divergence theorem over both polyhedra
    assert!(
        (vin - (va + vb)).abs() < 2e-3,
        "inside {vin} vs {}",
        va + vb
    );
    // the point in the first body picks it; the second is dropped and reported
    let (out, vp) = mesh(
        &two,
        5,
        &CutOptions {
            fluid: FluidSide::Point(Vec3::new(0.3, 0.5, 0.5)),
            ..Default::default()
        },
    );
    assert!((vp - va).abs() < 1.5e-3, "point region {vp} vs {va}");
    assert_eq!(out.report.dropped_regions.len(), 1);
    let d = &out.report.dropped_regions[0];
    assert!(
        (d.volume - vb).abs() < 1.5e-3,
        "dropped {} vs {vb}",
        d.volume
    );
    let p = Vec3::from_array(d.point);
    assert!(
        (p - Vec3::new(0.73, 0.5, 0.5)).length() < 0.15,
        "dropped region point {p} not in the second body"
    );
    // a point outside both bodies gives the outside mesh
    let (_, vo) = mesh(
        &two,
        5,
        &CutOptions {
            fluid: FluidSide::Point(Vec3::new(0.05, 0.05, 0.05)),
            ..Default::default()
        },
    );
    let (_, vout) = mesh(&two, 5, &CutOptions::default());
    assert_eq!(vo.to_bits(), vout.to_bits());
}

#[test]
fn domain_box_clips_a_body_on_the_floor() {
    // a sphere centred on the floor z = 0: the box face cuts it in half
    let r = 0.3;
    let s = icosphere(Vec3::new(0.5, 0.52, 0.0), r, 3);
    let (out, v) = mesh(&s, 5, &CutOptions::default());
    // exact: half the polyhedron (symmetric about z = 0 by construction of the icosphere)
    let want = 1.0 - 0.5 * s.enclosed_volume();
    assert!((v - want).abs() < 1e-3, "{v} vs {want}");
    let floor = out
        .mesh
        .patches
        .iter()
        .find(|p| p.kind == PatchKind::Side { side: 4 })
        .unwrap();
    assert!(floor.count > 0);
}

#[test]
fn output_is_identical_at_one_and_two_threads() {
    let t = torus(Vec3::new(0.5, 0.49, 0.51), 0.28, 0.1, 32, 16);
    // the rotated cube exercises pierce points, poke edges, edge splits and feature vertices
    let c = rotated_cube(Vec3::new(0.5, 0.49, 0.51), 0.45, 0.4, 0.7);
    for s in [t, c] {
        same_at_one_and_two_threads(s);
    }
}

fn same_at_one_and_two_threads(s: Surface) {
    let index = SurfaceIndex::new(s);
    let tree = refined_tree(unit_domain(), &index, 5);
    let run = |n| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
            .install(|| cut_cells(&tree, &index, &CutOptions::default()).unwrap())
    };
    let (a, b) = (run(1), run(2));
    let bits = |m: &octocut_volmesh::VolumeMesh| {
        m.points
            .iter()
            .flat_map(|p| p.to_array().map(f64::to_bits))
            .collect::<Vec<_>>()
    };
    assert_eq!(bits(&a.mesh), bits(&b.mesh));
    assert_eq!(a.mesh.face_offsets, b.mesh.face_offsets);
    assert_eq!(a.mesh.face_vertices, b.mesh.face_vertices);
    assert_eq!(a.mesh.owner, b.mesh.owner);
    assert_eq!(a.mesh.neighbour, b.mesh.neighbour);
    assert_eq!(a.mesh.patches, b.mesh.patches);
    assert_eq!(a.report, b.report);
}

/// Meshes `s` (refined to `level`, fluid inside) and requires the volume-mesh validator and the
/// independent check to pass; returns the fluid volume.
fn valid_inside(s: &Surface, level: u8) -> f64 {
    let opts = CutOptions {
        fluid: FluidSide::Inside,
        ..Default::default()
    };
    let (out, v) = mesh(s, level, &opts);
    let r = out.mesh.validate();
    assert!(
        r.is_valid(),
        "level {level}: {:?} (sharp-edge fallbacks {})",
        r.problems.first(),
        out.report.sharp_fallbacks
    );
    v
}

#[test]
fn prism_resting_on_a_box_top_in_a_grid_plane_stays_valid() {
    // regression: a turned prism standing on a cuboid whose top lies in a grid plane (z = 0.5
    // at level 3); before the fix a wall fan of two cells on either side of a face had a
    // triangle in the face plane made of that face's cut points, so both cells emitted it
    // (DuplicateFace)
    let (lo, hi) = (
        Vec3::new(0.2592564761784898, 0.2762762485640857, 0.2),
        Vec3::new(0.7134066235718481, 0.7044208242350701, 0.5),
    );
    let (side, turn, ztop) = (0.16506818833718784, 1.4865251623643325, 0.7694995300195527);
    let centre = Vec3::new(0.5289836014398379, 0.5365373806805865, 0.5 * (0.5 + ztop));
    let mut s = Surface::unit_cube();
    for p in &mut s.vertices {
        *p = lo + *p * (hi - lo);
    }
    let mut prism = Surface::unit_cube();
    let rot = glam::DMat3::from_rotation_z(turn);
    for p in &mut prism.vertices {
        let q = (*p - Vec3::splat(0.5)) * Vec3::new(side, side, ztop - 0.5);
        *p = centre + rot * q;
    }
    s.append(prism);
    // exact: the two solids touch along the prism's base only, so the union's volume is the
    // sum of the cuboid's and the prism's
    let want = (hi - lo).element_product() + side * side * (ztop - 0.5);
    for lv in [3u8, 4] {
        let v = valid_inside(&s, lv);
        eprintln!("prism on box level {lv}: fluid {v:.9} exact {want:.9}");
        assert!((v - want).abs() < 1e-3 * want, "level {lv}: {v} vs {want}");
    }
}

/// Two overlapping rotated cubes (edges 0.25 and 0.22, the second shifted by (0.2, 0.05, 0.02)),
/// fluid inside, meshed at `levels`: every mesh valid and, exact, the union's volume between
/// the larger part's and the sum of both.
fn overlapping_cubes_stay_valid(c1: Vec3, ang: [f64; 4], levels: &[u8]) {
    let mut s = rotated_cube(c1, 0.25, ang[0], ang[1]);
    s.append(rotated_cube(
        c1 + Vec3::new(0.2, 0.05, 0.02),
        0.22,
        ang[2],
        ang[3],
    ));
    let (v1, v2) = (0.25f64.powi(3), 0.22f64.powi(3));
    for &lv in levels {
        let v = valid_inside(&s, lv);
        eprintln!(
            "two cubes level {lv}: fluid {v:.9}, bounds [{v1:.9}, {:.9}]",
            v1 + v2
        );
        assert!(v > v1.max(v2) && v < v1 + v2, "level {lv}: {v}");
    }
}

#[test]
fn two_overlapping_rotated_cubes_stay_valid() {
    // regression: the concave edges where two rotated cubes intersect, fluid inside; before the
    // fix a wall fan diagonal lay in a face plane through another cut point (VertexOnEdge)
    overlapping_cubes_stay_valid(
        Vec3::new(0.41812720983398116, 0.4554723096132617, 0.5241016390964719),
        [
            0.03517768541210764,
            0.2552845462313291,
            0.5346793961609182,
            2.995306921241081,
        ],
        &[4, 5],
    );
    // regression: two pieces of one leaf meeting along the concave edge; one piece's feature
    // vertex lay on the other piece's wall edge along that edge (VertexOnEdge at level 5)
    overlapping_cubes_stay_valid(
        Vec3::new(0.42889475159411794, 0.47002568278203216, 0.5152975598267014),
        [
            1.2688951476316088,
            1.439943900681992,
            0.680349332497181,
            2.610248150182177,
        ],
        &[5],
    );
}

#[test]
fn drone_demo_at_base_size_019_validates() {
    // regression: the project's own drone demo at base_size 0.19 had a fluid hanging vertex on
    // a straight face side between two solid ones (the surface through it), a zero-area face
    // polygon (VertexOnEdge); the pipeline validates every mesh and fails on any defect
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-geometry");
    let file = dir.join("drone.toml");
    let text = std::fs::read_to_string(&file).unwrap();
    let text: String = text
        .lines()
        .map(|l| {
            if l.starts_with("base_size = ") {
                "base_size = 0.19".to_string()
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    let spec = octocut::CaseSpec::from_toml_str(&text, &file).unwrap();
    let m = octocut::pipeline::Mesher::load(&spec).unwrap();
    let out = m.mesh(&spec, &octocut::stages::Hooks::default());
    let out = out.unwrap_or_else(|e| panic!("drone at base 0.19: {e}"));
    assert!(out.report.valid);
}
