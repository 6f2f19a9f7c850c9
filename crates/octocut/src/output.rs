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
pub use octocut_writers::slice::AxisPlane;
use octocut_writers::slice::{
    mesh_values, render_slice, slice_cells, slice_cells_on_planes, ColourBy, SliceStyle,
    VolumeMeshCells,
};
use octocut_writers::vtkxml::ValuesRef;
use octocut_writers::vtu::write_vtu_with_volumes;
use octocut_writers::{write_atomically, write_vtp, CellArray, Encoding};
use std::io::Write;
use std::path::{Path, PathBuf};

fn werr(path: &Path, e: impl std::fmt::Display) -> MeshError {
    MeshError::Write {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

/// The extra cell-data arrays written to `mesh.vtu`: the per-cell quality measures (level,
/// cut, region and volume are written by the VTU writer itself; a repeated name makes VTK's
/// reader fail).
pub fn cell_arrays(out: &Outcome) -> Vec<CellArray> {
    CellArray::from_quality(&out.quality.per_cell)
}

/// Writes the outputs `spec.output.formats` asks for into `dir`; returns the paths written.
pub fn write_outputs(
    out: &Outcome,
    spec: &CaseSpec,
    dir: &Path,
    hooks: &Hooks,
) -> Result<Vec<PathBuf>, MeshError> {
    std::fs::create_dir_all(dir).map_err(|e| werr(dir, e))?;
    let want = |f: &str| spec.output.formats.iter().any(|x| x == f);
    let encoding = match spec.output.encoding.as_str() {
        "ascii" => Encoding::Ascii,
        "base64" => Encoding::Base64,
        _ => Encoding::Appended,
    };
    let mut clock = StageClock::default();
    let mut written = clock.run(hooks, Stage::Write, "files", || {
        // the volume mesh on one thread, the boundary and the pictures on the other: they only
        // read the outcome, and each file has its own temporary name
        let vtu = || -> Result<Vec<PathBuf>, MeshError> {
            if !want("vtu") {
                return Ok(Vec::new());
            }
            let p = dir.join("mesh.vtu");
            // the quality arrays borrowed, not copied
            let named = out.quality.per_cell.named();
            let extra: Vec<(&str, ValuesRef)> =
                named.iter().map(|&(n, v)| (n, ValuesRef::F64(v))).collect();
            let volume = &out.quality.per_cell.volume;
            write_vtu_with_volumes(&out.mesh, volume, &extra, &p, encoding)
                .map_err(|e| werr(&p, e))?;
            Ok(vec![p])
        };
        let rest = || -> Result<Vec<PathBuf>, MeshError> {
            let mut written = Vec::new();
            if want("vtp") {
                let p = dir.join("boundary.vtp");
                write_vtp(&out.mesh, &p, encoding).map_err(|e| werr(&p, e))?;
                written.push(p);
            }
            if want("png") {
                written.extend(write_pictures(out, dir)?);
            }
            Ok(written)
        };
        let (a, b) = rayon::join(vtu, rest);
        crate::pipeline::release_free_memory();
        let mut written = a?;
        written.extend(b?);
        let n = written.len() as u64;
        Ok::<_, MeshError>((written, n))
    })?;
    // the report last, with the time and peak memory of writing the other files
    if want("report") {
        let p = dir.join("report.json");
        let mut report = out.report.clone();
        report.stages.extend(clock.figures.iter().cloned());
        let text = serde_json::to_string_pretty(&report).map_err(|e| werr(&p, e))?;
        write_atomically(&p, |w| w.write_all(text.as_bytes())).map_err(|e| werr(&p, e))?;
        written.push(p);
    }
    Ok(written)
}

/// The slice planes through the middle of `bodies`, one per axis.
pub fn middle_planes(bodies: &Aabb) -> [AxisPlane; 3] {
    let c = bodies.center();
    [0, 1, 2].map(|axis| AxisPlane {
        axis,
        value: c[axis],
    })
}

/// Writes `slice-x.png`, `slice-y.png`, `slice-z.png` (by level) and `quality-histogram.png`.
pub fn write_pictures(out: &Outcome, dir: &Path) -> Result<Vec<PathBuf>, MeshError> {
    let mut written = Vec::new();
    let cells = VolumeMeshCells::new(&out.mesh);
    let values = mesh_values(&out.mesh, ColourBy::Level).unwrap_or_default();
    let bodies = out.bodies;
    let domain = out.domain.bounds();
    let planes = middle_planes(&bodies);
    let cut = slice_cells_on_planes(&cells, &planes);
    drop(cells);
    for (plane, polys) in planes.into_iter().zip(cut) {
        let [u, v] = plane.in_plane_axes();
        // show the bodies with one body length around them, clipped to the domain
        let margin = bodies.extent().max_element();
        let lo = [
            (bodies.min[u] - margin).max(domain.min[u]),
            (bodies.min[v] - margin).max(domain.min[v]),
        ];
        let hi = [
            (bodies.max[u] + margin).min(domain.max[u]),
            (bodies.max[v] + margin).min(domain.max[v]),
        ];
        let name = ["x", "y", "z"][plane.axis];
        let style = SliceStyle {
            title: format!(
                "cells cut by the plane {name} = {:.4}, coloured by octree level",
                plane.value
            ),
            value_name: "level".into(),
            view: Some((lo, hi)),
            unit: "m".into(),
            ..SliceStyle::default()
        };
        let p = dir.join(format!("slice-{name}.png"));
        let png = render_slice(&polys, &values, ColourBy::Level, plane, &style)
            .map_err(|e| werr(&p, e))?;
        write_atomically(&p, |w| w.write_all(&png)).map_err(|e| werr(&p, e))?;
        written.push(p);
    }
    let q = &out.quality.per_cell;
    let measures = [
        Measure {
            name: "non-orthogonality",
            unit: "deg",
            values: &q.non_orthogonality,
            bins: 45,
            range: Some((0.0, 90.0)),
            limit: Some(out.quality.non_orthogonality.threshold.value),
        },
        Measure {
            name: "skewness",
            unit: "",
            values: &q.skewness,
            bins: 40,
            range: None,
            limit: Some(out.quality.skewness.threshold.value),
        },
        Measure {
            name: "volume ratio",
            unit: "",
            values: &q.volume_ratio,
            bins: 40,
            range: None,
            limit: None,
        },
    ];
    let style = HistogramStyle {
        title: "cell quality (worst face of each cell)".into(),
        ..HistogramStyle::default()
    };
    let p = dir.join("quality-histogram.png");
    let png = render_histogram(&measures, &style).map_err(|e| werr(&p, e))?;
    write_atomically(&p, |w| w.write_all(&png)).map_err(|e| werr(&p, e))?;
    written.push(p);
    Ok(written)
}

/// How `octocut slice` colours the cells.
#[derive(Clone, Debug, PartialEq)]
pub enum SliceColour {
    Level,
    Region,
    /// A quality cell array of `mesh.vtu` by name (e.g. `non_orthogonality`).
    Quality(String),
}

/// Draws the axis-plane slice `plane` of the mesh written in `dir` (`mesh.vtu`, and
/// `boundary.vtp` to draw the walls heavier) as PNG bytes.
pub fn slice_written_mesh(
    dir: &Path,
    plane: AxisPlane,
    colour: &SliceColour,
) -> Result<Vec<u8>, MeshError> {
    let vtu = dir.join("mesh.vtu");
    let m = octocut_writers::read_vtu(&vtu)
        .map_err(|e| MeshError::Config(format!("{}: {e}", vtu.display())))?;
    // wall faces: the boundary polygons of wall patches, matched by their exact coordinates
    let vtp = dir.join("boundary.vtp");
    let mut walls = std::collections::HashSet::new();
    if let Ok(b) = octocut_writers::read_vtp(&vtp) {
        let kinds: Vec<String> = match b.field_data.get("tag_kinds") {
            Some(octocut_writers::ReadArray::Strings(s)) => s.clone(),
            _ => Vec::new(),
        };
        let tags = b
            .cell_data
            .get("tag")
            .and_then(|a| a.as_f64())
            .unwrap_or_default();
        for i in 0..b.n_polys() {
            let wall = tags
                .get(i)
                .and_then(|&t| kinds.get(t as usize))
                .is_some_and(|k| k.starts_with("wall"));
            if wall {
                walls.insert(face_key(&b.points, b.poly(i)));
            }
        }
    }
    let mut cells = octocut_writers::slice::PolyhedronCells::new(m.points.clone());
    for c in 0..m.n_cells() {
        let faces: Vec<(&[u32], bool)> = (m.cell_offsets[c] as usize
            ..m.cell_offsets[c + 1] as usize)
            .map(|f| {
                let v = m.face(f);
                (
                    v,
                    !walls.is_empty() && walls.contains(&face_key(&m.points, v)),
                )
            })
            .collect();
        cells.push_cell(faces);
    }
    let (values, mode, name, names) = match colour {
        SliceColour::Level => (
            m.cell_data.get("level").and_then(|a| a.as_f64()),
            ColourBy::Level,
            "level".to_string(),
            Vec::new(),
        ),
        SliceColour::Region => {
            let names = match m.field_data.get("region_names") {
                Some(octocut_writers::ReadArray::Strings(s)) => s.clone(),
                _ => Vec::new(),
            };
            (
                m.cell_data.get("region").and_then(|a| a.as_f64()),
                ColourBy::Region,
                "region".to_string(),
                names,
            )
        }
        SliceColour::Quality(q) => (
            m.cell_data.get(q.as_str()).and_then(|a| a.as_f64()),
            ColourBy::Quality,
            q.clone(),
            Vec::new(),
        ),
    };
    let Some(values) = values else {
        let known: Vec<&String> = m.cell_data.keys().collect();
        return Err(MeshError::Config(format!(
            "{} has no cell array `{name}` (it has: {known:?})",
            vtu.display()
        )));
    };
    let polys = slice_cells(&cells, plane);
    if polys.is_empty() {
        return Err(MeshError::Config(format!(
            "the plane {}={} cuts no cell of {}",
            ["x", "y", "z"][plane.axis],
            plane.value,
            vtu.display()
        )));
    }
    let style = SliceStyle {
        title: format!(
            "{} = {}: cells coloured by {name}",
            ["x", "y", "z"][plane.axis],
            plane.value
        ),
        value_name: name,
        category_names: names,
        unit: "m".into(),
        ..SliceStyle::default()
    };
    render_slice(&polys, &values, mode, plane, &style).map_err(|e| MeshError::Config(e.to_string()))
}

/// A face identified by the exact bits of its vertices' coordinates, in sorted order.
fn face_key(points: &[octocut_surface::Vec3], v: &[u32]) -> Vec<[u64; 3]> {
    let mut k: Vec<[u64; 3]> = v
        .iter()
        .map(|&i| points[i as usize].to_array().map(f64::to_bits))
        .collect();
    k.sort_unstable();
    k
}

/// Writes `bytes` to `path` through a temporary file and a rename.
pub fn write_file_atomically(path: &Path, bytes: &[u8]) -> Result<(), MeshError> {
    write_atomically(path, |w| w.write_all(bytes)).map_err(|e| werr(path, e))
}
