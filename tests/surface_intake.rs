//! Reference checks of surface intake: STL reading, repair and the health report.

use octocut_surface::stl::{to_ascii_stl, to_binary_stl};
use octocut_surface::{
    health, load_stl, load_stl_files, parse_stl, repair, HealthReport, RepairOptions, Surface,
    SurfaceError, Vec3,
};
use std::f64::consts::PI;
use std::path::PathBuf;
use tempfile::TempDir;

fn write(dir: &TempDir, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.path().join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

/// Load `bytes` from a temp file, repair with default options, report.
fn check_bytes(name: &str, bytes: &[u8]) -> (Surface, HealthReport) {
    let dir = TempDir::new().unwrap();
    let mut s = load_stl(&write(&dir, name, bytes)).unwrap();
    let r = repair(&mut s, &RepairOptions::default());
    let h = health(&s, &r);
    (s, h)
}

fn cube(a: f64) -> Surface {
    let mut s = Surface::unit_cube();
    s.vertices
        .iter_mut()
        .for_each(|p| *p = *p * a - Vec3::splat(0.25));
    s
}

#[test]
fn cube_volume_is_exact() {
    // exact: cube volume a^3 and area 6 a^2 (coordinates exact in f32)
    let (_, h) = check_bytes("cube.stl", &to_binary_stl(&cube(2.5), "cube"));
    assert!((h.enclosed_volume - 2.5f64.powi(3)).abs() < 1e-13);
    assert!((h.area - 6.0 * 2.5 * 2.5).abs() < 1e-13);
    assert!(h.is_watertight());
}

/// Observed order of convergence log2(e_k / e_{k+1}) over three refinements by 2.
fn orders(errors: &[f64]) -> Vec<f64> {
    errors.windows(2).map(|w| (w[0] / w[1]).log2()).collect()
}

#[test]
fn sphere_volume_converges_with_order_two() {
    // classical geometry: V = 4/3 pi r^3; an inscribed polyhedron with facet size h misses
    // O(h^2) of it, so halving h divides the error by about 4
    let r = 1.7;
    let exact = 4.0 / 3.0 * PI * r * r * r;
    let errors: Vec<f64> = [12u32, 24, 48, 96]
        .iter()
        .map(|&n| {
            let s = Surface::uv_sphere(Vec3::new(0.1, -0.2, 0.3), r, n, 2 * n);
            let (_, h) = check_bytes("sphere.stl", to_ascii_stl(&s.to_soup()).as_bytes());
            assert!(h.is_watertight(), "{h:?}");
            assert_eq!(h.closed_component_count, 1);
            (h.enclosed_volume - exact).abs()
        })
        .collect();
    for o in orders(&errors) {
        assert!(o > 1.8, "order {o}, errors {errors:?}");
    }
}

#[test]
fn torus_volume_converges_with_order_two() {
    // Pappus: V = 2 pi^2 R r^2
    let (big, small) = (2.0, 0.6);
    let exact = 2.0 * PI * PI * big * small * small;
    let errors: Vec<f64> = [16u32, 32, 64, 128]
        .iter()
        .map(|&n| {
            let s = Surface::torus(big, small, 2 * n, n);
            let (_, h) = check_bytes("torus.stl", to_ascii_stl(&s.to_soup()).as_bytes());
            assert!(h.is_watertight());
            (h.enclosed_volume - exact).abs()
        })
        .collect();
    for o in orders(&errors) {
        assert!(o > 1.8, "order {o}, errors {errors:?}");
    }
}

#[test]
fn volume_agrees_with_parry_mass_properties() {
    // reference library: parry3d's MassProperties::from_trimesh (density 1: mass = volume)
    use parry3d_f64::mass_properties::MassProperties;
    for s in [
        Surface::torus(2.0, 0.5, 40, 20),
        Surface::uv_sphere(Vec3::ONE, 0.8, 20, 40),
        cube(1.5),
    ] {
        let (rs, h) = check_bytes("shape.stl", &to_binary_stl(&s, ""));
        let m = MassProperties::from_trimesh(1.0, &rs.vertices, &rs.triangles).mass();
        assert!(
            (m - h.enclosed_volume).abs() < 1e-9 * m,
            "{m} vs {}",
            h.enclosed_volume
        );
    }
}

#[test]
fn soup_sphere_welds_to_closed_manifold() {
    let s = Surface::uv_sphere(Vec3::ZERO, 1.0, 10, 20);
    let soup = s.to_soup();
    let mut w = soup.clone();
    let r = repair(&mut w, &RepairOptions::default());
    // exact: the UV sphere has 2 + (rings - 1) segments vertices
    assert_eq!(w.vertices.len(), s.vertices.len());
    assert_eq!(
        r.vertices_merged_exact,
        soup.vertices.len() - s.vertices.len()
    );
    let h = health(&w, &r);
    assert!(h.is_watertight());
    // Euler characteristic of a sphere: V - E + F = 2 (E = 3F/2 on a closed manifold)
    let (v, f) = (h.vertices as i64, h.triangles as i64);
    assert_eq!(v - 3 * f / 2 + f, 2);
}

#[test]
fn near_coincident_vertices_weld_within_tolerance() {
    let mut soup = Surface::uv_sphere(Vec3::ZERO, 1.0, 8, 16).to_soup();
    // jitter every copy by up to 1e-9 (far below 1e-6 of the diagonal 2 sqrt 3)
    for (i, p) in soup.vertices.iter_mut().enumerate() {
        *p += Vec3::splat(1e-9 * ((i * 7919) % 13) as f64 / 13.0);
    }
    let r = repair(&mut soup, &RepairOptions::default());
    assert!(r.vertices_merged_tolerance > 0);
    assert!(health(&soup, &r).is_watertight());
}

#[test]
fn flipped_facets_are_reoriented_and_counted() {
    let mut s = Surface::uv_sphere(Vec3::ZERO, 1.0, 12, 24).to_soup();
    let flipped = [3usize, 17, 100, 101, 250];
    for &t in &flipped {
        s.triangles[t].swap(0, 2);
    }
    let r = repair(&mut s, &RepairOptions::default());
    assert_eq!(r.reoriented, flipped.len());
    assert!(
        (s.enclosed_volume() - Surface::uv_sphere(Vec3::ZERO, 1.0, 12, 24).enclosed_volume()).abs()
            < 1e-12
    );
}

#[test]
fn inside_out_sphere_is_turned_outward() {
    let mut s = Surface::uv_sphere(Vec3::ZERO, 2.0, 12, 24);
    s.triangles.iter_mut().for_each(|t| t.swap(1, 2));
    let n = s.triangles.len();
    assert!(s.enclosed_volume() < 0.0);
    let r = repair(&mut s, &RepairOptions::default());
    assert_eq!((r.reoriented, r.components_turned_outward), (n, 1));
    assert!(s.enclosed_volume() > 0.0);
}

#[test]
fn duplicates_and_reversed_duplicates_are_removed() {
    let base = Surface::uv_sphere(Vec3::ZERO, 1.0, 8, 16);
    let mut s = base.clone();
    for t in [0usize, 5, 9] {
        s.triangles.push(s.triangles[t]);
    }
    for t in [20usize, 30] {
        let [a, b, c] = s.triangles[t];
        s.triangles.push([a, c, b]);
    }
    s.tags.resize(s.triangles.len(), s.tags[0]);
    let mut s = s.to_soup();
    let r = repair(&mut s, &RepairOptions::default());
    assert_eq!((r.duplicates, r.duplicates_reversed), (3, 2));
    assert_eq!(s.triangles.len(), base.triangles.len());
    assert!(health(&s, &r).is_watertight());
}

#[test]
fn zero_area_triangles_are_dropped() {
    let mut s = Surface::uv_sphere(Vec3::ZERO, 1.0, 8, 16).to_soup();
    let tris = s.triangles.len();
    let (a, b) = (Vec3::ZERO, Vec3::new(0.5, 0.25, 0.125));
    // a sliver with exactly collinear corners (the midpoint of a dyadic segment is exact), and
    // one whose two corners coincide after welding
    s.vertices
        .extend([a, b, 0.5 * (a + b), a, a + Vec3::splat(1e-12), b]);
    let n = s.vertices.len() as u32;
    s.triangles.push([n - 6, n - 5, n - 4]);
    s.triangles.push([n - 3, n - 2, n - 1]);
    s.tags.resize(s.triangles.len(), s.tags[0]);
    let mut collinear = s.clone();
    let r = repair(&mut collinear, &RepairOptions::default());
    assert_eq!((r.degenerate_collinear, r.degenerate_repeated), (1, 1));
    assert_eq!(collinear.triangles.len(), tris);
}

#[test]
fn overlapping_cubes_intersect_clean_sphere_does_not() {
    let mut two = cube(1.0);
    let mut other = cube(1.0);
    other
        .vertices
        .iter_mut()
        .for_each(|p| *p += Vec3::new(0.5, 0.25, 0.125));
    two.append(other);
    let (_, h) = check_bytes("two.stl", &to_binary_stl(&two, ""));
    assert!(h.intersecting_pairs > 0);
    assert!(!h.is_watertight());
    // the witness point lies in the overlap of the two cubes' boxes
    let p = h.intersections[0].at;
    let (lo, hi) = (Vec3::new(0.25, 0.0, -0.125), Vec3::splat(0.75));
    assert!(
        p.cmpge(lo - 1e-12).all() && p.cmple(hi + 1e-12).all(),
        "{p}"
    );
    let (_, h) = check_bytes(
        "ball.stl",
        &to_binary_stl(&Surface::uv_sphere(Vec3::ZERO, 1.0, 24, 48), ""),
    );
    assert_eq!(h.intersecting_pairs, 0);
    // an open box (cube without its top): one open loop on the rim z = 1 - 0.25
    let mut open = cube(1.0);
    open.triangles.drain(2..4);
    open.tags.truncate(10);
    let (_, h) = check_bytes("open.stl", &to_binary_stl(&open, ""));
    let l = h.longest_open_loop.unwrap();
    assert_eq!((h.open_loops, l.edges), (1, 4));
    assert_eq!(l.at.z, 0.75);
}

const FACET: &str = "  facet normal 0 0 1\n    outer loop\n      vertex 0 0 0\n      vertex 1 0 0\n      vertex 0 1 0\n    endloop\n  endfacet\n";

#[test]
fn multi_solid_ascii_tags() {
    let three = format!(
        "solid inlet\n{FACET}endsolid inlet\nsolid outlet\n{FACET}{FACET}endsolid outlet\nsolid wall\n{FACET}endsolid\n"
    );
    let (s, h) = check_bytes("duct.stl", three.as_bytes());
    assert_eq!(s.tag_names, vec!["inlet", "outlet", "wall"]);
    // identical facets are duplicates; their tags follow the kept (first) one
    assert_eq!(h.duplicates_removed, 3);
    let s = parse_stl(three.as_bytes(), "duct.stl").unwrap();
    assert_eq!(
        s.tags.iter().map(|t| t.0).collect::<Vec<_>>(),
        vec![0, 1, 1, 2]
    );
    let unnamed = format!("solid\n{FACET}endsolid\n");
    let dir = TempDir::new().unwrap();
    let p = write(&dir, "fin.stl", unnamed.as_bytes());
    assert_eq!(load_stl(&p).unwrap().tag_names, vec!["fin"]);
    // several files: a repeated name gets a suffix
    let q = write(&dir, "other.stl", three.as_bytes());
    let r = write(
        &dir,
        "more.stl",
        format!("solid wall\n{FACET}endsolid wall\n").as_bytes(),
    );
    let all = load_stl_files(&[p, q, r]).unwrap();
    assert_eq!(
        all.tag_names,
        vec!["fin", "inlet", "outlet", "wall", "wall.2"]
    );
    assert_eq!(all.triangles.len(), 6);
}

/// The error of reading `bytes` from a file `name`, with its message and the file's path.
fn read_error(name: &str, bytes: &[u8]) -> (SurfaceError, String, String) {
    let dir = TempDir::new().unwrap();
    let p = write(&dir, name, bytes);
    let e = load_stl(&p).unwrap_err();
    let msg = e.to_string();
    assert!(msg.contains(&p.display().to_string()), "{msg}");
    (e, msg, p.display().to_string())
}

#[test]
fn error_missing_file() {
    let dir = TempDir::new().unwrap();
    let p = dir.path().join("absent.stl");
    let e = load_stl(&p).unwrap_err();
    assert!(matches!(e, SurfaceError::Io { .. }));
    assert!(e.to_string().contains(&p.display().to_string()));
}

#[test]
fn error_empty_file() {
    let (e, _, _) = read_error("empty.stl", b"");
    assert!(matches!(e, SurfaceError::Empty { .. }));
}

#[test]
fn error_binary_count_mismatch() {
    let mut b = to_binary_stl(&cube(1.0), "");
    b.truncate(b.len() - 7);
    let (e, msg, _) = read_error("short.stl", &b);
    assert!(matches!(e, SurfaceError::CountMismatch { .. }));
    assert!(
        msg.contains("byte offset 80") && msg.contains("684") && msg.contains("677"),
        "{msg}"
    );
}

#[test]
fn error_binary_truncated_header() {
    let (e, msg, _) = read_error("stub.stl", &[7u8; 50]);
    assert!(matches!(e, SurfaceError::Truncated { .. }));
    assert!(msg.contains("byte offset 50"), "{msg}");
}

#[test]
fn error_ascii_truncated() {
    let text = format!("solid a\n{FACET}");
    let cut = &text[..text.len() - 20];
    let (e, msg, _) = read_error("cut.stl", cut.as_bytes());
    assert!(matches!(e, SurfaceError::Truncated { .. }));
    assert!(msg.contains("line 7"), "{msg}");
}

#[test]
fn error_ascii_syntax() {
    let text = format!(
        "solid a\n{}endsolid a\n",
        FACET.replace("outer loop", "outer lop")
    );
    let (e, msg, _) = read_error("typo.stl", text.as_bytes());
    assert!(matches!(e, SurfaceError::Syntax { .. }));
    assert!(
        msg.contains("line 3, column 11") && msg.contains("\"lop\""),
        "{msg}"
    );
}

#[test]
fn error_non_finite_coordinates() {
    let text = format!(
        "solid a\n{}endsolid a\n",
        FACET.replace("vertex 1 0 0", "vertex 1 0 inf")
    );
    let (e, msg, _) = read_error("inf.stl", text.as_bytes());
    assert!(matches!(e, SurfaceError::NonFinite { .. }));
    assert!(msg.contains("line 5, column 18"), "{msg}");
    let mut b = to_binary_stl(&cube(1.0), "");
    let at = 84 + 50 * 3 + 12 + 12 * 2 + 8; // triangle 3, third vertex, z
    b[at..at + 4].copy_from_slice(&f32::NAN.to_le_bytes());
    let (e, msg, _) = read_error("nan.stl", &b);
    assert!(matches!(e, SurfaceError::NonFinite { .. }));
    assert!(msg.contains(&format!("byte offset {at}")), "{msg}");
}

#[test]
fn error_no_triangles() {
    let (e, _, _) = read_error("hollow.stl", b"solid nothing\nendsolid nothing\n");
    assert!(matches!(e, SurfaceError::NoTriangles { .. }));
    let mut header = vec![b' '; 80];
    header.extend(0u32.to_le_bytes());
    let (e, _, _) = read_error("zero.stl", &header);
    assert!(matches!(e, SurfaceError::NoTriangles { .. }));
}
