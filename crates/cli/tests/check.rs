//! Drives the built `octocut check` binary on generated STL files in a temp dir.

use octocut_surface::stl::{to_ascii_stl, to_binary_stl};
use octocut_surface::{HealthReport, Surface, Vec3};
use std::process::Command;
use tempfile::TempDir;

fn octocut(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_octocut"))
        .args(args)
        .output()
        .unwrap();
    let s = |b: Vec<u8>| String::from_utf8_lossy(&b).into_owned();
    (
        out.status.code().unwrap_or(-1),
        s(out.stdout),
        s(out.stderr),
    )
}

#[test]
fn clean_sphere_table_and_json() {
    let dir = TempDir::new().unwrap();
    let p = dir.path().join("ball.stl");
    std::fs::write(
        &p,
        to_binary_stl(&Surface::uv_sphere(Vec3::ZERO, 1.0, 16, 32), ""),
    )
    .unwrap();
    let ps = p.to_str().unwrap();
    let (code, out, _) = octocut(&["check", ps]);
    assert_eq!(code, 0);
    assert!(out.contains("verdict: watertight"), "{out}");
    let (code, out, _) = octocut(&["check", "--json", ps]);
    assert_eq!(code, 0);
    let h: HealthReport = serde_json::from_str(&out).unwrap();
    assert_eq!(
        (h.open_edges, h.intersecting_pairs, h.triangles),
        (0, 0, 2 * 32 * 15)
    );
    // classical geometry: the inscribed polyhedron's volume is a little below 4/3 pi
    let v = 4.0 / 3.0 * std::f64::consts::PI;
    assert!(h.enclosed_volume < v && h.enclosed_volume > 0.97 * v);
}

#[test]
fn findings_are_listed_with_coordinates() {
    let dir = TempDir::new().unwrap();
    // an open box (cube without two top triangles) and an overlapping cube, in two files
    let mut open = Surface::unit_cube();
    open.triangles.drain(2..4);
    open.tags.truncate(10);
    let mut other = Surface::unit_cube();
    other
        .vertices
        .iter_mut()
        .for_each(|p| *p += Vec3::new(0.5, 0.5, 0.5));
    let a = dir.path().join("open.stl");
    let b = dir.path().join("other.stl");
    std::fs::write(&a, to_ascii_stl(&open)).unwrap();
    std::fs::write(&b, to_binary_stl(&other, "")).unwrap();
    let (code, out, _) = octocut(&["check", a.to_str().unwrap(), b.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}");
    assert!(
        out.contains("not watertight: open edges, self-intersections"),
        "{out}"
    );
    assert!(out.contains("loop of 4 edges, length 4, at ("), "{out}");
    assert!(
        out.contains("pair") && out.contains("cube: 10 triangles") && out.contains("other: 12"),
        "{out}"
    );
}

#[test]
fn unreadable_input_exits_2_naming_the_file() {
    let dir = TempDir::new().unwrap();
    let missing = dir.path().join("missing.stl");
    let (code, out, err) = octocut(&["check", missing.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(out.is_empty() && err.contains("missing.stl"), "{err}");
    let bad = dir.path().join("bad.stl");
    std::fs::write(
        &bad,
        "solid x\n facet normal 0 0 1\n outer loop\n vertex 0 0 x\n",
    )
    .unwrap();
    let (code, _, err) = octocut(&["check", bad.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(err.contains("bad.stl") && err.contains("line 4"), "{err}");
}
