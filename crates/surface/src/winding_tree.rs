//! Hierarchical (fast) generalized winding number over a radix tree of triangles.
//!
//! Follows Barill, Dickson, Schmidt, Levin, Jacobson (2018), "Fast winding numbers for soups and
//! clouds": every tree node stores the Taylor expansion, about the area-weighted centroid `c`
//! of its triangles, of the solid-angle kernel `(x - q) / |x - q|^3` integrated over them, up to
//! the second derivative: the area vector sum `N = sum a_t n_t` (the dipole term),
//! `M = sum a_t n_t (c_t - c)^T` (first moments; `c_t` the triangle centroid) and
//! `T_ijk = sum a_t n_ti S_t,jk` (second moments; `S_t` the mean of `(x - c)(x - c)^T` over
//! the triangle, `(e0 e0^T + e1 e1^T + e2 e2^T + s s^T) / 12` with `e_k` the corners minus `c`
//! and `s` their sum). Children's moments are moved to the parent's centre exactly. A node is
//! far from `q` when `|c - q| > beta r`, `r` bounding the distance from `c` to its triangles
//! (exact for nodes of at most 2048 triangles, a bound above); far nodes use the expansion,
//! near leaves sum the exact solid angles (Van Oosterom and Strackee 1983,
//! [`crate::winding::solid_angle`]). The winding number is the one defined by Jacobson, Kavan,
//! Sorkine-Hornung (2013): the summed solid angle over 4 pi.
//!
//! Invariants: a node whose sphere (radius `r`) holds `q` is never expanded (`beta >= 1`); the
//! result for a point depends only on the point, the surface and `beta`; the truncation error
//! falls as `beta` grows (measured in `tests/spatial_queries.rs`).

use crate::geom::{Aabb, Vec3};
use crate::surface::Surface;
use crate::tree::RadixTree;
use crate::winding::solid_angle;
use rayon::prelude::*;

/// Far-field data of one tree node.
#[derive(Clone, Copy, Debug)]
struct Moments {
    center: Vec3,
    /// Squared radius bound.
    r2: f64,
    /// Total triangle area.
    area: f64,
    /// Area vector sum (half the summed edge cross products).
    n: Vec3,
    /// First moment, row-major: `m[3 i + j] = sum a (n_i) (c_t - c)_j`.
    m: [f64; 9],
    /// Second moment, `t[6 i + s(j, k)] = sum a n_i S_jk` with `S` the triangle's mean of
    /// `(x - c)(x - c)^T`; `s` runs over 00, 01, 02, 11, 12, 22.
    t: [f64; 18],
}

impl Default for Moments {
    fn default() -> Self {
        Moments {
            center: Vec3::ZERO,
            r2: 0.0,
            area: 0.0,
            n: Vec3::ZERO,
            m: [0.0; 9],
            t: [0.0; 18],
        }
    }
}

/// The data read by every visit: expansion centre and squared radius (hot, 32 bytes).
#[derive(Clone, Copy, Debug, Default)]
struct Hot {
    center: Vec3,
    r2: f64,
}

/// A node's expansion as stored for queries: the area vector in f64 (it cancels on closed
/// parts), the higher terms in f32 (their rounding, ~1e-7 relative, is far below the truncation
/// error), pre-combined for the evaluation.
#[derive(Clone, Copy, Debug)]
struct Expansion {
    n: Vec3,
    /// `M`, row-major.
    m: [f32; 9],
    /// `2 u + v`, `u_k = sum_i T_iik`, `v_i = sum_j T_ijj`.
    w: [f32; 3],
    /// `T` with the off-diagonal `(j, k)` entries doubled.
    t: [f32; 18],
}

impl Expansion {
    fn from_moments(mo: &Moments) -> Expansion {
        let t = &mo.t;
        let u = [
            t[0] + t[7] + t[14],
            t[1] + t[9] + t[16],
            t[2] + t[10] + t[17],
        ];
        let v = [
            t[0] + t[3] + t[5],
            t[6] + t[9] + t[11],
            t[12] + t[15] + t[17],
        ];
        let mut tt = [0.0f32; 18];
        for i in 0..3 {
            for (k, f) in [1.0, 2.0, 2.0, 1.0, 2.0, 1.0].iter().enumerate() {
                tt[6 * i + k] = (f * t[6 * i + k]) as f32;
            }
        }
        Expansion {
            n: mo.n,
            m: mo.m.map(|x| x as f32),
            w: [0, 1, 2].map(|k| (2.0 * u[k] + v[k]) as f32),
            t: tt,
        }
    }
}

/// The per-node expansions of a [`RadixTree`] (same node ids).
#[derive(Clone, Debug, Default)]
pub struct WindingTree {
    hot: Vec<Hot>,
    expansions: Vec<Expansion>,
}

/// Subtrees larger than this are filled in parallel.
const PAR_FILL: u32 = 8192;
/// Nodes of at most this many triangles get the exact radius (larger ones a bound).
const EXACT_RADIUS: u32 = 2048;

/// Depth bound of the radix tree: 63 key bits plus halving of equal keys (< 2^32 triangles).
const STACK: usize = 128;

impl WindingTree {
    /// Computes the expansions of every node of `tree` (built over `surface`).
    pub fn build(surface: &Surface, tree: &RadixTree) -> WindingTree {
        let mut moments = vec![Moments::default(); tree.nodes.len()];
        if !tree.nodes.is_empty() {
            fill(surface, tree, 0, &mut moments);
        }
        let expansions = moments.par_iter().map(Expansion::from_moments).collect();
        let hot = moments
            .par_iter()
            .zip(&tree.nodes)
            .map(|(mo, node)| {
                let mut r2 = mo.r2;
                if node.end - node.start <= EXACT_RADIUS && !node.is_leaf() {
                    let mut e: f64 = 0.0;
                    for &t in &tree.order[node.start as usize..node.end as usize] {
                        for v in surface.corners(t as usize) {
                            e = e.max((v - mo.center).length_squared());
                        }
                    }
                    r2 = r2.min(sanitize(e));
                }
                Hot {
                    center: mo.center,
                    r2,
                }
            })
            .collect();
        WindingTree { hot, expansions }
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
            let h = self.hot[id];
            let d = h.center - q;
            let l2 = d.length_squared();
            if l2 > beta2 * h.r2 {
                sum += far_field(&self.expansions[id], d, l2);
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
        self.expansions.capacity() * std::mem::size_of::<Expansion>()
            + self.hot.capacity() * std::mem::size_of::<Hot>()
    }
}

/// Solid angle of a node's triangles seen from `q`, `d = c - q`, `l2 = |d|^2`: the Taylor
/// expansion of `(x - q) / |x - q|^3` about `c` to second order, integrated over the triangles.
#[inline]
fn far_field(ex: &Expansion, d: Vec3, l2: f64) -> f64 {
    let inv2 = 1.0 / l2;
    let inv3 = inv2 / l2.sqrt();
    let m = ex.m.map(f64::from);
    let md = Vec3::new(
        m[0] * d.x + m[1] * d.y + m[2] * d.z,
        m[3] * d.x + m[4] * d.y + m[5] * d.z,
        m[6] * d.x + m[7] * d.y + m[8] * d.z,
    );
    let tr = m[0] + m[4] + m[8];
    let order1 = (ex.n.dot(d) + tr) * inv3 - 3.0 * d.dot(md) * inv3 * inv2;
    // second order: 1/2 H_ijk T_ijk with
    // H_ijk = -3 (D_ij d_k + D_ik d_j + D_jk d_i) / L^5 + 15 d_i d_j d_k / L^7,
    // = -3/2 (2 u + v).d / L^5 + 15/2 T[d, d, d] / L^7
    let dd = [
        d.x * d.x,
        d.x * d.y,
        d.x * d.z,
        d.y * d.y,
        d.y * d.z,
        d.z * d.z,
    ];
    let mut ddd = 0.0;
    for i in 0..3 {
        let ti = &ex.t[6 * i..6 * i + 6];
        let mut s = 0.0;
        for k in 0..6 {
            s += f64::from(ti[k]) * dd[k];
        }
        ddd += d[i] * s;
    }
    let w = Vec3::new(ex.w[0].into(), ex.w[1].into(), ex.w[2].into());
    let inv5 = inv3 * inv2;
    let order2 = -1.5 * w.dot(d) * inv5 + 7.5 * ddd * inv5 * inv2;
    order1 + order2
}

/// Fills the moments of node `id` and its subtree, `out` holding exactly the subtree's nodes
/// (preorder: the node, its left subtree, its right subtree); returns the node's bounding box.
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
            let (e0, e1, e2) = (a - center, b - center, c - center);
            let sum = e0 + e1 + e2;
            let mut cov = [0.0; 6];
            for (k, (j, l)) in SYM.iter().enumerate() {
                cov[k] = (e0[*j] * e0[*l] + e1[*j] * e1[*l] + e2[*j] * e2[*l] + sum[*j] * sum[*l])
                    / 12.0;
            }
            add_sym(&mut mo.t, an, &cov);
            for v in [a, b, c] {
                r2 = r2.max((v - center).length_squared());
            }
        }
        mo.r2 = sanitize(r2);
        out[0] = mo;
        return bb;
    }
    let (l, r) = (id + 1, node.right as usize);
    let (me, rest) = out.split_first_mut().expect("a node has its own slot");
    let (left, right) = rest.split_at_mut(r - l);
    let (bl, br) = if node.end - node.start > PAR_FILL {
        rayon::join(
            || fill(surface, tree, l, left),
            || fill(surface, tree, r, right),
        )
    } else {
        (fill(surface, tree, l, left), fill(surface, tree, r, right))
    };
    let (ml, mr) = (left[0], right[0]);
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
        // re-centre, dl = c_child - c:
        // M = M_child + N_child dl^T,
        // T_ijk = T_child,ijk + M_child,ij dl_k + M_child,ik dl_j + N_child,i dl_j dl_k
        let dl = ch.center - center;
        add_outer(&mut mo.m, ch.n, dl);
        for k in 0..18 {
            mo.t[k] += ch.t[k];
        }
        for i in 0..3 {
            for (s, (j, l)) in SYM.iter().enumerate() {
                let (j, l) = (*j, *l);
                mo.t[6 * i + s] +=
                    ch.m[3 * i + j] * dl[l] + ch.m[3 * i + l] * dl[j] + ch.n[i] * dl[j] * dl[l];
            }
        }
    }
    let bb = bl.union(&br);
    let by_children = [ml, mr]
        .iter()
        .map(|ch| (ch.center - center).length() + ch.r2.sqrt())
        .fold(0.0f64, f64::max);
    let by_box = far_corner(bb, center);
    mo.r2 = sanitize(by_children.min(by_box).powi(2));
    *me = mo;
    bb
}

/// Distance from `c` to the farthest corner of `b`.
fn far_corner(b: Aabb, c: Vec3) -> f64 {
    (b.max - c).abs().max((c - b.min).abs()).length()
}

/// The symmetric index pairs `(j, k)`, `j <= k`, in storage order.
const SYM: [(usize, usize); 6] = [(0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2)];

#[inline]
fn add_sym(t: &mut [f64; 18], a: Vec3, cov: &[f64; 6]) {
    for i in 0..3 {
        for k in 0..6 {
            t[6 * i + k] += a[i] * cov[k];
        }
    }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::winding::winding_number_direct;

    #[test]
    fn expansion_error_falls_with_distance() {
        // Barill et al. 2018: the truncated Taylor series of order 2 has error O((r/L)^3) relative
        // to the far patch's solid angle, so doubling L cuts the error by about 2^5 in absolute.
        let mut s = Surface::unit_cube();
        s.vertices
            .iter_mut()
            .for_each(|v| *v = *v * Vec3::new(1.0, 0.7, 0.3));
        s.triangles.truncate(9); // an open, bent patch
        s.tags.truncate(9);
        let tree = RadixTree::build(&s, 16); // one leaf
        let wt = WindingTree::build(&s, &tree);
        let ex = wt.expansions[0];
        let mo = wt.hot[0];
        let dir = Vec3::new(0.3, -0.5, 0.8).normalize();
        let err = |l: f64| {
            let q = mo.center - l * dir;
            let d = mo.center - q;
            let fast = far_field(&ex, d, d.length_squared()) / (4.0 * std::f64::consts::PI);
            let exact = winding_number_direct(q, (0..9).map(|t| s.corners(t)));
            (fast - exact).abs()
        };
        let r = mo.r2.sqrt();
        let (e4, e8) = (err(4.0 * r), err(8.0 * r));
        assert!(e8 < e4 / 16.0, "{e4} {e8}");
        assert!(e4 < 1e-3, "{e4}");
    }
}
