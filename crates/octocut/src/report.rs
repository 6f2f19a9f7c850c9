//! The run report: what was asked (the plan) and what was built, serialisable to `report.json`.

use crate::stages::StageFigures;
use serde::{Deserialize, Serialize};

/// One size request and the octree level it became.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PlannedSize {
    pub request: String,
    pub size: f64,
    pub level: u8,
    pub cell_size: f64,
}

/// What a run will do, known before any refinement.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// The box actually meshed `[xmin, ymin, zmin, xmax, ymax, zmax]` (grown to whole base cells).
    pub domain_box: [f64; 6],
    pub base_cells: [u32; 3],
    pub base_size: f64,
    pub levels: Vec<PlannedSize>,
    /// Predicted octree leaves after balance.
    pub estimated_leaves: u64,
    /// Predicted cells: the leaves times the share whose centre is on the fluid side (sampled
    /// on the estimate's deepest capped tree).
    pub estimated_cells: u64,
    pub estimated_memory_bytes: u64,
    pub max_cells: u64,
    pub max_memory_bytes: u64,
}

/// Cell counts of the built mesh.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct CellCounts {
    pub total: u64,
    pub hexahedra: u64,
    pub polyhedra: u64,
    pub cut: u64,
    /// Cells per octree level, index = level.
    pub by_level: Vec<u64>,
    /// Cells per size region (name, count); cells outside every region are not listed.
    pub by_region: Vec<(String, u64)>,
}

/// Per-patch figures.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PatchFigures {
    pub name: String,
    pub kind: String,
    pub faces: u64,
    pub area: f64,
}

/// The full report of a run.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct MeshReport {
    pub octocut_version: String,
    pub surfaces: Vec<String>,
    pub plan: Plan,
    pub leaves: u64,
    pub cells: CellCounts,
    pub faces: u64,
    pub interior_faces: u64,
    pub points: u64,
    pub fluid_volume: f64,
    pub patches: Vec<PatchFigures>,
    /// True when `validate()` found no problem; the problems otherwise.
    pub valid: bool,
    pub validation: serde_json::Value,
    pub quality: serde_json::Value,
    pub cut: serde_json::Value,
    pub surface_health: serde_json::Value,
    pub warnings: Vec<String>,
    pub stages: Vec<StageFigures>,
    pub mesh_bytes: u64,
}

/// Cells whose six faces are all quadrilaterals (written as hexahedra when they are boxes).
pub fn count_hexahedra(mesh: &octocut_volmesh::VolumeMesh) -> u64 {
    let mut faces = vec![0u8; mesh.n_cells()];
    let mut quads = vec![0u8; mesh.n_cells()];
    for f in 0..mesh.n_faces() {
        let q = (mesh.face(f).len() == 4) as u8;
        let mut bump = |c: u32| {
            faces[c as usize] = faces[c as usize].saturating_add(1);
            quads[c as usize] = quads[c as usize].saturating_add(q);
        };
        bump(mesh.owner[f]);
        if f < mesh.n_interior_faces() {
            bump(mesh.neighbour[f]);
        }
    }
    faces
        .iter()
        .zip(&quads)
        .filter(|(&f, &q)| f == 6 && q == 6)
        .count() as u64
}

/// Bytes held by the mesh arrays (points, faces, owner/neighbour, cell tags).
pub fn mesh_bytes(m: &octocut_volmesh::VolumeMesh) -> u64 {
    (m.points.len() * 24
        + (m.face_offsets.len() + m.face_vertices.len() + m.owner.len() + m.neighbour.len()) * 4
        + m.cell_level.len() * 2
        + m.cell_region.len() * 2) as u64
}

fn si(x: f64) -> String {
    if x >= 1e9 {
        format!("{:.2}G", x / 1e9)
    } else if x >= 1e6 {
        format!("{:.2}M", x / 1e6)
    } else if x >= 1e3 {
        format!("{:.1}k", x / 1e3)
    } else {
        format!("{x:.0}")
    }
}

/// The plan as a readable table.
pub fn plan_table(p: &Plan) -> String {
    let b = &p.domain_box;
    let mut s = String::new();
    s += "plan\n";
    s += &format!(
        "  box used      [{:.6}, {:.6}, {:.6}] .. [{:.6}, {:.6}, {:.6}]\n",
        b[0], b[1], b[2], b[3], b[4], b[5]
    );
    s += &format!(
        "  base cells    {} x {} x {} of edge {}\n",
        p.base_cells[0], p.base_cells[1], p.base_cells[2], p.base_size
    );
    s += "  size requests:\n";
    for l in &p.levels {
        s += &format!(
            "    {:<32} size {:<10} -> level {:>2} (cell {:.6})\n",
            l.request, l.size, l.level, l.cell_size
        );
    }
    s += &format!(
        "  estimate      {} cells ({} octree leaves), {:.2} GiB (limits {} cells, {:.1} GiB)",
        si(p.estimated_cells as f64),
        si(p.estimated_leaves as f64),
        p.estimated_memory_bytes as f64 / (1u64 << 30) as f64,
        si(p.max_cells as f64),
        p.max_memory_bytes as f64 / (1u64 << 30) as f64
    );
    s
}

/// The end-of-run summary as a readable table.
pub fn summary_table(r: &MeshReport) -> String {
    let mut s = String::new();
    let c = &r.cells;
    s += "summary\n";
    s += &format!(
        "  cells         {} ({} hexahedra, {} polyhedra, {} cut)\n",
        c.total, c.hexahedra, c.polyhedra, c.cut
    );
    s += &format!(
        "  faces         {} ({} interior), points {}\n",
        r.faces, r.interior_faces, r.points
    );
    s += &format!("  fluid volume  {:.9e}\n", r.fluid_volume);
    s += &format!(
        "  valid         {}\n",
        if r.valid {
            "yes (closed cells, conforming faces, volumes match)"
        } else {
            "NO"
        }
    );
    s += "  patches:\n";
    for p in &r.patches {
        s += &format!(
            "    {:<20} {:<5} {:>9} faces  area {:.6e}\n",
            p.name, p.kind, p.faces, p.area
        );
    }
    if let Some(q) = r.quality.as_object() {
        s += "  quality        min        mean       max        flagged\n";
        for key in [
            "non_orthogonality",
            "skewness",
            "volume_ratio",
            "cut_fraction",
            "aspect_ratio",
        ] {
            if let Some(m) = q.get(key) {
                let g = |k: &str| m.get(k).and_then(|v| v.as_f64()).unwrap_or(f64::NAN);
                let flagged = m.get("flagged").and_then(|v| v.as_u64()).unwrap_or(0);
                s += &format!(
                    "    {:<18} {:<10.4} {:<10.4} {:<10.4} {}\n",
                    key,
                    g("min"),
                    g("mean"),
                    g("max"),
                    flagged
                );
            }
        }
    }
    s += "  stages          seconds    items        peak memory\n";
    for f in &r.stages {
        s += &format!(
            "    {:<28} {:>7.2}  {:>9} {:<6} {:>8.1} MiB\n",
            f.stage.label(),
            f.seconds,
            si(f.items as f64),
            f.unit,
            f.peak_memory_bytes as f64 / (1 << 20) as f64
        );
    }
    for w in &r.warnings {
        s += &format!("  warning: {w}\n");
    }
    s
}
