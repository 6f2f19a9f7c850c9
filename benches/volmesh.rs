//! Validation and quality of a 1M-cell block of cubes (100^3), and of a block with refined
//! cells (hanging faces, polyhedral coarse cells).

use criterion::{criterion_group, criterion_main, Criterion};
use octocut_volmesh::{quality, testmesh};

fn bench(c: &mut Criterion) {
    let block = testmesh::block(100, 0.01);
    let refine: Vec<[u32; 3]> = (0..40).flat_map(|x| [[x, x, 20], [x, 20, x]]).collect();
    let refined = testmesh::refined_block(40, 0.025, &refine);
    let mut g = c.benchmark_group("volmesh");
    g.sample_size(10);
    g.bench_function("validate_block_1M", |b| b.iter(|| block.validate()));
    g.bench_function("quality_block_1M", |b| b.iter(|| quality(&block, |_| 0.01)));
    g.bench_function("validate_refined_64k", |b| b.iter(|| refined.validate()));
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
