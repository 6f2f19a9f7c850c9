//! Whole library pipeline throughput: `Mesher::mesh` (refine + balance, cut cells and assembly,
//! validation, quality) on a ~100k-triangle UV sphere in a box, at three surface sizes that
//! halve each time, so the cell count grows about four times a step (33.6k, 123k and 483k
//! fluid cells from 59k, 233k and 928k leaves; the leaves inside the body are dropped).
//! The surface is repaired and indexed once outside the timing; no file is written.
//! Throughput is in cells of the finished mesh (counted by a first untimed run).
//!
//! `cargo bench --bench pipeline -- --warm-up-time 1 --measurement-time 3`
//! (`PIPELINE_BENCH_STEPS=2` runs only the two smaller sizes.)

use criterion::{
    criterion_group, criterion_main, BenchmarkId, Criterion, SamplingMode, Throughput,
};
use octocut::pipeline::Mesher;
use octocut::spec::{CaseSpec, FluidSpec};
use octocut::stages::Hooks;
use octocut_surface::shapes::uv_sphere;
use octocut_surface::{RepairOptions, Vec3};
use std::time::{Duration, Instant};

/// Domain box around the unit sphere and its base cell size (10^3 base cells).
const BOX: [f64; 6] = [-5.0, -5.0, -5.0, 5.0, 5.0, 5.0];
const BASE: f64 = 1.0;
/// Surface cell sizes: each half the previous.
const SURFACE_SIZES: [f64; 3] = [SIZE0, SIZE0 / 2.0, SIZE0 / 4.0];
const SIZE0: f64 = 0.04;

fn bench(c: &mut Criterion) {
    // 320 x 160 bands: 101,760 triangles
    let body = uv_sphere(Vec3::ZERO, 1.0, 320, 160, "body");
    let mesher = Mesher::from_surface(body, &RepairOptions::default());
    let hooks = Hooks::default();
    let mut g = c.benchmark_group("pipeline_sphere100k");
    g.sample_size(10);
    // each iteration takes seconds: ten iterations a size, not the 55 of linear sampling
    g.sampling_mode(SamplingMode::Flat);
    g.warm_up_time(Duration::from_secs(1));
    g.measurement_time(Duration::from_secs(3));
    // PIPELINE_BENCH_STEPS=1|2|3 (default 3): how many of the sizes to run, smallest first
    let steps: usize = std::env::var("PIPELINE_BENCH_STEPS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(3)
        .clamp(1, 3);
    for &h in &SURFACE_SIZES[..steps] {
        let spec = CaseSpec::quick(Vec::new(), BOX, BASE, h, FluidSpec::Outside);
        let t0 = Instant::now();
        let out = mesher
            .mesh(&spec, &hooks)
            .expect("the bench case meshes and validates");
        let cells = out.report.cells.total;
        eprintln!(
            "pipeline bench: surface size {h}: {} leaves, {cells} cells ({} cut), {} faces, {} triangles; first run {:.2} s; stages: {}",
            out.report.leaves,
            out.report.cells.cut,
            out.report.faces,
            mesher.index().surface().triangles.len(),
            t0.elapsed().as_secs_f64(),
            out.report
                .stages
                .iter()
                .map(|s| format!("{} {:.2} s", s.stage.label(), s.seconds))
                .collect::<Vec<_>>()
                .join(", ")
        );
        drop(out);
        g.throughput(Throughput::Elements(cells));
        g.bench_with_input(BenchmarkId::new("mesh", cells), &spec, |b, spec| {
            b.iter(|| mesher.mesh(spec, &hooks).unwrap())
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
