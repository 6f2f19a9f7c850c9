//! Cut-cell stage throughput: classify + clip + merge + assemble on a sphere in a box, reported
//! as cut cells per second, plus the bytes per cell of the resulting mesh.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use glam::DVec3 as Vec3;
use octocut_cutcell::test_support::{icosphere, refined_tree};
use octocut_cutcell::{cut_cells, CutOptions};
use octocut_octree::Domain;
use octocut_surface::{Aabb, SurfaceIndex};
use octocut_volmesh::VolumeMesh;

fn mesh_bytes(m: &VolumeMesh) -> usize {
    m.points.len() * 24
        + (m.face_offsets.len() + m.face_vertices.len() + m.owner.len() + m.neighbour.len()) * 4
        + m.n_cells() * 4
}

fn bench(c: &mut Criterion) {
    let level: u8 = std::env::var("CUTCELL_BENCH_LEVEL")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(7);
    let index = SurfaceIndex::new(icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 3));
    let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
    let tree = refined_tree(d, &index, level);
    let opts = CutOptions::default();
    let out = cut_cells(&tree, &index, &opts).unwrap();
    let cut = out.report.cut_leaves as u64;
    eprintln!(
        "cutcell bench: level {level}, {} leaves, {} cut leaves, {} cells, {} triangles, mesh {:.1} bytes/cell",
        tree.leaves().len(),
        cut,
        out.mesh.n_cells(),
        index.surface().triangles.len(),
        mesh_bytes(&out.mesh) as f64 / out.mesh.n_cells() as f64
    );
    let mut g = c.benchmark_group("cutcell");
    g.sample_size(10);
    g.throughput(Throughput::Elements(cut));
    g.bench_function("sphere_cut_leaves", |b| {
        b.iter(|| cut_cells(&tree, &index, &opts).unwrap())
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
