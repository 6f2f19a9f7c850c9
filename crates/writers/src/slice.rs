//! Plane slices of a polyhedral volume mesh and their PNG pictures.
//!
//! [`slice_cells`] cuts every cell (a closed polyhedron given by outward faces) with an axis
//! plane: each face crossing the plane contributes the segments where the plane meets it (the
//! crossing points on its edges, paired in order along the cut line: the even-odd rule for a
//! planar polygon), directed so that the cell lies on their left; the segments are then chained
//! end to start into closed loops (common practice for polyhedron/plane sections, as in
//! marching-style contouring). Invariants: outer loops run counter-clockwise in the picture axes
//! ([`AxisPlane::in_plane_axes`]), holes clockwise, so the signed areas of a cell's loops add up to
//! its exact cross-section. A vertex lying exactly on the plane counts as above it (a symbolic
//! shift of the plane by an infinitesimal amount to lower values, after Edelsbrunner and Mücke
//! 1990, "Simulation of simplicity"): a face lying in the plane is therefore taken by the cell
//! below it only, and the loops of neighbouring cells tile the plane without overlap.
//!
//! [`render_slice`] draws the loops filled by a per-cell value, outlined, with wall edges heavy,
//! axes in model units, a scale bar and a legend.

pub use crate::picture::PictureError;
use crate::picture::{
    category, fill_rect, format_tick, format_value, label, line, new_pixmap, nice_step, paint, png,
    ramp, rect_outline, text, text_width, ticks, Align, Rgb, INK, WHITE,
};
use octocut_surface::Vec3;
use octocut_volmesh::{PatchKind, VolumeMesh, NO_REGION};
use rayon::prelude::*;
use tiny_skia::{FillRule, PathBuilder, Pixmap, Stroke, Transform};

/// The plane `x[axis] = value` (axis 0, 1 or 2).
///
/// ```
/// use octocut_writers::slice::AxisPlane;
/// assert_eq!(AxisPlane { axis: 1, value: 0.0 }.in_plane_axes(), [0, 2]);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AxisPlane {
    pub axis: usize,
    pub value: f64,
}

impl AxisPlane {
    /// The model axes across and up the picture: x-plane (y, z), y-plane (x, z), z-plane (x, y).
    /// An axis above 2 is treated as 2.
    pub fn in_plane_axes(&self) -> [usize; 2] {
        match self.axis {
            0 => [1, 2],
            1 => [0, 2],
            _ => [0, 1],
        }
    }

    fn normal_axis(&self) -> usize {
        self.axis.min(2)
    }
}

/// How a face is seen from the cell being cut.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FaceSide {
    /// The stored vertex order runs clockwise seen from outside this cell.
    pub reversed: bool,
    /// The face lies on a wall (body surface) patch.
    pub wall: bool,
}

/// A mesh seen cell by cell as closed polyhedra (a [`VolumeMesh`] through [`VolumeMeshCells`], a
/// mesh read back from VTU polyhedra through [`PolyhedronCells`]).
pub trait CellFaces {
    fn points(&self) -> &[Vec3];
    fn n_cells(&self) -> usize;
    /// Calls `f(vertex ids, side)` for every face of `cell`.
    fn for_each_face(&self, cell: usize, f: &mut dyn FnMut(&[u32], FaceSide));
}

/// Cell-to-face lists of a [`VolumeMesh`] (references out of range are left out).
///
/// ```
/// use octocut_writers::slice::{CellFaces, VolumeMeshCells};
/// let m = octocut_volmesh::VolumeMesh::default();
/// assert_eq!(VolumeMeshCells::new(&m).n_cells(), 0);
/// ```
pub struct VolumeMeshCells<'a> {
    mesh: &'a VolumeMesh,
    offsets: Vec<u32>,
    /// `2 * face + reversed`.
    faces: Vec<u32>,
    wall: Vec<bool>,
}

impl<'a> VolumeMeshCells<'a> {
    pub fn new(mesh: &'a VolumeMesh) -> Self {
        let (nc, nf) = (
            mesh.n_cells(),
            mesh.n_faces()
                .min(mesh.face_offsets.len().saturating_sub(1)),
        );
        let mut count = vec![0u32; nc + 1];
        let each = |f: usize, visit: &mut dyn FnMut(usize, u32)| {
            if let Some(&o) = mesh.owner.get(f) {
                visit(o as usize, 2 * f as u32);
            }
            if let Some(&n) = mesh.neighbour.get(f) {
                visit(n as usize, 2 * f as u32 + 1);
            }
        };
        for f in 0..nf {
            each(f, &mut |c, _| {
                if c < nc {
                    count[c + 1] += 1
                }
            });
        }
        for c in 0..nc {
            count[c + 1] += count[c];
        }
        let mut fill = count.clone();
        let mut faces = vec![0u32; count[nc] as usize];
        for f in 0..nf {
            each(f, &mut |c, code| {
                if c < nc {
                    faces[fill[c] as usize] = code;
                    fill[c] += 1;
                }
            });
        }
        let mut wall = vec![false; nf];
        for p in &mesh.patches {
            if matches!(p.kind, PatchKind::Wall { .. }) {
                let end = (p.start as usize).saturating_add(p.count as usize).min(nf);
                for w in wall.iter_mut().take(end).skip(p.start as usize) {
                    *w = true;
                }
            }
        }
        VolumeMeshCells {
            mesh,
            offsets: count,
            faces,
            wall,
        }
    }
}

impl CellFaces for VolumeMeshCells<'_> {
    fn points(&self) -> &[Vec3] {
        &self.mesh.points
    }
    fn n_cells(&self) -> usize {
        self.offsets.len() - 1
    }
    fn for_each_face(&self, cell: usize, f: &mut dyn FnMut(&[u32], FaceSide)) {
        let (a, b) = (self.offsets[cell] as usize, self.offsets[cell + 1] as usize);
        for &code in &self.faces[a..b] {
            let face = (code / 2) as usize;
            let (s, e) = (
                self.mesh.face_offsets[face] as usize,
                self.mesh.face_offsets[face + 1] as usize,
            );
            if let Some(v) = self.mesh.face_vertices.get(s..e) {
                f(
                    v,
                    FaceSide {
                        reversed: code & 1 == 1,
                        wall: self.wall[face],
                    },
                );
            }
        }
    }
}

/// Cells stored as their own outward faces (the VTU polyhedron layout).
///
/// ```
/// use octocut_writers::slice::{CellFaces, PolyhedronCells};
/// let mut cells = PolyhedronCells::new(vec![]);
/// cells.push_cell(std::iter::empty());
/// assert_eq!(cells.n_cells(), 1);
/// ```
#[derive(Clone, Debug, Default)]
pub struct PolyhedronCells {
    pub points: Vec<Vec3>,
    /// CSR offsets into the faces, one more than the number of cells.
    pub cell_offsets: Vec<u32>,
    /// CSR offsets into `face_vertices`, one more than the number of faces.
    pub face_offsets: Vec<u32>,
    /// Vertex ids, counter-clockwise seen from outside the cell.
    pub face_vertices: Vec<u32>,
    pub face_wall: Vec<bool>,
}

impl PolyhedronCells {
    pub fn new(points: Vec<Vec3>) -> Self {
        PolyhedronCells {
            points,
            cell_offsets: vec![0],
            face_offsets: vec![0],
            ..Default::default()
        }
    }

    /// Adds a cell from its faces: (vertex ids counter-clockwise seen from outside, on a wall).
    pub fn push_cell<'f>(&mut self, faces: impl IntoIterator<Item = (&'f [u32], bool)>) {
        for (v, wall) in faces {
            self.face_vertices.extend_from_slice(v);
            self.face_offsets.push(self.face_vertices.len() as u32);
            self.face_wall.push(wall);
        }
        self.cell_offsets.push(self.face_wall.len() as u32);
    }
}

impl CellFaces for PolyhedronCells {
    fn points(&self) -> &[Vec3] {
        &self.points
    }
    fn n_cells(&self) -> usize {
        self.cell_offsets.len().saturating_sub(1)
    }
    fn for_each_face(&self, cell: usize, f: &mut dyn FnMut(&[u32], FaceSide)) {
        let (Some(&a), Some(&b)) = (self.cell_offsets.get(cell), self.cell_offsets.get(cell + 1))
        else {
            return;
        };
        for face in a as usize..(b as usize).min(self.face_wall.len()) {
            let (Some(&s), Some(&e)) =
                (self.face_offsets.get(face), self.face_offsets.get(face + 1))
            else {
                return;
            };
            if let Some(v) = self.face_vertices.get(s as usize..e as usize) {
                f(
                    v,
                    FaceSide {
                        reversed: false,
                        wall: self.face_wall[face],
                    },
                );
            }
        }
    }
}

/// One closed loop of a cell's cut: vertices in picture axes, `wall[i]` for the edge from vertex
/// `i` to vertex `i + 1` (cyclically).
#[derive(Clone, Debug, PartialEq)]
pub struct SlicePolygon {
    pub cell: u32,
    pub polygon: Vec<[f64; 2]>,
    pub wall: Vec<bool>,
}

impl SlicePolygon {
    /// Signed area (shoelace formula): positive for an outer loop, negative for a hole.
    pub fn signed_area(&self) -> f64 {
        let n = self.polygon.len();
        (0..n)
            .map(|i| {
                let (a, b) = (self.polygon[i], self.polygon[(i + 1) % n]);
                a[0] * b[1] - a[1] * b[0]
            })
            .sum::<f64>()
            * 0.5
    }
}

#[derive(Clone, Copy)]
struct Segment {
    p: [f64; 2],
    q: [f64; 2],
    wall: bool,
}

fn dist2(a: [f64; 2], b: [f64; 2]) -> f64 {
    (a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2)
}

/// Cuts every cell of `cells` with `plane`; see the module doc for orientation and the rule for
/// faces in the plane. A cell's segments that do not close into loops (an open cell) are dropped.
///
/// ```
/// use octocut_writers::slice::{slice_cells, AxisPlane, PolyhedronCells};
/// use octocut_surface::Vec3;
/// let pts: Vec<Vec3> = (0..8).map(|i| Vec3::new((i & 1) as f64, ((i >> 1) & 1) as f64, (i >> 2) as f64)).collect();
/// let quads: [[u32; 4]; 6] = [[0, 2, 3, 1], [4, 5, 7, 6], [0, 1, 5, 4], [2, 6, 7, 3], [0, 4, 6, 2], [1, 3, 7, 5]];
/// let mut cells = PolyhedronCells::new(pts);
/// cells.push_cell(quads.iter().map(|q| (&q[..], false)));
/// let polys = slice_cells(&cells, AxisPlane { axis: 2, value: 0.5 });
/// assert_eq!(polys.len(), 1);
/// assert!((polys[0].signed_area() - 1.0).abs() < 1e-15);
/// ```
pub fn slice_cells(cells: &(impl CellFaces + Sync), plane: AxisPlane) -> Vec<SlicePolygon> {
    // cells in parallel chunks, the chunks' loops concatenated in cell order
    const CHUNK: usize = 4096;
    let n = cells.n_cells();
    let parts: Vec<Vec<SlicePolygon>> = (0..n.div_ceil(CHUNK))
        .into_par_iter()
        .map(|k| slice_range(cells, plane, k * CHUNK..((k + 1) * CHUNK).min(n)))
        .collect();
    parts.into_iter().flatten().collect()
}

/// [`slice_cells`] for several planes at once: one pass over the faces finds the cells with
/// vertices on both sides of each plane (the only cells a plane can cut), then each plane cuts
/// only its cells. The polygons per plane equal those of [`slice_cells`].
///
/// ```
/// use octocut_writers::slice::{slice_cells, slice_cells_on_planes, AxisPlane, VolumeMeshCells};
/// let m = octocut_volmesh::testmesh::block(4, 0.25);
/// let cells = VolumeMeshCells::new(&m);
/// let planes = [AxisPlane { axis: 0, value: 0.3 }, AxisPlane { axis: 2, value: 0.6 }];
/// let many = slice_cells_on_planes(&cells, &planes);
/// assert_eq!(many[1], slice_cells(&cells, planes[1]));
/// assert_eq!(many[0].len(), 16); // exact: the plane x = 0.3 cuts one layer of 4 x 4 cells
/// ```
pub fn slice_cells_on_planes(
    cells: &(impl CellFaces + Sync),
    planes: &[AxisPlane],
) -> Vec<Vec<SlicePolygon>> {
    const CHUNK: usize = 4096;
    if planes.len() > 32 {
        // one bit per plane in a u32 mask: 32 planes a pass
        return planes
            .chunks(32)
            .flat_map(|group| slice_cells_on_planes(cells, group))
            .collect();
    }
    let pts = cells.points();
    // bit i of a point: on or above plane i (the side rule of the cut itself)
    let side: Vec<u32> = pts
        .par_iter()
        .map(|p| {
            planes.iter().enumerate().fold(0u32, |m, (i, pl)| {
                m | (((p[pl.normal_axis()] >= pl.value) as u32) << i)
            })
        })
        .collect();
    let n = cells.n_cells();
    let parts: Vec<Vec<Vec<usize>>> = (0..n.div_ceil(CHUNK))
        .into_par_iter()
        .map(|k| {
            let mut hit = vec![Vec::new(); planes.len()];
            for cell in k * CHUNK..((k + 1) * CHUNK).min(n) {
                let (mut any, mut all) = (0u32, u32::MAX);
                cells.for_each_face(cell, &mut |face, _| {
                    if face.len() < 3 || face.iter().any(|&i| i as usize >= pts.len()) {
                        return; // skipped by the cut as well
                    }
                    for &i in face {
                        any |= side[i as usize];
                        all &= side[i as usize];
                    }
                });
                let both = any & !all;
                for (i, h) in hit.iter_mut().enumerate() {
                    if both >> i & 1 == 1 {
                        h.push(cell);
                    }
                }
            }
            hit
        })
        .collect();
    drop(side);
    (0..planes.len())
        .map(|i| {
            let list: Vec<usize> = parts.iter().flat_map(|h| h[i].iter().copied()).collect();
            let polys: Vec<Vec<SlicePolygon>> = list
                .par_chunks(256)
                .map(|c| slice_range(cells, planes[i], c.iter().copied()))
                .collect();
            polys.into_iter().flatten().collect()
        })
        .collect()
}

/// The loops of cells `range` (see [`slice_cells`]).
fn slice_range(
    cells: &impl CellFaces,
    plane: AxisPlane,
    range: impl Iterator<Item = usize>,
) -> Vec<SlicePolygon> {
    let k = plane.normal_axis();
    let [u, v] = plane.in_plane_axes();
    let pts = cells.points();
    let mut out = Vec::new();
    let mut segs: Vec<Segment> = Vec::new();
    let mut crossings: Vec<(f64, [f64; 2])> = Vec::new();
    let mut used: Vec<bool> = Vec::new();
    for cell in range {
        segs.clear();
        cells.for_each_face(cell, &mut |face, side| {
            let n = face.len();
            if n < 3 || face.iter().any(|&i| i as usize >= pts.len()) {
                return;
            }
            let above = |i: u32| pts[i as usize][k] >= plane.value;
            let first = above(face[0]);
            if face.iter().all(|&i| above(i) == first) {
                return;
            }
            // Newell's area vector, outward from this cell
            let c = pts[face[0] as usize];
            let mut normal = Vec3::ZERO;
            for j in 0..n {
                let (a, b) = (
                    pts[face[j] as usize] - c,
                    pts[face[(j + 1) % n] as usize] - c,
                );
                normal += a.cross(b);
            }
            if side.reversed {
                normal = -normal;
            }
            // cut direction with the cell on its left: the in-plane normal turned by +90 degrees
            let d = [-normal[v], normal[u]];
            if d == [0.0, 0.0] {
                return;
            }
            crossings.clear();
            for j in 0..n {
                let (ia, ib) = (face[j], face[(j + 1) % n]);
                if above(ia) == above(ib) {
                    continue;
                }
                // the same edge gives the same point from both of its faces: order by vertex id
                let (lo, hi) = if ia < ib { (ia, ib) } else { (ib, ia) };
                let (a, b) = (pts[lo as usize], pts[hi as usize]);
                let x = if a[k] == plane.value {
                    a
                } else if b[k] == plane.value {
                    b
                } else {
                    a + (b - a) * ((plane.value - a[k]) / (b[k] - a[k]))
                };
                let p = [x[u], x[v]];
                crossings.push((p[0] * d[0] + p[1] * d[1], p));
            }
            crossings.sort_by(|a, b| a.0.total_cmp(&b.0));
            for pair in crossings.chunks_exact(2) {
                segs.push(Segment {
                    p: pair[0].1,
                    q: pair[1].1,
                    wall: side.wall,
                });
            }
        });
        if segs.is_empty() {
            continue;
        }
        // tolerance for matching segment ends (hanging vertices give equal points up to rounding)
        let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
        for s in &segs {
            for p in [s.p, s.q] {
                lo = [lo[0].min(p[0]), lo[1].min(p[1])];
                hi = [hi[0].max(p[0]), hi[1].max(p[1])];
            }
        }
        let tol2 = (1e-9 * (hi[0] - lo[0]).max(hi[1] - lo[1])).powi(2);
        segs.retain(|s| dist2(s.p, s.q) > tol2);
        used.clear();
        used.resize(segs.len(), false);
        for s0 in 0..segs.len() {
            if used[s0] {
                continue;
            }
            used[s0] = true;
            let start = segs[s0].p;
            let mut end = segs[s0].q;
            let mut poly = SlicePolygon {
                cell: cell as u32,
                polygon: vec![start],
                wall: vec![segs[s0].wall],
            };
            let closed = loop {
                if poly.polygon.len() >= 3 && dist2(end, start) <= tol2 {
                    break true;
                }
                let next = (0..segs.len())
                    .filter(|&j| !used[j])
                    .map(|j| (dist2(segs[j].p, end), j))
                    .min_by(|a, b| a.0.total_cmp(&b.0));
                match next {
                    Some((d2, j)) if d2 <= tol2 => {
                        used[j] = true;
                        poly.polygon.push(segs[j].p);
                        poly.wall.push(segs[j].wall);
                        end = segs[j].q;
                    }
                    _ => break false,
                }
            };
            if closed {
                out.push(poly);
            }
        }
    }
    out
}

/// What the fill colour shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColourBy {
    /// Octree level (integer values; categorical colours).
    Level,
    /// A quality measure (continuous ramp).
    Quality,
    /// Size-region tag (integer values, `NO_REGION` for none; categorical colours).
    Region,
}

/// Picture options of [`render_slice`].
///
/// ```
/// let s = octocut_writers::slice::SliceStyle::default();
/// assert_eq!((s.width, s.height), (1200, 900));
/// ```
#[derive(Clone, Debug)]
pub struct SliceStyle {
    pub width: u32,
    pub height: u32,
    pub title: String,
    /// Legend heading: what the colours mean.
    pub value_name: String,
    /// Range of the quality ramp; `None`: the range of the values drawn.
    pub value_range: Option<(f64, f64)>,
    /// Names of the categories by value (region names); others print as numbers.
    pub category_names: Vec<String>,
    /// Part of the plane shown, (min, max) in picture axes; `None`: all polygons.
    pub view: Option<([f64; 2], [f64; 2])>,
    /// Length unit of the axes and the scale bar.
    pub unit: String,
}

impl Default for SliceStyle {
    fn default() -> Self {
        SliceStyle {
            width: 1200,
            height: 900,
            title: String::new(),
            value_name: String::new(),
            value_range: None,
            category_names: Vec::new(),
            view: None,
            unit: "m".into(),
        }
    }
}

const NO_CELLS: Rgb = [205, 205, 205];
const NOT_FINITE: Rgb = [230, 0, 120];
const NONE_REGION: Rgb = [250, 250, 250];

/// [`render_slice_pixmap`] encoded as PNG.
pub fn render_slice(
    polys: &[SlicePolygon],
    values: &[f64],
    colour: ColourBy,
    plane: AxisPlane,
    style: &SliceStyle,
) -> Result<Vec<u8>, PictureError> {
    png(&render_slice_pixmap(polys, values, colour, plane, style)?)
}

/// Draws the slice: each loop filled by `values[cell]` as `colour` says, outlined thinly (loops
/// under 4 pixels across are filled only), wall edges heavy, on a grey ground where no cell is.
pub fn render_slice_pixmap(
    polys: &[SlicePolygon],
    values: &[f64],
    colour: ColourBy,
    plane: AxisPlane,
    style: &SliceStyle,
) -> Result<Pixmap, PictureError> {
    let mut pm = new_pixmap(style.width, style.height)?;
    if polys.is_empty() {
        return Err(PictureError::Empty("the plane crosses no cell"));
    }
    if let Some(p) = polys.iter().find(|p| p.cell as usize >= values.len()) {
        return Err(PictureError::Values {
            cell: p.cell,
            values: values.len(),
        });
    }
    let (w, h) = (style.width as f64, style.height as f64);
    let (left, right, top, bottom) = (110.0, 260.0, 70.0, 90.0);
    let (pw, ph) = ((w - left - right).max(10.0), (h - top - bottom).max(10.0));
    // view: requested or all polygons, widened to the plot's aspect ratio (equal scales)
    let (mut lo, mut hi) = style.view.unwrap_or_else(|| {
        let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
        for p in polys.iter().flat_map(|p| &p.polygon) {
            lo = [lo[0].min(p[0]), lo[1].min(p[1])];
            hi = [hi[0].max(p[0]), hi[1].max(p[1])];
        }
        (lo, hi)
    });
    if !(lo[0].is_finite() && lo[1].is_finite() && hi[0].is_finite() && hi[1].is_finite()) {
        return Err(PictureError::Empty("no finite polygon coordinates"));
    }
    let span = [(hi[0] - lo[0]).max(1e-300), (hi[1] - lo[1]).max(1e-300)];
    let scale = (pw / span[0]).min(ph / span[1]);
    let centre = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
    lo = [centre[0] - 0.5 * pw / scale, centre[1] - 0.5 * ph / scale];
    hi = [centre[0] + 0.5 * pw / scale, centre[1] + 0.5 * ph / scale];
    let to_px = |p: [f64; 2]| -> [f32; 2] {
        [
            (left + (p[0] - lo[0]) * scale) as f32,
            (top + ph - (p[1] - lo[1]) * scale) as f32,
        ]
    };

    fill_rect(
        &mut pm,
        left as f32,
        top as f32,
        pw as f32,
        ph as f32,
        NO_CELLS,
    );

    // value range of the continuous ramp
    let shown = |p: &SlicePolygon| {
        p.polygon
            .iter()
            .any(|q| q[0] >= lo[0] && q[0] <= hi[0] && q[1] >= lo[1] && q[1] <= hi[1])
    };
    let (mut vmin, mut vmax) = style
        .value_range
        .unwrap_or((f64::INFINITY, f64::NEG_INFINITY));
    if style.value_range.is_none() {
        for p in polys.iter().filter(|p| shown(p)) {
            let x = values[p.cell as usize];
            if x.is_finite() {
                vmin = vmin.min(x);
                vmax = vmax.max(x);
            }
        }
    }
    if !(vmin.is_finite() && vmax.is_finite()) {
        (vmin, vmax) = (0.0, 1.0);
    }
    if vmax <= vmin {
        let pad = (vmin.abs() * 0.01).max(0.5);
        (vmin, vmax) = (vmin - pad, vmax + pad);
    }
    let mut categories: Vec<i64> = Vec::new();
    let mut any_not_finite = false;
    let fill_of = |x: f64| -> Rgb {
        if !x.is_finite() {
            return NOT_FINITE;
        }
        match colour {
            ColourBy::Quality => ramp((x - vmin) / (vmax - vmin)),
            ColourBy::Region if x == NO_REGION as f64 => NONE_REGION,
            ColourBy::Level | ColourBy::Region => category(x.round().max(0.0) as usize),
        }
    };

    let thin = Stroke {
        width: 0.7,
        ..Stroke::default()
    };
    let heavy = Stroke {
        width: 3.0,
        ..Stroke::default()
    };
    let mut outline_paint = paint([35, 35, 35], 170);
    outline_paint.anti_alias = true;
    let wall_paint = paint(INK, 255);
    let mut walls = PathBuilder::new();
    for p in polys {
        let px: Vec<[f32; 2]> = p.polygon.iter().map(|&q| to_px(q)).collect();
        let (mut a, mut b) = ([f32::INFINITY; 2], [f32::NEG_INFINITY; 2]);
        for q in &px {
            a = [a[0].min(q[0]), a[1].min(q[1])];
            b = [b[0].max(q[0]), b[1].max(q[1])];
        }
        if b[0] < left as f32
            || a[0] > (left + pw) as f32
            || b[1] < top as f32
            || a[1] > (top + ph) as f32
        {
            continue;
        }
        let x = values[p.cell as usize];
        any_not_finite |= !x.is_finite();
        if colour != ColourBy::Quality && x.is_finite() && !categories.contains(&(x.round() as i64))
        {
            categories.push(x.round() as i64);
        }
        let mut pb = PathBuilder::new();
        pb.move_to(px[0][0], px[0][1]);
        for q in &px[1..] {
            pb.line_to(q[0], q[1]);
        }
        pb.close();
        let Some(path) = pb.finish() else { continue };
        let mut fp = paint(fill_of(x), 255);
        fp.anti_alias = false;
        pm.fill_path(&path, &fp, FillRule::EvenOdd, Transform::identity(), None);
        if (b[0] - a[0]).max(b[1] - a[1]) >= 4.0 {
            pm.stroke_path(&path, &outline_paint, &thin, Transform::identity(), None);
        }
        for (i, &wall) in p.wall.iter().enumerate() {
            if wall {
                let (s, e) = (px[i], px[(i + 1) % px.len()]);
                walls.move_to(s[0], s[1]);
                walls.line_to(e[0], e[1]);
            }
        }
    }
    let has_walls = if let Some(path) = walls.finish() {
        pm.stroke_path(&path, &wall_paint, &heavy, Transform::identity(), None);
        true
    } else {
        false
    };

    // margins over anything drawn outside the plot, then the frame
    let (wf, hf) = (w as f32, h as f32);
    let (l, t, pwf, phf) = (left as f32, top as f32, pw as f32, ph as f32);
    fill_rect(&mut pm, 0.0, 0.0, wf, t, WHITE);
    fill_rect(&mut pm, 0.0, t + phf, wf, hf - t - phf, WHITE);
    fill_rect(&mut pm, 0.0, 0.0, l, hf, WHITE);
    fill_rect(&mut pm, l + pwf, 0.0, wf - l - pwf, hf, WHITE);
    rect_outline(&mut pm, l, t, pwf, phf, 1.5, INK);

    // axes
    let names = ["x", "y", "z"];
    let [au, av] = plane.in_plane_axes();
    let step_u = nice_step(hi[0] - lo[0], (pw / 110.0).max(2.0));
    for x in ticks(lo[0], hi[0], step_u) {
        let sx = to_px([x, lo[1]])[0];
        line(&mut pm, [sx, t + phf], [sx, t + phf + 7.0], 1.5, INK);
        label(
            &mut pm,
            sx,
            t + phf + 22.0,
            &format_tick(x, step_u),
            2,
            Align::Centre,
            INK,
        );
    }
    label(
        &mut pm,
        l + 0.5 * pwf,
        t + phf + 55.0,
        &format!("{} ({})", names[au], style.unit),
        2,
        Align::Centre,
        INK,
    );
    let step_v = nice_step(hi[1] - lo[1], (ph / 90.0).max(2.0));
    for y in ticks(lo[1], hi[1], step_v) {
        let sy = to_px([lo[0], y])[1];
        line(&mut pm, [l - 7.0, sy], [l, sy], 1.5, INK);
        label(
            &mut pm,
            l - 12.0,
            sy,
            &format_tick(y, step_v),
            2,
            Align::Right,
            INK,
        );
    }
    label(
        &mut pm,
        l - 12.0,
        t - 18.0,
        &format!("{} ({})", names[av], style.unit),
        2,
        Align::Right,
        INK,
    );

    // title and plane
    text(&mut pm, l, 14.0, &style.title, 3, INK);
    let where_ = format!(
        "slice {} = {}",
        names[plane.normal_axis()],
        format_value(plane.value)
    );
    label(&mut pm, l + pwf, t - 18.0, &where_, 2, Align::Right, INK);

    // scale bar (bottom left, on a white plate)
    let bar = nice_step((hi[0] - lo[0]) * 0.2, 1.0);
    let bar_px = (bar * scale) as f32;
    let bar_label = format!("{} {}", format_value(bar), style.unit);
    let plate_w = bar_px.max(text_width(&bar_label, 2)) + 24.0;
    let (bx, by) = (l + 14.0, t + phf - 56.0);
    fill_rect(&mut pm, bx, by, plate_w, 44.0, WHITE);
    rect_outline(&mut pm, bx, by, plate_w, 44.0, 1.0, INK);
    line(
        &mut pm,
        [bx + 12.0, by + 32.0],
        [bx + 12.0 + bar_px, by + 32.0],
        4.0,
        INK,
    );
    line(
        &mut pm,
        [bx + 12.0, by + 24.0],
        [bx + 12.0, by + 38.0],
        2.0,
        INK,
    );
    line(
        &mut pm,
        [bx + 12.0 + bar_px, by + 24.0],
        [bx + 12.0 + bar_px, by + 38.0],
        2.0,
        INK,
    );
    text(&mut pm, bx + 12.0, by + 6.0, &bar_label, 2, INK);

    // legend
    let lx = l + pwf + 28.0;
    let mut ly = t + 4.0;
    let heading = if style.value_name.is_empty() {
        match colour {
            ColourBy::Level => "octree level",
            ColourBy::Quality => "value",
            ColourBy::Region => "size region",
        }
    } else {
        style.value_name.as_str()
    };
    text(&mut pm, lx, ly, heading, 2, INK);
    ly += 30.0;
    let swatch = |pm: &mut Pixmap, y: f32, c: Rgb, name: &str| {
        fill_rect(pm, lx, y, 28.0, 18.0, c);
        rect_outline(pm, lx, y, 28.0, 18.0, 1.0, INK);
        label(pm, lx + 38.0, y + 9.0, name, 2, Align::Left, INK);
    };
    match colour {
        ColourBy::Quality => {
            let bar_h = (ph * 0.55) as f32;
            for i in 0..bar_h as usize {
                let f = 1.0 - i as f64 / (bar_h as f64 - 1.0);
                fill_rect(&mut pm, lx, ly + i as f32, 30.0, 1.0, ramp(f));
            }
            rect_outline(&mut pm, lx, ly, 30.0, bar_h, 1.0, INK);
            let step = nice_step(vmax - vmin, 5.0);
            for x in ticks(vmin, vmax, step) {
                let y = ly + bar_h * (1.0 - ((x - vmin) / (vmax - vmin)) as f32);
                line(&mut pm, [lx + 30.0, y], [lx + 37.0, y], 1.5, INK);
                label(
                    &mut pm,
                    lx + 42.0,
                    y,
                    &format_tick(x, step),
                    2,
                    Align::Left,
                    INK,
                );
            }
            ly += bar_h + 20.0;
            let range = format!("{} to {}", format_value(vmin), format_value(vmax));
            text(&mut pm, lx, ly, &range, 2, INK);
            ly += 30.0;
        }
        ColourBy::Level | ColourBy::Region => {
            categories.sort_unstable();
            let max_rows = ((ph as f32 - 160.0) / 26.0).max(1.0) as usize;
            for (i, &c) in categories.iter().enumerate() {
                if i == max_rows {
                    text(&mut pm, lx, ly, "...", 2, INK);
                    ly += 26.0;
                    break;
                }
                let (col, name) = if colour == ColourBy::Region && c == NO_REGION as i64 {
                    (NONE_REGION, "none".to_string())
                } else if colour == ColourBy::Region {
                    let n = style
                        .category_names
                        .get(c as usize)
                        .cloned()
                        .unwrap_or_else(|| format!("region {c}"));
                    (category(c.max(0) as usize), n)
                } else {
                    (category(c.max(0) as usize), format!("level {c}"))
                };
                swatch(&mut pm, ly, col, &name);
                ly += 26.0;
            }
            ly += 8.0;
        }
    }
    if any_not_finite {
        swatch(&mut pm, ly, NOT_FINITE, "not finite");
        ly += 26.0;
    }
    swatch(&mut pm, ly, NO_CELLS, "no cells");
    ly += 26.0;
    if has_walls {
        line(&mut pm, [lx, ly + 9.0], [lx + 28.0, ly + 9.0], 3.0, INK);
        label(&mut pm, lx + 38.0, ly + 9.0, "wall", 2, Align::Left, INK);
    }
    Ok(pm)
}

/// Per-cell values of a [`VolumeMesh`] for [`ColourBy::Level`] (octree level) and
/// [`ColourBy::Region`] (region tag, `NO_REGION` for none); `None` for [`ColourBy::Quality`],
/// whose values come from the quality measures.
///
/// ```
/// use octocut_writers::slice::{mesh_values, ColourBy};
/// let m = octocut_volmesh::VolumeMesh { cell_level: vec![3, 4], ..Default::default() };
/// assert_eq!(mesh_values(&m, ColourBy::Level), Some(vec![3.0, 4.0]));
/// ```
pub fn mesh_values(mesh: &VolumeMesh, colour: ColourBy) -> Option<Vec<f64>> {
    match colour {
        ColourBy::Level => Some(mesh.cell_level.iter().map(|&l| l as f64).collect()),
        ColourBy::Region => Some(mesh.cell_region.iter().map(|&r| r as f64).collect()),
        ColourBy::Quality => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use octocut_volmesh::Patch;
    use std::collections::HashMap;

    type Box3 = (Vec3, Vec3);

    #[derive(Default)]
    struct Points {
        pts: Vec<Vec3>,
        ids: HashMap<[u64; 3], u32>,
    }

    impl Points {
        fn id(&mut self, p: Vec3) -> u32 {
            let n = self.pts.len() as u32;
            *self
                .ids
                .entry(p.to_array().map(f64::to_bits))
                .or_insert_with(|| {
                    self.pts.push(p);
                    n
                })
        }
    }

    /// A rectangle on the plane `x[axis] = c` as 4 vertex ids, counter-clockwise about
    /// `+e_axis` when `positive` (e_(a+1) x e_(a+2) = e_a for cyclic axes), else clockwise.
    fn rect(
        pts: &mut Points,
        axis: usize,
        c: f64,
        lo: [f64; 2],
        hi: [f64; 2],
        positive: bool,
    ) -> Vec<u32> {
        let (b, d) = ((axis + 1) % 3, (axis + 2) % 3);
        let corner = |x: f64, y: f64| {
            let mut p = Vec3::ZERO;
            p[axis] = c;
            p[b] = x;
            p[d] = y;
            p
        };
        let mut v: Vec<u32> = [
            (lo[0], lo[1]),
            (hi[0], lo[1]),
            (hi[0], hi[1]),
            (lo[0], hi[1]),
        ]
        .iter()
        .map(|&(x, y)| pts.id(corner(x, y)))
        .collect();
        if !positive {
            v.reverse();
        }
        v
    }

    /// A face piece: (cell, other cell or None, axis, coordinate, rect lo, rect hi, outward sign).
    type Piece = (usize, Option<usize>, usize, f64, [f64; 2], [f64; 2], bool);

    /// The face pieces of a block of axis-aligned boxes meeting face to face (conforming by
    /// splitting a side into the overlaps with its neighbours' sides; unmatched sides are
    /// boundary faces).
    fn pieces(boxes: &[Box3]) -> Vec<Piece> {
        let mut out = Vec::new();
        for (i, &(lo, hi)) in boxes.iter().enumerate() {
            for axis in 0..3 {
                let (b, d) = ((axis + 1) % 3, (axis + 2) % 3);
                for positive in [false, true] {
                    let c = if positive { hi[axis] } else { lo[axis] };
                    let mut covered = 0.0;
                    for (j, &(lo2, hi2)) in boxes.iter().enumerate() {
                        let c2 = if positive { lo2[axis] } else { hi2[axis] };
                        if j == i || c2 != c {
                            continue;
                        }
                        let a = [lo[b].max(lo2[b]), lo[d].max(lo2[d])];
                        let z = [hi[b].min(hi2[b]), hi[d].min(hi2[d])];
                        if z[0] > a[0] && z[1] > a[1] {
                            covered += (z[0] - a[0]) * (z[1] - a[1]);
                            out.push((i, Some(j), axis, c, a, z, positive));
                        }
                    }
                    let area = (hi[b] - lo[b]) * (hi[d] - lo[d]);
                    if covered == 0.0 {
                        out.push((i, None, axis, c, [lo[b], lo[d]], [hi[b], hi[d]], positive));
                    } else {
                        assert!((covered - area).abs() < 1e-12 * area, "partly covered side");
                    }
                }
            }
        }
        out
    }

    /// Boxes as VTU-style polyhedra; boundary faces not on `domain` are walls.
    fn polyhedra(boxes: &[Box3], domain: Box3) -> PolyhedronCells {
        let mut pts = Points::default();
        let mut faces: Vec<Vec<(Vec<u32>, bool)>> = vec![Vec::new(); boxes.len()];
        for (i, other, axis, c, a, z, positive) in pieces(boxes) {
            let wall = other.is_none() && c != domain.0[axis] && c != domain.1[axis];
            faces[i].push((rect(&mut pts, axis, c, a, z, positive), wall));
        }
        let mut cells = PolyhedronCells::new(std::mem::take(&mut pts.pts));
        for f in &faces {
            cells.push_cell(f.iter().map(|(v, w)| (v.as_slice(), *w)));
        }
        cells
    }

    /// Boxes as a face-based VolumeMesh (each interior face once, owner = lower cell id); the
    /// xmin side is a wall patch, the other sides side patches.
    fn volume_mesh(boxes: &[Box3]) -> VolumeMesh {
        let mut pts = Points::default();
        let mut m = VolumeMesh::default();
        let mut boundary: Vec<Vec<(u32, Vec<u32>)>> = vec![Vec::new(); 6];
        m.face_offsets.push(0);
        let dom = boxes
            .iter()
            .fold((Vec3::INFINITY, Vec3::NEG_INFINITY), |(a, b), &(l, h)| {
                (a.min(l), b.max(h))
            });
        for (i, other, axis, c, a, z, positive) in pieces(boxes) {
            let v = rect(&mut pts, axis, c, a, z, positive);
            match other {
                Some(j) if j > i => {
                    m.face_vertices.extend(v);
                    m.face_offsets.push(m.face_vertices.len() as u32);
                    m.owner.push(i as u32);
                    m.neighbour.push(j as u32);
                }
                Some(_) => {}
                None => {
                    assert!(c == dom.0[axis] || c == dom.1[axis]);
                    boundary[2 * axis + positive as usize].push((i as u32, v));
                }
            }
        }
        for (side, faces) in boundary.into_iter().enumerate() {
            let start = m.owner.len() as u32;
            let kind = if side == 0 {
                PatchKind::Wall { tag: 0 }
            } else {
                PatchKind::Side { side: side as u8 }
            };
            m.patches.push(Patch {
                name: format!("p{side}"),
                kind,
                start,
                count: faces.len() as u32,
            });
            for (o, v) in faces {
                m.face_vertices.extend(v);
                m.face_offsets.push(m.face_vertices.len() as u32);
                m.owner.push(o);
            }
        }
        m.points = pts.pts;
        m.cell_level = vec![0; boxes.len()];
        m.cell_cut = vec![0; boxes.len()];
        m.cell_region = vec![NO_REGION; boxes.len()];
        m
    }

    fn cube(lo: Vec3, size: f64) -> Box3 {
        (lo, lo + Vec3::splat(size))
    }

    /// The unit cube as 2 x 2 x 2 cells of size 0.5 with the octant at the origin refined into
    /// 8 cells of size 0.25 (15 cells; the coarse cells next to the octant get hanging vertices).
    fn refined_block() -> Vec<Box3> {
        let mut b = Vec::new();
        for k in 0..8 {
            let lo = Vec3::new((k & 1) as f64, ((k >> 1) & 1) as f64, (k >> 2) as f64) * 0.5;
            if k == 0 {
                for f in 0..8 {
                    let o =
                        Vec3::new((f & 1) as f64, ((f >> 1) & 1) as f64, (f >> 2) as f64) * 0.25;
                    b.push(cube(o, 0.25));
                }
            } else {
                b.push(cube(lo, 0.5));
            }
        }
        b
    }

    fn area(polys: &[SlicePolygon]) -> f64 {
        polys.iter().map(|p| p.signed_area()).sum()
    }

    #[test]
    fn unit_cube_cell_cuts_to_the_unit_square() {
        let cells = polyhedra(&[cube(Vec3::ZERO, 1.0)], cube(Vec3::ZERO, 1.0));
        for axis in 0..3 {
            let polys = slice_cells(&cells, AxisPlane { axis, value: 0.5 });
            assert_eq!(polys.len(), 1);
            assert_eq!(polys[0].polygon.len(), 4);
            // exact: unit square area 1 (all coordinates are 0 or 1)
            assert_eq!(polys[0].signed_area(), 1.0);
        }
        // a plane off the cell, or through its bottom face (taken by the cell below it: none)
        assert!(slice_cells(
            &cells,
            AxisPlane {
                axis: 2,
                value: 1.5
            }
        )
        .is_empty());
        assert!(slice_cells(
            &cells,
            AxisPlane {
                axis: 2,
                value: 0.0
            }
        )
        .is_empty());
        // through its top face: the cell lies below, so it takes the face
        assert_eq!(
            area(&slice_cells(
                &cells,
                AxisPlane {
                    axis: 2,
                    value: 1.0
                }
            )),
            1.0
        );
    }

    #[test]
    fn block_of_eight_cubes_gives_four_squares() {
        let boxes: Vec<Box3> = (0..8)
            .map(|k| {
                cube(
                    Vec3::new((k & 1) as f64, ((k >> 1) & 1) as f64, (k >> 2) as f64) * 0.5,
                    0.5,
                )
            })
            .collect();
        let mesh = volume_mesh(&boxes);
        let cells = VolumeMeshCells::new(&mesh);
        for value in [0.3, 0.5] {
            let polys = slice_cells(&cells, AxisPlane { axis: 2, value });
            assert_eq!(polys.len(), 4, "z = {value}");
            // exact: squares of side 0.5
            assert!(polys.iter().all(|p| p.signed_area() == 0.25));
            // z = 0.5 lies on the interior faces: the lower layer (cells 0..4) takes them
            assert!(polys.iter().all(|p| p.cell < 4));
        }
        // walls: the xmin patch gives one heavy edge on x = 0 in each of the two cells there
        let polys = slice_cells(
            &cells,
            AxisPlane {
                axis: 2,
                value: 0.3,
            },
        );
        let mut walls = 0;
        for p in &polys {
            for (i, &w) in p.wall.iter().enumerate() {
                if w {
                    walls += 1;
                    let (a, b) = (p.polygon[i], p.polygon[(i + 1) % p.polygon.len()]);
                    assert!(a[0] == 0.0 && b[0] == 0.0);
                }
            }
        }
        assert_eq!(walls, 2);
    }

    #[test]
    fn refined_octant_tiles_the_cross_section() {
        let boxes = refined_block();
        let poly = polyhedra(&boxes, cube(Vec3::ZERO, 1.0));
        let mesh = volume_mesh(&boxes);
        let vm = VolumeMeshCells::new(&mesh);
        for axis in 0..3 {
            for value in [0.1, 0.25, 0.4, 0.5, 0.77, 1.0] {
                let plane = AxisPlane { axis, value };
                let (a, b) = (slice_cells(&poly, plane), slice_cells(&vm, plane));
                // exact: the meshed domain is the unit cube, cross-section area 1
                assert!(
                    (area(&a) - 1.0).abs() < 1e-14,
                    "{axis} {value}: {}",
                    area(&a)
                );
                assert!(
                    (area(&b) - 1.0).abs() < 1e-14,
                    "{axis} {value}: {}",
                    area(&b)
                );
                assert!(a.iter().chain(&b).all(|p| p.signed_area() > 0.0));
                let expected = if value <= 0.5 { 4 + 3 } else { 4 };
                assert_eq!(a.len(), expected, "{axis} {value}");
                assert_eq!(b.len(), expected, "{axis} {value}");
            }
        }
    }

    #[test]
    fn planes_at_once_equal_one_plane_at_a_time() {
        let boxes = refined_block();
        let poly = polyhedra(&boxes, cube(Vec3::ZERO, 1.0));
        let mesh = volume_mesh(&boxes);
        let vm = VolumeMeshCells::new(&mesh);
        // planes through vertices (multiples of 0.25), the domain floor (0.0) and between them;
        // 123 planes, more than the 32 of one pass
        let planes: Vec<AxisPlane> = (0..3)
            .flat_map(|axis| {
                (0..=40).map(move |i| AxisPlane {
                    axis,
                    value: i as f64 / 40.0 + if i % 7 == 3 { 0.013 } else { 0.0 },
                })
            })
            .collect();
        let (a, b) = (
            slice_cells_on_planes(&poly, &planes),
            slice_cells_on_planes(&vm, &planes),
        );
        for (i, &plane) in planes.iter().enumerate() {
            assert_eq!(a[i], slice_cells(&poly, plane), "{plane:?}");
            assert_eq!(b[i], slice_cells(&vm, plane), "{plane:?}");
        }
    }

    /// The unit cube with the corner (1,1,1) clipped by the plane x + y + z = 2.5.
    fn clipped_cube() -> PolyhedronCells {
        let mut pts = Points::default();
        let p = |x: f64, y: f64, z: f64| Vec3::new(x, y, z);
        let faces_xyz: Vec<Vec<Vec3>> = vec![
            vec![p(0., 0., 0.), p(1., 0., 0.), p(1., 1., 0.), p(0., 1., 0.)],
            vec![p(0., 0., 0.), p(0., 1., 0.), p(0., 1., 1.), p(0., 0., 1.)],
            vec![p(0., 0., 0.), p(0., 0., 1.), p(1., 0., 1.), p(1., 0., 0.)],
            vec![
                p(0., 0., 1.),
                p(1., 0., 1.),
                p(1., 0.5, 1.),
                p(0.5, 1., 1.),
                p(0., 1., 1.),
            ],
            vec![
                p(1., 0., 0.),
                p(1., 1., 0.),
                p(1., 1., 0.5),
                p(1., 0.5, 1.),
                p(1., 0., 1.),
            ],
            vec![
                p(0., 1., 0.),
                p(0., 1., 1.),
                p(0.5, 1., 1.),
                p(1., 1., 0.5),
                p(1., 1., 0.),
            ],
            vec![p(1., 1., 0.5), p(0.5, 1., 1.), p(1., 0.5, 1.)],
        ];
        let centre = Vec3::splat(0.45);
        let mut faces = Vec::new();
        for mut f in faces_xyz {
            // orient outward (the cell is convex)
            let c = f.iter().sum::<Vec3>() / f.len() as f64;
            let n: Vec3 = (0..f.len())
                .map(|i| (f[i] - c).cross(f[(i + 1) % f.len()] - c))
                .sum();
            if n.dot(c - centre) < 0.0 {
                f.reverse();
            }
            faces.push(f.into_iter().map(|q| pts.id(q)).collect::<Vec<u32>>());
        }
        let mut cells = PolyhedronCells::new(std::mem::take(&mut pts.pts));
        cells.push_cell(faces.iter().map(|f| (f.as_slice(), true)));
        cells
    }

    #[test]
    fn clipped_corner_cut_areas() {
        let cells = clipped_cube();
        for value in [0.3, 0.5, 0.75, 0.9, 1.0] {
            let polys = slice_cells(&cells, AxisPlane { axis: 2, value });
            assert_eq!(polys.len(), 1);
            // exact: the unit square minus the triangle x + y > 2.5 - z, legs z - 0.5 (for z > 0.5)
            let want = 1.0 - 0.5 * (value - 0.5f64).max(0.0).powi(2);
            assert!(
                (polys[0].signed_area() - want).abs() < 1e-14,
                "{value}: {}",
                polys[0].signed_area()
            );
            let corners = if value > 0.5 { 5 } else { 4 };
            assert_eq!(polys[0].polygon.len(), corners);
            assert!(polys[0].wall.iter().all(|&w| w));
        }
    }

    /// One ring-shaped cell: the square [0,3]^2 minus the hole [1,2]^2, z in [0,1]; its top and
    /// bottom are four trapezoids each. Faces are oriented by their known outward normals.
    fn ring_cell() -> PolyhedronCells {
        let mut pts = Points::default();
        let p = |x: f64, y: f64, z: f64| Vec3::new(x, y, z);
        let mut faces: Vec<(Vec<Vec3>, Vec3)> = Vec::new();
        let side = |a: [f64; 2], b: [f64; 2], n: Vec3| {
            (
                vec![
                    p(a[0], a[1], 0.0),
                    p(b[0], b[1], 0.0),
                    p(b[0], b[1], 1.0),
                    p(a[0], a[1], 1.0),
                ],
                n,
            )
        };
        faces.push(side([0.0, 0.0], [0.0, 3.0], -Vec3::X));
        faces.push(side([3.0, 0.0], [3.0, 3.0], Vec3::X));
        faces.push(side([0.0, 0.0], [3.0, 0.0], -Vec3::Y));
        faces.push(side([0.0, 3.0], [3.0, 3.0], Vec3::Y));
        faces.push(side([1.0, 1.0], [1.0, 2.0], Vec3::X)); // hole walls face into the hole
        faces.push(side([2.0, 1.0], [2.0, 2.0], -Vec3::X));
        faces.push(side([1.0, 1.0], [2.0, 1.0], Vec3::Y));
        faces.push(side([1.0, 2.0], [2.0, 2.0], -Vec3::Y));
        let outer = [[0.0, 0.0], [3.0, 0.0], [3.0, 3.0], [0.0, 3.0]];
        let inner = [[1.0, 1.0], [2.0, 1.0], [2.0, 2.0], [1.0, 2.0]];
        for (z, n) in [(0.0, -Vec3::Z), (1.0, Vec3::Z)] {
            for k in 0..4 {
                let (a, b, c, d) = (outer[k], outer[(k + 1) % 4], inner[(k + 1) % 4], inner[k]);
                faces.push((
                    vec![
                        p(a[0], a[1], z),
                        p(b[0], b[1], z),
                        p(c[0], c[1], z),
                        p(d[0], d[1], z),
                    ],
                    n,
                ));
            }
        }
        let mut ids = Vec::new();
        for (mut f, n) in faces {
            let c = f[0];
            let area: Vec3 = (1..f.len() - 1)
                .map(|i| (f[i] - c).cross(f[i + 1] - c))
                .sum();
            if area.dot(n) < 0.0 {
                f.reverse();
            }
            ids.push(f.into_iter().map(|q| pts.id(q)).collect::<Vec<u32>>());
        }
        let mut cells = PolyhedronCells::new(std::mem::take(&mut pts.pts));
        cells.push_cell(ids.iter().map(|f| (f.as_slice(), false)));
        cells
    }

    #[test]
    fn a_hole_runs_clockwise() {
        let polys = slice_cells(
            &ring_cell(),
            AxisPlane {
                axis: 2,
                value: 0.5,
            },
        );
        let mut areas: Vec<f64> = polys.iter().map(|p| p.signed_area()).collect();
        areas.sort_by(f64::total_cmp);
        // exact: outer square 3 x 3 counter-clockwise, hole 1 x 1 clockwise, section 9 - 1
        assert_eq!(areas, vec![-1.0, 9.0]);
        let across = slice_cells(
            &ring_cell(),
            AxisPlane {
                axis: 0,
                value: 1.5,
            },
        );
        // exact: across the hole the section is two rectangles 1 x 1 (y in [0,1] and [2,3])
        assert_eq!(across.len(), 2);
        assert!(across.iter().all(|p| p.signed_area() == 1.0));
    }

    #[test]
    fn bad_references_are_skipped_not_panicking() {
        let mut cells = PolyhedronCells::new(vec![Vec3::ZERO; 3]);
        cells.push_cell([(&[0u32, 1, 7][..], false)]);
        assert!(slice_cells(
            &cells,
            AxisPlane {
                axis: 9,
                value: 0.0
            }
        )
        .is_empty());
        let mut m = volume_mesh(&[cube(Vec3::ZERO, 1.0)]);
        m.owner[0] = 99;
        assert_eq!(
            slice_cells(
                &VolumeMeshCells::new(&m),
                AxisPlane {
                    axis: 2,
                    value: 0.5
                }
            )
            .len(),
            0
        );
    }

    fn count_colour(pm: &Pixmap, c: Rgb) -> usize {
        pm.pixels()
            .iter()
            .filter(|p| (p.red(), p.green(), p.blue()) == (c[0], c[1], c[2]))
            .count()
    }

    #[test]
    fn rendering_makes_a_png_of_the_right_size() {
        let boxes = refined_block();
        let cells = polyhedra(&boxes, cube(Vec3::ZERO, 1.0));
        let polys = slice_cells(
            &cells,
            AxisPlane {
                axis: 2,
                value: 0.1,
            },
        );
        let levels: Vec<f64> = boxes
            .iter()
            .map(|(l, h)| if h.x - l.x < 0.3 { 2.0 } else { 1.0 })
            .collect();
        let style = SliceStyle {
            title: "refined block".into(),
            ..Default::default()
        };
        let png = render_slice(
            &polys,
            &levels,
            ColourBy::Level,
            AxisPlane {
                axis: 2,
                value: 0.1,
            },
            &style,
        )
        .unwrap();
        let pm = Pixmap::decode_png(&png).unwrap();
        assert_eq!((pm.width(), pm.height()), (1200, 900));
        // both level colours fill a good part of the plot: coarse cells 3/4 of the area, fine 1/4
        let (c1, c2) = (
            count_colour(&pm, category(1)),
            count_colour(&pm, category(2)),
        );
        assert!(c1 > 2 * c2 && c2 > 20_000, "{c1} {c2}");
        let q: Vec<f64> = (0..boxes.len()).map(|i| i as f64).collect();
        let png = render_slice(
            &polys,
            &q,
            ColourBy::Quality,
            AxisPlane {
                axis: 2,
                value: 0.1,
            },
            &style,
        )
        .unwrap();
        assert!(Pixmap::decode_png(&png).is_ok());
        assert!(matches!(
            render_slice(
                &polys,
                &q[..3],
                ColourBy::Quality,
                AxisPlane {
                    axis: 2,
                    value: 0.1
                },
                &style
            ),
            Err(PictureError::Values { .. })
        ));
        assert!(matches!(
            render_slice(
                &[],
                &q,
                ColourBy::Level,
                AxisPlane {
                    axis: 2,
                    value: 0.1
                },
                &style
            ),
            Err(PictureError::Empty(_))
        ));
        let tiny = SliceStyle { width: 10, ..style };
        assert!(matches!(
            render_slice(
                &polys,
                &q,
                ColourBy::Level,
                AxisPlane {
                    axis: 2,
                    value: 0.1
                },
                &tiny
            ),
            Err(PictureError::Size(..))
        ));
    }

    /// A quadtree-refined slab around a square body (cells inside the body removed; its sides
    /// are walls), for looking at the pictures: `OCTOCUT_PICTURES=/tmp cargo test -p octocut-writers`.
    #[test]
    fn sample_pictures() {
        let body = ([3.0, 2.5], [4.5, 3.5]);
        let mut boxes = Vec::new();
        let mut levels = Vec::new();
        let mut stack: Vec<([f64; 2], f64, u8)> = Vec::new();
        for i in 0..8 {
            for j in 0..6 {
                stack.push(([i as f64, j as f64], 1.0, 0));
            }
        }
        while let Some((lo, s, lev)) = stack.pop() {
            let gap = |a: f64, b0: f64, b1: f64| (b0 - a - s).max(a - b1).max(0.0);
            let d = gap(lo[0], body.0[0], body.1[0]).max(gap(lo[1], body.0[1], body.1[1]));
            if lev < 3 && d < 0.6 * s * 2.0 {
                for k in 0..4 {
                    let h = 0.5 * s;
                    stack.push((
                        [lo[0] + h * (k & 1) as f64, lo[1] + h * (k >> 1) as f64],
                        h,
                        lev + 1,
                    ));
                }
            } else if !(lo[0] >= body.0[0]
                && lo[0] + s <= body.1[0]
                && lo[1] >= body.0[1]
                && lo[1] + s <= body.1[1])
            {
                boxes.push((
                    Vec3::new(lo[0], lo[1], 0.0),
                    Vec3::new(lo[0] + s, lo[1] + s, 1.0),
                ));
                levels.push(lev as f64);
            }
        }
        let cells = polyhedra(&boxes, (Vec3::ZERO, Vec3::new(8.0, 6.0, 1.0)));
        let plane = AxisPlane {
            axis: 2,
            value: 0.5,
        };
        let polys = slice_cells(&cells, plane);
        // exact: the slab's cross-section 8 x 6 minus the body 1.5 x 1
        assert!((area(&polys) - (48.0 - 1.5)).abs() < 1e-12);
        let q: Vec<f64> = boxes
            .iter()
            .map(|(l, h)| ((l.x + h.x) * 0.5 - 3.75).hypot((l.y + h.y) * 0.5 - 3.0) * 9.0)
            .collect();
        let style = SliceStyle {
            title: "sample: levels".into(),
            ..Default::default()
        };
        let a = render_slice(&polys, &levels, ColourBy::Level, plane, &style).unwrap();
        let style = SliceStyle {
            title: "sample: quality".into(),
            value_name: "distance (deg)".into(),
            view: Some(([2.0, 1.5], [6.0, 4.5])),
            ..Default::default()
        };
        let b = render_slice(&polys, &q, ColourBy::Quality, plane, &style).unwrap();
        let regions: Vec<f64> = boxes
            .iter()
            .map(|(l, _)| {
                if l.x >= 5.0 {
                    0.0
                } else if l.y < 2.0 {
                    1.0
                } else {
                    NO_REGION as f64
                }
            })
            .collect();
        let style = SliceStyle {
            title: "sample: regions".into(),
            category_names: vec!["wake".into(), "near ground".into()],
            ..Default::default()
        };
        let c = render_slice(&polys, &regions, ColourBy::Region, plane, &style).unwrap();
        let pm = Pixmap::decode_png(&a).unwrap();
        assert!(count_colour(&pm, INK) > 2_000); // walls, axes and labels
        if let Ok(dir) = std::env::var("OCTOCUT_PICTURES") {
            std::fs::write(std::path::Path::new(&dir).join("slice_levels.png"), &a).unwrap();
            std::fs::write(std::path::Path::new(&dir).join("slice_quality.png"), &b).unwrap();
            std::fs::write(std::path::Path::new(&dir).join("slice_regions.png"), &c).unwrap();
        }
    }
}
