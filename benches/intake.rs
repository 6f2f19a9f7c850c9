//! Surface intake speed: parse + repair (weld, orient) and the full health report on a
//! ~1M-triangle closed torus generated here (binary STL bytes in memory).

use criterion::{criterion_group, criterion_main, Criterion};
use octocut_surface::stl::to_binary_stl;
use octocut_surface::{health, parse_stl, repair, RepairOptions, Surface};
use std::hint::black_box;

fn intake(c: &mut Criterion) {
    // 1000 x 500 quads = 1,000,000 triangles
    let torus = Surface::torus(2.0, 0.6, 1000, 500);
    let bytes = to_binary_stl(&torus, "bench torus");
    let opts = RepairOptions::default();
    let mut g = c.benchmark_group("intake_1M");
    g.sample_size(10);
    g.bench_function("parse", |b| {
        b.iter(|| parse_stl(black_box(&bytes), "torus.stl").unwrap())
    });
    g.bench_function("parse_weld_orient", |b| {
        b.iter(|| {
            let mut s = parse_stl(black_box(&bytes), "torus.stl").unwrap();
            repair(&mut s, &opts)
        })
    });
    let mut s = parse_stl(&bytes, "torus.stl").unwrap();
    let r = repair(&mut s, &opts);
    assert_eq!(s.triangles.len(), 1_000_000);
    g.bench_function("health", |b| b.iter(|| health(black_box(&s), &r)));
    g.finish();
}

criterion_group!(benches, intake);
criterion_main!(benches);
