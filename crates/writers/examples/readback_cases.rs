//! Writes read-back cases for `tests/vtk_readback.py`: one directory per hand-made mesh with
//! `mesh.vtu`, `boundary.vtp` and `expected.json` (cell count, fluid volume, tag names...).
//!
//! Usage: `cargo run -p octocut-writers --example readback_cases -- OUT_DIR`

use octocut_volmesh::{quality, testmesh, VolumeMesh};
use octocut_writers::{write_vtp, write_vtu, CellArray, Encoding};
use std::path::PathBuf;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let out = PathBuf::from(
        std::env::args()
            .nth(1)
            .ok_or("usage: readback_cases OUT_DIR")?,
    );
    let mut refined = testmesh::refined_block(3, 0.5, &[[1, 1, 1], [0, 0, 0], [2, 0, 0]]);
    refined.region_names = vec!["core".into()];
    refined.cell_region[0] = 0;
    let cases: Vec<(&str, VolumeMesh, Encoding)> = vec![
        ("block", testmesh::block(4, 0.25), Encoding::Appended),
        ("refined-appended", refined.clone(), Encoding::Appended),
        ("refined-base64", refined.clone(), Encoding::Base64),
        ("refined-ascii", refined, Encoding::Ascii),
        ("clipped-cube", testmesh::clipped_cube(), Encoding::Appended),
        ("l-cell", testmesh::l_cell(), Encoding::Base64),
    ];
    for (name, m, enc) in cases {
        let dir = out.join(name);
        std::fs::create_dir_all(&dir)?;
        let rep = m.validate();
        if !rep.is_valid() {
            return Err(format!("{name}: test mesh is not valid: {:?}", rep.problems).into());
        }
        let q = quality(&m, |l| 1.0 / (1u32 << l) as f64);
        write_vtu(
            &m,
            &CellArray::from_quality(&q.per_cell),
            &dir.join("mesh.vtu"),
            enc,
        )?;
        write_vtp(&m, &dir.join("boundary.vtp"), enc)?;
        let names: Vec<&str> = m.patches.iter().map(|p| p.name.as_str()).collect();
        let area: f64 = rep.patch_areas.iter().map(|p| p.area).sum();
        let json = serde_json::json!({
            "cells": m.n_cells(),
            "fluid_volume": rep.cells_volume,
            "boundary_faces": rep.n_boundary_faces,
            "boundary_area": area,
            "tag_names": names,
        });
        std::fs::write(
            dir.join("expected.json"),
            serde_json::to_string_pretty(&json)? + "\n",
        )?;
        println!("{}", dir.display());
    }
    Ok(())
}
