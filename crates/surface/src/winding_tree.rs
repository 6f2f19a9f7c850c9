//! Hierarchical (fast) generalized winding number over a radix tree of triangles.
//!
//! Follows Barill, Dickson, Schmidt, Levin, Jacobson (2018), "Fast winding numbers for soups and
//! clouds": every tree node stores a far-field expansion of the solid angle of its triangles
//! about their area-weighted centroid `c`, to second order: the area vector sum
//! `N = sum a_t n_t` (first order, a dipole) and the matrix `M = sum a_t n_t (c_t - c)^T`
//! (second order; `c_t` is the triangle centroid, so the triangle integral is exact). With
//! `d = c - q`, `L = |d|`, the node's solid angle seen from `q` is
//! `N.d / L^3 + tr(M) / L^3 - 3 d.M d / L^5`. A node is "far" when `L > beta * r`, `r` bounding
//! the distance from `c` to every point of its triangles; far nodes use the expansion, near
//! leaves sum the exact solid angles (Van Oosterom and Strackee 1983,
//! [`crate::winding::solid_angle`]). The definition of the winding number is the one of
//! Jacobson, Kavan, Sorkine-Hornung (2013).
//!
//! Invariants: a node whose sphere (radius `r`) holds `q` is never expanded (`beta >= 1`); the
//! result for a point depends only on the point, the surface and `beta`.

use crate::geom::{Aabb, Vec3};
use crate::surface::Surface;
use crate::tree::RadixTree;
use crate::winding::solid_angle;

/// Far-field data of one tree node.
#[derive(Clone, Copy, Debug, Default)]
struct Moments {
    center: Vec3,
    /// Squared radius bound.
    r2: f64,
    /// Total triangle area.
    area: f64,
    /// Area vector sum (half the summed edge cross products).
    n: Vec3,
    /// Second-order matrix, row-major: `m[3 i + j] = sum a (n_i) (c_t - c)_j`.
    m: [f64; 9],
}

/// The per-node expansions of a [`RadixTree`] (same node ids).
#[derive(Clone, Debug, Default)]
pub struct WindingTree {
    moments: Vec<Moments>,
}

/// Depth bound of the radix tree: 63 key bits plus halving of equal keys (< 2^32 triangles).
const STACK: usize = 128;

impl WindingTree {
    /// Computes the expansions of every node of `tree` (built over `surface`).
    pub fn build(surface: &Surface, tree: &RadixTree) -> WindingTree {
        let mut moments = vec![Moments::default(); tree.nodes.len()];
        if !tree.nodes.is_empty() {
            fill(surface, tree, 0, &mut moments);
        }
        WindingTree { moments }
    }

    /// Winding number at `q` with far-field criterion `L > beta r` (beta clamped to >= 1).
    pub fn winding_number(&self, surface: &Surface, tree: &RadixTree, q: Vec3, beta: f64) -> f64 {
        if tree.nodes.is_empty() {
            return 0.0;
        }
        let beta2 = beta.max(1.0).powi(2);
        let mut stack = [0u32; STACK];
        let mut top = 1;
        let mut sum = 0.0;
        while top > 0 {
            top -= 1;
            let id = stack[top] as usize;
            let mo = &self.moments[id];
            let d = mo.center - q;
            let l2 = d.length_squared();
            if l2 > beta2 * mo.r2 {
                sum += far_field(mo, d, l2);
                continue;
            }
            let node = tree.nodes[id];
            if node.is_leaf() {
                for &t in &tree.order[node.start as usize..node.end as usize] {
                    let [a, b, c] = surface.corners(t as usize);
                    sum += solid_angle(q, a, b, c);
                }
            } else {
                stack[top] = node.right;
                stack[top + 1] = id as u32 + 1;
                top += 2;
            }
        }
        sum / (4.0 * std::f64::consts::PI)
    }

    /// Heap bytes held.
    pub fn heap_bytes(&self) -> usize {
        self.moments.capacity() * std::mem::size_of::<Moments>()
    }
}

#[inline]
fn far_field(mo: &Moments, d: Vec3, l2: f64) -> f64 {
    let l = l2.sqrt();
    let inv3 = 1.0 / (l2 * l);
    let m = &mo.m;
    let md = Vec3::new(
        m[0] * d.x + m[1] * d.y + m[2] * d.z,
        m[3] * d.x + m[4] * d.y + m[5] * d.z,
        m[6] * d.x + m[7] * d.y + m[8] * d.z,
    );
    let tr = m[0] + m[4] + m[8];
    (mo.n.dot(d) + tr) * inv3 - 3.0 * d.dot(md) * inv3 / l2
}

/// Fills the moments of node `id` and its subtree, returning the node's bounding box.
fn fill(surface: &Surface, tree: &RadixTree, id: usize, out: &mut [Moments]) -> Aabb {
    let node = tree.nodes[id];
    if node.is_leaf() {
        let tris = &tree.order[node.start as usize..node.end as usize];
        let mut area = 0.0;
        let mut wc = Vec3::ZERO;
        let mut bb = Aabb::empty();
        for &t in tris {
            let [a, b, c] = surface.corners(t as usize);
            let w = 0.5 * (b - a).cross(c - a).length();
            area += w;
            wc += w * (a + b + c) / 3.0;
            bb = bb.union(&Aabb::from_points([a, b, c]));
        }
        let center = if area > 0.0 { wc / area } else { bb.center() };
        let mut mo = Moments {
            center,
            area,
            ..Moments::default()
        };
        let mut r2: f64 = 0.0;
        for &t in tris {
            let [a, b, c] = surface.corners(t as usize);
            let an = 0.5 * (b - a).cross(c - a);
            let e = (a + b + c) / 3.0 - center;
            mo.n += an;
            add_outer(&mut mo.m, an, e);
            for v in [a, b, c] {
                r2 = r2.max((v - center).length_squared());
            }
        }
        mo.r2 = sanitize(r2);
        out[id] = mo;
        return bb;
    }
    let (l, r) = (id + 1, node.right as usize);
    let bl = fill(surface, tree, l, out);
    let br = fill(surface, tree, r, out);
    let (ml, mr) = (out[l], out[r]);
    let area = ml.area + mr.area;
    let center = if area > 0.0 {
        (ml.area * ml.center + mr.area * mr.center) / area
    } else {
        0.5 * (ml.center + mr.center)
    };
    let mut mo = Moments {
        center,
        area,
        n: ml.n + mr.n,
        ..Moments::default()
    };
    for ch in [ml, mr] {
        for k in 0..9 {
            mo.m[k] += ch.m[k];
        }
        // re-centre: sum a n (c_t - c)^T = M_child + N_child (c_child - c)^T
        add_outer(&mut mo.m, ch.n, ch.center - center);
    }
    let bb = bl.union(&br);
    let by_children = [ml, mr]
        .iter()
        .map(|ch| (ch.center - center).length() + ch.r2.sqrt())
        .fold(0.0f64, f64::max);
    let by_box = far_corner(bb, center);
    mo.r2 = sanitize(by_children.min(by_box).powi(2));
    out[id] = mo;
    bb
}

/// Distance from `c` to the farthest corner of `b`.
fn far_corner(b: Aabb, c: Vec3) -> f64 {
    (b.max - c).abs().max((c - b.min).abs()).length()
}

#[inline]
fn add_outer(m: &mut [f64; 9], a: Vec3, b: Vec3) {
    let (a, b) = (a.to_array(), b.to_array());
    for i in 0..3 {
        for j in 0..3 {
            m[3 * i + j] += a[i] * b[j];
        }
    }
}

/// Non-finite radii (non-finite input) make the node always near: it is summed exactly.
#[inline]
fn sanitize(r2: f64) -> f64 {
    if r2.is_finite() {
        r2
    } else {
        f64::INFINITY
    }
}
