//! Fluid/solid classification of mesh vertices by the generalized winding number.
//!
//! Follows Jacobson, Kavan, Sorkine-Hornung (2013): a point is inside when its winding number is
//! at least 1/2. The winding number is evaluated only at corners of leaves the surface touches
//! (exact triangle-box test on the slightly inflated leaf box); every connected run of untouched
//! leaves (face adjacency) takes one class, read from an already classified corner of the run or
//! from one winding-number evaluation at its first leaf's centre. Invariant: for a closed
//! surface every vertex gets its exact class, since the winding number is constant on each
//! connected surface-free region.

use crate::topology::Topology;
use crate::util::UnionFind;
use octocut_octree::Octree;
use octocut_surface::SurfaceIndex;
use rayon::prelude::*;

pub(crate) struct Classes {
    /// Fluid flag per mesh vertex (point id).
    pub fluid: Vec<bool>,
    /// Leaves whose (inflated) box the surface touches.
    pub touched: Vec<bool>,
    /// Winding-number evaluations spent.
    pub evaluations: usize,
}

pub(crate) fn classify(
    tree: &Octree,
    index: &SurfaceIndex,
    topo: &Topology,
    fluid_inside: bool,
) -> Classes {
    let d = &tree.domain;
    let leaves = tree.leaves();
    let touched: Vec<bool> = leaves
        .par_iter()
        .map(|&k| {
            let b = d.key_box(k);
            index.any_triangle_in_box(&b.inflated(1e-7 * d.cell_size(k.level())))
        })
        .collect();
    let np = topo.grid.len();
    let mut known = vec![false; np];
    for (l, c) in topo.corners.iter().enumerate() {
        if touched[l] {
            for &p in c {
                known[p as usize] = true;
            }
        }
    }
    let eval: Vec<u32> = (0..np as u32).filter(|&p| known[p as usize]).collect();
    let vals: Vec<bool> = eval
        .par_iter()
        .map(|&p| index.is_inside(d.point(topo.grid[p as usize])))
        .collect();
    let mut fluid = vec![false; np];
    for (&p, &inside) in eval.iter().zip(&vals) {
        fluid[p as usize] = inside == fluid_inside;
    }
    let mut evaluations = eval.len();
    // runs of untouched leaves
    let mut uf = UnionFind::new(leaves.len());
    for f in &topo.faces {
        if !f.is_boundary() && !touched[f.e as usize] && !touched[f.n as usize] {
            uf.union(f.e, f.n);
        }
    }
    const UNKNOWN: u8 = 2;
    let mut run_class = vec![UNKNOWN; leaves.len()];
    for l in 0..leaves.len() as u32 {
        if touched[l as usize] {
            continue;
        }
        let r = uf.find(l) as usize;
        if run_class[r] == UNKNOWN {
            if let Some(&p) = topo.corners[l as usize]
                .iter()
                .find(|&&p| known[p as usize])
            {
                run_class[r] = fluid[p as usize] as u8;
            }
        }
    }
    let roots: Vec<u32> = (0..leaves.len() as u32)
        .filter(|&l| !touched[l as usize] && uf.find(l) == l && run_class[l as usize] == UNKNOWN)
        .collect();
    let rv: Vec<bool> = roots
        .par_iter()
        .map(|&l| index.is_inside(d.key_box(leaves[l as usize]).center()) == fluid_inside)
        .collect();
    evaluations += roots.len();
    for (&l, &f) in roots.iter().zip(&rv) {
        run_class[l as usize] = f as u8;
    }
    for l in 0..leaves.len() as u32 {
        if touched[l as usize] {
            continue;
        }
        let c = run_class[uf.find(l) as usize] == 1;
        for &p in &topo.corners[l as usize] {
            if !known[p as usize] {
                known[p as usize] = true;
                fluid[p as usize] = c;
            }
        }
    }
    Classes {
        fluid,
        touched,
        evaluations,
    }
}
