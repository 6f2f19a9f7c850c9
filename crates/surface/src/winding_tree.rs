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
//! near leaves sum the exact solid angles (Van Oosterom and Strackee 1983, as
//! [`crate::winding::solid_angle`]), here as the argument of a running product of complex
//! numbers, one `atan2` per query (see `Near`), over a copy of the corners in tree order.
//! The winding number is the one defined by Jacobson, Kavan, Sorkine-Hornung (2013): the
//! summed solid angle over 4 pi. Batches walk the tree in packets of [`PACKET`] points (node
//! tests and far-field terms vectorised across the points, AVX2 when the CPU has it).
//!
//! Invariants: a node whose sphere (radius `r`) holds `q` is never expanded (`beta >= 1`); the
//! result for a point depends only on the point, the surface and `beta`, bit for bit the same
//! alone or in any packet (same nodes, same order, no fused multiply-add); the truncation error
//! falls as `beta` grows (measured in `tests/spatial_queries.rs`).

use crate::geom::{Aabb, Vec3};
use crate::surface::Surface;
use crate::tree::RadixTree;
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
    /// Second moment, `t[6 i + s2(j, k)] = sum a n_i S_jk` with `S` the triangle's mean of
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

/// A node's expansion as stored for queries, reduced to what the contraction with the kernel
/// derivatives sees (the symmetric parts of `M` and `T`) and scaled by their constants:
/// `far = (n.d + tr) / L^3 + (m[d, d] + w.d) / L^5 + t[d, d, d] / L^7` (see [`far_field`]).
#[derive(Clone, Copy, Debug)]
struct Expansion {
    /// Area vector sum `N`.
    n: [f64; 3],
    /// `tr M`.
    tr: f64,
    /// `-3/2 (2 u + v)`, `u_k = sum_i T_iik`, `v_i = sum_j T_ijj`.
    w: [f64; 3],
    /// `-3 M` symmetrized, on the monomials `d_j d_k` of [`SYM`] (off-diagonal counted twice).
    m: [f64; 6],
    /// `15/2 T` symmetrized, on the monomials `d_i d_j d_k` of [`SYM3`].
    t: [f64; 10],
}

impl Expansion {
    fn from_moments(mo: &Moments) -> Expansion {
        let t = &mo.t;
        let mut w = [0.0; 3];
        let (mut m, mut tt) = ([0.0; 6], [0.0; 10]);
        for i in 0..3 {
            for j in 0..3 {
                w[j] += -1.5 * (2.0 * t[6 * i + s2(i, j)] + t[6 * j + s2(i, i)]);
                m[s2(i, j)] += -3.0 * mo.m[3 * i + j];
                for k in 0..3 {
                    tt[s3(i, j, k)] += 7.5 * t[6 * i + s2(j, k)];
                }
            }
        }
        Expansion {
            n: mo.n.to_array(),
            tr: mo.m[0] + mo.m[4] + mo.m[8],
            w,
            m,
            t: tt,
        }
    }
}

/// The per-node expansions of a [`RadixTree`] (same node ids).
#[derive(Clone, Debug, Default)]
pub struct WindingTree {
    hot: Vec<Hot>,
    expansions: Vec<Expansion>,
    /// Triangle corners in tree order, padded with `LANES` degenerate triangles at the end.
    corners: Vec<[f64; 9]>,
}

/// Subtrees larger than this are filled in parallel.
const PAR_FILL: u32 = 8192;
/// Nodes of at most this many triangles get the exact radius (larger ones a bound).
const EXACT_RADIUS: u32 = 2048;

/// Depth bound of the radix tree: 63 key bits plus halving of equal keys (< 2^32 triangles).
const STACK: usize = 128;

/// Points per packet of [`WindingTree::winding_numbers_packet`] (at most 32, the mask bits):
/// 16 measured ~20% faster than 8 and 24 on the torus bench (node data read once per 16
/// points; the packet's walk is the union of its points' walks).
pub const PACKET: usize = 16;

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
        let mut corners = Vec::with_capacity(tree.order.len() + LANES);
        tree.order
            .par_iter()
            .map(|&t| {
                let [a, b, c] = surface.corners(t as usize);
                [a.x, a.y, a.z, b.x, b.y, b.z, c.x, c.y, c.z]
            })
            .collect_into_vec(&mut corners);
        corners.extend([[0.0; 9]; LANES]);
        WindingTree {
            hot,
            expansions,
            corners,
        }
    }

    /// Winding number at `q` with far-field criterion `L > beta r` (beta clamped to >= 1).
    pub fn winding_number(&self, tree: &RadixTree, q: Vec3, beta: f64) -> f64 {
        if tree.nodes.is_empty() {
            return 0.0;
        }
        let beta2 = beta.max(1.0).powi(2);
        let mut stack = [0u32; STACK];
        let mut top = 1;
        let mut far = 0.0;
        let mut near = Near::new();
        // pending run of consecutive near leaves (tree order), summed in one pass
        let (mut run0, mut run1) = (0usize, 0usize);
        while top > 0 {
            top -= 1;
            let id = stack[top] as usize;
            let h = self.hot[id];
            let d = h.center - q;
            let l2 = d.length_squared();
            if l2 > beta2 * h.r2 {
                far += far_field(&self.expansions[id], d.x, d.y, d.z, l2);
                continue;
            }
            let node = tree.nodes[id];
            if node.is_leaf() {
                let (s, e) = (node.start as usize, node.end as usize);
                if s != run1 {
                    near.add_run(q, &self.corners, run0, run1);
                    run0 = s;
                }
                run1 = e;
            } else {
                stack[top] = node.right;
                stack[top + 1] = id as u32 + 1;
                top += 2;
            }
        }
        near.add_run(q, &self.corners, run0, run1);
        (far + near.solid_angle()) / (4.0 * std::f64::consts::PI)
    }

    /// [`WindingTree::winding_number`] of up to [`PACKET`] points at once (`out[k]` for
    /// `qs[k]`), bit for bit the same values: the points walk the tree together, each point
    /// taking the same far nodes and near leaves in the same order as alone, while the node
    /// tests and far-field terms run across the points (vectorised). Best for nearby points.
    pub fn winding_numbers_packet(
        &self,
        tree: &RadixTree,
        qs: &[Vec3],
        beta: f64,
        out: &mut [f64],
    ) {
        let n = qs.len().min(PACKET).min(out.len());
        if n == 0 {
            return;
        }
        if tree.nodes.is_empty() {
            out[..n].fill(0.0);
            return;
        }
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // Safety: the CPU has the features the function is compiled for.
            unsafe { self.packet_avx2(tree, &qs[..n], beta, &mut out[..n]) };
            return;
        }
        self.packet(tree, &qs[..n], beta, &mut out[..n]);
    }

    /// [`WindingTree::packet`] compiled for AVX2 (the same operations, no fused multiply-add,
    /// so the same results).
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn packet_avx2(&self, tree: &RadixTree, qs: &[Vec3], beta: f64, out: &mut [f64]) {
        self.packet(tree, qs, beta, out)
    }

    /// The packet walk: `qs.len()` in `1..=PACKET`, a non-empty tree.
    #[inline(always)]
    fn packet(&self, tree: &RadixTree, qs: &[Vec3], beta: f64, out: &mut [f64]) {
        let n = qs.len();
        let beta2 = beta.max(1.0).powi(2);
        let (mut qx, mut qy, mut qz) = ([0.0; PACKET], [0.0; PACKET], [0.0; PACKET]);
        for k in 0..PACKET {
            let q = qs[k.min(n - 1)];
            (qx[k], qy[k], qz[k]) = (q.x, q.y, q.z);
        }
        let full = (1u32 << n).wrapping_sub(1);
        let mut stack = [(0u32, 0u32); STACK];
        stack[0] = (0, full);
        let mut top = 1;
        let mut far = [0.0; PACKET];
        let mut near = [Near::new(); PACKET];
        let (mut run0, mut run1) = ([0usize; PACKET], [0usize; PACKET]);
        let (mut dx, mut dy, mut dz, mut l2) =
            ([0.0; PACKET], [0.0; PACKET], [0.0; PACKET], [0.0; PACKET]);
        while top > 0 {
            top -= 1;
            let (id, mask) = stack[top];
            let h = self.hot[id as usize];
            let lim = beta2 * h.r2;
            let mut fm = 0u32;
            for k in 0..PACKET {
                dx[k] = h.center.x - qx[k];
                dy[k] = h.center.y - qy[k];
                dz[k] = h.center.z - qz[k];
                l2[k] = dx[k] * dx[k] + dy[k] * dy[k] + dz[k] * dz[k];
                fm |= ((l2[k] > lim) as u32) << k;
            }
            let fm = fm & mask;
            let nm = mask & !fm;
            if fm != 0 {
                let ex = &self.expansions[id as usize];
                for k in 0..PACKET {
                    let v = far_field(ex, dx[k], dy[k], dz[k], l2[k]);
                    // adding +0 leaves a sum unchanged (it never holds -0)
                    far[k] += if fm >> k & 1 == 1 { v } else { 0.0 };
                }
            }
            if nm == 0 {
                continue;
            }
            let node = tree.nodes[id as usize];
            if node.is_leaf() {
                let (s, e) = (node.start as usize, node.end as usize);
                let mut m = nm;
                while m != 0 {
                    let k = m.trailing_zeros() as usize;
                    m &= m - 1;
                    if s != run1[k] {
                        let q = Vec3::new(qx[k], qy[k], qz[k]);
                        near[k].add_run(q, &self.corners, run0[k], run1[k]);
                        run0[k] = s;
                    }
                    run1[k] = e;
                }
            } else {
                stack[top] = (node.right, nm);
                stack[top + 1] = (id + 1, nm);
                top += 2;
            }
        }
        for k in 0..n {
            let q = Vec3::new(qx[k], qy[k], qz[k]);
            near[k].add_run(q, &self.corners, run0[k], run1[k]);
            out[k] = (far[k] + near[k].solid_angle()) / (4.0 * std::f64::consts::PI);
        }
    }

    /// The work of one [`WindingTree::winding_number`] call: `(far nodes expanded, triangles
    /// summed exactly)`.
    pub fn work(&self, tree: &RadixTree, q: Vec3, beta: f64) -> (usize, usize) {
        let beta2 = beta.max(1.0).powi(2);
        let (mut far, mut near) = (0, 0);
        let mut stack = vec![0u32];
        while let Some(id) = stack.pop().filter(|_| !tree.nodes.is_empty()) {
            let h = self.hot[id as usize];
            let node = tree.nodes[id as usize];
            if (h.center - q).length_squared() > beta2 * h.r2 {
                far += 1;
            } else if node.is_leaf() {
                near += (node.end - node.start) as usize;
            } else {
                stack.extend([node.right, id + 1]);
            }
        }
        (far, near)
    }

    /// Heap bytes held.
    pub fn heap_bytes(&self) -> usize {
        self.expansions.capacity() * std::mem::size_of::<Expansion>()
            + self.hot.capacity() * std::mem::size_of::<Hot>()
            + self.corners.capacity() * std::mem::size_of::<[f64; 9]>()
    }
}

/// Lanes of the near-field sum (independent running products).
const LANES: usize = 4;

/// Running sum of exact triangle solid angles as arguments of complex products.
///
/// By Van Oosterom and Strackee (1983) a triangle's solid angle is `2 arg(w)`,
/// `w = D + i det` (`det` the triple product of the corners relative to `q`, `D` their length
/// and dot product sum), so a sum of solid angles is twice the argument of the product of the
/// `w`s. Each lane keeps `z` with `arg z` in about `[-pi/4, pi/4]` and counts the quarter turns
/// taken out (`w` is first turned into the right half plane by a half turn, then the product
/// back by a quarter turn), so no product comes near the branch cut at `pi`; `z` is rescaled
/// by a power of two after each step. One `atan2` per query.
#[derive(Clone, Copy, Debug)]
struct Near {
    re: [f64; LANES],
    im: [f64; LANES],
    /// Quarter turns taken out, exact small integers.
    quarters: [f64; LANES],
}

impl Near {
    fn new() -> Near {
        Near {
            re: [1.0; LANES],
            im: [0.0; LANES],
            quarters: [0.0; LANES],
        }
    }

    /// Adds the triangles `corners[start..end]` (`corners` padded by `LANES` at the end).
    #[inline(always)]
    fn add_run(&mut self, q: Vec3, corners: &[[f64; 9]], start: usize, end: usize) {
        let mut i = start;
        while i < end {
            let group: &[[f64; 9]; LANES] = corners[i..i + LANES]
                .try_into()
                .expect("corners are padded");
            self.add_group(q, group, end - i);
            i += LANES;
        }
    }

    /// Adds the first `valid` triangles of `g` (lane `l` takes triangle `l`).
    #[inline(always)]
    fn add_group(&mut self, q: Vec3, g: &[[f64; 9]; LANES], valid: usize) {
        let mut wr = [1.0; LANES];
        let mut wi = [0.0; LANES];
        let mut turn = [0.0; LANES];
        for l in 0..LANES {
            let t = &g[l];
            let (ax, ay, az) = (t[0] - q.x, t[1] - q.y, t[2] - q.z);
            let (bx, by, bz) = (t[3] - q.x, t[4] - q.y, t[5] - q.z);
            let (cx, cy, cz) = (t[6] - q.x, t[7] - q.y, t[8] - q.z);
            let la = (ax * ax + ay * ay + az * az).sqrt();
            let lb = (bx * bx + by * by + bz * bz).sqrt();
            let lc = (cx * cx + cy * cy + cz * cz).sqrt();
            let det =
                ax * (by * cz - bz * cy) + ay * (bz * cx - bx * cz) + az * (bx * cy - by * cx);
            let div = la * lb * lc
                + (ax * bx + ay * by + az * bz) * lc
                + (ax * cx + ay * cy + az * cz) * lb
                + (bx * cx + by * cy + bz * cz) * la;
            // zero triple product: principal value 0, as `crate::winding::solid_angle`
            let skip = det == 0.0 || l >= valid;
            let flip = div < 0.0;
            let s = if flip { -1.0 } else { 1.0 };
            wr[l] = if skip { 1.0 } else { s * div };
            wi[l] = if skip { 0.0 } else { s * det };
            turn[l] = if skip || !flip {
                0.0
            } else if det > 0.0 {
                2.0
            } else {
                -2.0
            };
        }
        for l in 0..LANES {
            let (zr, zi) = (self.re[l], self.im[l]);
            let pr = zr * wr[l] - zi * wi[l];
            let pi = zr * wi[l] + zi * wr[l];
            let (re, im, t) = quarter_normalize(pr, pi);
            let k = scale_of(re);
            self.re[l] = re * k;
            self.im[l] = im * k;
            self.quarters[l] += turn[l] + t;
        }
    }

    /// The summed solid angle of all triangles added.
    fn solid_angle(&self) -> f64 {
        let (mut zr, mut zi, mut quarters) = (1.0, 0.0, 0.0);
        for l in 0..LANES {
            let pr = zr * self.re[l] - zi * self.im[l];
            let pi = zr * self.im[l] + zi * self.re[l];
            let (re, im, t) = quarter_normalize(pr, pi);
            let k = scale_of(re);
            (zr, zi) = (re * k, im * k);
            quarters += self.quarters[l] + t;
        }
        2.0 * (zi.atan2(zr) + quarters * std::f64::consts::FRAC_PI_2)
    }
}

/// Turns `(re, im)` (argument within `(-3 pi / 4, 3 pi / 4]` up to rounding) by a quarter turn
/// when its argument is beyond `pi / 4`: the new value and the quarter turns taken out.
#[inline(always)]
fn quarter_normalize(re: f64, im: f64) -> (f64, f64, f64) {
    let keep = re >= im.abs();
    let up = im > 0.0;
    let nr = if keep { re } else { im.abs() };
    let ni = if keep {
        im
    } else if up {
        -re
    } else {
        re
    };
    let t = if keep {
        0.0
    } else if up {
        1.0
    } else {
        -1.0
    };
    (nr, ni, t)
}

/// A power of two bringing the non-negative `x` into `[1, 2)` (clamped for zero and huge `x`).
#[inline(always)]
fn scale_of(x: f64) -> f64 {
    let e = ((x.to_bits() >> 52) & 0x7ff).clamp(1, 2045);
    f64::from_bits((2046 - e) << 52)
}

/// Solid angle of a node's triangles seen from `q`, `d = c - q`, `l2 = |d|^2`: the Taylor
/// expansion of `(x - q) / |x - q|^3` about `c` to second order, integrated over the triangles.
///
/// Order 0 and 1: `(N.d + tr M) / L^3 - 3 d^T M d / L^5`; order 2: `1/2 H_ijk T_ijk`,
/// `H_ijk = -3 (D_ij d_k + D_ik d_j + D_jk d_i) / L^5 + 15 d_i d_j d_k / L^7`, i.e.
/// `-3/2 (2 u + v).d / L^5 + 15/2 T[d, d, d] / L^7`.
#[inline(always)]
fn far_field(ex: &Expansion, x: f64, y: f64, z: f64, l2: f64) -> f64 {
    let l = l2.sqrt();
    let inv3 = 1.0 / (l2 * l);
    let inv2 = inv3 * l;
    let dd = [x * x, x * y, x * z, y * y, y * z, z * z];
    let ddd = [
        x * dd[0],
        x * dd[1],
        x * dd[2],
        x * dd[3],
        x * dd[4],
        x * dd[5],
        y * dd[3],
        y * dd[4],
        y * dd[5],
        z * dd[5],
    ];
    let o3 = ex.n[0] * x + ex.n[1] * y + ex.n[2] * z + ex.tr;
    let mut o5 = ex.w[0] * x + ex.w[1] * y + ex.w[2] * z;
    for (c, v) in ex.m.iter().zip(&dd) {
        o5 += c * v;
    }
    let mut o7 = 0.0;
    for (c, v) in ex.t.iter().zip(&ddd) {
        o7 += c * v;
    }
    inv3 * (o3 + inv2 * (o5 + inv2 * o7))
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

/// The sorted index triples `(i, j, k)`, `i <= j <= k`, in storage order.
const SYM3: [(usize, usize, usize); 10] = [
    (0, 0, 0),
    (0, 0, 1),
    (0, 0, 2),
    (0, 1, 1),
    (0, 1, 2),
    (0, 2, 2),
    (1, 1, 1),
    (1, 1, 2),
    (1, 2, 2),
    (2, 2, 2),
];

/// Storage position of the pair `(j, k)` in [`SYM`] order.
fn s2(j: usize, k: usize) -> usize {
    [[0, 1, 2], [1, 3, 4], [2, 4, 5]][j][k]
}

/// Storage position of the triple `(i, j, k)` in [`SYM3`] order.
fn s3(i: usize, j: usize, k: usize) -> usize {
    let mut v = [i, j, k];
    v.sort_unstable();
    SYM3.iter()
        .position(|&t| t == (v[0], v[1], v[2]))
        .expect("indices below 3")
}

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
            let fast =
                far_field(&ex, d.x, d.y, d.z, d.length_squared()) / (4.0 * std::f64::consts::PI);
            let exact = winding_number_direct(q, (0..9).map(|t| s.corners(t)));
            (fast - exact).abs()
        };
        let r = mo.r2.sqrt();
        let (e4, e8) = (err(4.0 * r), err(8.0 * r));
        println!(
            "error at 4 r: {e4:.3e}, at 8 r: {e8:.3e}, ratio {:.1}",
            e4 / e8
        );
        assert!(e8 < e4 / 16.0, "{e4} {e8}");
        assert!(e4 < 1e-3, "{e4}");
    }

    #[test]
    fn near_product_matches_atan2_sum() {
        // Van Oosterom and Strackee 1983: the product's argument equals the sum of the
        // per-triangle atan2 values; closed fans around q sum to 4 pi (w = 1, Jacobson et al.
        // 2013), which crosses the branch cut many times.
        let s = crate::shapes::uv_sphere(Vec3::ZERO, 1.0, 24, 12, "s");
        let tree = RadixTree::build(&s, 8);
        let wt = WindingTree::build(&s, &tree);
        let n = tree.order.len();
        let mut state = 7u64;
        let mut rnd = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        for k in 0..400 {
            let q = match k % 4 {
                0 => Vec3::new(rnd(), rnd(), rnd()) * 3.0 - 1.5,
                1 => Vec3::new(rnd(), rnd(), rnd()) * 0.2 - 0.1,
                // on a corner and on a triangle (principal value)
                2 => Vec3::from_slice(&wt.corners[k % n][0..3]),
                _ => {
                    let c = &wt.corners[k % n];
                    (Vec3::from_slice(&c[0..3])
                        + Vec3::from_slice(&c[3..6])
                        + Vec3::from_slice(&c[6..9]))
                        / 3.0
                }
            };
            let (a, b) = (k % n, n.min(k % n + 1 + k % 97));
            let mut near = Near::new();
            near.add_run(q, &wt.corners, a, b);
            near.add_run(q, &wt.corners, b, n);
            let mut direct = 0.0;
            for c in &wt.corners[a..n] {
                let v = |i: usize| Vec3::new(c[i], c[i + 1], c[i + 2]);
                direct += crate::winding::solid_angle(q, v(0), v(3), v(6));
            }
            assert!(
                (near.solid_angle() - direct).abs() < 1e-11,
                "{q}: {} {direct}",
                near.solid_angle()
            );
        }
    }

    #[test]
    fn moved_moments_equal_direct_moments() {
        // The shift of a Taylor expansion's moments is exact (binomial expansion of
        // (e + dl)^k): the root of a deep tree must carry the moments of a single leaf holding
        // every triangle, computed directly about the same centroid.
        let mut s = crate::shapes::torus(Vec3::ZERO, 1.0, 0.3, 12, 8, "t");
        s.triangles.truncate(150); // open, so no moment cancels
        s.tags.truncate(150);
        let (deep, flat) = (RadixTree::build(&s, 2), RadixTree::build(&s, 1000));
        assert!(deep.nodes.len() > 100 && flat.nodes.len() == 1);
        let (a, b) = (WindingTree::build(&s, &deep), WindingTree::build(&s, &flat));
        assert!((a.hot[0].center - b.hot[0].center).length() < 1e-12);
        let (ea, eb) = (&a.expansions[0], &b.expansions[0]);
        let close = |x: &[f64], y: &[f64]| {
            let scale = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            x.iter().zip(y).all(|(p, q)| (p - q).abs() <= 1e-9 * scale)
        };
        assert!(close(&ea.n, &eb.n) && (ea.tr - eb.tr).abs() < 1e-12);
        assert!(close(&ea.m, &eb.m) && close(&ea.t, &eb.t) && close(&ea.w, &eb.w));
    }

    #[test]
    fn packets_equal_single_queries() {
        // The packet walk must reproduce each point's own walk bit for bit, for full and
        // partial packets, points near and far, on and off the surface.
        let s = crate::shapes::torus(Vec3::ZERO, 1.0, 0.3, 30, 12, "t");
        let tree = RadixTree::build(&s, 8);
        let wt = WindingTree::build(&s, &tree);
        let pts: Vec<Vec3> = (0..61)
            .map(|i| {
                let t = i as f64 * 0.37;
                Vec3::new(1.3 * t.cos(), 1.1 * t.sin(), 0.05 * (i % 9) as f64 - 0.2)
            })
            .chain([Vec3::from_slice(&wt.corners[5][0..3]), Vec3::splat(9.0)])
            .collect();
        for beta in [1.0, 2.0, 3.5] {
            for chunk in pts.chunks(PACKET).chain(pts.chunks(3)) {
                let mut out = [f64::NAN; PACKET];
                wt.winding_numbers_packet(&tree, chunk, beta, &mut out);
                for (k, &q) in chunk.iter().enumerate() {
                    assert_eq!(out[k], wt.winding_number(&tree, q, beta), "{q}");
                }
            }
        }
    }
}
