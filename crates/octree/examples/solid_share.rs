//! How many leaves inside the body the refinement makes before the balance, and what
//! classifying its surface-free leaves by winding number would cost: the figures behind
//! benches/README "Cut-stage levers measured and not taken".
//! `cargo run --release -p octocut-octree --example solid_share -- [surface size, 0.005]` on the
//! 101,760-triangle UV sphere of `make_body` in the box [-5, 5]^3 with base cells of 1.

use octocut_octree::{refine, refine_unbalanced, Domain, RefineSpec, SurfaceRule, TagSel};
use octocut_surface::{Aabb, SurfaceIndex, Vec3};
use std::time::Instant;

fn main() {
    let size: f64 = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(0.005);
    let s = octocut_surface::shapes::uv_sphere(Vec3::ZERO, 1.0, 320, 160, "body");
    let index = SurfaceIndex::new(s);
    let d = Domain::new(Aabb::new(Vec3::splat(-5.0), Vec3::splat(5.0)), 1.0).unwrap();
    let mut spec = RefineSpec::default();
    spec.surface.push(SurfaceRule {
        tag: TagSel::All,
        size,
        finest_size: None,
    });
    let (raw, _) = refine_unbalanced(&d, &index, &spec).unwrap();
    let t = Instant::now();
    let free: Vec<Vec3> = raw
        .iter()
        .map(|&k| d.key_box(k))
        .filter(|b| !index.any_triangle_in_box(b))
        .map(|b| b.center())
        .collect();
    let t_free = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let w = index.winding_numbers(&free);
    let t_wind = t.elapsed().as_secs_f64();
    let inside = w.iter().filter(|&&x| x >= 0.5).count();
    println!(
        "before balance: {} leaves, {} meeting no triangle ({t_free:.2} s), {inside} of those \
         inside (winding numbers {t_wind:.2} s)",
        raw.len(),
        free.len()
    );
    let r = refine(&d, &index, &spec).unwrap();
    let leaves = r.tree.leaves();
    let crossed = leaves
        .iter()
        .filter(|&&k| index.any_triangle_in_box(&d.key_box(k)))
        .count();
    let centres: Vec<Vec3> = leaves.iter().map(|&k| d.key_box(k).center()).collect();
    let inside = index
        .winding_numbers(&centres)
        .iter()
        .filter(|&&x| x >= 0.5)
        .count();
    println!(
        "balanced: {} leaves, {crossed} meeting a triangle, {inside} with the centre inside",
        leaves.len()
    );
}
