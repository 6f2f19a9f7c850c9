//! Spatial index throughput: hierarchical winding numbers (batch on all threads and on one,
//! single queries) vs the exact sum on a ~100k-triangle torus, index build time for ~1M
//! triangles, box and segment queries. Prints the mean work of a query (far-field expansions,
//! triangles summed exactly).
//!
//! Run briefly: `cargo bench --bench winding -- --warm-up-time 1 --measurement-time 3`.

use criterion::{criterion_group, criterion_main, BatchSize, BenchmarkId, Criterion, Throughput};
use octocut_surface::{Aabb, IndexOptions, Surface, SurfaceIndex, TagId, Vec3};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;
use std::time::Instant;

/// Torus around the z axis, closed, outward: `2 n m` triangles.
fn torus(big: f64, small: f64, n: usize, m: usize) -> Surface {
    let mut v = Vec::with_capacity(n * m);
    for i in 0..n {
        let u = 2.0 * PI * i as f64 / n as f64;
        for j in 0..m {
            let w = 2.0 * PI * j as f64 / m as f64;
            let rr = big + small * w.cos();
            v.push(Vec3::new(rr * u.cos(), rr * u.sin(), small * w.sin()));
        }
    }
    let id = |i: usize, j: usize| ((i % n) * m + j % m) as u32;
    let mut t = Vec::with_capacity(2 * n * m);
    for i in 0..n {
        for j in 0..m {
            t.push([id(i, j), id(i + 1, j), id(i + 1, j + 1)]);
            t.push([id(i, j), id(i + 1, j + 1), id(i, j + 1)]);
        }
    }
    let k = t.len();
    Surface {
        vertices: v,
        triangles: t,
        tags: vec![TagId(0); k],
        tag_names: vec!["torus".into()],
    }
}

fn points(n: usize, b: &Aabb, seed: u64) -> Vec<Vec3> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n)
        .map(|_| b.min + Vec3::new(rng.random(), rng.random(), rng.random()) * b.extent())
        .collect()
}

fn bench(c: &mut Criterion) {
    let s = torus(1.0, 0.35, 316, 158); // 99 856 triangles
    let bb = s.bounding_box().inflated(0.2);
    let t0 = Instant::now();
    let index = SurfaceIndex::new(s.clone());
    eprintln!(
        "index of {} triangles: built in {:.1} ms, {:.1} MB",
        s.triangles.len(),
        t0.elapsed().as_secs_f64() * 1e3,
        index.heap_bytes() as f64 / 1e6
    );

    for (name, ix) in [("default", &index)] {
        let (mut far, mut near) = (0, 0);
        let probe = points(10_000, &bb, 4);
        for &p in &probe {
            let (f, n) = ix.winding_work(p);
            far += f;
            near += n;
        }
        eprintln!(
            "winding work per query ({name}, beta {}): {:.1} far-field expansions, {:.1} triangles summed exactly",
            ix.options().winding_beta,
            far as f64 / probe.len() as f64,
            near as f64 / probe.len() as f64
        );
    }
    let mut g = c.benchmark_group("winding");
    g.sample_size(10);
    let pts = points(100_000, &bb, 1);
    g.throughput(Throughput::Elements(pts.len() as u64));
    g.bench_function("hierarchical_batch_100k_points", |b| {
        b.iter(|| index.winding_numbers(&pts))
    });
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("a one-thread pool");
    g.bench_function("hierarchical_batch_100k_points_1_thread", |b| {
        b.iter(|| one.install(|| index.winding_numbers(&pts)))
    });
    let fast = SurfaceIndex::with_options(
        s.clone(),
        IndexOptions {
            winding_beta: 2.0,
            ..IndexOptions::default()
        },
    );
    g.bench_function("hierarchical_batch_100k_points_beta2", |b| {
        b.iter(|| fast.winding_numbers(&pts))
    });
    let few = points(200, &bb, 2);
    g.throughput(Throughput::Elements(few.len() as u64));
    g.bench_function("exact_200_points", |b| {
        b.iter(|| {
            few.iter()
                .map(|&p| index.winding_number_exact(p))
                .sum::<f64>()
        })
    });
    g.bench_function("hierarchical_single_thread_200_points", |b| {
        b.iter(|| few.iter().map(|&p| index.winding_number(p)).sum::<f64>())
    });
    g.finish();

    let mut g = c.benchmark_group("queries");
    g.sample_size(10);
    let centers = points(10_000, &bb, 3);
    g.throughput(Throughput::Elements(centers.len() as u64));
    let mut out = Vec::new();
    g.bench_function("triangles_in_box_h0.02", |b| {
        b.iter(|| {
            let mut n = 0;
            for &p in &centers {
                index.triangles_in_box(&Aabb::new(p - 0.02, p + 0.02), &mut out);
                n += out.len();
            }
            n
        })
    });
    let mut hits = Vec::new();
    g.bench_function("segment_crossings_len0.1", |b| {
        b.iter(|| {
            let mut n = 0;
            for &p in &centers {
                index.segment_crossings(p, p + Vec3::new(0.06, -0.05, 0.06), &mut hits);
                n += hits.len();
            }
            n
        })
    });
    g.bench_function("closest_point", |b| {
        b.iter(|| {
            centers
                .iter()
                .map(|&p| index.closest_point(p).unwrap().distance)
                .sum::<f64>()
        })
    });
    g.finish();

    let big = torus(1.0, 0.35, 1000, 500); // 1 000 000 triangles
    let mut g = c.benchmark_group("build");
    g.sample_size(10);
    g.bench_with_input(
        BenchmarkId::new("index_build", big.triangles.len()),
        &big,
        |b, s| b.iter_batched(|| s.clone(), SurfaceIndex::new, BatchSize::LargeInput),
    );
    g.finish();
    let ix = SurfaceIndex::new(big.clone());
    eprintln!(
        "index of {} triangles: {:.1} MB besides the surface",
        big.triangles.len(),
        ix.heap_bytes() as f64 / 1e6
    );
}

criterion_group!(benches, bench);
criterion_main!(benches);
