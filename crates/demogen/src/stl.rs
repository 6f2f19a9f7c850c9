//! STL output: a multi-solid ASCII writer of our own and a binary writer (via `stl_io`), plus a
//! small ASCII reader used to check what was written.
//!
//! Format: the ASCII and binary STL layouts as commonly documented (one `solid NAME` ...
//! `endsolid NAME` block per part; binary: 80-byte header, u32 count, 50 bytes a facet).
//! Coordinates are printed with Rust's shortest round-trip `f64` formatting, so reading the
//! text back gives the very same `f64` values; facet normals are the unit area normals.

use crate::shapes::Part;
use glam::DVec3 as Vec3;
use std::fmt::Write as _;

/// Unit normal of a triangle (zero for a degenerate one).
fn unit_normal([a, b, c]: [Vec3; 3]) -> Vec3 {
    (b - a).cross(c - a).normalize_or_zero()
}

/// Writes named parts as one ASCII STL text with one `solid` block each.
///
/// ```
/// use octocut_demogen::{shapes::cuboid, stl::{ascii_stl, read_ascii_stl}};
/// use glam::DVec3;
/// let text = ascii_stl(&[("box", &cuboid(DVec3::ZERO, DVec3::ONE))]);
/// let solids = read_ascii_stl(&text).unwrap();
/// assert_eq!(solids[0].0, "box");
/// assert_eq!(solids[0].1.len(), 12);
/// ```
pub fn ascii_stl(parts: &[(&str, &Part)]) -> String {
    let mut s = String::new();
    for (name, part) in parts {
        let _ = writeln!(s, "solid {name}");
        for t in 0..part.triangles.len() {
            let c = part.corners(t);
            let n = unit_normal(c);
            // normals only need a few digits; readers recompute them
            let _ = writeln!(s, "  facet normal {:.6} {:.6} {:.6}", n.x, n.y, n.z);
            s.push_str("    outer loop\n");
            for v in c {
                let _ = writeln!(s, "      vertex {} {} {}", v.x, v.y, v.z);
            }
            s.push_str("    endloop\n  endfacet\n");
        }
        let _ = writeln!(s, "endsolid {name}");
    }
    s
}

/// Binary STL bytes of all parts together (binary STL has no part names; f32 coordinates).
pub fn binary_stl(parts: &[&Part]) -> Vec<u8> {
    let tris: Vec<stl_io::Triangle> = parts
        .iter()
        .flat_map(|p| (0..p.triangles.len()).map(move |t| p.corners(t)))
        .map(|c| {
            let f = |v: Vec3| stl_io::Vector::new([v.x as f32, v.y as f32, v.z as f32]);
            stl_io::Triangle {
                normal: f(unit_normal(c)),
                vertices: c.map(f),
            }
        })
        .collect();
    let mut out = Vec::with_capacity(84 + 50 * tris.len());
    // writing to a Vec cannot fail
    stl_io::write_stl(&mut out, tris.iter()).expect("in-memory write");
    out
}

/// Reads an ASCII STL text into `(solid name, triangle corners)` blocks; `None` when malformed.
pub fn read_ascii_stl(text: &str) -> Option<Vec<(String, Vec<[Vec3; 3]>)>> {
    let mut solids = Vec::new();
    let mut corners = Vec::with_capacity(3);
    for line in text.lines() {
        let mut w = line.split_whitespace();
        match w.next() {
            Some("solid") => solids.push((w.collect::<Vec<_>>().join(" "), Vec::new())),
            Some("vertex") => {
                let c: Vec<f64> = w.map(|x| x.parse().ok()).collect::<Option<_>>()?;
                if c.len() != 3 {
                    return None;
                }
                corners.push(Vec3::new(c[0], c[1], c[2]));
            }
            Some("endloop") => {
                let tri: [Vec3; 3] = corners.as_slice().try_into().ok()?;
                solids.last_mut()?.1.push(tri);
                corners.clear();
            }
            _ => {}
        }
    }
    Some(solids)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::shapes::cylinder;

    #[test]
    fn ascii_round_trip_is_bit_exact() {
        let mut c = cylinder(
            Vec3::new(0.1, 0.2, 0.3),
            Vec3::new(0.4, -0.2, 0.9),
            0.0123456789,
            11,
        );
        c.quantise(1e7);
        let text = ascii_stl(&[("a", &c), ("b", &c)]);
        let back = read_ascii_stl(&text).unwrap();
        assert_eq!(back.len(), 2);
        for (_, tris) in &back {
            assert_eq!(tris.len(), c.triangles.len());
            for (t, tri) in tris.iter().enumerate() {
                assert_eq!(*tri, c.corners(t)); // exact: shortest round-trip formatting
            }
        }
    }

    #[test]
    fn binary_layout() {
        let c = cylinder(Vec3::ZERO, Vec3::Z, 1.0, 5);
        let b = binary_stl(&[&c, &c]);
        // binary STL: 80-byte header + u32 count + 50 bytes per facet (common practice)
        assert_eq!(b.len(), 84 + 50 * 40);
        assert_eq!(u32::from_le_bytes(b[80..84].try_into().unwrap()), 40);
    }
}
