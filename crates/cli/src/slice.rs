//! `octocut slice DIR --plane z=0.3 [--colour level|quality|region] -o FILE.png`.

use anyhow::{bail, Context, Result};
use clap::Args;
use octocut::output::AxisPlane;
use octocut::output::{slice_written_mesh, SliceColour};
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `octocut slice`.
#[derive(Args, Debug)]
pub struct SliceArgs {
    /// Directory holding a written mesh (mesh.vtu, and boundary.vtp for the walls).
    pub dir: PathBuf,
    /// The plane: x=VALUE, y=VALUE or z=VALUE in model units.
    #[arg(long, value_name = "AXIS=VALUE")]
    pub plane: String,
    /// What fills the cells.
    #[arg(long, default_value = "level", value_parser = ["level", "quality", "region"])]
    pub colour: String,
    /// With --colour quality: which cell measure.
    #[arg(long, default_value = "non_orthogonality", value_parser = ["non_orthogonality", "skewness", "volume_ratio", "cut_fraction", "aspect_ratio", "volume"])]
    pub measure: String,
    /// The PNG file to write.
    #[arg(short = 'o', long = "output", value_name = "FILE.png")]
    pub output: PathBuf,
}

fn parse_plane(s: &str) -> Result<AxisPlane> {
    let Some((a, v)) = s.split_once('=') else {
        bail!("--plane must look like z=0.3, got `{s}`");
    };
    let axis = match a.trim() {
        "x" => 0,
        "y" => 1,
        "z" => 2,
        other => bail!("--plane axis must be x, y or z, got `{other}`"),
    };
    let value: f64 = v
        .trim()
        .parse()
        .with_context(|| format!("--plane value `{v}` is not a number"))?;
    if !value.is_finite() {
        bail!("--plane value must be finite");
    }
    Ok(AxisPlane { axis, value })
}

/// Runs `octocut slice`: 0 written, 2 bad input.
pub fn run(a: &SliceArgs) -> ExitCode {
    let go = || -> Result<()> {
        let plane = parse_plane(&a.plane)?;
        let colour = match a.colour.as_str() {
            "quality" => SliceColour::Quality(a.measure.clone()),
            "region" => SliceColour::Region,
            _ => SliceColour::Level,
        };
        let png = slice_written_mesh(&a.dir, plane, &colour)?;
        octocut::output::write_file_atomically(&a.output, &png)?;
        Ok(())
    };
    match go() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("octocut slice: error: {e:#}");
            ExitCode::from(2)
        }
    }
}
