//! Writes a closed ~100k-triangle body as binary STL, for the whole-process figures in
//! `benches/whole-process.sh`.
//!
//! `cargo run --release -p octocut-surface --example make_body -- body.stl [sphere|torus]`
//!
//! sphere: UV sphere of radius 1 at the origin, 320 x 160 bands (101,760 triangles);
//! torus: major radius 1, tube radius 0.35 at the origin, 320 x 160 quads (102,400 triangles).

use octocut_surface::shapes::{torus, uv_sphere};
use octocut_surface::stl::to_binary_stl;
use octocut_surface::Vec3;
use std::process::ExitCode;

fn main() -> ExitCode {
    let mut args = std::env::args().skip(1);
    let Some(path) = args.next() else {
        eprintln!("usage: make_body OUT.stl [sphere|torus]");
        return ExitCode::from(2);
    };
    let kind = args.next().unwrap_or_else(|| "sphere".into());
    let s = match kind.as_str() {
        "sphere" => uv_sphere(Vec3::ZERO, 1.0, 320, 160, "body"),
        "torus" => torus(Vec3::ZERO, 1.0, 0.35, 320, 160, "body"),
        other => {
            eprintln!("make_body: unknown shape {other:?} (sphere or torus)");
            return ExitCode::from(2);
        }
    };
    let bytes = to_binary_stl(&s, &format!("octocut make_body {kind}"));
    if let Err(e) = std::fs::write(&path, &bytes) {
        eprintln!("make_body: cannot write {path}: {e}");
        return ExitCode::from(1);
    }
    eprintln!(
        "make_body: wrote {path}: {kind}, {} triangles",
        s.triangles.len()
    );
    ExitCode::SUCCESS
}
