//! Times the stages after the cut (validate, quality, write) on one meshed case, several times
//! over, with wall and process CPU seconds (CPU time discounts waiting for a shared core).
//!
//! `cargo run --release -p octocut --example post_stages -- BODY.STL SURFACE_SIZE [REPS] [OUT_DIR]`
//! meshes BODY.STL in the box [-5, 5]^3 with base cells of 1 (as benches/README.md's
//! whole-process case), then runs each stage REPS times (default 3), as the pipeline does:
//! validation keeps the cell geometry and quality takes it. With `POST_ONLY=validate`
//! (or `quality`, `write`) only that stage is repeated. With `PERF_CTL=FIFO` the program writes
//! `enable` to FIFO just before the repeated stages, for `perf record -D -1 --control fifo:FIFO`
//! to profile those alone.

use octocut::output::write_outputs;
use octocut::pipeline::{release_free_memory, Mesher};
use octocut::spec::{CaseSpec, FluidSpec};
use octocut::stages::{peak_memory_bytes, reset_peak_memory, Hooks};
use octocut_volmesh::geometry::CellGeometry;
use octocut_volmesh::quality_with;
use std::io::Write;
use std::time::Instant;

/// User + system CPU seconds of this process so far (Linux `/proc/self/stat`, 100 ticks/s).
fn cpu_seconds() -> f64 {
    let s = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    // fields after the parenthesised command name: state is field 3, utime 14, stime 15
    let rest = s.rsplit_once(')').map(|x| x.1).unwrap_or("");
    let f: Vec<&str> = rest.split_whitespace().collect();
    let tick = |i: usize| f.get(i).and_then(|v| v.parse::<f64>().ok()).unwrap_or(0.0);
    (tick(11) + tick(12)) / 100.0
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() < 3 {
        eprintln!("usage: post_stages BODY.STL SURFACE_SIZE [REPS] [OUT_DIR]");
        std::process::exit(2);
    }
    let size: f64 = args[2].parse().expect("surface size");
    let reps: usize = args.get(3).and_then(|r| r.parse().ok()).unwrap_or(3);
    let out_dir = std::path::PathBuf::from(args.get(4).map_or("/tmp/post_stages_out", |s| s));
    let only = std::env::var("POST_ONLY").ok();
    let spec = CaseSpec::quick(
        vec![args[1].clone().into()],
        [-5.0, -5.0, -5.0, 5.0, 5.0, 5.0],
        1.0,
        size,
        FluidSpec::Outside,
    );
    let mesher = Mesher::load(&spec).expect("surface loads");
    let hooks = Hooks::default();
    let out = mesher
        .mesh(&spec, &hooks)
        .expect("case meshes and validates");
    for s in &out.report.stages {
        eprintln!(
            "pipeline {:>9}: {:7.2} s, peak {:7.1} MiB",
            format!("{:?}", s.stage),
            s.seconds,
            s.peak_memory_bytes as f64 / (1u64 << 20) as f64
        );
    }
    eprintln!("cells {}, faces {}", out.mesh.n_cells(), out.mesh.n_faces());
    if let Ok(fifo) = std::env::var("PERF_CTL") {
        let mut f = std::fs::OpenOptions::new()
            .write(true)
            .open(fifo)
            .expect("perf control fifo");
        f.write_all(b"enable\n").unwrap();
    }
    let want = |s: &str| only.as_deref().is_none_or(|o| o == s);
    let dom = out.domain;
    for rep in 0..reps {
        let mut line = format!("rep {rep}:");
        let mut time = |name: &str, f: &mut dyn FnMut()| {
            if !want(name) {
                return;
            }
            release_free_memory();
            reset_peak_memory();
            let (t0, c0) = (Instant::now(), cpu_seconds());
            f();
            line += &format!(
                " {name} {:.3} s wall {:.2} s cpu {:.0} MiB;",
                t0.elapsed().as_secs_f64(),
                cpu_seconds() - c0,
                peak_memory_bytes() as f64 / (1u64 << 20) as f64
            );
        };
        // as the pipeline: validation keeps the cell geometry, quality takes it
        let mut geometry = None;
        time("validate", &mut || {
            let (v, g) = out.mesh.validate_keeping_geometry();
            assert!(v.is_valid());
            geometry = g;
        });
        if want("quality") {
            // computed untimed when validation did not run
            let mut g = Some(
                geometry
                    .take()
                    .unwrap_or_else(|| CellGeometry::new(&out.mesh)),
            );
            time("quality", &mut || {
                let g = g.take().expect("one quality run a repetition");
                let q = quality_with(&out.mesh, g, |l| dom.cell_size(l));
                assert_eq!(q.per_cell.volume.len(), out.mesh.n_cells());
            });
        }
        time("write", &mut || {
            let _ = std::fs::remove_dir_all(&out_dir);
            write_outputs(&out, &spec, &out_dir, &hooks).expect("outputs written");
        });
        eprintln!("{line}");
    }
}
