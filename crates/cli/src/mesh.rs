//! `octocut mesh`: the case file or the quick form, the plan, progress, outputs and summary.

use anyhow::{bail, Context, Result};
use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};
use octocut::pipeline::{MeshError, Mesher};
use octocut::spec::{CaseSpec, FluidSpec};
use octocut::stages::{Hooks, Progress};
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::Mutex;
use std::time::Duration;

/// Arguments of `octocut mesh`.
#[derive(Args, Debug)]
pub struct MeshArgs {
    /// Case file (TOML); see the case-file reference in README.md.
    pub case: Option<PathBuf>,
    /// Quick form: a surface file (repeat for several).
    #[arg(long = "surface", value_name = "FILE.stl")]
    pub surfaces: Vec<PathBuf>,
    /// Quick form: the domain box xmin,ymin,zmin,xmax,ymax,zmax.
    #[arg(
        long,
        value_name = "XMIN,YMIN,ZMIN,XMAX,YMAX,ZMAX",
        value_delimiter = ',',
        allow_hyphen_values = true
    )]
    pub domain: Option<Vec<f64>>,
    /// Quick form: edge of the base (coarsest) cells.
    #[arg(long = "base-size", value_name = "H")]
    pub base_size: Option<f64>,
    /// Quick form: cell size wanted at the surface.
    #[arg(long = "surface-size", value_name = "h")]
    pub surface_size: Option<f64>,
    /// Quick form: which side of the surface is fluid.
    #[arg(long, value_parser = ["outside", "inside"])]
    pub fluid: Option<String>,
    /// Output directory (overrides the case file's).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Print the plan only.
    #[arg(long = "dry-run")]
    pub dry_run: bool,
    /// No progress or summary on stderr.
    #[arg(long)]
    pub quiet: bool,
    /// Print the report (or, with --dry-run, the plan) as JSON on stdout.
    #[arg(long)]
    pub json: bool,
}

fn case_from_args(a: &MeshArgs) -> Result<CaseSpec, MeshError> {
    let quick = !a.surfaces.is_empty()
        || a.domain.is_some()
        || a.base_size.is_some()
        || a.surface_size.is_some()
        || a.fluid.is_some();
    match (&a.case, quick) {
        (Some(_), true) => Err(MeshError::Config("give either a case file or the quick-form flags (--surface, --domain, --base-size, --surface-size, --fluid), not both".into())),
        (Some(path), false) => Ok(CaseSpec::from_file(path)?),
        (None, _) => {
            let missing: Vec<&str> = [
                (a.surfaces.is_empty(), "--surface FILE.stl"),
                (a.domain.is_none(), "--domain xmin,ymin,zmin,xmax,ymax,zmax"),
                (a.base_size.is_none(), "--base-size H"),
                (a.surface_size.is_none(), "--surface-size h"),
            ]
            .into_iter()
            .filter_map(|(m, s)| m.then_some(s))
            .collect();
            if !missing.is_empty() {
                return Err(MeshError::Config(format!("give a case file, or the quick form; missing: {}", missing.join(", "))));
            }
            let d = a.domain.as_ref().unwrap();
            if d.len() != 6 {
                return Err(MeshError::Config(format!("--domain takes six numbers xmin,ymin,zmin,xmax,ymax,zmax, got {}", d.len())));
            }
            let bbox = [d[0], d[1], d[2], d[3], d[4], d[5]];
            let fluid = match a.fluid.as_deref() {
                Some("inside") => FluidSpec::Inside,
                _ => FluidSpec::Outside,
            };
            let spec = CaseSpec::quick(a.surfaces.clone(), bbox, a.base_size.unwrap(), a.surface_size.unwrap(), fluid);
            spec.check_quick().map_err(MeshError::Config)?;
            Ok(spec)
        }
    }
}

/// Runs `octocut mesh`.
pub fn run(a: &MeshArgs) -> ExitCode {
    match run_inner(a) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            let code = e
                .downcast_ref::<MeshError>()
                .map_or(1, MeshError::exit_code);
            eprintln!("octocut mesh: error: {e:#}");
            ExitCode::from(code)
        }
    }
}

fn run_inner(a: &MeshArgs) -> Result<()> {
    let mut spec = case_from_args(a)?;
    if let Some(out) = &a.out {
        spec.output.dir = Some(out.clone());
    }
    let bar = |msg: String| {
        if a.quiet {
            return ProgressBar::hidden();
        }
        let b = ProgressBar::new_spinner();
        b.set_style(ProgressStyle::with_template("{spinner} {msg} {elapsed}").unwrap());
        b.enable_steady_tick(Duration::from_millis(120));
        b.set_message(msg);
        b
    };

    let load_bar = bar("load + repair + index".into());
    let mesher = Mesher::load(&spec)?;
    load_bar.finish_and_clear();
    if !a.quiet {
        eprintln!("{}", mesher.load_summary());
    }

    let plan = mesher.plan(&spec)?;
    if !a.quiet || (a.dry_run && !a.json) {
        let text = octocut::report::plan_table(&plan);
        if a.dry_run && !a.json {
            println!("{text}");
        } else {
            eprintln!("{text}");
        }
    }
    mesher.check_limits(&plan)?;
    if a.dry_run {
        if a.json {
            println!("{}", serde_json::to_string_pretty(&plan)?);
        }
        return Ok(());
    }
    let Some(dir) = spec.output.dir.clone() else {
        bail!(MeshError::Config(
            "no output directory: give --out DIR or output.dir in the case file".into()
        ));
    };

    let current: Mutex<Option<ProgressBar>> = Mutex::new(None);
    let quiet = a.quiet;
    let on_progress = |p: Progress| {
        if quiet {
            return;
        }
        let mut cur = current.lock().unwrap();
        match p {
            Progress::Started(stage) => *cur = Some(bar(stage.label().to_string())),
            Progress::Finished {
                stage,
                items,
                seconds,
            } => {
                if let Some(b) = cur.take() {
                    b.finish_and_clear();
                }
                let rate = if seconds > 0.0 {
                    items as f64 / seconds
                } else {
                    0.0
                };
                eprintln!(
                    "  {:<28} {:>8.2} s  {:>12} items  {:>12.0} /s",
                    stage.label(),
                    seconds,
                    items,
                    rate
                );
            }
        }
    };
    let hooks = Hooks {
        progress: Some(&on_progress),
        cancel: None,
    };
    let outcome = mesher.mesh_planned(&spec, plan, &hooks)?;
    let written = octocut::output::write_outputs(&outcome, &spec, &dir, &hooks)
        .with_context(|| format!("writing the outputs into {}", dir.display()))?;
    if !a.quiet {
        eprintln!("{}", octocut::report::summary_table(&outcome.report));
        for w in &written {
            eprintln!("  wrote {}", w.display());
        }
    }
    if a.json {
        println!("{}", serde_json::to_string_pretty(&outcome.report)?);
    }
    Ok(())
}
