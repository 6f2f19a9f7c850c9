//! The case specification: what to mesh and how, as read from a TOML case file.
//!
//! Every table rejects unknown keys; wrong types and impossible values (non-positive sizes, an
//! empty box, an unknown flow direction) are reported with the file, line and column of the
//! offending value and a sentence saying what is expected. Values that need the surface to judge
//! (a fluid point inside the body) keep their position so the pipeline can report it the same way.

use octocut_surface::{Aabb, Vec3};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// A position in a case file (1-based line and column).
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct SourcePos {
    pub file: PathBuf,
    pub line: usize,
    pub column: usize,
}

impl fmt::Display for SourcePos {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}:{}:{}", self.file.display(), self.line, self.column)
    }
}

/// A case-file problem with its position.
#[derive(Debug, thiserror::Error, PartialEq)]
#[error("{pos}: {message}")]
pub struct SpecError {
    pub pos: SourcePos,
    pub message: String,
}

/// Byte span of a value in the case text, kept to report problems found later.
pub type Span = Range<usize>;

/// The whole case.
///
/// ```
/// use octocut::spec::CaseSpec;
/// let text = r#"
/// [surfaces]
/// files = ["body.stl"]
/// size = 0.05
/// [domain]
/// box = [-1.0, -1.0, -1.0, 2.0, 1.0, 1.0]
/// base_size = 0.5
/// "#;
/// let case = CaseSpec::from_toml_str(text, "case.toml".as_ref()).unwrap();
/// assert_eq!(case.surfaces.size, 0.05);
/// let err = CaseSpec::from_toml_str("[surfaces]\nfiles = []\nsize = -1.0\n[domain]\nbase_size = 1.0\nbox=[0,0,0,1,1,1]", "c.toml".as_ref()).unwrap_err();
/// assert!(err.to_string().starts_with("c.toml:3:8:"), "{err}");
/// ```
#[derive(Clone, Debug, Serialize)]
pub struct CaseSpec {
    /// Directory the case file lives in; relative paths are resolved against it.
    pub base_dir: PathBuf,
    pub surfaces: SurfacesSpec,
    pub domain: DomainSpec,
    pub fluid: FluidSpec,
    pub gaps: Option<GapsSpec>,
    pub regions: Vec<RegionSpec>,
    pub transition_layers: u32,
    pub small_cell_fraction: f64,
    pub side_names: [String; 6],
    pub output: OutputSpec,
    pub limits: LimitsSpec,
    /// Source file and text, for positions of problems found after parsing.
    #[serde(skip)]
    pub source: Option<(PathBuf, String)>,
}

/// Surface files and sizes.
#[derive(Clone, Debug, Serialize)]
pub struct SurfacesSpec {
    pub files: Vec<PathBuf>,
    /// Cell size wanted at the surface, for tags without a size of their own.
    pub size: f64,
    /// Per-tag sizes, by surface tag name.
    pub sizes: Vec<(String, f64)>,
    /// Normals spreading by more than this (degrees) inside a cell ask for finer cells.
    pub feature_angle: f64,
    /// Finest cell size that feature refinement may reach (default: half the surface size).
    pub finest_size: Option<f64>,
    /// Weld tolerance relative to the bounding-box diagonal.
    pub weld_tolerance: Option<f64>,
}

/// The domain box.
#[derive(Clone, Debug, Serialize)]
pub struct DomainSpec {
    pub placement: BoxPlacement,
    pub base_size: f64,
}

/// How the box is given.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub enum BoxPlacement {
    /// An explicit box `[xmin, ymin, zmin, xmax, ymax, zmax]`.
    Explicit([f64; 6]),
    /// Around the bodies, in multiples of their length along the flow direction.
    Around(AroundSpec),
}

/// A box placed around the bodies.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct AroundSpec {
    /// Flow direction: "+x", "-x", "+y" or "-y" (z is up).
    pub flow: String,
    pub upstream: f64,
    pub downstream: f64,
    pub sides: f64,
    pub above: f64,
    /// Below the bodies (default: `sides`); ignored with `floor = true`.
    pub below: Option<f64>,
    /// Put the box floor at the bodies' lowest point.
    #[serde(default)]
    pub floor: bool,
}

/// Which side of the surface is fluid.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub enum FluidSpec {
    Outside,
    Inside,
    /// The connected region holding this point; the span locates it in the case file.
    Point([f64; 3], #[serde(skip)] Option<Span>),
}

/// Gap refinement.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct GapsSpec {
    /// Cells wanted across a gap.
    pub cells: u32,
    /// Finest size gap refinement may reach.
    pub finest_size: f64,
}

/// A size region.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct RegionSpec {
    pub name: String,
    pub shape: RegionShapeSpec,
    pub size: f64,
    /// Distance over which the size grows back to the surrounding size.
    pub grow: Option<f64>,
}

/// Region shapes.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub enum RegionShapeSpec {
    Box {
        min: [f64; 3],
        max: [f64; 3],
    },
    Sphere {
        center: [f64; 3],
        radius: f64,
    },
    Cylinder {
        a: [f64; 3],
        b: [f64; 3],
        radius: f64,
    },
}

/// Output choices.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct OutputSpec {
    pub dir: Option<PathBuf>,
    pub formats: Vec<String>,
    /// "binary" (raw appended), "base64" or "ascii".
    pub encoding: String,
}

/// Limits that refuse a run before it starts.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct LimitsSpec {
    pub max_cells: u64,
    pub max_memory_bytes: u64,
}

pub const DEFAULT_SIDE_NAMES: [&str; 6] = ["xmin", "xmax", "ymin", "ymax", "zmin", "zmax"];
pub const KNOWN_FORMATS: [&str; 4] = ["vtu", "vtp", "png", "report"];

// ---- raw, as written in the file ----

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCase {
    surfaces: RawSurfaces,
    domain: RawDomain,
    fluid: Option<RawFluid>,
    gaps: Option<Spanned<GapsSpec>>,
    #[serde(default)]
    regions: Vec<RawRegion>,
    refinement: Option<RawRefinement>,
    cells: Option<RawCells>,
    sides: Option<RawSides>,
    output: Option<RawOutput>,
    limits: Option<RawLimits>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSurfaces {
    files: Vec<String>,
    size: Spanned<f64>,
    #[serde(default)]
    sizes: toml::Table,
    feature_angle: Option<Spanned<f64>>,
    finest_size: Option<Spanned<f64>>,
    weld_tolerance: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDomain {
    #[serde(rename = "box")]
    bbox: Option<Spanned<[f64; 6]>>,
    around: Option<Spanned<AroundSpec>>,
    base_size: Spanned<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFluid {
    side: Spanned<String>,
    point: Option<Spanned<[f64; 3]>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRegion {
    name: String,
    shape: Spanned<String>,
    min: Option<[f64; 3]>,
    max: Option<[f64; 3]>,
    center: Option<[f64; 3]>,
    radius: Option<Spanned<f64>>,
    a: Option<[f64; 3]>,
    b: Option<[f64; 3]>,
    size: Spanned<f64>,
    grow: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRefinement {
    transition_layers: Option<Spanned<i64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCells {
    small_cell_fraction: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSides {
    xmin: Option<String>,
    xmax: Option<String>,
    ymin: Option<String>,
    ymax: Option<String>,
    zmin: Option<String>,
    zmax: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawOutput {
    dir: Option<String>,
    formats: Option<Spanned<Vec<String>>>,
    encoding: Option<Spanned<String>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLimits {
    max_cells: Option<Spanned<i64>>,
    max_memory_gb: Option<Spanned<f64>>,
}

/// Line and column (1-based) of byte `offset` in `text`.
pub fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    let before = &text[..offset];
    let line = before.matches('\n').count() + 1;
    let col = before.rfind('\n').map_or(offset, |p| offset - p - 1) + 1;
    (line, col)
}

struct Ctx<'a> {
    file: &'a Path,
    text: &'a str,
}

impl Ctx<'_> {
    fn err(&self, span: Option<Span>, message: impl Into<String>) -> SpecError {
        let (line, column) = span.map_or((1, 1), |s| line_col(self.text, s.start));
        SpecError {
            pos: SourcePos {
                file: self.file.to_path_buf(),
                line,
                column,
            },
            message: message.into(),
        }
    }

    fn positive(&self, v: &Spanned<f64>, what: &str) -> Result<f64, SpecError> {
        let x = *v.get_ref();
        if x.is_finite() && x > 0.0 {
            Ok(x)
        } else {
            Err(self.err(
                Some(v.span()),
                format!("{what} must be a positive length, got {x}"),
            ))
        }
    }

    fn non_negative(&self, v: &Spanned<f64>, what: &str) -> Result<f64, SpecError> {
        let x = *v.get_ref();
        if x.is_finite() && x >= 0.0 {
            Ok(x)
        } else {
            Err(self.err(
                Some(v.span()),
                format!("{what} must be zero or positive, got {x}"),
            ))
        }
    }
}

impl CaseSpec {
    /// Reads and checks a case file.
    pub fn from_file(path: &Path) -> Result<CaseSpec, SpecError> {
        let text = std::fs::read_to_string(path).map_err(|e| SpecError {
            pos: SourcePos {
                file: path.to_path_buf(),
                line: 1,
                column: 1,
            },
            message: format!("cannot read the case file: {e}"),
        })?;
        Self::from_toml_str(&text, path)
    }

    /// Parses and checks case text; `file` names it in messages and anchors relative paths.
    pub fn from_toml_str(text: &str, file: &Path) -> Result<CaseSpec, SpecError> {
        let cx = Ctx { file, text };
        let raw: RawCase = toml::from_str(text).map_err(|e| {
            let msg = e.message().trim_end().replace('\n', " ");
            cx.err(
                e.span(),
                format!("{msg} (see the case-file reference in README.md)"),
            )
        })?;
        let base_dir = file.parent().map(Path::to_path_buf).unwrap_or_default();

        let s = &raw.surfaces;
        let size = cx.positive(&s.size, "surfaces.size")?;
        let mut sizes = Vec::new();
        for (name, v) in &s.sizes {
            let x = v.as_float().or_else(|| v.as_integer().map(|i| i as f64));
            match x {
                Some(x) if x.is_finite() && x > 0.0 => sizes.push((name.clone(), x)),
                _ => {
                    let span = find_key(text, "sizes", name);
                    return Err(cx.err(
                        span,
                        format!("surfaces.sizes.{name} must be a positive length, got {v}"),
                    ));
                }
            }
        }
        let feature_angle = match &s.feature_angle {
            Some(a) => {
                let x = *a.get_ref();
                if !(x > 0.0 && x < 180.0) {
                    return Err(cx.err(
                        Some(a.span()),
                        format!(
                            "surfaces.feature_angle must be between 0 and 180 degrees, got {x}"
                        ),
                    ));
                }
                x
            }
            None => 30.0,
        };
        let finest_size = s
            .finest_size
            .as_ref()
            .map(|v| cx.positive(v, "surfaces.finest_size"))
            .transpose()?;
        let weld_tolerance = s
            .weld_tolerance
            .as_ref()
            .map(|v| cx.non_negative(v, "surfaces.weld_tolerance"))
            .transpose()?;
        let surfaces = SurfacesSpec {
            files: s.files.iter().map(PathBuf::from).collect(),
            size,
            sizes,
            feature_angle,
            finest_size,
            weld_tolerance,
        };

        let d = &raw.domain;
        let base_size = cx.positive(&d.base_size, "domain.base_size")?;
        let placement = match (&d.bbox, &d.around) {
            (Some(b), None) => {
                let v = *b.get_ref();
                if v.iter().any(|x| !x.is_finite()) || !(v[0] < v[3] && v[1] < v[4] && v[2] < v[5]) {
                    return Err(cx.err(Some(b.span()), "domain.box must be [xmin, ymin, zmin, xmax, ymax, zmax] with each min below its max"));
                }
                BoxPlacement::Explicit(v)
            }
            (None, Some(a)) => {
                let g = a.get_ref();
                if !["+x", "-x", "+y", "-y"].contains(&g.flow.as_str()) {
                    return Err(cx.err(Some(a.span()), format!("domain.around.flow must be one of \"+x\", \"-x\", \"+y\", \"-y\" (z is up), got \"{}\"", g.flow)));
                }
                let all = [g.upstream, g.downstream, g.sides, g.above, g.below.unwrap_or(0.0)];
                if all.iter().any(|x| !x.is_finite() || *x < 0.0) {
                    return Err(cx.err(Some(a.span()), "domain.around distances are multiples of the body length and must be zero or positive"));
                }
                BoxPlacement::Around(g.clone())
            }
            (Some(b), Some(_)) => return Err(cx.err(Some(b.span()), "give either domain.box or domain.around, not both")),
            (None, None) => return Err(cx.err(Some(d.base_size.span()), "the domain needs a box: domain.box = [xmin, ymin, zmin, xmax, ymax, zmax] or a [domain.around] table")),
        };
        let domain = DomainSpec {
            placement,
            base_size,
        };

        let fluid = match &raw.fluid {
            None => FluidSpec::Outside,
            Some(f) => match (f.side.get_ref().as_str(), &f.point) {
                ("outside", None) => FluidSpec::Outside,
                ("inside", None) => FluidSpec::Inside,
                ("point", Some(p)) => {
                    if p.get_ref().iter().any(|x| !x.is_finite()) {
                        return Err(cx.err(
                            Some(p.span()),
                            "fluid.point must be three finite coordinates",
                        ));
                    }
                    FluidSpec::Point(*p.get_ref(), Some(p.span()))
                }
                ("point", None) => {
                    return Err(cx.err(
                        Some(f.side.span()),
                        "fluid.side = \"point\" needs fluid.point = [x, y, z]",
                    ))
                }
                ("outside" | "inside", Some(p)) => {
                    return Err(cx.err(
                        Some(p.span()),
                        "fluid.point is only used with fluid.side = \"point\"",
                    ))
                }
                (other, _) => {
                    return Err(cx.err(
                        Some(f.side.span()),
                        format!(
                        "fluid.side must be \"outside\", \"inside\" or \"point\", got \"{other}\""
                    ),
                    ))
                }
            },
        };

        let gaps = match &raw.gaps {
            Some(g) => {
                let v = g.get_ref();
                if v.cells == 0 || !(v.finest_size.is_finite() && v.finest_size > 0.0) {
                    return Err(cx.err(
                        Some(g.span()),
                        "gaps.cells must be at least 1 and gaps.finest_size a positive length",
                    ));
                }
                Some(v.clone())
            }
            None => None,
        };

        let mut regions = Vec::new();
        for r in &raw.regions {
            let size = cx.positive(&r.size, &format!("regions \"{}\" size", r.name))?;
            let grow = r
                .grow
                .as_ref()
                .map(|g| cx.non_negative(g, &format!("regions \"{}\" grow", r.name)))
                .transpose()?;
            let need = |what: &str| {
                cx.err(
                    Some(r.shape.span()),
                    format!(
                        "region \"{}\" of shape \"{}\" needs {what}",
                        r.name,
                        r.shape.get_ref()
                    ),
                )
            };
            let radius = |cx: &Ctx| -> Result<f64, SpecError> {
                match &r.radius {
                    Some(v) => cx.positive(v, &format!("region \"{}\" radius", r.name)),
                    None => Err(need("radius")),
                }
            };
            let shape = match r.shape.get_ref().as_str() {
                "box" => {
                    let (min, max) = (
                        r.min.ok_or_else(|| need("min = [x, y, z]"))?,
                        r.max.ok_or_else(|| need("max = [x, y, z]"))?,
                    );
                    if !(0..3).all(|i| min[i] < max[i]) {
                        return Err(cx.err(
                            Some(r.shape.span()),
                            format!("region \"{}\": each min must be below its max", r.name),
                        ));
                    }
                    RegionShapeSpec::Box { min, max }
                }
                "sphere" => RegionShapeSpec::Sphere {
                    center: r.center.ok_or_else(|| need("center = [x, y, z]"))?,
                    radius: radius(&cx)?,
                },
                "cylinder" => {
                    let (a, b) = (
                        r.a.ok_or_else(|| need("a = [x, y, z] (one end of the axis)"))?,
                        r.b.ok_or_else(|| need("b = [x, y, z] (the other end)"))?,
                    );
                    if a == b {
                        return Err(cx.err(
                            Some(r.shape.span()),
                            format!("region \"{}\": the axis ends a and b must differ", r.name),
                        ));
                    }
                    RegionShapeSpec::Cylinder {
                        a,
                        b,
                        radius: radius(&cx)?,
                    }
                }
                other => {
                    return Err(cx.err(
                        Some(r.shape.span()),
                        format!(
                        "region shape must be \"box\", \"sphere\" or \"cylinder\", got \"{other}\""
                    ),
                    ))
                }
            };
            regions.push(RegionSpec {
                name: r.name.clone(),
                shape,
                size,
                grow,
            });
        }

        let transition_layers = match raw
            .refinement
            .as_ref()
            .and_then(|r| r.transition_layers.as_ref())
        {
            Some(t) => {
                let v = *t.get_ref();
                if !(1..=8).contains(&v) {
                    return Err(cx.err(
                        Some(t.span()),
                        format!("refinement.transition_layers must be 1 (plain 2:1) to 8, got {v}"),
                    ));
                }
                v as u32
            }
            None => 1,
        };
        let small_cell_fraction = match raw
            .cells
            .as_ref()
            .and_then(|c| c.small_cell_fraction.as_ref())
        {
            Some(f) => {
                let v = *f.get_ref();
                if !(0.0..1.0).contains(&v) {
                    return Err(cx.err(
                        Some(f.span()),
                        format!(
                            "cells.small_cell_fraction must be at least 0 and below 1, got {v}"
                        ),
                    ));
                }
                v
            }
            None => 0.5,
        };

        let mut side_names = DEFAULT_SIDE_NAMES.map(String::from);
        if let Some(s) = &raw.sides {
            for (i, v) in [&s.xmin, &s.xmax, &s.ymin, &s.ymax, &s.zmin, &s.zmax]
                .into_iter()
                .enumerate()
            {
                if let Some(n) = v {
                    side_names[i] = n.clone();
                }
            }
        }

        let mut output = OutputSpec {
            dir: None,
            formats: KNOWN_FORMATS.map(String::from).to_vec(),
            encoding: "binary".into(),
        };
        if let Some(o) = &raw.output {
            output.dir = o.dir.as_ref().map(PathBuf::from);
            if let Some(f) = &o.formats {
                if let Some(bad) = f
                    .get_ref()
                    .iter()
                    .find(|x| !KNOWN_FORMATS.contains(&x.as_str()))
                {
                    return Err(cx.err(Some(f.span()), format!("output.formats holds \"{bad}\"; known formats are vtu, vtp, png, report")));
                }
                output.formats = f.get_ref().clone();
            }
            if let Some(e) = &o.encoding {
                if !["binary", "base64", "ascii"].contains(&e.get_ref().as_str()) {
                    return Err(cx.err(Some(e.span()), format!("output.encoding must be \"binary\", \"base64\" or \"ascii\", got \"{}\"", e.get_ref())));
                }
                output.encoding = e.get_ref().clone();
            }
        }

        let mut limits = LimitsSpec::default();
        if let Some(l) = &raw.limits {
            if let Some(c) = &l.max_cells {
                if *c.get_ref() <= 0 {
                    return Err(cx.err(Some(c.span()), "limits.max_cells must be a positive count"));
                }
                limits.max_cells = *c.get_ref() as u64;
            }
            if let Some(m) = &l.max_memory_gb {
                limits.max_memory_bytes =
                    (cx.positive(m, "limits.max_memory_gb")? * (1u64 << 30) as f64) as u64;
            }
        }

        Ok(CaseSpec {
            base_dir,
            surfaces,
            domain,
            fluid,
            gaps,
            regions,
            transition_layers,
            small_cell_fraction,
            side_names,
            output,
            limits,
            source: Some((file.to_path_buf(), text.to_string())),
        })
    }

    /// A position for a span of the case text (line 1 for specs built in code).
    pub fn pos_of(&self, span: Option<&Span>) -> SourcePos {
        match (&self.source, span) {
            (Some((file, text)), Some(s)) => {
                let (line, column) = line_col(text, s.start);
                SourcePos {
                    file: file.clone(),
                    line,
                    column,
                }
            }
            (Some((file, _)), None) => SourcePos {
                file: file.clone(),
                line: 1,
                column: 1,
            },
            (None, _) => SourcePos {
                file: PathBuf::from("<spec>"),
                line: 1,
                column: 1,
            },
        }
    }

    /// The surface files, resolved against the case file's directory.
    pub fn surface_paths(&self) -> Vec<PathBuf> {
        self.surfaces
            .files
            .iter()
            .map(|f| {
                if f.is_absolute() {
                    f.clone()
                } else {
                    self.base_dir.join(f)
                }
            })
            .collect()
    }
}

impl Default for LimitsSpec {
    fn default() -> Self {
        LimitsSpec {
            max_cells: 50_000_000,
            max_memory_bytes: 16 << 30,
        }
    }
}

/// Span of `key = ...` inside the `[...sizes]` table, for per-tag messages.
fn find_key(text: &str, table: &str, key: &str) -> Option<Span> {
    let start = text.find(&format!("{table}]"))?;
    let rel = text[start..].find(key)?;
    Some(start + rel..start + rel + key.len())
}

impl CaseSpec {
    /// The case of the quick command-line form: surfaces, an explicit box, a base size and one
    /// surface size.
    pub fn quick(
        files: Vec<PathBuf>,
        bbox: [f64; 6],
        base_size: f64,
        surface_size: f64,
        fluid: FluidSpec,
    ) -> CaseSpec {
        CaseSpec {
            base_dir: PathBuf::new(),
            surfaces: SurfacesSpec {
                files,
                size: surface_size,
                sizes: Vec::new(),
                feature_angle: 30.0,
                finest_size: None,
                weld_tolerance: None,
            },
            domain: DomainSpec {
                placement: BoxPlacement::Explicit(bbox),
                base_size,
            },
            fluid,
            gaps: None,
            regions: Vec::new(),
            transition_layers: 1,
            small_cell_fraction: 0.5,
            side_names: DEFAULT_SIDE_NAMES.map(String::from),
            output: OutputSpec {
                dir: None,
                formats: KNOWN_FORMATS.map(String::from).to_vec(),
                encoding: "binary".into(),
            },
            limits: LimitsSpec::default(),
            source: None,
        }
    }

    /// The requested box, placing it around `bodies` when the case asks for that.
    pub fn requested_box(&self, bodies: &Aabb) -> Aabb {
        match &self.domain.placement {
            BoxPlacement::Explicit(b) => {
                Aabb::new(Vec3::new(b[0], b[1], b[2]), Vec3::new(b[3], b[4], b[5]))
            }
            BoxPlacement::Around(a) => around_box(a, bodies),
        }
    }
}

/// The box around `bodies` given by multiples of their length along the flow direction.
///
/// ```
/// use octocut::spec::{around_box, AroundSpec};
/// use octocut_surface::{Aabb, Vec3};
/// let a = AroundSpec { flow: "+x".into(), upstream: 1.0, downstream: 2.0, sides: 1.0, above: 1.0, below: None, floor: true };
/// let b = around_box(&a, &Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)));
/// assert_eq!(b.min, Vec3::new(-2.0, -2.0, 0.0));
/// assert_eq!(b.max, Vec3::new(6.0, 3.0, 3.0));
/// ```
pub fn around_box(a: &AroundSpec, bodies: &Aabb) -> Aabb {
    let (axis, positive) = match a.flow.as_str() {
        "-x" => (0, false),
        "+y" => (1, true),
        "-y" => (1, false),
        _ => (0, true),
    };
    let lateral = 1 - axis; // the other horizontal axis
    let len = bodies.extent()[axis];
    let mut min = bodies.min;
    let mut max = bodies.max;
    let (up, down) = (a.upstream * len, a.downstream * len);
    if positive {
        min[axis] -= up;
        max[axis] += down;
    } else {
        min[axis] -= down;
        max[axis] += up;
    }
    min[lateral] -= a.sides * len;
    max[lateral] += a.sides * len;
    max[2] += a.above * len;
    if !a.floor {
        min[2] -= a.below.unwrap_or(a.sides) * len;
    }
    Aabb::new(min, max)
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"[surfaces]
files = ["a.stl"]
size = 0.1
[domain]
box = [0.0, 0.0, 0.0, 4.0, 2.0, 2.0]
base_size = 1.0
"#;

    fn err(text: &str) -> SpecError {
        CaseSpec::from_toml_str(text, Path::new("case.toml")).unwrap_err()
    }

    /// Asserts the error sits at `line:col` (1-based; positions counted by hand in the text).
    fn at(e: &SpecError, line: usize, column: usize) {
        assert_eq!((e.pos.line, e.pos.column), (line, column), "{e}");
        assert!(
            e.to_string()
                .starts_with(&format!("case.toml:{line}:{column}: ")),
            "{e}"
        );
    }

    #[test]
    fn good_case_parses_with_defaults() {
        let c = CaseSpec::from_toml_str(GOOD, Path::new("dir/case.toml")).unwrap();
        assert_eq!(c.surface_paths(), vec![PathBuf::from("dir/a.stl")]);
        assert_eq!(c.fluid, FluidSpec::Outside);
        assert_eq!(c.side_names[4], "zmin");
        assert_eq!(c.transition_layers, 1);
    }

    #[test]
    fn unknown_key_is_located() {
        let e = err(&GOOD.replace("size = 0.1", "size = 0.1\ncolour = 3"));
        at(&e, 4, 1);
        assert!(e.message.contains("colour"), "{e}");
    }

    #[test]
    fn wrong_type_is_located() {
        let e = err(&GOOD.replace("size = 0.1", "size = \"fine\""));
        at(&e, 3, 8);
    }

    #[test]
    fn negative_size_is_located() {
        let e = err(&GOOD.replace("base_size = 1.0", "base_size = -1.0"));
        at(&e, 6, 13);
        assert!(e.message.contains("positive"), "{e}");
    }

    #[test]
    fn empty_box_is_located() {
        let e = err(&GOOD.replace("4.0, 2.0, 2.0", "0.0, 2.0, 2.0"));
        at(&e, 5, 7);
        assert!(e.message.contains("min below its max"), "{e}");
    }

    #[test]
    fn syntax_error_is_located() {
        let e = err(&GOOD.replace("size = 0.1", "size = = 0.1"));
        assert_eq!(e.pos.line, 3, "{e}");
    }

    #[test]
    fn bad_region_and_fluid_are_located() {
        let e = err(&format!(
            "{GOOD}[[regions]]\nname = \"wake\"\nshape = \"cone\"\nsize = 0.2\n"
        ));
        at(&e, 9, 9);
        let e = err(&format!("{GOOD}[fluid]\nside = \"point\"\n"));
        at(&e, 8, 8);
        let e = err(&format!("{GOOD}[[regions]]\nname = \"w\"\nshape = \"sphere\"\ncenter = [0,0,0]\nradius = 0.0\nsize = 0.2\n"));
        at(&e, 11, 10);
    }

    #[test]
    fn around_box_needs_known_flow() {
        let t = GOOD.replace(
            "box = [0.0, 0.0, 0.0, 4.0, 2.0, 2.0]",
            "around = { flow = \"up\", upstream = 1, downstream = 2, sides = 1, above = 1 }",
        );
        let e = err(&t);
        at(&e, 5, 10);
    }
}

impl CaseSpec {
    /// Checks the values of a quick-form case (built in code, so without file positions).
    pub fn check_quick(&self) -> Result<(), String> {
        let pos = |x: f64| x.is_finite() && x > 0.0;
        if !pos(self.domain.base_size) {
            return Err(format!(
                "--base-size must be a positive length, got {}",
                self.domain.base_size
            ));
        }
        if !pos(self.surfaces.size) {
            return Err(format!(
                "--surface-size must be a positive length, got {}",
                self.surfaces.size
            ));
        }
        if let BoxPlacement::Explicit(b) = &self.domain.placement {
            if b.iter().any(|x| !x.is_finite()) || !(b[0] < b[3] && b[1] < b[4] && b[2] < b[5]) {
                return Err(format!("--domain must be xmin,ymin,zmin,xmax,ymax,zmax with each min below its max, got {b:?}"));
            }
        }
        Ok(())
    }
}
