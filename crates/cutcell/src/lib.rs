//! The cut-cell stage: classifies octree leaves as fluid, solid or cut, clips the cut ones into
//! polyhedra against the surface and assembles the conforming volume mesh.
//!
//! Pipeline of [`cut_cells`]: conforming face topology of the octree ([`topology`]), vertex
//! classes by winding number ([`classify`]), edge crossings ([`crossing`]), face clipping
//! ([`clip`]), closing cut leaves into pieces with wall faces ([`pieces`], feature vertices by
//! [`feature`], loop triangulation by [`wallsplit`]), fluid-region selection, small-cell
//! merging ([`merge`]) and assembly ([`assemble`]).
//!
//! Conventions: a vertex is fluid iff it is not inside (winding number below 1/2) for
//! [`FluidSide::Outside`], the reverse for [`FluidSide::Inside`]; a crossing never sits on a
//! grid vertex (see [`crossing::T_EPS`]), so no face has a zero-length edge.
//!
//! ```
//! use octocut_cutcell::{cut_cells, CutOptions};
//! use octocut_octree::{Domain, Octree};
//! use octocut_surface::{Aabb, Surface, SurfaceIndex, Vec3};
//! // a unit cube body in a 3 x 3 x 3 box, uniform 12^3 leaves
//! let mut s = Surface::unit_cube();
//! for v in &mut s.vertices { *v = *v * 1.01 + Vec3::splat(0.995); }
//! let index = SurfaceIndex::new(s);
//! let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::splat(3.0)), 1.0).unwrap();
//! let tree = Octree::uniform(d, 2);
//! let out = cut_cells(&tree, &index, &CutOptions::default()).unwrap();
//! // exact: box volume minus the body volume 1.01^3
//! assert!((out.report.fluid_volume - (27.0 - 1.01f64.powi(3))).abs() < 1e-9);
//! ```

pub mod assemble;
pub mod classify;
pub mod clip;
mod concat;
pub mod crossing;
pub mod feature;
pub mod merge;
pub mod pieces;
#[doc(hidden)]
pub mod test_support;
pub mod topology;
mod util;
pub mod wallsplit;

use assemble::{assemble, AssembleInput, RawFaces, BOUNDARY};
use clip::ClipCtx;
use crossing::{edge_key, EdgeHits, EdgeTable, UNCROSSED, WHOLE};
use merge::{merge_small, MergeInput};
use octocut_octree::{Domain, Octree};
use octocut_surface::{SurfaceIndex, Vec3};
use octocut_volmesh::{VolumeMesh, NO_REGION};
use pieces::{CellCtx, CutChunk, Points, Scratch, LOCAL};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use topology::Topology;
use util::UnionFind;

/// Which side of the surface is meshed.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
pub enum FluidSide {
    /// Everything outside the body (winding number below 1/2).
    #[default]
    Outside,
    /// The body's interior.
    Inside,
    /// The connected region containing this point; other regions are dropped and reported.
    Point(Vec3),
}

/// Options of the cut-cell stage.
///
/// ```
/// let o = octocut_cutcell::CutOptions::default();
/// assert_eq!(o.small_cell_fraction, 0.5);
/// assert_eq!(o.side_names[0], "xmin");
/// ```
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CutOptions {
    pub fluid: FluidSide,
    /// Cut cells below this fraction of their full cube are merged (Berger and Giuliani: 1/2).
    pub small_cell_fraction: f64,
    /// Crossing normals further apart than this (degrees) mark a sharp feature.
    pub feature_angle_deg: f64,
    /// Put the pierce points of sharp body edges into face cut paths.
    pub pierce_points: bool,
    /// Patch names of the box sides: xmin, xmax, ymin, ymax, zmin, zmax.
    pub side_names: [String; 6],
}

impl Default for CutOptions {
    fn default() -> Self {
        CutOptions {
            fluid: FluidSide::Outside,
            small_cell_fraction: 0.5,
            feature_angle_deg: 30.0,
            pierce_points: true,
            side_names: ["xmin", "xmax", "ymin", "ymax", "zmin", "zmax"].map(String::from),
        }
    }
}

/// Why the cut-cell stage failed.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum CutError {
    #[error("small_cell_fraction must lie in [0, 1), got {0}")]
    BadFraction(f64),
    #[error("feature_angle_deg must lie in [0, 180], got {0}")]
    BadFeatureAngle(f64),
    #[error("{given} leaf region tags given for {leaves} leaves")]
    RegionCount { given: usize, leaves: usize },
    #[error("the fluid point {0:?} lies outside the domain box")]
    PointOutsideDomain([f64; 3]),
    #[error("the fluid point {0:?} lies in no fluid cell")]
    PointNotInFluid([f64; 3]),
    #[error("the mesh would need {0} points, more than the 2^31 supported")]
    TooManyPoints(u64),
}

/// A piece of fluid dropped for being tiny and without a fluid neighbour.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DroppedPiece {
    pub volume: f64,
    /// The centroid of the piece's vertices (approximately inside it).
    pub point: [f64; 3],
}

/// A fluid region not containing the fluid point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DroppedRegion {
    pub volume: f64,
    pub cells: usize,
    /// A point inside the region (an uncut cell's centre when there is one).
    pub point: [f64; 3],
}

/// A cell where the surface has topology the vertex classes cannot see.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CellWarning {
    pub leaf: u32,
    pub level: u8,
    pub centre: [f64; 3],
    pub reason: String,
}

/// What the stage did.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct CutReport {
    pub leaves: usize,
    pub fluid_leaves: usize,
    pub solid_leaves: usize,
    pub cut_leaves: usize,
    pub winding_evaluations: usize,
    pub cells: usize,
    pub cut_cells: usize,
    /// Cells absorbed into a neighbour by small-cell merging.
    pub merged_cells: usize,
    pub fluid_volume: f64,
    pub wall_area: f64,
    pub dropped_pieces: Vec<DroppedPiece>,
    pub dropped_regions: Vec<DroppedRegion>,
    /// "Feature below cell size" warnings (at most [`MAX_WARNINGS`] listed).
    pub warnings: Vec<CellWarning>,
    pub warnings_total: usize,
    /// Faces where a sharp edge's pierce point was dropped to keep the face's parts disjoint.
    #[serde(default)]
    pub sharp_fallbacks: usize,
}

/// Most warnings listed in a report; the total is always counted.
pub const MAX_WARNINGS: usize = 10_000;

/// The mesh and the report.
#[derive(Clone, Debug)]
pub struct CutOutput {
    pub mesh: VolumeMesh,
    pub report: CutReport,
}

/// Cuts `tree` by the surface of `index` into a conforming volume mesh.
pub fn cut_cells(
    tree: &Octree,
    index: &SurfaceIndex,
    opts: &CutOptions,
) -> Result<CutOutput, CutError> {
    cut_cells_with_regions(tree, index, opts, None)
}

const SOLID: u8 = 0;
const FLUID: u8 = 1;
const CUT: u8 = 2;

/// As [`cut_cells`], copying a per-leaf region tag into the cells (merged cells take their
/// first leaf's tag; [`NO_REGION`] without tags).
pub fn cut_cells_with_regions(
    tree: &Octree,
    index: &SurfaceIndex,
    opts: &CutOptions,
    leaf_region: Option<&[u16]>,
) -> Result<CutOutput, CutError> {
    let leaves = tree.leaves();
    let domain = &tree.domain;
    tmark("start");
    if !(0.0..1.0).contains(&opts.small_cell_fraction) {
        return Err(CutError::BadFraction(opts.small_cell_fraction));
    }
    if !(0.0..=180.0).contains(&opts.feature_angle_deg) {
        return Err(CutError::BadFeatureAngle(opts.feature_angle_deg));
    }
    if let Some(r) = leaf_region {
        if r.len() != leaves.len() {
            return Err(CutError::RegionCount {
                given: r.len(),
                leaves: leaves.len(),
            });
        }
    }
    let fluid_inside = match opts.fluid {
        FluidSide::Outside => false,
        FluidSide::Inside => true,
        FluidSide::Point(p) => {
            if !domain.bounds().contains_point(p) || !p.is_finite() {
                return Err(CutError::PointOutsideDomain(p.to_array()));
            }
            index.is_inside(p)
        }
    };
    let cos_feature = opts.feature_angle_deg.to_radians().cos();
    let mut report = CutReport {
        leaves: leaves.len(),
        ..Default::default()
    };

    // leaf corner slots are u32 ids (topology) and points must stay below 2^31
    if leaves.len() as u64 * 8 >= 1 << 32 {
        return Err(CutError::TooManyPoints(leaves.len() as u64 * 8));
    }
    let mut topo = Topology::build(tree);
    tmark("topology");
    // every query below sees the grid in the shifted frame (see `grid_shift`)
    let shift = grid_shift(tree);
    let true_domain = domain;
    let shifted = Domain {
        origin: domain.origin + shift,
        ..*domain
    };
    let domain = &shifted;
    let touched = classify::touched_leaves(tree, domain, index);
    tmark("touched");
    let n_grid = topo.grid.len() as u32;
    let gpos = |p: u32| domain.point(topo.grid[p as usize]);
    // edges to query: all edges of faces bounding a touched leaf; an edge needs the surface
    // query only if a triangle of a leaf it bounds has a bounding box meeting it (a leaf
    // without triangles, or without such a triangle, proves the edge uncrossed)
    let surf = index.surface();
    let face_keys = |f: u32, need: bool| {
        let pts = topo.face(f);
        let n = if need { pts.len() } else { 0 };
        let face = topo.faces[f as usize];
        let (t, g) = (&touched, &gpos);
        let probe = (face.is_boundary() || t.is(face.n)).then_some(face.e());
        (0..n).map(move |i| {
            let (p, q) = (pts[i], pts[(i + 1) % n]);
            let may = probe.is_some_and(|l| t.may_cross(surf, l, g(p), g(q)));
            // the edge lies in leaf e's closed box: its triangle list holds every candidate
            (edge_key(p, q), if may { face.e() + 1 } else { UNCROSSED })
        })
    };
    let touches = |f: u32| {
        let face = topo.faces[f as usize];
        touched.is(face.e()) || (!face.is_boundary() && touched.is(face.n))
    };
    // per run of faces, sorted and deduplicated (the smallest code of a key kept, as the
    // global sort and dedup in `EdgeHits::query` keep it): neighbouring faces share most
    // edges, so the list is about a third of the raw one (memory at the peak of the stage)
    let keys: Vec<(u64, u32)> = {
        const RUN: usize = 2048;
        let nf = topo.faces.len();
        let parts: Vec<Vec<(u64, u32)>> = (0..nf.div_ceil(RUN))
            .into_par_iter()
            .map(|r| {
                let (f0, f1) = ((r * RUN) as u32, ((r + 1) * RUN).min(nf) as u32);
                let mut v: Vec<(u64, u32)> =
                    (f0..f1).flat_map(|f| face_keys(f, touches(f))).collect();
                v.sort_unstable();
                v.dedup_by_key(|x| x.0);
                v.shrink_to_fit();
                v
            })
            .collect();
        concat::concat(&parts)
    };
    tmark("edgekeys");
    if std::env::var_os("OCTOCUT_CUT_TIMING").is_some() {
        let may = keys.iter().filter(|k| k.1 != UNCROSSED).count();
        eprintln!(
            "edge keys {} (may cross {may}), faces {}",
            keys.len(),
            topo.faces.len()
        );
    }
    let mut eh = EdgeHits::query(index, &gpos, &touched, keys);
    tmark("edgehits");
    let cls = classify::classify(tree, domain, index, &topo, fluid_inside, &touched, &eh);
    report.winding_evaluations = cls.evaluations;
    tmark("classify");
    let fluid = &cls.fluid;
    // leaf status from the classes of all vertices on its boundary
    let face_mix: Vec<u8> = (0..topo.faces.len() as u32)
        .into_par_iter()
        .with_min_len(1024)
        .map(|f| {
            let mut m = 0u8;
            for &p in topo.face(f) {
                m |= if fluid[p as usize] { 1 } else { 2 };
            }
            m
        })
        .collect();
    let mut mix = vec![0u8; leaves.len()];
    for (f, face) in topo.faces.iter().enumerate() {
        mix[face.e() as usize] |= face_mix[f];
        if !face.is_boundary() {
            mix[face.n as usize] |= face_mix[f];
        }
    }
    let mut status: Vec<u8> = mix
        .iter()
        .map(|&m| {
            if m == 3 {
                CUT
            } else if m == 1 {
                FLUID
            } else {
                SOLID
            }
        })
        .collect();

    // a mixed face away from every touched leaf (rare: classes decided at a grazing surface)
    let extra: Vec<(u64, u32)> = (0..topo.faces.len() as u32)
        .into_par_iter()
        .flat_map_iter(|f| face_keys(f, face_mix[f as usize] == 3 && !touches(f)))
        .map(|(k, _)| (k, WHOLE))
        .collect();
    if !extra.is_empty() {
        let mut all: Vec<(u64, u32)> = eh
            .keys
            .iter()
            .copied()
            .zip(eh.code.iter().copied())
            .collect();
        all.extend(extra);
        eh = EdgeHits::query(index, &gpos, &touched, all);
    }
    drop((face_mix, mix));
    let edges = EdgeTable::build(index, &gpos, fluid, fluid_inside, eh);
    tmark("edgetable");
    let pierce_base = n_grid as u64 + edges.crossings.len() as u64;
    if pierce_base >= LOCAL as u64 / 2 {
        return Err(CutError::TooManyPoints(pierce_base));
    }
    let pierce_base = pierce_base as u32;
    // leaves with a face edge that the surface crosses more than once (warned about below),
    // read off the face polygons before the clip consumes them
    let any_multi = edges.hits.iter().any(|&h| h >= 2);
    let mut multi_edge = vec![false; if any_multi { leaves.len() } else { 0 }];
    if any_multi {
        let face_multi: Vec<bool> = (0..topo.faces.len() as u32)
            .into_par_iter()
            .with_min_len(1024)
            .map(|f| {
                let p = topo.face(f);
                (0..p.len()).any(|i| {
                    edges
                        .find(p[i], p[(i + 1) % p.len()])
                        .is_some_and(|e| edges.hits[e] >= 2)
                })
            })
            .collect();
        for (face, &m) in topo.faces.iter().zip(&face_multi) {
            if m {
                multi_edge[face.e() as usize] = true;
                if !face.is_boundary() {
                    multi_edge[face.n as usize] = true;
                }
            }
        }
    }
    let blocks = topo.take_face_blocks();
    let mut clip = ClipCtx {
        domain,
        index,
        topo: &topo,
        fluid,
        edges: &edges,
        fluid_inside,
        cos_feature,
        n_grid,
        pierce_cuts: opts.pierce_points,
    }
    .run(pierce_base, blocks, topo.block_bits);
    // the vertex classes are in the clipped polygons now (memory through the closing)
    drop(cls);
    // a uniform leaf beside a face that a poke edge cuts (see `clip`) is cut
    if !clip.poke_plane.is_empty() {
        for (f, face) in topo.faces.iter().enumerate() {
            if !clip.chords_of(f as u32).is_empty() {
                for l in [face.e(), face.n] {
                    if (l as usize) < leaves.len() && status[l as usize] != CUT {
                        status[l as usize] = CUT;
                    }
                }
            }
        }
    }
    report.sharp_fallbacks = clip.fallbacks;
    report.fluid_leaves = status.iter().filter(|&&s| s == FLUID).count();
    report.solid_leaves = status.iter().filter(|&&s| s == SOLID).count();
    report.cut_leaves = status.iter().filter(|&&s| s == CUT).count();
    tmark("clip");
    // face lists of the leaves closed below
    topo.build_leaf_faces(leaves.len(), |l| status[l as usize] == CUT);
    tmark("leaffaces");
    // cells to warn about
    let multi: Vec<u8> = (0..leaves.len() as u32)
        .into_par_iter()
        .with_min_len(256)
        .map(|l| {
            if status[l as usize] == SOLID || !touched.is(l) {
                return 0;
            }
            if multi_edge.get(l as usize) == Some(&true) {
                return 1;
            }
            if status[l as usize] == FLUID {
                // a surface vertex deep inside a uniform leaf: a body part smaller than the cell
                let b = domain.key_box(leaves[l as usize]);
                let m = 0.1 * b.extent().x;
                let inner =
                    octocut_surface::Aabb::new(b.min + Vec3::splat(m), b.max - Vec3::splat(m));
                let s = index.surface();
                // the leaf's list holds every triangle meeting its box
                if touched.of(l).iter().any(|&t| {
                    s.corners(t as usize)
                        .iter()
                        .any(|c| inner.contains_point(*c))
                }) {
                    return 2;
                }
            }
            0
        })
        .collect();
    drop(multi_edge);
    // the closing reads no triangle list (memory: the lists of every touched leaf)
    drop(touched);
    let pts = Points {
        domain,
        grid: &topo.grid,
        crossings: &edges.crossings,
        pierce: &clip.pierce,
        n_grid,
        pierce_base,
    };
    let cut_leaves: Vec<u32> = (0..leaves.len() as u32)
        .filter(|&l| status[l as usize] == CUT)
        .collect();
    let cctx = CellCtx {
        tree,
        index,
        topo: &topo,
        clip: &clip,
        pts: &pts,
        cos_feature,
    };
    let mut chunks: Vec<CutChunk> = cut_leaves
        .par_chunks(util::gather_chunk(cut_leaves.len(), 64, 1 << 14))
        .map_init(Scratch::default, |s, ls| {
            let mut out = CutChunk::default();
            for &l in ls {
                cctx.close_leaf(l, s, &mut out);
            }
            out
        })
        .collect();
    clip.release_chords();
    tmark("close");
    // warnings: edges crossed more than once, leaves with a surface inside but uniform classes
    let warn = |l: u32, reason: &str, report: &mut CutReport| {
        report.warnings_total += 1;
        if report.warnings.len() < MAX_WARNINGS {
            let k = leaves[l as usize];
            report.warnings.push(CellWarning {
                leaf: l,
                level: k.level(),
                centre: true_domain.key_box(k).center().to_array(),
                reason: reason.to_string(),
            });
        }
    };
    for (l, &m) in multi.iter().enumerate() {
        match m {
            1 => warn(
                l as u32,
                "feature below cell size: the surface crosses a cell edge more than once",
                &mut report,
            ),
            2 => warn(
                l as u32,
                "feature below cell size: surface inside a cell without crossing its edges",
                &mut report,
            ),
            _ => {}
        }
    }
    for ch in &chunks {
        for &(l, r) in &ch.warnings {
            warn(l, r, &mut report);
        }
    }
    tmark("warnings");
    // cells: uniform fluid leaves one each, cut leaves their pieces, in leaf order
    let mut leaf_cell = vec![u32::MAX; leaves.len()];
    let mut cell_leaf: Vec<u32> = Vec::new();
    let mut cell_vol: Vec<f64> = Vec::new();
    let mut cell_cut: Vec<u8> = Vec::new();
    {
        let mut pieces = chunks.iter().flat_map(|c| c.n_pieces.iter().copied());
        let mut vols = chunks.iter().flat_map(|c| c.piece_volume.iter().copied());
        for (l, &s) in status.iter().enumerate() {
            let n = match s {
                FLUID => 1,
                CUT => pieces.next().unwrap(),
                _ => 0,
            };
            leaf_cell[l] = cell_leaf.len() as u32;
            for _ in 0..n {
                cell_leaf.push(l as u32);
                cell_cut.push((s == CUT) as u8);
                cell_vol.push(if s == CUT {
                    vols.next().unwrap()
                } else {
                    domain.key_box(leaves[l]).volume()
                });
            }
        }
    }
    let n_raw = cell_leaf.len();
    // all point positions
    let new_pts: usize = chunks.iter().map(|c| c.new_pts.len()).sum();
    if std::env::var_os("OCTOCUT_CUT_TIMING").is_some() {
        let walls: usize = chunks.iter().map(|c| c.wall_len.len()).sum();
        eprintln!("wall faces {walls}, wall apex points {new_pts}");
    }
    // free what the faces no longer need before the new arrays (peak memory)
    let grid = std::mem::take(&mut topo.grid);
    topo.release_vertex_data();
    drop(multi);
    // polygon -> cell on each side (and the box side of boundary polygons), in parallel over
    // runs of faces: the polygons of a face run are one contiguous range
    let npoly = clip.poly_off.len() - 1;
    // room for the wall faces too (appended below without moving these)
    let n_walls: usize = chunks.iter().map(|c| c.wall_len.len()).sum();
    let room = |v: u32| {
        let mut x = Vec::with_capacity(npoly + n_walls);
        x.resize(npoly, v);
        x
    };
    let mut poly_e = room(u32::MAX);
    let mut poly_n = room(u32::MAX);
    let mut poly_kind = room(0u32);
    // polygons with a side that is no cell (not expected: a fluid polygon has fluid cells on
    // both sides) are left out below: the boundary marker must not stand for a missing cell
    const DEAD: u32 = u32::MAX;
    const INTERIOR: u32 = u32::MAX - 1;
    {
        const RUN: usize = 4096;
        let nf = topo.faces.len();
        let runs: Vec<usize> = (0..nf.div_ceil(RUN))
            .map(|r| {
                let (f0, f1) = (r * RUN, ((r + 1) * RUN).min(nf));
                (clip.face_poly[f1] - clip.face_poly[f0]) as usize
            })
            .collect();
        let pe = concat::split_by(&mut poly_e, runs.iter().copied());
        let pn = concat::split_by(&mut poly_n, runs.iter().copied());
        let pk = concat::split_by(&mut poly_kind, runs.iter().copied());
        pe.into_par_iter()
            .zip(pn)
            .zip(pk)
            .enumerate()
            .for_each(|(r, ((pe, pn), pk))| {
                let (f0, f1) = (r * RUN, ((r + 1) * RUN).min(nf));
                let p0 = clip.face_poly[f0];
                for f in f0..f1 {
                    let face = topo.faces[f];
                    for p in clip.polys_of(f as u32) {
                        let i = (p - p0) as usize;
                        if status[face.e() as usize] == FLUID {
                            pe[i] = leaf_cell[face.e() as usize];
                        }
                        if face.is_boundary() {
                            pk[i] = face.n - topology::SIDE_BASE;
                        } else {
                            pk[i] = INTERIOR;
                            if status[face.n as usize] == FLUID {
                                pn[i] = leaf_cell[face.n as usize];
                            }
                        }
                    }
                }
            });
    }
    // the face list and the face -> polygon map are read no more: freed before the points
    // (memory at the phase's peak)
    topo.faces = Vec::new();
    clip.face_poly = Vec::new();
    clip.pair = Vec::new();
    let mut points: Vec<Vec3> =
        Vec::with_capacity(pierce_base as usize + clip.pierce.len() + new_pts);
    points.extend(grid.iter().map(|&g| true_domain.point(g)));
    drop(grid);
    points.extend(edges.crossings.iter().map(|c| c.point));
    drop(edges);
    points.extend_from_slice(&clip.pierce);
    let mut raw;
    {
        // chunk-local piece indices and points to global ids, in place
        let mut cut_iter = cut_leaves.iter();
        let mut map = Vec::new();
        for ch in &mut chunks {
            map.clear();
            for &n in &ch.n_pieces {
                let l = *cut_iter.next().unwrap();
                for j in 0..n {
                    map.push(leaf_cell[l as usize] + j);
                }
            }
            for &x in &ch.poly_piece {
                let (p, pc) = (x.poly(), x.piece);
                if x.is_e() {
                    poly_e[p as usize] = map[pc as usize];
                } else {
                    poly_n[p as usize] = map[pc as usize];
                }
            }
            let base = points.len() as u32;
            points.extend_from_slice(&ch.new_pts);
            for q in &mut ch.wall_pts {
                if *q & LOCAL != 0 {
                    *q = base + (*q & !LOCAL);
                }
            }
            for w in &mut ch.wall_piece {
                *w = map[*w as usize];
            }
            ch.poly_piece = Vec::new();
            ch.new_pts = Vec::new();
        }
        let dead: usize = poly_kind
            .par_iter_mut()
            .zip(poly_e.par_iter().zip(poly_n.par_iter()))
            .with_min_len(4096)
            .map(|(k, (&a, &b))| {
                let interior = *k == INTERIOR;
                if interior {
                    *k = 0;
                }
                if a == u32::MAX || (interior && b == u32::MAX) {
                    *k = DEAD;
                    return 1;
                }
                0
            })
            .sum();
        // the clipped polygons become the first raw faces as they are (no copy), the wall
        // faces the second segment, gathered in parallel
        let lens: Vec<Vec<u32>> = chunks
            .iter_mut()
            .map(|c| std::mem::take(&mut c.wall_len))
            .collect();
        let wpts: Vec<Vec<u32>> = chunks
            .iter_mut()
            .map(|c| std::mem::take(&mut c.wall_pts))
            .collect();
        let second = assemble::Csr {
            off: concat::offsets(&lens),
            pts: concat::concat(&wpts),
        };
        drop((lens, wpts));
        for ch in &chunks {
            poly_e.extend_from_slice(&ch.wall_piece);
            poly_n.extend(std::iter::repeat_n(BOUNDARY, ch.wall_piece.len()));
            poly_kind.extend(ch.wall_tag.iter().map(|&t| 6 + t));
        }
        drop(chunks);
        raw = RawFaces {
            first: assemble::Csr {
                off: std::mem::take(&mut clip.poly_off),
                pts: std::mem::take(&mut clip.poly_pts),
            },
            second,
            a: poly_e,
            b: poly_n,
            kind: poly_kind,
        };
        drop(clip);
        if dead > 0 {
            raw = raw.without_kind(DEAD);
        }
    }
    tmark("rawfaces");
    // the faces are copied out: free the topology before the merge and the assembly
    drop(cut_leaves);
    drop(topo);
    if points.len() as u64 >= u32::MAX as u64 / 2 {
        return Err(CutError::TooManyPoints(points.len() as u64));
    }
    // back to the true frame: grid points are exact already; the others move by -shift, with
    // coordinates on a grid plane (crossings, pierce points) snapped onto the true plane
    let domain = true_domain;
    points[n_grid as usize..]
        .par_iter_mut()
        .with_min_len(4096)
        .for_each(|p| *p = unshift(domain, *p - shift));
    // cut cells' volumes in the true frame, by the divergence theorem over their planar faces
    // (V = 1/3 sum of x_f . A_f, x_f a vertex of face f, about the leaf centre for round-off)
    {
        let centre = |c: u32| {
            domain
                .key_box(leaves[cell_leaf[c as usize] as usize])
                .center()
        };
        for c in 0..n_raw {
            if cell_cut[c] != 0 {
                cell_vol[c] = 0.0;
            }
        }
        // face terms in parallel, a block at a time, added in face order (identical sums at
        // any thread count, bounded memory)
        const BLOCK: usize = 1 << 16;
        let term = |i: usize, c: u32| -> f64 {
            if c == BOUNDARY || cell_cut[c as usize] == 0 {
                return 0.0;
            }
            let f = raw.face(i);
            let r = centre(c);
            let x0 = points[f[0] as usize] - r;
            let mut area = Vec3::ZERO;
            for j in 1..f.len() - 1 {
                area += (points[f[j] as usize] - r - x0).cross(points[f[j + 1] as usize] - r - x0);
            }
            x0.dot(area) / 6.0
        };
        let mut terms: Vec<(f64, f64)> = Vec::with_capacity(BLOCK);
        for b0 in (0..raw.len()).step_by(BLOCK) {
            let b1 = (b0 + BLOCK).min(raw.len());
            (b0..b1)
                .into_par_iter()
                .with_min_len(1024)
                .map(|i| (term(i, raw.a[i]), term(i, raw.b[i])))
                .collect_into_vec(&mut terms);
            for (i, &(ta, tb)) in (b0..b1).zip(&terms) {
                let (a, b) = (raw.a[i] as usize, raw.b[i]);
                if cell_cut[a] != 0 {
                    cell_vol[a] += ta;
                }
                if b != BOUNDARY && cell_cut[b as usize] != 0 {
                    cell_vol[b as usize] -= tb;
                }
            }
        }
    }
    tmark("volumes");
    // fluid region selection
    let mut alive = vec![true; n_raw];
    if let FluidSide::Point(p) = opts.fluid {
        let mut uf = UnionFind::new(n_raw);
        for i in 0..raw.len() {
            if raw.b[i] != BOUNDARY {
                uf.union(raw.a[i], raw.b[i]);
            }
        }
        let start = point_cell(tree, &raw, &points, &leaf_cell, &status, &cell_leaf, p)
            .ok_or(CutError::PointNotInFluid(p.to_array()))?;
        let keep = uf.find(start);
        // (root, region, has an uncut cell)
        let mut regions: Vec<(u32, DroppedRegion, bool)> = Vec::new();
        for c in 0..n_raw as u32 {
            let r = uf.find(c);
            if r == keep {
                continue;
            }
            alive[c as usize] = false;
            let k = leaves[cell_leaf[c as usize] as usize];
            let centre = domain.key_box(k).center().to_array();
            let i = match regions.binary_search_by_key(&r, |x| x.0) {
                Ok(i) => i,
                Err(i) => {
                    regions.insert(
                        i,
                        (
                            r,
                            DroppedRegion {
                                volume: 0.0,
                                cells: 0,
                                point: centre,
                            },
                            false,
                        ),
                    );
                    i
                }
            };
            let reg = &mut regions[i];
            reg.1.volume += cell_vol[c as usize];
            reg.1.cells += 1;
            if cell_cut[c as usize] == 0 && !reg.2 {
                // an uncut cell's centre is certainly inside the region
                reg.1.point = centre;
                reg.2 = true;
            }
        }
        report.dropped_regions = regions.into_iter().map(|x| x.1).collect();
    }

    // small-cell merging
    let cell_full: Vec<f64> = cell_leaf
        .iter()
        .map(|&l| domain.key_box(leaves[l as usize]).volume())
        .collect();
    // interior faces with their areas: those beside a small cell for the merge's passes, all of
    // them only if a pass needs them
    let small = |c: u32| {
        merge::is_small(
            cell_vol[c as usize],
            cell_full[c as usize],
            opts.small_cell_fraction,
        )
    };
    let interior_faces = |keep: &(dyn Fn(u32, u32) -> bool + Sync)| -> Vec<(u32, u32, f64)> {
        (0..raw.len())
            .into_par_iter()
            .filter(|&i| raw.b[i] != BOUNDARY && keep(raw.a[i], raw.b[i]))
            .map(|i| {
                let f = raw.face(i);
                let mut n = Vec3::ZERO;
                for j in 0..f.len() {
                    n += points[f[j] as usize].cross(points[f[(j + 1) % f.len()] as usize]);
                }
                (raw.a[i], raw.b[i], 0.5 * n.length())
            })
            .collect()
    };
    let iface = interior_faces(&|a, b| small(a) || small(b));
    let all_faces = || interior_faces(&|_, _| true);
    let merged = merge_small(&MergeInput {
        volume: &cell_vol,
        full: &cell_full,
        alive: &alive,
        faces: &iface,
        all_faces: &all_faces,
        fraction: opts.small_cell_fraction,
    });
    report.merged_cells = merged.merged;
    // not needed past the merge (memory at the assembly, the stage's late peak)
    drop((iface, cell_full));
    tmark("merge");
    let mut uf = merged.uf;
    if !merged.tiny.is_empty() {
        // tiny isolated groups: report with their volume and a vertex centroid (one pass over
        // the faces; `tiny` is sorted)
        let mut acc = vec![(Vec3::ZERO, 0.0f64); merged.tiny.len()];
        for i in 0..raw.len() {
            if let Ok(k) = merged.tiny.binary_search(&uf.find(raw.a[i])) {
                for &q in raw.face(i) {
                    acc[k].0 += points[q as usize];
                    acc[k].1 += 1.0;
                }
            }
        }
        for (k, &t) in merged.tiny.iter().enumerate() {
            report.dropped_pieces.push(DroppedPiece {
                volume: merged.group_volume[t as usize],
                point: (acc[k].0 / acc[k].1.max(1.0)).to_array(),
            });
        }
    }
    let mut cell_id = vec![u32::MAX; n_raw];
    let mut root_id = vec![u32::MAX; n_raw];
    let mut n_cells = 0u32;
    let mut level = Vec::new();
    let mut cut = Vec::new();
    let mut region = Vec::new();
    for c in 0..n_raw as u32 {
        if !alive[c as usize] {
            continue;
        }
        let r = uf.find(c);
        if merged.tiny.binary_search(&r).is_ok() {
            continue;
        }
        if root_id[r as usize] == u32::MAX {
            root_id[r as usize] = n_cells;
            n_cells += 1;
            let l = cell_leaf[c as usize] as usize;
            level.push(leaves[l].level());
            cut.push(0u8);
            region.push(leaf_region.map(|t| t[l]).unwrap_or(NO_REGION));
        }
        let id = root_id[r as usize];
        cell_id[c as usize] = id;
        let l = cell_leaf[c as usize] as usize;
        level[id as usize] = level[id as usize].min(leaves[l].level());
        cut[id as usize] |= cell_cut[c as usize];
        report.fluid_volume += cell_vol[c as usize];
    }
    report.cells = n_cells as usize;
    report.cut_cells = cut.iter().filter(|&&c| c != 0).count();
    // per-cell and per-leaf arrays the assembly does not read (memory at its peak)
    drop((
        uf, root_id, alive, cell_vol, cell_leaf, cell_cut, leaf_cell, status,
    ));
    drop((merged.tiny, merged.group_volume));
    let mesh = assemble(AssembleInput {
        points: &points,
        faces: raw,
        cell_id: &cell_id,
        n_cells: n_cells as usize,
        cell_level: level,
        cell_cut: cut,
        cell_region: region,
        tag_names: &index.surface().tag_names,
        side_names: &opts.side_names,
    });
    report.wall_area = wall_area(&mesh);
    tmark("assemble");
    Ok(CutOutput { mesh, report })
}

/// Total area of the wall patches.
fn wall_area(m: &VolumeMesh) -> f64 {
    let mut a = 0.0;
    for p in &m.patches {
        if let octocut_volmesh::PatchKind::Wall { .. } = p.kind {
            for f in p.start..p.start + p.count {
                let v = m.face(f as usize);
                let mut n = Vec3::ZERO;
                for j in 0..v.len() {
                    n += m.points[v[j] as usize].cross(m.points[v[(j + 1) % v.len()] as usize]);
                }
                a += 0.5 * n.length();
            }
        }
    }
    a
}

/// The raw cell containing `p`: the leaf's cell, or among a cut leaf's pieces the one whose
/// closed boundary winds around `p` (solid-angle sum, Van Oosterom and Strackee 1983).
/// The translation of the grid, relative to the surface, under which the cut is computed:
/// `1e-6` of the finest leaf's edge times fixed irrational-looking fractions per axis, positive
/// so that a body face lying on a box minimum side (a body resting on the floor, a half model
/// on a symmetry plane) ends just outside the box.
///
/// Exact predicates decide every sign, but a surface lying exactly in a grid plane, or through
/// grid vertices (flat CAD faces at round coordinates), leaves the vertex classes undecided
/// (winding number 1/2) and the two cells sharing a face could clip it differently. Any nonzero
/// translation of the grid removes such coincidences for all but a measure-zero set of
/// surfaces (a numerical form of simulation of simplicity, Edelsbrunner and Muecke 1990); the
/// walls then lie within `2e-6` finest edges of the input surface, far below the crossing
/// clamp [`crossing::T_EPS`]. The mesh is returned in the true frame with the box sides exact.
pub fn grid_shift(tree: &Octree) -> Vec3 {
    let finest = tree.leaves().iter().map(|k| k.level()).max().unwrap_or(0);
    let h = tree.domain.cell_size(finest);
    // sqrt(2) - 1, (sqrt(5) - 1) / 2 - 0.5, pi - 3: no small rational relation among them
    1e-6 * h
        * Vec3::new(
            0.414_213_562_373_095,
            0.118_033_988_749_895,
            0.141_592_653_589_793,
        )
}

/// Point `p` with each coordinate within `1e-9` grid units of a grid plane snapped onto it.
fn unshift(domain: &Domain, p: Vec3) -> Vec3 {
    let u = domain.unit();
    let mut out = p;
    for a in 0..3 {
        let g = (p[a] - domain.origin[a]) / u;
        let r = g.round();
        if (g - r).abs() < 1e-9 && r >= 0.0 {
            let mut gi = [0u32; 3];
            gi[a] = r as u32;
            out[a] = domain.point(gi)[a];
        }
    }
    out
}

fn point_cell(
    tree: &Octree,
    raw: &RawFaces,
    points: &[Vec3],
    leaf_cell: &[u32],
    status: &[u8],
    cell_leaf: &[u32],
    p: Vec3,
) -> Option<u32> {
    let d = &tree.domain;
    let u = d.unit();
    let g = ((p - d.origin) / u).floor();
    let ext = d.grid_extent();
    let gi = [0, 1, 2].map(|i| (g[i].max(0.0) as u64).min(ext[i] as u64 - 1) as u32);
    let l = tree.locate(gi)? as usize;
    match status[l] {
        FLUID => Some(leaf_cell[l]),
        CUT => {
            let first = leaf_cell[l];
            let mut c = first;
            while (c as usize) < cell_leaf.len() && cell_leaf[c as usize] == l as u32 {
                let mut w = 0.0;
                for i in 0..raw.len() {
                    let sign = if raw.a[i] == c {
                        1.0
                    } else if raw.b[i] == c {
                        -1.0
                    } else {
                        continue;
                    };
                    let f = raw.face(i);
                    for j in 1..f.len() - 1 {
                        w += sign
                            * octocut_surface::winding::solid_angle(
                                p,
                                points[f[0] as usize],
                                points[f[j] as usize],
                                points[f[j + 1] as usize],
                            );
                    }
                }
                if w / (4.0 * std::f64::consts::PI) > 0.5 {
                    return Some(c);
                }
                c += 1;
            }
            None
        }
        _ => None,
    }
}
#[cfg(test)]
mod tests;

/// With `OCTOCUT_CUT_TIMING` set, prints the wall and process CPU seconds since the previous
/// mark and the resident memory (Linux `/proc`), for profiling the stage's phases. The peak is
/// the process's so far; with `OCTOCUT_CUT_TIMING=phase` it is the phase's own (the kernel's
/// high-water mark is reset at each mark, so the stage's reported peak is then only its last
/// phase's).
pub(crate) fn tmark(name: &str) {
    use std::sync::Mutex;
    static LAST: Mutex<Option<(std::time::Instant, f64)>> = Mutex::new(None);
    let Some(mode) = std::env::var_os("OCTOCUT_CUT_TIMING") else {
        return;
    };
    let now = std::time::Instant::now();
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let fields: Vec<&str> = stat
        .rsplit(')')
        .next()
        .unwrap_or("")
        .split_whitespace()
        .collect();
    // utime and stime, in clock ticks (100 per second on Linux)
    let tick = |i: usize| {
        fields
            .get(i)
            .and_then(|x| x.parse::<f64>().ok())
            .unwrap_or(0.0)
    };
    let cpu = (tick(11) + tick(12)) / 100.0;
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    let field = |k: &str| {
        let l = status.lines().find(|l| l.starts_with(k)).unwrap_or("");
        l[l.len().min(k.len())..].trim().to_string()
    };
    let rss = format!("rss {}, peak {}", field("VmRSS:"), field("VmHWM:"));
    let mut last = LAST.lock().unwrap_or_else(|e| e.into_inner());
    if let Some((t, c)) = *last {
        let wall = (now - t).as_secs_f64();
        eprintln!(
            "cut {name:>10}: wall {wall:6.3} s, cpu {:6.2} s, {rss}",
            cpu - c
        );
    }
    *last = Some((now, cpu));
    if mode == "phase" {
        // "5" resets the peak resident set size (proc(5), /proc/pid/clear_refs)
        let _ = std::fs::write("/proc/self/clear_refs", "5");
    }
}
