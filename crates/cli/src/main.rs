//! `octocut`: the command-line front end. Thin: parses arguments, calls the library, reports.
//!
//! Exit codes: 0 when the command ran (findings are part of the output), 2 for unreadable input
//! or bad arguments (message on stderr).

use anyhow::Context;
use clap::{Args, Parser, Subcommand};
use octocut_surface::{health, load_stl_files, repair, HealthReport, RepairOptions, Vec3};
use std::path::PathBuf;
use std::process::ExitCode;

mod mesh;
mod slice;

#[derive(Parser)]
#[command(
    name = "octocut",
    version,
    about = "Cut-cell octree meshing from STL surfaces"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Read STL files, repair them in memory and print the surface health report.
    Check(CheckArgs),
    /// Mesh a case: a case file, or the quick form with --surface, --domain, --base-size and
    /// --surface-size. Exit codes: 0 written and valid, 2 bad input or configuration, 3 refused
    /// by a limit, 1 internal error.
    Mesh(mesh::MeshArgs),
    /// Draw an axis-aligned slice of a written mesh as a PNG picture.
    Slice(slice::SliceArgs),
}

#[derive(Args)]
struct CheckArgs {
    /// STL files (binary or ASCII); read together as one surface, one tag per solid.
    #[arg(required = true, value_name = "FILE.stl")]
    files: Vec<PathBuf>,
    /// Print the report as JSON instead of a table.
    #[arg(long)]
    json: bool,
    /// Weld distance relative to the bounding-box diagonal.
    #[arg(long, value_name = "REL", default_value_t = RepairOptions::default().weld_tolerance)]
    weld_tolerance: f64,
}

/// Large arrays on transparent huge pages: far fewer page faults (see the module doc).
#[global_allocator]
static ALLOC: octocut::hugepage::HugePageAlloc = octocut::hugepage::HugePageAlloc;

fn main() -> ExitCode {
    octocut::hugepage::fixed_mmap_threshold();
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Check(args) => check(&args),
        Command::Mesh(args) => return mesh::run(&args),
        Command::Slice(args) => return slice::run(&args),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            eprintln!("octocut: error: {e:#}");
            ExitCode::from(2)
        }
    }
}

fn check(args: &CheckArgs) -> anyhow::Result<ExitCode> {
    let names: Vec<String> = args.files.iter().map(|p| p.display().to_string()).collect();
    let mut surface =
        load_stl_files(&args.files).with_context(|| format!("reading {}", names.join(", ")))?;
    let opts = RepairOptions {
        weld_tolerance: args.weld_tolerance,
    };
    let rep = repair(&mut surface, &opts);
    let report = health(&surface, &rep);
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", table(&names, &report));
    }
    Ok(ExitCode::SUCCESS)
}

/// A number with about six significant digits.
fn g(x: f64) -> String {
    let x = x + 0.0; // print -0 as 0
    if x == 0.0 || (1e-3..1e6).contains(&x.abs()) {
        let s = format!("{x:.6}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        format!("{x:.5e}")
    }
}

fn v(p: Vec3) -> String {
    format!("({}, {}, {})", g(p.x), g(p.y), g(p.z))
}

/// The human-readable report.
fn table(files: &[String], h: &HealthReport) -> String {
    use std::fmt::Write;
    let mut o = String::new();
    let mut row = |k: &str, val: String| writeln!(o, "  {k:<22} {val}").unwrap();
    row(
        "triangles",
        format!("{} (read {})", h.triangles, h.triangles_before),
    );
    row(
        "vertices",
        format!(
            "{} (read {}, welded {})",
            h.vertices, h.vertices_before, h.vertices_welded
        ),
    );
    row(
        "bounding box",
        format!("{} .. {}", v(h.bounding_box.min), v(h.bounding_box.max)),
    );
    row("area", g(h.area));
    for t in &h.tags {
        row("tag", format!("{}: {} triangles", t.name, t.triangles));
    }
    row("degenerates removed", h.degenerates_removed.to_string());
    row("duplicates removed", h.duplicates_removed.to_string());
    row(
        "re-oriented",
        format!(
            "{} triangles ({} components turned outward)",
            h.reoriented, h.components_turned_outward
        ),
    );
    row(
        "components",
        format!("{} ({} closed)", h.components, h.closed_component_count),
    );
    row("enclosed volume", g(h.enclosed_volume));
    for c in h.closed_components.iter().take(5) {
        row(
            "  closed component",
            format!(
                "from triangle {}: {} triangles, volume {}",
                c.first_triangle,
                c.triangles,
                g(c.volume)
            ),
        );
    }
    row(
        "open edges",
        format!(
            "{} (length {}) in {} loops",
            h.open_edges,
            g(h.open_edge_length),
            h.open_loops
        ),
    );
    if let Some(l) = &h.longest_open_loop {
        let kind = if l.closed { "loop" } else { "open chain" };
        row(
            "  longest",
            format!(
                "{kind} of {} edges, length {}, at {}",
                l.edges,
                g(l.length),
                v(l.at)
            ),
        );
    }
    let nm_at = h
        .non_manifold_at
        .map(|p| format!(", first at {}", v(p)))
        .unwrap_or_default();
    let nm = if h.non_manifold_edges > 0 {
        format!(
            "{} (up to {} triangles on one){nm_at}",
            h.non_manifold_edges, h.non_manifold_max_triangles
        )
    } else {
        "0".to_string()
    };
    row("non-manifold edges", nm);
    let no_at = h
        .non_orientable_at
        .map(|p| format!(", first at {}", v(p)))
        .unwrap_or_default();
    row(
        "non-orientable",
        format!("{} components{no_at}", h.non_orientable_components),
    );
    row("intersecting pairs", h.intersecting_pairs.to_string());
    for p in &h.intersections {
        row(
            "  pair",
            format!("triangles {} and {} at {}", p.a, p.b, v(p.at)),
        );
    }
    if let (Some(s), Some(l)) = (h.shortest_edge, h.longest_edge) {
        row("shortest edge", format!("{} at {}", g(s.length), v(s.at)));
        row("longest edge", format!("{} at {}", g(l.length), v(l.at)));
    }
    let verdict = if h.is_watertight() {
        "watertight: closed, manifold, oriented, no self-intersections".to_string()
    } else {
        let mut w = Vec::new();
        if h.open_edges > 0 {
            w.push("open edges");
        }
        if h.non_manifold_edges > 0 {
            w.push("non-manifold edges");
        }
        if h.non_orientable_components > 0 {
            w.push("non-orientable components");
        }
        if h.intersecting_pairs > 0 {
            w.push("self-intersections");
        }
        format!("not watertight: {}", w.join(", "))
    };
    format!(
        "surface health: {}\n{o}\n  verdict: {verdict}\n",
        files.join(", ")
    )
}
