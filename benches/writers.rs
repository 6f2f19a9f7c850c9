//! Writing a 1M-cell block of cubes (hexahedra) and a block with refined cells (a mix of
//! hexahedra and polyhedra) as VTU, appended raw encoding.

use criterion::{criterion_group, criterion_main, Criterion};
use octocut_volmesh::testmesh;
use octocut_writers::{write_vtp, write_vtu, Encoding};

fn bench(c: &mut Criterion) {
    let dir = tempfile::tempdir().unwrap();
    let block = testmesh::block(100, 0.01);
    let refine: Vec<[u32; 3]> = (0..40).flat_map(|x| [[x, x, 20], [x, 20, x]]).collect();
    let refined = testmesh::refined_block(40, 0.025, &refine);
    let mut g = c.benchmark_group("writers");
    g.sample_size(10);
    for (name, m) in [("block_1M", &block), ("refined_64k", &refined)] {
        let p = dir.path().join(format!("{name}.vtu"));
        g.bench_function(format!("write_vtu_{name}"), |b| {
            b.iter(|| write_vtu(m, &[], &p, Encoding::Appended).unwrap())
        });
        let bytes = std::fs::metadata(&p).unwrap().len();
        println!(
            "{name}: {} cells, {bytes} bytes, {:.1} bytes/cell",
            m.n_cells(),
            bytes as f64 / m.n_cells() as f64
        );
        let q = dir.path().join(format!("{name}.vtp"));
        g.bench_function(format!("write_vtp_{name}"), |b| {
            b.iter(|| write_vtp(m, &q, Encoding::Appended).unwrap())
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
