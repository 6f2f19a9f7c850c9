//! Octree stage benchmarks: refinement toward a ~100k-triangle sphere plus balance (end to end,
//! about 5.3M leaves), balance alone on a ~10M-leaf refined tree, and the cost growth of
//! refine + balance over about 1M and 4M leaves (16M: see `bench_growth`).
//!
//! `cargo bench --bench octree -- --warm-up-time 1 --measurement-time 3`

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use glam::DVec3 as Vec3;
use octocut_octree::{
    balance, refine, refine_unbalanced, BalanceMode, Domain, RefineSpec, SurfaceRule, TagSel,
};
use octocut_surface::{Aabb, Surface, SurfaceIndex};
use std::time::Duration;

/// A UV sphere with `2 n (2 n - 1)` triangles... about `4 n^2`.
fn uv_sphere(n: usize, r: f64) -> Surface {
    octocut_surface::shapes::uv_sphere(Vec3::ZERO, r, 2 * n as u32, n as u32, "sphere")
}

fn setup(level: u32, radius: f64) -> (Domain, SurfaceIndex, RefineSpec) {
    let index = SurfaceIndex::new(uv_sphere(158, radius)); // 99 224 triangles
    let d = Domain::new(Aabb::new(Vec3::splat(-2.0), Vec3::splat(2.0)), 4.0).unwrap();
    let mut spec = RefineSpec::default();
    spec.surface.push(SurfaceRule {
        tag: TagSel::All,
        size: 4.0 / (1u64 << level) as f64,
        finest_size: None,
    });
    (d, index, spec)
}

fn bench_refine(c: &mut Criterion) {
    let (d, index, spec) = setup(10, 1.2);
    let leaves = refine(&d, &index, &spec).unwrap().stats.leaves;
    let mut g = c.benchmark_group("octree_refine_balance");
    g.sample_size(10);
    g.throughput(Throughput::Elements(leaves));
    g.bench_function(BenchmarkId::new("sphere_100k_tris", leaves), |b| {
        b.iter(|| refine(&d, &index, &spec).unwrap())
    });
    g.finish();
}

fn bench_balance(c: &mut Criterion) {
    let (d, index, spec) = setup(11, 0.85);
    let (raw, _) = refine_unbalanced(&d, &index, &spec).unwrap();
    let leaves = balance(&d, raw.clone(), BalanceMode::Full, 1)
        .unwrap()
        .len() as u64;
    let mut g = c.benchmark_group("octree_balance");
    g.sample_size(10);
    g.throughput(Throughput::Elements(leaves));
    g.bench_function(BenchmarkId::new("refined_sphere", leaves), |b| {
        b.iter_batched(
            || raw.clone(),
            |r| balance(&d, r, BalanceMode::Full, 1).unwrap(),
            criterion::BatchSize::LargeInput,
        )
    });
    g.finish();
}

fn bench_growth(c: &mut Criterion) {
    let mut g = c.benchmark_group("octree_growth");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(2));
    // about 1M and 4M leaves: surface level 9 and 10 on the same sphere (16M, level 11, is timed
    // once by `cargo run --release -p octocut-octree --example octree_scale -- 11`)
    for level in [9u32, 10] {
        let (d, index, spec) = setup(level, 1.0);
        let leaves = refine(&d, &index, &spec).unwrap().stats.leaves;
        g.throughput(Throughput::Elements(leaves));
        g.bench_function(BenchmarkId::new("refine_balance", leaves), |b| {
            b.iter(|| refine(&d, &index, &spec).unwrap())
        });
    }
    g.finish();
}

fn bench_neighbours(c: &mut Criterion) {
    let (d, index, spec) = setup(9, 1.0);
    let tree = refine(&d, &index, &spec).unwrap().tree;
    let n = tree.leaves().len() as u32;
    let mut g = c.benchmark_group("octree_neighbours");
    g.sample_size(10);
    g.throughput(Throughput::Elements(n as u64));
    // all six faces of every leaf, as the cut-cell stage asks
    g.bench_function(BenchmarkId::new("six_faces_every_leaf", n), |b| {
        let mut out = Vec::new();
        b.iter(|| {
            let mut total = 0usize;
            for leaf in 0..n {
                for f in 0..6 {
                    tree.face_neighbours(leaf, f, &mut out);
                    total += out.len();
                }
            }
            total
        })
    });
    g.finish();
}

criterion_group!(
    benches,
    bench_refine,
    bench_balance,
    bench_growth,
    bench_neighbours
);
criterion_main!(benches);
