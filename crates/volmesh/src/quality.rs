//! Mesh quality measures of a [`VolumeMesh`], per face and per cell, with summary statistics.
//!
//! Definitions follow Moukalled, Mangani and Darwish 2016, "The Finite Volume Method in
//! Computational Fluid Dynamics", mesh-quality chapter (formulas stated here from memory):
//! with `P`, `N` the centroids of a face's owner and neighbour, `d = N - P`, `n` the face unit
//! normal and `f` the face centroid,
//! - non-orthogonality = angle between `n` and `d`, in degrees;
//! - skewness = `|f - x|/|d|`, `x` where the line `P + t d` crosses the face plane;
//! - volume ratio = larger / smaller of the two cell volumes.
//!
//! On a boundary face, non-orthogonality is the angle between `n` and `f - P` (our choice,
//! the boundary analogue of the interior definition). Per cell:
//! - cut fraction = cell volume / volume of the full cube of its level;
//! - aspect ratio = largest / smallest distance from the cell centroid to its faces' planes
//!   (our definition: exactly `a_max/a_min` for a box of edges `a`, 1 for any cube however its
//!   sides are split by hanging faces, large for slivers of any orientation; 1e12 caps a
//!   degenerate cell);
//! - the worst (largest) of its faces' non-orthogonality, skewness and volume ratio.
//!
//! Cell centroids are volume-weighted ([`crate::geometry`]). Nothing is stored per face (see
//! [`quality`]); sums are taken per chunk of cells, then in order, so results do not depend on the
//! thread count.

#[cfg(test)]
use crate::geometry::MeshGeometry;
use crate::geometry::{polygon_area_centroid, CellGeometry};
use crate::mesh::VolumeMesh;
use crate::validation::CHUNK;
use octocut_surface::Vec3;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Cap of the aspect ratio of a degenerate cell.
pub const ASPECT_CAP: f64 = 1e12;
/// Number of worst places kept per measure.
pub const N_WORST: usize = 10;

/// A fixed-bin histogram: `counts[i]` counts values in `[edges[i], edges[i+1])`; the last bin
/// is open above and values below `edges[0]` go into the first bin.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Histogram {
    pub edges: Vec<f64>,
    pub counts: Vec<u64>,
}

/// Where a measure is at its worst.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Place {
    pub value: f64,
    /// The face (face measures) or `None` (cell measures).
    pub face: Option<u32>,
    /// The owner cell (face measures) or the cell.
    pub cell: u32,
    /// The neighbour cell of an interior face.
    pub other_cell: Option<u32>,
    /// Face centroid (face measures) or cell centroid.
    pub at: Vec3,
}

/// A threshold beyond which a value is flagged, with where the figure comes from.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Threshold {
    pub value: f64,
    /// True when values above `value` are bad, false when values below are (beyond a
    /// relative slack of 1e-9, so round-off at the limit is not flagged).
    pub above: bool,
    pub source: String,
}

/// Summary of one measure.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MeasureStats {
    pub name: String,
    pub count: u64,
    pub min: f64,
    pub max: f64,
    pub mean: f64,
    pub histogram: Histogram,
    /// The [`N_WORST`] worst places, worst first (ties by id).
    pub worst: Vec<Place>,
    pub threshold: Threshold,
    /// How many values the threshold flags.
    pub flagged: u64,
}

/// Per-cell values, ready to be written as cell data.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct CellQuality {
    /// Cell volumes ([`crate::geometry::cell_volume_centroid`]), kept so that writers need
    /// not compute them again; not among [`CellQuality::named`] (writers name it themselves).
    pub volume: Vec<f64>,
    pub non_orthogonality: Vec<f64>,
    pub skewness: Vec<f64>,
    pub volume_ratio: Vec<f64>,
    pub cut_fraction: Vec<f64>,
    pub aspect_ratio: Vec<f64>,
}

impl CellQuality {
    /// The arrays with their cell-data names.
    pub fn named(&self) -> [(&'static str, &[f64]); 5] {
        [
            ("non_orthogonality", &self.non_orthogonality),
            ("skewness", &self.skewness),
            ("volume_ratio", &self.volume_ratio),
            ("cut_fraction", &self.cut_fraction),
            ("aspect_ratio", &self.aspect_ratio),
        ]
    }
}

/// All quality figures of a mesh.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct QualityReport {
    /// Interior-face non-orthogonality (degrees).
    pub non_orthogonality: MeasureStats,
    /// Boundary-face non-orthogonality (degrees).
    pub boundary_non_orthogonality: MeasureStats,
    pub skewness: MeasureStats,
    pub volume_ratio: MeasureStats,
    pub cut_fraction: MeasureStats,
    pub aspect_ratio: MeasureStats,
    /// Per cell (worst of its faces for face measures; boundary faces count in
    /// non-orthogonality).
    #[serde(skip)]
    pub per_cell: CellQuality,
}

fn angle_deg(a: Vec3, b: Vec3) -> f64 {
    let l = a.length() * b.length();
    if l == 0.0 {
        return 90.0;
    }
    (a.dot(b) / l).clamp(-1.0, 1.0).acos().to_degrees()
}

/// Non-orthogonality (degrees), skewness and volume ratio of interior face `f`.
#[cfg(test)]
fn interior_measures(mesh: &VolumeMesh, g: &MeshGeometry, f: usize) -> (f64, f64, f64) {
    let (o, n) = (mesh.owner[f] as usize, mesh.neighbour[f] as usize);
    face_measures(
        g.face_area[f],
        g.face_centroid[f],
        [g.cell_centroid[o], g.cell_centroid[n]],
        [g.cell_volume[o], g.cell_volume[n]],
    )
}

/// Non-orthogonality (degrees), skewness and volume ratio of an interior face of area vector
/// `a` and centroid `fc` between cells of centroids `pq` and volumes `v`.
fn face_measures(a: Vec3, fc: Vec3, pq: [Vec3; 2], v: [f64; 2]) -> (f64, f64, f64) {
    let [p, q] = pq;
    let d = q - p;
    let nonorth = angle_deg(a, d);
    let dn = d.dot(a);
    let skew = if dn != 0.0 && d.length() > 0.0 {
        let t = (fc - p).dot(a) / dn;
        (fc - (p + t * d)).length() / d.length()
    } else {
        f64::MAX
    };
    let [vo, vn] = v;
    let ratio = if vo.min(vn) > 0.0 {
        vo.max(vn) / vo.min(vn)
    } else {
        f64::MAX
    };
    (nonorth, skew, ratio)
}

/// Running figures of one face measure over a chunk of faces (merged in chunk order).
#[derive(Clone, Debug)]
struct Acc {
    count: u64,
    min: f64,
    max: f64,
    sum: f64,
    counts: Vec<u64>,
    flagged: u64,
    /// The worst values with their face ids (at most [`N_WORST`], any order).
    worst: Vec<(f64, u32)>,
    /// Index in `worst` of its least bad value once `worst` is full.
    least: usize,
    above: bool,
}

impl Acc {
    fn new(bins: usize, above: bool) -> Acc {
        Acc {
            count: 0,
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            sum: 0.0,
            counts: vec![0; bins],
            flagged: 0,
            worst: Vec::with_capacity(N_WORST),
            least: 0,
            above,
        }
    }

    /// True when `a` is worse than `b` (larger badness, ties by lower id).
    fn worse(&self, a: (f64, u32), b: (f64, u32)) -> bool {
        let bad = |v: f64| if self.above { v } else { -v };
        bad(a.0).total_cmp(&bad(b.0)).then(b.1.cmp(&a.1)).is_gt()
    }

    fn keep_worst(&mut self, x: (f64, u32)) {
        if self.worst.len() < N_WORST {
            self.worst.push(x);
            if self.worst.len() == N_WORST {
                self.find_least();
            }
            return;
        }
        // replace the least bad kept value when `x` is worse
        if self.worse(x, self.worst[self.least]) {
            self.worst[self.least] = x;
            self.find_least();
        }
    }

    /// Points `least` at the least bad kept value.
    fn find_least(&mut self) {
        let mut least = 0;
        for i in 1..self.worst.len() {
            if self.worse(self.worst[least], self.worst[i]) {
                least = i;
            }
        }
        self.least = least;
    }

    fn push(&mut self, v: f64, id: u32, bins: &[f64], t: &Threshold) {
        self.count += 1;
        self.min = self.min.min(v);
        self.max = self.max.max(v);
        self.sum += v;
        self.counts[bins.partition_point(|&e| e <= v).saturating_sub(1)] += 1;
        self.flagged += flags(v, t) as u64;
        self.keep_worst((v, id));
    }

    fn merge(&mut self, o: &Acc) {
        self.count += o.count;
        self.min = self.min.min(o.min);
        self.max = self.max.max(o.max);
        self.sum += o.sum;
        for (a, b) in self.counts.iter_mut().zip(&o.counts) {
            *a += b;
        }
        self.flagged += o.flagged;
        for &x in &o.worst {
            self.keep_worst(x);
        }
    }

    fn finish(
        mut self,
        name: &str,
        bins: &[f64],
        threshold: Threshold,
        place: impl Fn(usize, f64) -> Place,
    ) -> MeasureStats {
        let n = self.count;
        if n == 0 {
            (self.min, self.max) = (0.0, 0.0);
        }
        let mut worst = std::mem::take(&mut self.worst);
        worst.sort_by(|&a, &b| {
            if self.worse(a, b) {
                std::cmp::Ordering::Less
            } else {
                std::cmp::Ordering::Greater
            }
        });
        MeasureStats {
            name: name.into(),
            count: n,
            min: self.min,
            max: self.max,
            mean: if n > 0 { self.sum / n as f64 } else { 0.0 },
            histogram: Histogram {
                edges: bins.to_vec(),
                counts: self.counts,
            },
            worst: worst.iter().map(|&(v, i)| place(i as usize, v)).collect(),
            threshold,
            flagged: self.flagged,
        }
    }
}

/// True when the threshold flags `v` (beyond a relative slack of 1e-9).
fn flags(v: f64, t: &Threshold) -> bool {
    let slack = 1e-9 * t.value.abs();
    if t.above {
        v > t.value + slack
    } else {
        v < t.value - slack
    }
}

/// Computes every measure; `cell_size(level)` is the edge of a full cube of that level.
///
/// Computes the cell geometry ([`CellGeometry::new`]), then [`quality_with`].
///
/// ```
/// use octocut_volmesh::{quality, testmesh};
/// let m = testmesh::block(3, 0.5);
/// let q = quality(&m, |_| 0.5);
/// assert_eq!(q.non_orthogonality.max, 0.0); // exact: cube centroids lie on the face normal
/// assert_eq!(q.volume_ratio.max, 1.0);
/// ```
pub fn quality(mesh: &VolumeMesh, cell_size: impl Fn(u8) -> f64 + Sync) -> QualityReport {
    quality_with(mesh, CellGeometry::new(mesh), cell_size)
}

/// [`quality`] from the cell geometry already computed, e.g. by
/// [`VolumeMesh::validate_keeping_geometry`]; the volumes move into
/// [`CellQuality::volume`], the rest is freed before returning. The report is the one
/// [`quality`] gives.
///
/// Streams over the cells in parallel fixed chunks: every face's area vector and centroid are
/// computed on the fly from each of its cells, the per-cell arrays filled and the face figures
/// gathered (each face counted once, by its owner); nothing is stored per face. Sums are taken
/// per chunk, then over the chunks in order.
///
/// # Panics
/// When `geometry` has not one entry per cell of `mesh`.
///
/// ```
/// use octocut_volmesh::{quality, quality::quality_with, testmesh};
/// let m = testmesh::refined_block(2, 1.0, &[[1, 0, 0]]);
/// let (_, g) = m.validate_keeping_geometry();
/// assert_eq!(quality_with(&m, g.unwrap(), |l| 0.5f64.powi(l as i32)), quality(&m, |l| 0.5f64.powi(l as i32)));
/// ```
pub fn quality_with(
    mesh: &VolumeMesh,
    geometry: CellGeometry,
    cell_size: impl Fn(u8) -> f64 + Sync,
) -> QualityReport {
    let ni = mesh.n_interior_faces();
    let nc = mesh.n_cells();
    let pts = &mesh.points;
    let CellGeometry {
        faces: cf,
        volume,
        centroid,
    } = geometry;
    assert!(
        cf.offsets.len() == nc + 1 && volume.len() == nc && centroid.len() == nc,
        "cell geometry of another mesh"
    );

    let deg_bins: Vec<f64> = (0..18).map(|i| 5.0 * i as f64).collect();
    let skew_bins: Vec<f64> = (0..20).map(|i| 0.05 * i as f64).collect();
    let ratio_bins = [1.0, 1.5, 2.0, 4.0, 8.0, 8.0 + 1e-9, 16.0, 32.0, 64.0, 128.0];
    let frac_bins: Vec<f64> = (0..11).map(|i| 0.1 * i as f64).collect();
    let aspect_bins = [1.0, 1.5, 2.0, 3.0, 5.0, 10.0, 20.0, 50.0, 100.0, 1000.0];
    let nonorth_t = Threshold {
        value: 70.0,
        above: true,
        source: "common practice (from memory): faces above 70 degrees are commonly flagged".into(),
    };
    let skew_t = Threshold {
        value: 0.5,
        above: true,
        source: "our choice: no published limit is known to us for this normalisation \
                 (intersection offset of half the centroid distance)"
            .into(),
    };
    let ratio_t = Threshold {
        value: 8.0,
        above: true,
        source: "exact: 8 is the largest ratio of two uncut cells of a 2:1 balanced octree".into(),
    };

    let mut pc = CellQuality {
        volume: Vec::new(),
        non_orthogonality: vec![0.0; nc],
        skewness: vec![0.0; nc],
        volume_ratio: vec![0.0; nc],
        cut_fraction: vec![0.0; nc],
        aspect_ratio: vec![0.0; nc],
    };
    let accs: Vec<[Acc; 4]> = (
        pc.non_orthogonality.par_chunks_mut(CHUNK),
        pc.skewness.par_chunks_mut(CHUNK),
        pc.volume_ratio.par_chunks_mut(CHUNK),
        pc.cut_fraction.par_chunks_mut(CHUNK),
        pc.aspect_ratio.par_chunks_mut(CHUNK),
    )
        .into_par_iter()
        .enumerate()
        .map(|(k, (o_no, o_sk, o_vr, o_fr, o_ar))| {
            // interior non-orthogonality, boundary non-orthogonality, skewness, volume ratio
            let mut acc = [
                Acc::new(deg_bins.len(), true),
                Acc::new(deg_bins.len(), true),
                Acc::new(skew_bins.len(), true),
                Acc::new(ratio_bins.len(), true),
            ];
            // worst face values and plane distances of the chunk's cells; a face between two
            // cells of the chunk is computed once, by its owner, for both
            let base = k * CHUNK;
            let len = o_no.len();
            let inside = |c: usize| (base..base + len).contains(&c);
            let mut dmin = vec![f64::INFINITY; len];
            let mut dmax = vec![0.0f64; len];
            o_no.fill(0.0);
            o_sk.fill(0.0);
            o_vr.fill(1.0);
            let dist = |a: Vec3, fc: Vec3, c: usize| {
                let l = a.length();
                (l > 0.0).then(|| ((fc - centroid[c]).dot(a) / l).abs())
            };
            for i in 0..len {
                let c = base + i;
                for &f in cf.of(c) {
                    let f = f as usize;
                    let o = mesh.owner[f] as usize;
                    let mut cells = [c, usize::MAX];
                    let (a, fc) = if f < ni {
                        let n = mesh.neighbour[f] as usize;
                        if o != c && inside(o) {
                            continue; // done from its owner
                        }
                        let (a, fc) = polygon_area_centroid(pts, mesh.face(f));
                        let m = face_measures(
                            a,
                            fc,
                            [centroid[o], centroid[n]],
                            [volume[o], volume[n]],
                        );
                        if o == c {
                            acc[0].push(m.0, f as u32, &deg_bins, &nonorth_t);
                            acc[2].push(m.1, f as u32, &skew_bins, &skew_t);
                            acc[3].push(m.2, f as u32, &ratio_bins, &ratio_t);
                            if inside(n) && n != c {
                                cells[1] = n;
                            }
                        }
                        for &x in cells.iter().filter(|&&x| x != usize::MAX) {
                            let j = x - base;
                            o_no[j] = o_no[j].max(m.0);
                            o_sk[j] = o_sk[j].max(m.1);
                            o_vr[j] = o_vr[j].max(m.2);
                        }
                        (a, fc)
                    } else {
                        let (a, fc) = polygon_area_centroid(pts, mesh.face(f));
                        let b = angle_deg(a, fc - centroid[o]);
                        o_no[i] = o_no[i].max(b);
                        acc[1].push(b, f as u32, &deg_bins, &nonorth_t);
                        (a, fc)
                    };
                    for &x in cells.iter().filter(|&&x| x != usize::MAX) {
                        if let Some(d) = dist(a, fc, x) {
                            let j = x - base;
                            dmin[j] = dmin[j].min(d);
                            dmax[j] = dmax[j].max(d);
                        }
                    }
                }
            }
            for i in 0..len {
                let c = base + i;
                o_ar[i] = if dmin[i] > 0.0 && dmin[i].is_finite() {
                    (dmax[i] / dmin[i]).min(ASPECT_CAP)
                } else {
                    ASPECT_CAP
                };
                let h = cell_size(mesh.cell_level[c]);
                o_fr[i] = volume[c] / (h * h * h);
            }
            acc
        })
        .collect();
    drop(cf);
    let mut total = [
        Acc::new(deg_bins.len(), true),
        Acc::new(deg_bins.len(), true),
        Acc::new(skew_bins.len(), true),
        Acc::new(ratio_bins.len(), true),
    ];
    for a in &accs {
        for (t, x) in total.iter_mut().zip(a) {
            t.merge(x);
        }
    }
    let [t_no, t_bnd, t_sk, t_vr] = total;

    let face_place = |f: usize, value: f64| Place {
        value,
        face: Some(f as u32),
        cell: mesh.owner[f],
        other_cell: mesh.neighbour.get(f).copied(),
        at: polygon_area_centroid(pts, mesh.face(f)).1,
    };
    let cell_place = |c: usize, value: f64| Place {
        value,
        face: None,
        cell: c as u32,
        other_cell: None,
        at: centroid[c],
    };
    QualityReport {
        non_orthogonality: t_no.finish(
            "non_orthogonality",
            &deg_bins,
            nonorth_t.clone(),
            face_place,
        ),
        boundary_non_orthogonality: t_bnd.finish(
            "boundary_non_orthogonality",
            &deg_bins,
            nonorth_t,
            face_place,
        ),
        skewness: t_sk.finish("skewness", &skew_bins, skew_t, face_place),
        volume_ratio: t_vr.finish("volume_ratio", &ratio_bins, ratio_t, face_place),
        cut_fraction: stats(
            "cut_fraction",
            &pc.cut_fraction,
            &frac_bins,
            Threshold {
                value: 0.1,
                above: false,
                source: "common practice (from memory): cut cells below about a tenth of a full \
                         cell are merged or flagged"
                    .into(),
            },
            cell_place,
        ),
        aspect_ratio: stats(
            "aspect_ratio",
            &pc.aspect_ratio,
            &aspect_bins,
            Threshold {
                value: 20.0,
                above: true,
                source: "our choice".into(),
            },
            cell_place,
        ),
        per_cell: CellQuality { volume, ..pc },
    }
}

/// Figures of a per-cell measure (ids are cell ids); sums per chunk, then in order.
fn stats(
    name: &str,
    values: &[f64],
    bins: &[f64],
    threshold: Threshold,
    place: impl Fn(usize, f64) -> Place,
) -> MeasureStats {
    let parts: Vec<Acc> = values
        .par_chunks(CHUNK)
        .enumerate()
        .map(|(k, vs)| {
            let mut a = Acc::new(bins.len(), threshold.above);
            for (i, &v) in vs.iter().enumerate() {
                a.push(v, (k * CHUNK + i) as u32, bins, &threshold);
            }
            a
        })
        .collect();
    let mut total = Acc::new(bins.len(), threshold.above);
    for p in &parts {
        total.merge(p);
    }
    total.finish(name, bins, threshold, place)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testmesh;
    use rand::{RngExt, SeedableRng};

    #[test]
    fn uniform_block_is_perfect() {
        let m = testmesh::block(4, 0.25);
        let q = quality(&m, |_| 0.25);
        // exact: on a block of cubes the centroid line is the face normal through the face centre
        for s in [
            &q.non_orthogonality,
            &q.boundary_non_orthogonality,
            &q.skewness,
        ] {
            assert_eq!((s.min, s.max), (0.0, 0.0), "{}", s.name);
        }
        assert_eq!((q.volume_ratio.min, q.volume_ratio.max), (1.0, 1.0));
        assert!(
            (q.cut_fraction.min - 1.0).abs() < 1e-12 && (q.cut_fraction.max - 1.0).abs() < 1e-12
        );
        assert!((q.aspect_ratio.max - 1.0).abs() < 1e-12);
        assert_eq!(q.non_orthogonality.count, 144);
        assert_eq!(q.non_orthogonality.histogram.counts[0], 144);
        assert_eq!(q.per_cell.skewness.len(), 64);
    }

    /// Hand-worked from the definitions: coarse cube [0,2h]^3 (centroid (h,h,h)) and a fine cube
    /// of edge h on its +x side, centroid (2.5h, h/2, h/2): d = (1.5, -0.5, -0.5)h,
    /// |d| = h sqrt(11)/2, cos = 1.5/|d| = 3/sqrt(11); the line meets x = 2h at
    /// (2h, 2h/3, 2h/3), sqrt(2)/6 h from the face centre (2h, h/2, h/2): skewness
    /// sqrt(2)/6 / (sqrt(11)/2) = 0.14213; volume ratio 8h^3/h^3 = 8.
    #[test]
    fn hanging_face_figures() {
        let h = 0.5;
        let m = testmesh::refined_block(3, 2.0 * h, &[[1, 1, 1]]);
        let q = quality(&m, |l| 2.0 * h / (1u32 << l) as f64);
        let nonorth = (3.0 / 11f64.sqrt()).acos().to_degrees();
        let skew = (2f64.sqrt() / 6.0) / (11f64.sqrt() / 2.0);
        assert!((nonorth - 25.2394).abs() < 1e-4 && (skew - 0.14213).abs() < 1e-5);
        let g = MeshGeometry::new(&m);
        let mut hanging = 0;
        for f in 0..m.n_interior_faces() {
            let (o, n) = (m.owner[f] as usize, m.neighbour[f] as usize);
            let (no, sk, vr) = interior_measures(&m, &g, f);
            if m.cell_level[o] != m.cell_level[n] {
                // every sub-face of a coarse side shared with a fine cell: 4 per side, 6 sides
                hanging += 1;
                assert!((no - nonorth).abs() < 1e-9, "{no}");
                assert!((sk - skew).abs() < 1e-12, "{sk}");
                assert!((vr - 8.0).abs() < 1e-12);
            } else {
                assert!(no < 1e-9 && sk < 1e-12 && (vr - 1.0).abs() < 1e-12);
            }
        }
        assert_eq!(hanging, 24);
        assert!((q.non_orthogonality.max - nonorth).abs() < 1e-9);
        assert_eq!(q.non_orthogonality.worst.len(), 10);
        assert!(q.non_orthogonality.worst[0].other_cell.is_some());
        assert_eq!(q.volume_ratio.flagged, 0);
        // uncut cubes stay cubes: aspect 1, full volume
        assert!((q.aspect_ratio.max - 1.0).abs() < 1e-12);
        assert!((q.cut_fraction.min - 1.0).abs() < 1e-12);
    }

    #[test]
    fn no_balanced_uncut_cell_is_worse() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let nonorth = (3.0 / 11f64.sqrt()).acos().to_degrees();
        let skew = (2f64.sqrt() / 6.0) / (11f64.sqrt() / 2.0);
        for _ in 0..3 {
            let refine: Vec<[u32; 3]> = (0..20)
                .map(|_| {
                    [
                        rng.random_range(0..4),
                        rng.random_range(0..4),
                        rng.random_range(0..4),
                    ]
                })
                .collect();
            let m = testmesh::refined_block(4, 1.0, &refine);
            let q = quality(&m, |l| 1.0 / (1u32 << l) as f64);
            for c in 0..m.n_cells() {
                assert!(q.per_cell.non_orthogonality[c] <= nonorth + 1e-9);
                assert!(q.per_cell.skewness[c] <= skew + 1e-12);
                assert!(q.per_cell.volume_ratio[c] <= 8.0 + 1e-12);
            }
            assert!(q.non_orthogonality.flagged == 0 && q.skewness.flagged == 0);
        }
    }

    #[test]
    fn streamed_figures_match_a_direct_computation() {
        // more cells and faces than a chunk, hanging faces in several chunks
        let refine: Vec<[u32; 3]> = (0..17).map(|i| [i, (3 * i) % 17, (5 * i) % 17]).collect();
        let m = testmesh::refined_block(17, 1.0 / 17.0, &refine);
        assert!(m.n_cells() > CHUNK && m.n_interior_faces() > 2 * CHUNK);
        let size = |l: u8| 1.0 / 17.0 / (1u32 << l) as f64;
        let q = quality(&m, size);
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        assert_eq!(one.install(|| quality(&m, size)), q);
        // the same figures from the stored geometry, face by face
        let g = MeshGeometry::new(&m);
        let ni = m.n_interior_faces();
        let mut all: Vec<(f64, usize)> = (0..ni)
            .map(|f| (interior_measures(&m, &g, f).1, f))
            .collect();
        let mean = all.iter().map(|x| x.0).sum::<f64>() / ni as f64;
        assert!((q.skewness.mean - mean).abs() <= 1e-12 * mean);
        assert!(q.skewness.max > 0.1); // hanging faces are skewed (see hanging_face_figures)
        all.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        let want: Vec<u32> = all[..N_WORST].iter().map(|x| x.1 as u32).collect();
        let got: Vec<u32> = q.skewness.worst.iter().map(|p| p.face.unwrap()).collect();
        assert_eq!(got, want);
        assert_eq!(q.skewness.histogram.counts.iter().sum::<u64>(), ni as u64);
        assert_eq!(q.skewness.max, all[0].0);
        let w = &q.skewness.worst[0];
        assert_eq!(w.at, g.face_centroid[w.face.unwrap() as usize]);
        for c in 0..m.n_cells() {
            let h = size(m.cell_level[c]);
            assert_eq!(q.per_cell.cut_fraction[c], g.cell_volume[c] / (h * h * h));
        }
    }

    #[test]
    fn clipped_cube_measures() {
        let m = testmesh::clipped_cube();
        let q = quality(&m, |_| 1.0);
        // exact: 1 - 1/48 of the unit cube
        assert!((q.cut_fraction.min - 47.0 / 48.0).abs() < 1e-14);
        assert!(q.aspect_ratio.max > 1.0 && q.aspect_ratio.max < 1.5);
        assert_eq!(q.non_orthogonality.count, 0);
        assert_eq!(q.boundary_non_orthogonality.count, 7);
        // the cut face's normal (1,1,1)/sqrt(3) is off the centroid line: non-zero angle
        assert!(q.boundary_non_orthogonality.max > 0.0);
        let j = serde_json::to_string(&q).unwrap();
        assert!(j.contains("\"cut_fraction\""));
    }
}
