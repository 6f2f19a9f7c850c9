//! Drives the built `octocut mesh` and `octocut slice` binaries end to end on generated STL
//! files, each run inside its own temporary directory (never the current directory).

use glam::DQuat;
use octocut_surface::stl::to_binary_stl;
use octocut_surface::{parse_stl, shapes, Surface, Vec3};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Instant;
use tempfile::TempDir;

/// Runs the binary in `cwd` with extra environment variables; returns (exit code, stdout, stderr).
fn octocut_env(cwd: &Path, args: &[&str], env: &[(&str, &str)]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_octocut"))
        .current_dir(cwd)
        .args(args)
        .envs(env.iter().copied())
        .output()
        .unwrap();
    let s = |b: Vec<u8>| String::from_utf8_lossy(&b).into_owned();
    (
        out.status.code().unwrap_or(-1),
        s(out.stdout),
        s(out.stderr),
    )
}

fn octocut(cwd: &Path, args: &[&str]) -> (i32, String, String) {
    octocut_env(cwd, args, &[])
}

/// Writes `s` as binary STL to `dir/name` and returns the path and the surface exactly as a
/// reader sees it (f32 coordinates), which is the polyhedron the mesher gets.
fn write_stl(dir: &Path, name: &str, s: &Surface) -> (PathBuf, Surface) {
    let bytes = to_binary_stl(s, "octocut e2e test");
    let p = dir.join(name);
    std::fs::write(&p, &bytes).unwrap();
    (p.clone(), parse_stl(&bytes, name).unwrap())
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn box_volume(b: &[f64]) -> f64 {
    (b[3] - b[0]) * (b[4] - b[1]) * (b[5] - b[2])
}

/// 1-based line and column of the first occurrence of `needle` in `text` (counted here, from
/// the text the test wrote, independently of the case-file reader).
fn line_col_of(text: &str, needle: &str) -> (usize, usize) {
    let at = text
        .find(needle)
        .unwrap_or_else(|| panic!("{needle} not in {text}"));
    let before = &text[..at];
    let line = before.matches('\n').count() + 1;
    let col = at - before.rfind('\n').map_or(0, |p| p + 1) + 1;
    (line, col)
}

const FINAL_FILES: [&str; 7] = [
    "mesh.vtu",
    "boundary.vtp",
    "report.json",
    "slice-x.png",
    "slice-y.png",
    "slice-z.png",
    "quality-histogram.png",
];

/// The PNG file signature (PNG specification, ISO/IEC 15948, section 5.2).
const PNG_SIGNATURE: [u8; 8] = [0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a];

/// A complete PNG starts with the signature and ends with the IEND chunk (zero length, type
/// `IEND`, CRC 0xAE426082; PNG specification section 11.2.5).
fn png_complete(b: &[u8]) -> bool {
    b.starts_with(&PNG_SIGNATURE)
        && b.ends_with(&[0, 0, 0, 0, b'I', b'E', b'N', b'D', 0xae, 0x42, 0x60, 0x82])
}

/// A final-named output is complete: VTK XML files end with `</VTKFile>\n` (the last line the
/// writers in crates/writers/src/{vtu,vtp}.rs emit), the report parses as JSON, pictures are
/// whole PNGs. Returns a description of the problem, if any.
fn incomplete(path: &Path) -> Option<String> {
    let name = path.file_name().unwrap().to_str().unwrap();
    let b = std::fs::read(path).unwrap();
    let ok = if name.ends_with(".vtu") || name.ends_with(".vtp") {
        b.starts_with(b"<?xml") && b.ends_with(b"</VTKFile>\n")
    } else if name.ends_with(".json") {
        serde_json::from_slice::<Value>(&b).is_ok()
    } else if name.ends_with(".png") {
        png_complete(&b)
    } else {
        return Some(format!("unexpected file {name}"));
    };
    (!ok).then(|| format!("{name} is partial ({} bytes)", b.len()))
}

/// Temporary names of the atomic writer (crates/writers/src/atomic.rs): `.<name>.tmp-<pid>`.
fn is_temporary(name: &str) -> bool {
    name.strip_prefix('.')
        .and_then(|n| n.split_once(".tmp-"))
        .is_some_and(|(f, pid)| {
            FINAL_FILES.contains(&f) && !pid.is_empty() && pid.bytes().all(|c| c.is_ascii_digit())
        })
}

/// Runs the quick form on `stl` in the box `b`; returns the stdout report and report.json.
fn quick_mesh(
    cwd: &Path,
    stl: &Path,
    b: [f64; 6],
    base: f64,
    size: f64,
    out: &Path,
) -> (Value, Value) {
    let dom = b.map(|x| x.to_string()).join(",");
    let (code, stdout, stderr) = octocut(
        cwd,
        &[
            "mesh",
            "--surface",
            s(stl),
            "--domain",
            &dom,
            "--base-size",
            &base.to_string(),
            "--surface-size",
            &size.to_string(),
            "--out",
            s(out),
            "--json",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    let from_stdout: Value = serde_json::from_str(&stdout).expect("--json prints the report");
    let text = std::fs::read_to_string(out.join("report.json")).unwrap();
    let from_file: Value = serde_json::from_str(&text).unwrap();
    (from_stdout, from_file)
}

#[test]
fn fluid_volume_is_box_minus_body() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let mut cube = shapes::cuboid(Vec3::splat(-0.3), Vec3::splat(0.3), "cube");
    // a rotation about two axes, so that no face is aligned with the octree planes
    shapes::rotate(
        &mut cube,
        DQuat::from_rotation_z(0.5) * DQuat::from_rotation_x(0.3),
        Vec3::ZERO,
    );
    // (name, surface, box, base size, surface size ~ 1/20 of the body's extent, area x
    // curvature for the tolerance below)
    let cases = [
        (
            "sphere",
            shapes::uv_sphere(Vec3::new(0.01, -0.02, 0.03), 0.5, 48, 24, "ball"),
            [-1.0, -1.0, -1.0, 1.0, 1.0, 1.0],
            0.5,
            0.05,
            // sphere: area 4 pi r^2, curvature 1/r
            4.0 * std::f64::consts::PI * 0.25 / 0.5,
        ),
        (
            "torus",
            shapes::torus(Vec3::ZERO, 0.6, 0.2, 64, 24, "ring"),
            [-1.0, -1.0, -0.5, 1.0, 1.0, 0.5],
            0.5,
            0.04,
            // torus: area 4 pi^2 R r, largest curvature 1/r
            4.0 * std::f64::consts::PI.powi(2) * 0.6 * 0.2 / 0.2,
        ),
        // cube: flat faces; its 12 edges of 0.6 stand in for "area x curvature" (see below)
        (
            "cube",
            cube,
            [-1.0, -1.0, -1.0, 1.0, 1.0, 1.0],
            0.5,
            0.04,
            12.0 * 0.6,
        ),
    ];
    let mut worst = 0.0f64;
    for (name, surface, b, base, size, a_kappa) in cases {
        let (stl, read) = write_stl(d, &format!("{name}.stl"), &surface);
        // exact: the polyhedron's volume by the divergence theorem over its triangles
        let body = read.enclosed_volume();
        let out = d.join(format!("out-{name}"));
        let (rep, file) = quick_mesh(d, &stl, b, base, size, &out);
        // the box is a whole number of base cells, so the box used is the one asked for
        let used: Vec<f64> = serde_json::from_value(rep["plan"]["domain_box"].clone()).unwrap();
        assert_eq!(used, b.to_vec(), "{name}: box used");
        // exact: fluid = box volume - body volume (the body lies wholly inside the box)
        let want = box_volume(&b) - body;
        // Tolerance from the cell size h at the surface: where a cut cell stands for the surface
        // by planar pieces spanning one cell, the gap to a surface of curvature k is at most the
        // sagitta h^2 k / 8 (classical geometry: chord h on a circle of radius 1/k), so
        // |dV| <= A k h^2 / 8. For the cube's sharp edges the same form with the edge length in
        // place of A k is our own estimate (a sliver of cross-section h^2 / 8 along each edge).
        let h = rep["plan"]["levels"][0]["cell_size"].as_f64().unwrap();
        let tol = a_kappa * h * h / 8.0 / body;
        for (what, r) in [("stdout", &rep), ("report.json", &file)] {
            assert_eq!(r["valid"], Value::Bool(true), "{name} {what}");
            let v = r["fluid_volume"].as_f64().unwrap();
            let rel = (v - want).abs() / body;
            eprintln!(
                "{name} ({what}): fluid {v:.9} want {want:.9}, error {:.3e} = {rel:.3e} of the body volume {body:.6} (tolerance {tol:.3e} at h = {h}), {} cells",
                v - want,
                r["cells"]["total"]
            );
            assert!(
                rel < tol,
                "{name} {what}: fluid {v} want {want} (rel {rel:.3e} > {tol:.3e})"
            );
            worst = worst.max(rel);
        }
        assert_eq!(rep["fluid_volume"], file["fluid_volume"], "{name}");
        // report.json times every stage, writing the other files included
        let stages: Vec<&str> = file["stages"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["stage"].as_str().unwrap())
            .collect();
        assert_eq!(
            stages,
            ["load", "refine", "cut", "validate", "quality", "write"],
            "{name}"
        );
    }
    eprintln!("worst relative error {worst:.3e}");
}

/// A case file for a sphere `ball.stl` of radius 0.5 in [-1, 1]^3, with `extra` appended.
fn case_text(extra: &str) -> String {
    format!(
        "# e2e test case\n[surfaces]\nfiles = [\"ball.stl\"]\nsize = 0.1\n\n[domain]\nbox = [-1.0, -1.0, -1.0, 1.0, 1.0, 1.0]\nbase_size = 0.5\n{extra}"
    )
}

fn ball(d: &Path) -> Surface {
    write_stl(
        d,
        "ball.stl",
        &shapes::uv_sphere(Vec3::ZERO, 0.5, 32, 16, "x"),
    )
    .1
}

const SIDES: &str = "\n[sides]\nxmin = \"inflow\"\nxmax = \"outflow\"\nymin = \"wall_south\"\nymax = \"wall_north\"\nzmin = \"floor\"\nzmax = \"ceiling\"\n";

#[test]
fn outputs_are_complete_with_configured_names() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    ball(d);
    let case = d.join("case.toml");
    std::fs::write(&case, case_text(SIDES)).unwrap();
    let out = d.join("out");
    let (code, stdout, stderr) = octocut(d, &["mesh", s(&case), "--out", s(&out), "--quiet"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.is_empty() && stderr.is_empty(),
        "--quiet: {stdout} {stderr}"
    );
    for f in FINAL_FILES {
        let p = out.join(f);
        assert!(p.exists(), "{f} missing");
        assert_eq!(incomplete(&p), None);
    }
    let rep: Value =
        serde_json::from_slice(&std::fs::read(out.join("report.json")).unwrap()).unwrap();
    assert_eq!(rep["valid"], Value::Bool(true));
    let mut names: Vec<(String, String)> = rep["patches"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            (
                p["name"].as_str().unwrap().into(),
                p["kind"].as_str().unwrap().into(),
            )
        })
        .collect();
    names.sort();
    // the surface tag is the binary file's stem; the six sides carry the [sides] names
    let mut want: Vec<(String, String)> = [
        ("ball", "wall"),
        ("inflow", "side"),
        ("outflow", "side"),
        ("wall_south", "side"),
        ("wall_north", "side"),
        ("floor", "side"),
        ("ceiling", "side"),
    ]
    .iter()
    .map(|(a, b)| (a.to_string(), b.to_string()))
    .collect();
    want.sort();
    assert_eq!(names, want);
    // exact: each side of [-1, 1]^3 has area 4
    for p in rep["patches"].as_array().unwrap() {
        if p["kind"] == "side" {
            assert!((p["area"].as_f64().unwrap() - 4.0).abs() < 1e-9, "{p}");
        }
    }
    // the same names, in patch order, in the boundary file's FieldData String array
    // `tag_names` (VTK XML ascii String arrays: byte codes, each string ended by a 0)
    let vtp = std::fs::read(out.join("boundary.vtp")).unwrap();
    let vtp = String::from_utf8_lossy(&vtp);
    let body = &vtp[vtp.find("Name=\"tag_names\"").expect("tag_names array")..];
    let body = &body[body.find('>').unwrap() + 1..body.find("</Array>").unwrap()];
    let bytes: Vec<u8> = body
        .split_whitespace()
        .map(|x| x.parse().unwrap())
        .collect();
    let in_vtp: Vec<String> = bytes
        .split(|&b| b == 0)
        .filter(|s| !s.is_empty())
        .map(|s| String::from_utf8(s.to_vec()).unwrap())
        .collect();
    let in_report: Vec<String> = rep["patches"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["name"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(in_vtp, in_report);
}

#[test]
fn case_file_errors_are_located() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    ball(d);
    let base = case_text("");
    // (what, case text, the token the message must point at, words the message must hold)
    let cases: Vec<(&str, String, &str, &str)> = vec![
        (
            "unknown key",
            base.replace("size = 0.1\n", "size = 0.1\ncolour = 3\n"),
            "colour",
            "colour",
        ),
        (
            "wrong type",
            base.replace("size = 0.1", "size = \"fine\""),
            "\"fine\"",
            "",
        ),
        (
            "negative size",
            base.replace("base_size = 0.5", "base_size = -0.5"),
            "-0.5",
            "positive",
        ),
        (
            "empty box",
            base.replace("1.0, 1.0, 1.0]", "-1.0, 1.0, 1.0]"),
            "[-1.0",
            "min below its max",
        ),
        (
            "fluid point inside the body",
            case_text("\n[fluid]\nside = \"point\"\npoint = [0.0, 0.0, 0.0]\n"),
            "[0.0, 0.0, 0.0]",
            "inside the body",
        ),
    ];
    for (what, text, token, words) in cases {
        let case = d.join("case.toml");
        std::fs::write(&case, &text).unwrap();
        let out = d.join("out");
        let (code, stdout, stderr) =
            octocut(d, &["mesh", "case.toml", "--out", s(&out), "--quiet"]);
        let (line, col) = line_col_of(&text, token);
        eprintln!("{what}: exit {code}: {}", stderr.trim());
        assert_eq!(code, 2, "{what}: {stderr}");
        assert!(stdout.is_empty(), "{what}: {stdout}");
        assert!(
            stderr.contains(&format!("case.toml:{line}:{col}:")),
            "{what}: want case.toml:{line}:{col}: in {stderr}"
        );
        assert!(stderr.contains(words), "{what}: {stderr}");
        assert!(!out.exists(), "{what}: an output directory was made");
    }
    // a missing surface file: exit 2 and the message names the file
    let text = base.replace("ball.stl", "nothere.stl");
    std::fs::write(d.join("case.toml"), &text).unwrap();
    let (code, _, stderr) = octocut(d, &["mesh", "case.toml", "--out", "out", "--quiet"]);
    eprintln!("missing file: exit {code}: {}", stderr.trim());
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("nothere.stl"), "{stderr}");
}

#[test]
fn limits_and_dry_run_write_nothing() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    ball(d);
    let case = d.join("case.toml");
    let out = d.join("out");
    std::fs::write(&case, case_text("\n[limits]\nmax_cells = 10\n")).unwrap();
    let (code, stdout, stderr) = octocut(d, &["mesh", s(&case), "--out", s(&out)]);
    eprintln!(
        "limit: exit {code}: {}",
        stderr.lines().last().unwrap_or("")
    );
    assert_eq!(code, 3, "{stderr}");
    assert!(stdout.is_empty());
    assert!(
        stderr.contains("refused") && stderr.contains("limits.max_cells"),
        "{stderr}"
    );
    assert!(!out.exists(), "a refused run wrote {out:?}");

    std::fs::write(&case, case_text("")).unwrap();
    let (code, stdout, stderr) = octocut(d, &["mesh", s(&case), "--out", s(&out), "--dry-run"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.contains("plan") && stdout.contains("estimate"),
        "{stdout}"
    );
    assert!(!out.exists(), "--dry-run wrote {out:?}");

    let (code, stdout, stderr) = octocut(
        d,
        &["mesh", s(&case), "--out", s(&out), "--dry-run", "--json"],
    );
    assert_eq!(code, 0, "{stderr}");
    let plan: Value = serde_json::from_str(&stdout).expect("--dry-run --json prints JSON");
    let est = plan["estimated_cells"].as_u64().expect("estimated_cells");
    // the base grid alone is 4 x 4 x 4 cells of edge 0.5 in [-1, 1]^3
    assert_eq!(plan["base_cells"], serde_json::json!([4, 4, 4]));
    assert!(est >= 64, "{plan}");
    eprintln!("dry run: estimated {est} cells");
    assert!(!out.exists(), "--dry-run --json wrote {out:?}");
}

#[test]
fn killed_runs_leave_no_partial_file() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let (stl, _) = write_stl(
        d,
        "fine.stl",
        &shapes::uv_sphere(Vec3::ZERO, 0.5, 64, 32, "ball"),
    );
    let start = |out: &Path| {
        Command::new(env!("CARGO_BIN_EXE_octocut"))
            .current_dir(d)
            .args([
                "mesh",
                "--surface",
                s(&stl),
                "--domain=-1,-1,-1,1,1,1",
                "--base-size",
                "0.5",
                "--surface-size",
                "0.05",
                "--quiet",
                "--out",
                s(out),
            ])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap()
    };
    // The output directory is made when writing starts (crates/octocut/src/output.rs), so the
    // kills are timed from its appearance: 0, 40, 80, ... ms into the write phase, until a run
    // completes by itself (bounded to 25 runs).
    let (mut killed_writing, mut finished, mut temporaries) = (0, 0, 0);
    for k in 0..25u32 {
        let out = d.join(format!("kill-{k}"));
        let mut child = start(&out);
        let t0 = Instant::now();
        let mut done = false;
        while !out.exists() {
            if child.try_wait().unwrap().is_some() {
                done = true;
                break;
            }
            assert!(t0.elapsed().as_secs() < 60, "the run never started writing");
            std::thread::sleep(std::time::Duration::from_millis(2));
        }
        let delay = std::time::Duration::from_millis(40 * k as u64);
        std::thread::sleep(delay);
        if done || child.try_wait().unwrap().is_some() {
            finished += 1;
        } else {
            child.kill().unwrap();
            killed_writing += 1;
        }
        child.wait().unwrap();
        let mut finals = Vec::new();
        for e in std::fs::read_dir(&out).unwrap() {
            let e = e.unwrap();
            let name = e.file_name().into_string().unwrap();
            if FINAL_FILES.contains(&name.as_str()) {
                assert_eq!(
                    incomplete(&e.path()),
                    None,
                    "after a kill {delay:?} into writing"
                );
                finals.push(name);
            } else {
                assert!(
                    is_temporary(&name),
                    "unexpected file {name} after a kill {delay:?} into writing"
                );
                temporaries += 1;
            }
        }
        eprintln!("kill {delay:?} into writing: complete {finals:?}");
        if finished > 0 {
            break;
        }
    }
    eprintln!("{killed_writing} runs killed while writing, {finished} completed by itself, {temporaries} temporaries left");
    assert!(killed_writing > 0, "no run was killed while writing");
}

#[test]
fn slices_of_a_written_mesh() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let (stl, _) = write_stl(
        d,
        "ball.stl",
        &shapes::uv_sphere(Vec3::ZERO, 0.5, 32, 16, "ball"),
    );
    let out = d.join("out");
    quick_mesh(d, &stl, [-1.0, -1.0, -1.0, 1.0, 1.0, 1.0], 0.5, 0.1, &out);
    let level = d.join("level.png");
    let (code, _, stderr) = octocut(
        d,
        &[
            "slice",
            s(&out),
            "--plane",
            "z=0.0",
            "--colour",
            "level",
            "-o",
            s(&level),
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(png_complete(&std::fs::read(&level).unwrap()));
    let skew = d.join("skew.png");
    let (code, _, stderr) = octocut(
        d,
        &[
            "slice",
            s(&out),
            "--plane",
            "x=0.1",
            "--colour",
            "quality",
            "--measure",
            "skewness",
            "-o",
            s(&skew),
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(png_complete(&std::fs::read(&skew).unwrap()));
    // a plane outside the box [-1, 1]^3 cuts no cell
    let none = d.join("none.png");
    let (code, _, stderr) = octocut(d, &["slice", s(&out), "--plane", "z=5", "-o", s(&none)]);
    eprintln!("outside plane: exit {code}: {}", stderr.trim());
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains("z=5") && stderr.contains("no cell"),
        "{stderr}"
    );
    assert!(!none.exists());
}

#[test]
fn mesh_does_not_depend_on_the_thread_count() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let mut s0 = shapes::torus(Vec3::ZERO, 0.6, 0.2, 48, 16, "ring");
    shapes::rotate(&mut s0, DQuat::from_rotation_x(0.4), Vec3::ZERO);
    let (stl, _) = write_stl(d, "ring.stl", &s0);
    let mut files = Vec::new();
    for threads in ["1", "2"] {
        let out = d.join(format!("t{threads}"));
        let (code, _, stderr) = octocut_env(
            d,
            &[
                "mesh",
                "--surface",
                s(&stl),
                "--domain=-1,-1,-1,1,1,1",
                "--base-size",
                "0.5",
                "--surface-size",
                "0.05",
                "--quiet",
                "--out",
                s(&out),
            ],
            &[("RAYON_NUM_THREADS", threads)],
        );
        assert_eq!(code, 0, "{stderr}");
        files.push(std::fs::read(out.join("mesh.vtu")).unwrap());
    }
    // common practice: appended raw binary VTU, so equal meshes give equal bytes
    assert!(String::from_utf8_lossy(&files[0][..2000]).contains("appended"));
    eprintln!("mesh.vtu: {} and {} bytes", files[0].len(), files[1].len());
    assert!(
        files[0] == files[1],
        "mesh.vtu differs between 1 and 2 threads"
    );
}
