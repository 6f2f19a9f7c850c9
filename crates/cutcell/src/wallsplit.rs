//! Splitting a non-planar wall loop into triangles without adding a point: a fan from one loop
//! vertex, so that every reader computes the same cell volume from planar faces.
//!
//! Method: the fan from vertex `r` of a polygon is a valid triangulation iff the polygon is
//! star-shaped from `r` (every fan triangle positively oriented and the fan's angles at `r`
//! summing to less than a full turn; the "fan triangulation of a star-shaped polygon", de Berg
//! et al. 2008, ch. 3). The loop is tested in its projection along the dominant axis of its
//! Newell normal (Newell 1972; Sutherland et al. 1974) with exact orientation signs
//! (Shewchuk 1997, [`octocut_surface::predicates::orient2d`]). A fan diagonal with both ends on
//! one side plane of the leaf would lie in a face of the leaf, so such a root is rejected;
//! so is one giving a triangle thinner than `1e-9 h^2`, whose orientation the
//! frame shift back could flip. Among valid roots the one with the best worst triangle shape
//! is taken (ties: the first); with an apex given (a surface point near the loop), the one whose
//! fan encloses the least volume with the fan to the apex (`fan_gap` measures that volume per
//! area, for the caller to fall back to the apex fan). Invariant: the fan covers the loop's
//! projection exactly once, with the loop's orientation.

use octocut_surface::predicates::orient2d;
use octocut_surface::{Aabb, Vec3};

/// Quality below which a fan triangle counts as degenerate (twice its area over `h^2`).
const MIN_AREA: f64 = 1e-9;

/// Bits of the side planes of `cell` that `p` lies on (within `1e-9 h`).
fn side_mask(p: Vec3, cell: &Aabb, h: f64) -> u8 {
    let tol = 1e-9 * h;
    let mut m = 0u8;
    for a in 0..3 {
        if (p[a] - cell.min[a]).abs() <= tol {
            m |= 1 << (2 * a);
        }
        if (p[a] - cell.max[a]).abs() <= tol {
            m |= 2 << (2 * a);
        }
    }
    m
}

/// Shape of triangle `(a, b, c)`: `4 sqrt(3) area / (sum of squared edges)`, 1 when equilateral.
fn shape(a: Vec3, b: Vec3, c: Vec3) -> f64 {
    let twice_area = (b - a).cross(c - a).length();
    let e = (b - a).length_squared() + (c - b).length_squared() + (a - c).length_squared();
    if e > 0.0 {
        2.0 * 3f64.sqrt() * twice_area / e
    } else {
        0.0
    }
}

/// The loop vertex from which the fan `(r, r + i, r + i + 1)`, `i = 1..m - 1` (indices mod `m`),
/// triangulates the loop `pos` (in order, inside leaf box `cell` of edge `h`), best shaped or
/// closest in volume to the fan to `apex`, or `None` when no vertex gives a valid fan. `masks`
/// is a scratch buffer.
///
pub(crate) fn fan_root(
    pos: &[Vec3],
    cell: &Aabb,
    h: f64,
    apex: Option<Vec3>,
    masks: &mut Vec<u8>,
) -> Option<usize> {
    let m = pos.len();
    if m < 3 {
        return None;
    }
    let mut n = Vec3::ZERO;
    for i in 0..m {
        n += pos[i].cross(pos[(i + 1) % m]);
    }
    let k = if n.x.abs() >= n.y.abs() && n.x.abs() >= n.z.abs() {
        0
    } else if n.y.abs() >= n.z.abs() {
        1
    } else {
        2
    };
    if n[k] == 0.0 {
        return None;
    }
    let s = if n[k] > 0.0 { 1 } else { -1 };
    // (k + 1, k + 2) keeps a loop counter-clockwise about +axis k positive in the projection
    let (u, v) = ((k + 1) % 3, (k + 2) % 3);
    let proj = |p: Vec3| [p[u], p[v]];
    masks.clear();
    masks.extend(pos.iter().map(|&p| side_mask(p, cell, h)));
    let min_area = MIN_AREA * h * h;
    // (root, volume between the fans, worst shape)
    let mut best: Option<(usize, f64, f64)> = None;
    'root: for r in 0..m {
        let a = pos[r];
        // a diagonal in a side plane could run through another point of that face (a
        // T-junction) or along the neighbour's wall
        if (2..m - 1).any(|i| masks[r] & masks[(r + i) % m] != 0) {
            continue;
        }
        let mut sweep = 0.0;
        let mut worst = f64::INFINITY;
        let mut vol = 0.0;
        for i in 1..m - 1 {
            let (ib, ic) = ((r + i) % m, (r + i + 1) % m);
            let (b, c) = (pos[ib], pos[ic]);
            if masks[r] & masks[ib] & masks[ic] != 0
                || orient2d(proj(a), proj(b), proj(c)) != s
                || (b - a).cross(c - a).length() < min_area
            {
                continue 'root;
            }
            let (pb, pc) = (proj(b - a), proj(c - a));
            let cross = pb[0] * pc[1] - pb[1] * pc[0];
            let dot = pb[0] * pc[0] + pb[1] * pc[1];
            sweep += (cross * s as f64).atan2(dot);
            worst = worst.min(shape(a, b, c));
            if let Some(x) = apex {
                vol += (a - x).dot((b - x).cross(c - x));
            }
        }
        // a loop winding twice about `r` would pass every triangle test
        if sweep >= 2.0 * std::f64::consts::PI - 1e-6 {
            continue;
        }
        let vol = vol.abs();
        if best.is_none_or(|(_, v, q)| vol < v || vol == v && worst > q) {
            best = Some((r, vol, worst));
        }
    }
    best.map(|(r, _, _)| r)
}

/// Mean gap between the fan from `root` and the fan to `apex` over loop `pos`: the volume
/// between the two (closed by the shared loop) over the loop's vector area.
pub(crate) fn fan_gap(pos: &[Vec3], root: usize, apex: Vec3) -> f64 {
    let m = pos.len();
    let (mut vol, mut n) = (0.0, Vec3::ZERO);
    for i in 1..m - 1 {
        let (a, b, c) = (pos[root], pos[(root + i) % m], pos[(root + i + 1) % m]);
        vol += (a - apex).dot((b - apex).cross(c - apex));
        n += (b - a).cross(c - a);
    }
    // volume = vol / 6, area = |n| / 2
    if n == Vec3::ZERO {
        return f64::INFINITY;
    }
    vol.abs() / (3.0 * n.length())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cube() -> Aabb {
        Aabb::new(Vec3::ZERO, Vec3::ONE)
    }

    /// Sum of the fan triangles' vector areas.
    fn fan_area(p: &[Vec3], r: usize) -> Vec3 {
        let m = p.len();
        (1..m - 1)
            .map(|i| 0.5 * (p[(r + i) % m] - p[r]).cross(p[(r + i + 1) % m] - p[r]))
            .sum()
    }

    fn newell(p: &[Vec3]) -> Vec3 {
        let m = p.len();
        0.5 * (0..m).map(|i| p[i].cross(p[(i + 1) % m])).sum::<Vec3>()
    }

    #[test]
    fn bent_quad_in_a_cube_fans_and_keeps_its_vector_area() {
        // a wall loop cutting four edges of the unit cube parallel to z, at different heights
        let p = [
            Vec3::new(0.0, 0.0, 0.3),
            Vec3::new(1.0, 0.0, 0.5),
            Vec3::new(1.0, 1.0, 0.4),
            Vec3::new(0.0, 1.0, 0.6),
        ];
        let r = fan_root(&p, &cube(), 1.0, None, &mut vec![]).unwrap();
        // exact: the vector area of a closed polygon does not depend on the triangulation
        // (Newell's formula equals the sum over any fan)
        assert!((fan_area(&p, r) - newell(&p)).length() < 1e-14);
        // exact: its projection on z = 0 is the unit square
        assert!((fan_area(&p, r).z - 1.0).abs() < 1e-14);
    }

    #[test]
    fn triangle_in_a_leaf_face_is_refused() {
        // vertices 0, 1, 2 all lie on the side x = 0: the fans from 0 and 2 hold the triangle
        // (0, 1, 2) lying there; those from 1 and 3 stay off the side planes
        let p = [
            Vec3::new(0.0, 0.2, 0.0),
            Vec3::new(0.0, 0.9, 0.1),
            Vec3::new(0.0, 0.7, 0.8),
            Vec3::new(0.6, 0.3, 0.9),
        ];
        let r = fan_root(&p, &cube(), 1.0, None, &mut vec![]).unwrap();
        let m = p.len();
        for i in 1..m - 1 {
            let t = [r, (r + i) % m, (r + i + 1) % m];
            assert!(!t.iter().all(|&j| p[j].x == 0.0), "triangle {t:?} in x = 0");
        }
    }

    #[test]
    fn non_star_shaped_loop_is_refused() {
        // a flat "comb" (no vertex sees all others) lifted out of plane by a small bend
        let p: Vec<Vec3> = [
            (0.0, 0.0),
            (0.9, 0.0),
            (0.9, 0.9),
            (0.7, 0.9),
            (0.7, 0.2),
            (0.5, 0.2),
            (0.5, 0.9),
            (0.3, 0.9),
            (0.3, 0.2),
            (0.1, 0.2),
            (0.1, 0.9),
            (0.0, 0.9),
        ]
        .iter()
        .enumerate()
        .map(|(i, &(x, y))| Vec3::new(x + 0.05, y + 0.05, 0.5 + 0.01 * (i % 2) as f64))
        .collect();
        // common practice: a comb with three teeth has no kernel point at any vertex
        assert_eq!(fan_root(&p, &cube(), 1.0, None, &mut vec![]), None);
    }

    #[test]
    fn gap_to_an_apex_is_the_pyramid_height_over_three() {
        let p = [Vec3::ZERO, Vec3::X, Vec3::new(1.0, 1.0, 0.0), Vec3::Y];
        // exact: a pyramid of base area 1 and height 0.3 has volume 0.1
        for r in 0..4 {
            assert!((fan_gap(&p, r, Vec3::new(0.5, 0.5, 0.3)) - 0.1).abs() < 1e-15);
        }
    }

    #[test]
    fn reversed_loop_fans_with_reversed_area() {
        let mut p = vec![
            Vec3::new(0.0, 0.0, 0.3),
            Vec3::new(1.0, 0.0, 0.5),
            Vec3::new(1.0, 1.0, 0.4),
            Vec3::new(0.0, 1.0, 0.6),
        ];
        p.reverse();
        let r = fan_root(&p, &cube(), 1.0, None, &mut vec![]).unwrap();
        assert!((fan_area(&p, r) - newell(&p)).length() < 1e-14);
        // exact: its projection on z = 0 is the unit square, clockwise
        assert!((fan_area(&p, r).z + 1.0).abs() < 1e-14);
    }
}
