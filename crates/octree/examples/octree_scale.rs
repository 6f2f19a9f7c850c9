//! Times refinement and balance toward a UV sphere at a given surface level, for cost-growth
//! figures: `cargo run --release -p octocut-octree --example octree_scale -- <level> [tris]`.

use octocut_octree::{balance, refine, BalanceMode, Domain, RefineSpec, SurfaceRule, TagSel};
use octocut_surface::{Aabb, Surface, SurfaceIndex, Vec3};
use std::time::Instant;

fn uv_sphere(n: usize, r: f64) -> Surface {
    octocut_surface::shapes::uv_sphere(Vec3::ZERO, r, 2 * n as u32, n as u32, "sphere")
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let level: u32 = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(9);
    let radius: f64 = args.get(3).and_then(|s| s.parse().ok()).unwrap_or(1.0);
    let n: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(158);
    let surface = uv_sphere(n, radius);
    let ntri = surface.triangles.len();
    let index = SurfaceIndex::new(surface);
    let d = Domain::new(Aabb::new(Vec3::splat(-2.0), Vec3::splat(2.0)), 4.0).unwrap();
    let mut spec = RefineSpec::default();
    spec.surface.push(SurfaceRule {
        tag: TagSel::All,
        size: 4.0 / (1u64 << level) as f64,
        finest_size: None,
    });
    if args.get(4).map(String::as_str) == Some("mem") {
        // peak memory of balance alone: unbalanced tree in, balanced tree out
        let (raw, _) = octocut_octree::refine_unbalanced(&d, &index, &spec).unwrap();
        let n_raw = raw.len() as u64;
        let (before, _) = rss();
        let out = balance(&d, raw, BalanceMode::Full, 1).unwrap();
        let (after, hwm) = rss();
        let base = before - 16 * n_raw;
        let n = out.len() as u64;
        println!(
            "balance: {n_raw} -> {n} leaves; RSS before {} MB, after {} MB, peak {} MB; peak above baseline {:.1} bytes/leaf; tree {:.1} bytes/leaf",
            before >> 20,
            after >> 20,
            hwm >> 20,
            (hwm - base) as f64 / n as f64,
            (after - base) as f64 / n as f64
        );
        return;
    }
    let t = Instant::now();
    let r = refine(&d, &index, &spec).unwrap();
    let total = t.elapsed().as_secs_f64();
    let leaves = r.tree.leaves().len();
    println!(
        "level {level} tris {ntri}: refined {} -> balanced {} leaves, refine+balance {:.3} s, {:.2} M leaves/s, {:.1} ns/leaf",
        r.stats.leaves_refined,
        leaves,
        total,
        leaves as f64 / total / 1e6,
        total / leaves as f64 * 1e9
    );
    println!("per level {:?}", r.stats.leaves_per_level);
    let tree = r.tree.into_leaves();
    let t = Instant::now();
    let (un, _) = octocut_octree::refine_unbalanced(&d, &index, &spec).unwrap();
    let rt = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let b2 = balance(&d, un, BalanceMode::Full, 1).unwrap();
    let bt2 = t.elapsed().as_secs_f64();
    assert_eq!(b2, tree);
    println!(
        "criteria alone {rt:.3} s, balance of the refined tree {bt2:.3} s ({:.2} M leaves/s)",
        leaves as f64 / bt2 / 1e6
    );
    let t = Instant::now();
    let b = balance(&d, tree.clone(), BalanceMode::Full, 1).unwrap();
    let bt = t.elapsed().as_secs_f64();
    assert_eq!(b.len(), leaves);
    println!(
        "re-balance of a balanced tree {:.3} s ({:.2} M leaves/s)",
        bt,
        leaves as f64 / bt / 1e6
    );
}

/// `VmRSS` and `VmHWM` of this process in bytes (Linux).
pub fn rss() -> (u64, u64) {
    let s = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    let field = |name: &str| {
        s.lines()
            .find(|l| l.starts_with(name))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse::<u64>().ok())
            .unwrap_or(0)
            * 1024
    };
    (field("VmRSS:"), field("VmHWM:"))
}
