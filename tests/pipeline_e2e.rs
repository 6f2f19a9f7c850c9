//! End-to-end checks of the library pipeline on generated surfaces.

use octocut::pipeline::Mesher;
use octocut::spec::{CaseSpec, FluidSpec};
use octocut::stages::Hooks;
use octocut_surface::{shapes, RepairOptions, Vec3};

/// Meshes `surface` in the box `b` and returns (fluid volume, box volume - polyhedron volume).
fn fluid_volume(
    surface: octocut_surface::Surface,
    b: [f64; 6],
    base: f64,
    size: f64,
) -> (f64, f64) {
    let body = surface.enclosed_volume();
    let m = Mesher::from_surface(surface, &RepairOptions::default());
    let spec = CaseSpec::quick(vec![], b, base, size, FluidSpec::Outside);
    let out = m.mesh(&spec, &Hooks::default()).expect("meshes");
    assert!(out.report.valid);
    let bv = (b[3] - b[0]) * (b[4] - b[1]) * (b[5] - b[2]);
    (out.report.fluid_volume, bv - body)
}

#[test]
fn sphere_in_a_box_fluid_volume() {
    // exact reference: box volume minus the enclosed volume of the input polyhedron
    // (divergence theorem); the analytic sphere 4/3 pi r^3 only sets the scale
    let s = shapes::uv_sphere(Vec3::ZERO, 0.5, 48, 24, "ball");
    let (v, want) = fluid_volume(s, [-1.0, -1.0, -1.0, 1.0, 1.0, 1.0], 0.5, 0.0625);
    let rel = (v - want).abs() / (8.0 - want);
    eprintln!("fluid {v} want {want} relative error vs body volume {rel:.3e}");
    assert!(rel < 5e-3, "fluid {v} want {want}");
}

#[test]
fn demo_case_files_parse_and_plan() {
    // the committed demo cases are valid case files whose per-tag sizes name real solids
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-geometry");
    for case in ["drone.toml", "rooftop.toml"] {
        let spec = CaseSpec::from_file(&root.join(case)).expect("parses");
        let m = Mesher::load(&spec).expect("loads");
        let plan = m.plan(&spec).expect("plans");
        assert!(
            plan.estimated_cells > 10_000 && plan.estimated_cells < spec.limits.max_cells,
            "{case}: {plan:?}"
        );
    }
}
