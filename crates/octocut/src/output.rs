//! Writing a finished run into its output directory.
//!
//! Files: `mesh.vtu` (cells with level, cut, region, volume and quality cell data),
//! `boundary.vtp` (the boundary faces with patch tags and names), `report.json`, and PNG
//! pictures: slices through the middle of the bodies on the three axis planes coloured by level
//! and a histogram of the main quality measures. Every file goes to a temporary name in the
//! directory and is renamed when complete, so a failure or a kill leaves the old file or the new
//! one, never a partial one.

use crate::pipeline::{MeshError, Outcome};
use crate::spec::CaseSpec;
use crate::stages::{Hooks, Stage, StageClock};
use octocut_surface::Aabb;
use octocut_writers::histogram::{render_histogram, HistogramStyle, Measure};
use octocut_writers::slice::{mesh_values, render_slice, slice_cells, AxisPlane, ColourBy, SliceStyle, VolumeMeshCells};
use octocut_writers::{write_atomically, write_vtp, write_vtu, CellArray, Encoding};
use std::io::Write;
use std::path::{Path, PathBuf};

fn werr(path: &Path, e: impl std::fmt::Display) -> MeshError {
    MeshError::Write { path: path.to_path_buf(), message: e.to_string() }
}

/// The cell-data arrays written to `mesh.vtu`: volume and the per-cell quality measures
/// (level, cut and region are written by the VTU writer itself).
pub fn cell_arrays(out: &Outcome) -> Vec<CellArray> {
    let mut a = vec![CellArray::f64("volume", out.cell_volumes())];
    a.extend(CellArray::from_quality(&out.quality.per_cell));
    a
}

/// Writes the outputs `spec.output.formats` asks for into `dir`; returns the paths written.
pub fn write_outputs(out: &Outcome, spec: &CaseSpec, dir: &Path, hooks: &Hooks) -> Result<Vec<PathBuf>, MeshError> {
    std::fs::create_dir_all(dir).map_err(|e| werr(dir, e))?;
    let want = |f: &str| spec.output.formats.iter().any(|x| x == f);
    let encoding = match spec.output.encoding.as_str() {
        "ascii" => Encoding::Ascii,
        "base64" => Encoding::Base64,
        _ => Encoding::Appended,
    };
    let mut clock = StageClock::default();
    clock.run(hooks, Stage::Write, "files", || {
        let mut written = Vec::new();
        if want("vtu") {
            let p = dir.join("mesh.vtu");
            write_vtu(&out.mesh, &cell_arrays(out), &p, encoding).map_err(|e| werr(&p, e))?;
            written.push(p);
        }
        if want("vtp") {
            let p = dir.join("boundary.vtp");
            write_vtp(&out.mesh, &p, encoding).map_err(|e| werr(&p, e))?;
            written.push(p);
        }
        if want("png") {
            written.extend(write_pictures(out, dir)?);
        }
        if want("report") {
            let p = dir.join("report.json");
            let text = serde_json::to_string_pretty(&out.report).map_err(|e| werr(&p, e))?;
            write_atomically(&p, |w| w.write_all(text.as_bytes())).map_err(|e| werr(&p, e))?;
            written.push(p);
        }
        let n = written.len() as u64;
        Ok::<_, MeshError>((written, n))
    })
}

/// The slice planes through the middle of `bodies`, one per axis.
pub fn middle_planes(bodies: &Aabb) -> [AxisPlane; 3] {
    let c = bodies.center();
    [0, 1, 2].map(|axis| AxisPlane { axis, value: c[axis] })
}

/// Writes `slice-x.png`, `slice-y.png`, `slice-z.png` (by level) and `quality-histogram.png`.
pub fn write_pictures(out: &Outcome, dir: &Path) -> Result<Vec<PathBuf>, MeshError> {
    let mut written = Vec::new();
    let cells = VolumeMeshCells::new(&out.mesh);
    let values = mesh_values(&out.mesh, ColourBy::Level).unwrap_or_default();
    let bodies = out.bodies;
    let domain = out.domain.bounds();
    for plane in middle_planes(&bodies) {
        let polys = slice_cells(&cells, plane);
        let [u, v] = plane.in_plane_axes();
        // show the bodies with one body length around them, clipped to the domain
        let margin = bodies.extent().max_element();
        let lo = [(bodies.min[u] - margin).max(domain.min[u]), (bodies.min[v] - margin).max(domain.min[v])];
        let hi = [(bodies.max[u] + margin).min(domain.max[u]), (bodies.max[v] + margin).min(domain.max[v])];
        let name = ["x", "y", "z"][plane.axis];
        let style = SliceStyle {
            title: format!("cells cut by the plane {name} = {:.4}, coloured by octree level", plane.value),
            value_name: "level".into(),
            view: Some((lo, hi)),
            unit: "m".into(),
            ..SliceStyle::default()
        };
        let p = dir.join(format!("slice-{name}.png"));
        let png = render_slice(&polys, &values, ColourBy::Level, plane, &style).map_err(|e| werr(&p, e))?;
        write_atomically(&p, |w| w.write_all(&png)).map_err(|e| werr(&p, e))?;
        written.push(p);
    }
    let q = &out.quality.per_cell;
    let measures = [
        Measure { name: "non-orthogonality", unit: "deg", values: &q.non_orthogonality, bins: 45, range: Some((0.0, 90.0)), limit: Some(out.quality.non_orthogonality.threshold.value) },
        Measure { name: "skewness", unit: "", values: &q.skewness, bins: 40, range: None, limit: Some(out.quality.skewness.threshold.value) },
        Measure { name: "volume ratio", unit: "", values: &q.volume_ratio, bins: 40, range: None, limit: None },
    ];
    let style = HistogramStyle { title: "cell quality (worst face of each cell)".into(), ..HistogramStyle::default() };
    let p = dir.join("quality-histogram.png");
    let png = render_histogram(&measures, &style).map_err(|e| werr(&p, e))?;
    write_atomically(&p, |w| w.write_all(&png)).map_err(|e| werr(&p, e))?;
    written.push(p);
    Ok(written)
}
