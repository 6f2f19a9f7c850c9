//! Refinement configuration and the level plan it resolves to.
//!
//! Sizes are model units; each request becomes the level `l` whose cell edge
//! `base_size / 2^l` is the largest not above the size (clamped to `0..=MAX_DEPTH`). The
//! [`LevelPlan`] reports every such choice. Later surface rules override earlier ones for the
//! tags they name; a rule with [`TagSel::All`] applies to every tag.

use crate::domain::Domain;
use crate::key::MAX_DEPTH;
use crate::region::SizeRegion;
use octocut_surface::{Surface, TagId};
use serde::{Deserialize, Serialize};

/// Why refinement or balance cannot run.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum OctreeError {
    #[error("invalid refinement setting: {0}")]
    BadSpec(String),
    #[error("surface tag `{0}` is not in the surface (known tags: {1})")]
    UnknownTag(String, String),
    #[error("transition layers must be 1 to {max}, got {got}")]
    BadLayers { got: u32, max: u32 },
    #[error("the tree would hold more than {limit} leaves: coarsen the sizes or raise the limit")]
    TooManyLeaves { limit: u64 },
}

/// Which surface tags a rule applies to.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TagSel {
    All,
    Id(TagId),
    Name(String),
}

/// Cell size on the surface of some tags, and the finest size for curvature refinement there.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SurfaceRule {
    pub tag: TagSel,
    /// Every leaf this surface crosses gets an edge at most `size`.
    pub size: f64,
    /// Finest edge where normals spread more than the feature angle (None: no curvature rule).
    #[serde(default)]
    pub finest_size: Option<f64>,
}

/// Gap refinement: a gap between facing sheets holds at least `cells` cells across.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GapSpec {
    pub cells: u32,
    /// No gap cell is made smaller than this.
    pub finest_size: f64,
    /// Widest gap looked for (default: `cells` times the coarsest surface cell size).
    #[serde(default)]
    pub max_width: Option<f64>,
}

/// Which adjacencies the 2:1 rule covers.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BalanceMode {
    /// Faces, edges and corners (the common choice).
    #[default]
    Full,
    /// Faces only.
    Face,
}

/// Everything that decides the leaves.
///
/// ```
/// use octocut_octree::{RefineSpec, SurfaceRule, TagSel};
/// let mut spec = RefineSpec::default();
/// spec.surface.push(SurfaceRule { tag: TagSel::All, size: 0.05, finest_size: None });
/// assert_eq!(spec.transition_layers, 1);
/// ```
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RefineSpec {
    #[serde(default)]
    pub surface: Vec<SurfaceRule>,
    /// Normal spread (degrees) above which a leaf is refined toward its tag's finest size.
    #[serde(default)]
    pub feature_angle_deg: Option<f64>,
    #[serde(default)]
    pub gap: Option<GapSpec>,
    #[serde(default)]
    pub regions: Vec<SizeRegion>,
    /// Cells of each coarser level around a level before the next coarser may start (1 = 2:1).
    #[serde(default = "one")]
    pub transition_layers: u32,
    #[serde(default)]
    pub balance: BalanceMode,
    /// Refuse to build more leaves than this.
    #[serde(default)]
    pub max_leaves: Option<u64>,
}

fn one() -> u32 {
    1
}

impl Default for RefineSpec {
    fn default() -> Self {
        RefineSpec {
            surface: Vec::new(),
            feature_angle_deg: None,
            gap: None,
            regions: Vec::new(),
            transition_layers: 1,
            balance: BalanceMode::Full,
            max_leaves: None,
        }
    }
}

/// Largest number of transition layers accepted.
pub const MAX_TRANSITION_LAYERS: u32 = 4;

/// The level one request became.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PlannedLevel {
    /// What asked for it, e.g. `surface wing` or `region wake`.
    pub request: String,
    pub size: f64,
    pub level: u8,
    /// The cell edge at that level.
    pub cell_size: f64,
}

/// Every request and the level it became, plus the per-tag levels used by refinement.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LevelPlan {
    pub entries: Vec<PlannedLevel>,
    /// Surface level per tag id (0 where no rule applies).
    pub tag_level: Vec<u8>,
    /// Curvature finest level per tag id (None: no curvature rule).
    pub tag_feature_level: Vec<Option<u8>>,
    pub gap_level: Option<u8>,
    pub region_level: Vec<u8>,
    /// Deepest level any request asks for.
    pub max_level: u8,
}

fn check_size(what: &str, s: f64) -> Result<(), OctreeError> {
    if s.is_finite() && s > 0.0 {
        Ok(())
    } else {
        Err(OctreeError::BadSpec(format!(
            "{what}: size must be a positive finite length, got {s}"
        )))
    }
}

impl LevelPlan {
    /// Resolves `spec` against the surface's tags and the domain's base size.
    pub fn new(
        domain: &Domain,
        surface: &Surface,
        spec: &RefineSpec,
    ) -> Result<LevelPlan, OctreeError> {
        if spec.transition_layers == 0 || spec.transition_layers > MAX_TRANSITION_LAYERS {
            return Err(OctreeError::BadLayers {
                got: spec.transition_layers,
                max: MAX_TRANSITION_LAYERS,
            });
        }
        let ntags = surface.tag_names.len();
        let mut size: Vec<Option<f64>> = vec![None; ntags];
        let mut finest: Vec<Option<f64>> = vec![None; ntags];
        for rule in &spec.surface {
            check_size("surface rule", rule.size)?;
            if let Some(f) = rule.finest_size {
                check_size("surface rule finest size", f)?;
            }
            let ids: Vec<usize> = match &rule.tag {
                TagSel::All => (0..ntags).collect(),
                TagSel::Id(t) if (t.0 as usize) < ntags => vec![t.0 as usize],
                TagSel::Id(t) => {
                    return Err(OctreeError::UnknownTag(
                        format!("#{}", t.0),
                        surface.tag_names.join(", "),
                    ))
                }
                TagSel::Name(n) => match surface.tag_names.iter().position(|x| x == n) {
                    Some(i) => vec![i],
                    None => {
                        return Err(OctreeError::UnknownTag(
                            n.clone(),
                            surface.tag_names.join(", "),
                        ))
                    }
                },
            };
            for i in ids {
                size[i] = Some(rule.size);
                finest[i] = rule.finest_size;
            }
        }
        if let Some(a) = spec.feature_angle_deg {
            if !(a.is_finite() && a > 0.0 && a < 180.0) {
                return Err(OctreeError::BadSpec(format!(
                    "feature angle must be in (0, 180) degrees, got {a}"
                )));
            }
        }
        let mut entries = Vec::new();
        let mut push = |request: String, s: f64| {
            let level = domain.level_for_size(s);
            entries.push(PlannedLevel {
                request,
                size: s,
                level,
                cell_size: domain.cell_size(level),
            });
            level
        };
        let mut tag_level = vec![0u8; ntags];
        let mut tag_feature_level = vec![None; ntags];
        for i in 0..ntags {
            let name = &surface.tag_names[i];
            if let Some(s) = size[i] {
                tag_level[i] = push(format!("surface {name}"), s);
            }
            if let (Some(f), Some(_)) = (finest[i], spec.feature_angle_deg) {
                let l = push(format!("surface {name} features"), f);
                tag_feature_level[i] = Some(l.max(tag_level[i]));
            }
        }
        let gap_level = match &spec.gap {
            Some(g) => {
                check_size("gap finest size", g.finest_size)?;
                if g.cells == 0 || g.cells > 1000 {
                    return Err(OctreeError::BadSpec(format!(
                        "gap cells must be 1 to 1000, got {}",
                        g.cells
                    )));
                }
                if let Some(w) = g.max_width {
                    check_size("gap max width", w)?;
                }
                Some(push("gap finest".into(), g.finest_size))
            }
            None => None,
        };
        let mut region_level = Vec::new();
        for r in &spec.regions {
            r.validate().map_err(OctreeError::BadSpec)?;
            region_level.push(push(format!("region {}", r.name), r.size));
        }
        let max_level = tag_level
            .iter()
            .copied()
            .chain(tag_feature_level.iter().flatten().copied())
            .chain(gap_level)
            .chain(region_level.iter().copied())
            .max()
            .unwrap_or(0)
            .min(MAX_DEPTH);
        Ok(LevelPlan {
            entries,
            tag_level,
            tag_feature_level,
            gap_level,
            region_level,
            max_level,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use octocut_surface::{Aabb, Vec3};

    #[test]
    fn sizes_become_levels() {
        let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::splat(8.0)), 8.0).unwrap();
        let mut spec = RefineSpec::default();
        spec.surface.push(SurfaceRule {
            tag: TagSel::All,
            size: 1.0,
            finest_size: None,
        });
        // 0.9 is not a power-of-two fraction of 8: the next finer level, edge 0.5
        spec.surface.push(SurfaceRule {
            tag: TagSel::Name("cube".into()),
            size: 0.9,
            finest_size: Some(0.1),
        });
        spec.feature_angle_deg = Some(30.0);
        let p = LevelPlan::new(&d, &Surface::unit_cube(), &spec).unwrap();
        assert_eq!(p.tag_level, vec![4]); // exact: 8 / 2^4 = 0.5 <= 0.9 < 1
        assert_eq!(p.tag_feature_level, vec![Some(7)]); // exact: 8 / 2^7 = 0.0625 <= 0.1
        assert_eq!(p.max_level, 7);
        spec.surface.push(SurfaceRule {
            tag: TagSel::Name("wing".into()),
            size: 1.0,
            finest_size: None,
        });
        assert!(matches!(
            LevelPlan::new(&d, &Surface::unit_cube(), &spec),
            Err(OctreeError::UnknownTag(..))
        ));
    }

    #[test]
    fn bad_settings_are_errors() {
        let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
        let s = Surface::unit_cube();
        let mut spec = RefineSpec {
            transition_layers: 0,
            ..Default::default()
        };
        assert!(LevelPlan::new(&d, &s, &spec).is_err());
        spec.transition_layers = 1;
        spec.surface.push(SurfaceRule {
            tag: TagSel::All,
            size: f64::NAN,
            finest_size: None,
        });
        assert!(LevelPlan::new(&d, &s, &spec).is_err());
    }
}
