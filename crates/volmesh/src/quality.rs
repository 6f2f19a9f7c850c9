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
//! Cell centroids are volume-weighted ([`crate::geometry`]). Results do not depend on the
//! thread count.

use crate::geometry::MeshGeometry;
use crate::mesh::VolumeMesh;
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

impl Histogram {
    fn new(edges: &[f64], values: impl Iterator<Item = f64>) -> Histogram {
        let mut counts = vec![0u64; edges.len()];
        for v in values {
            let i = edges.partition_point(|&e| e <= v).saturating_sub(1);
            counts[i] += 1;
        }
        Histogram {
            edges: edges.to_vec(),
            counts,
        }
    }
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
fn interior_measures(mesh: &VolumeMesh, g: &MeshGeometry, f: usize) -> (f64, f64, f64) {
    let (o, n) = (mesh.owner[f] as usize, mesh.neighbour[f] as usize);
    let (p, q) = (g.cell_centroid[o], g.cell_centroid[n]);
    let d = q - p;
    let a = g.face_area[f];
    let nonorth = angle_deg(a, d);
    let dn = d.dot(a);
    let skew = if dn != 0.0 && d.length() > 0.0 {
        let t = (g.face_centroid[f] - p).dot(a) / dn;
        (g.face_centroid[f] - (p + t * d)).length() / d.length()
    } else {
        f64::MAX
    };
    let (vo, vn) = (g.cell_volume[o], g.cell_volume[n]);
    let ratio = if vo.min(vn) > 0.0 {
        vo.max(vn) / vo.min(vn)
    } else {
        f64::MAX
    };
    (nonorth, skew, ratio)
}

/// Computes every measure; `cell_size(level)` is the edge of a full cube of that level.
///
/// ```
/// use octocut_volmesh::{quality, testmesh};
/// let m = testmesh::block(3, 0.5);
/// let q = quality(&m, |_| 0.5);
/// assert_eq!(q.non_orthogonality.max, 0.0); // exact: cube centroids lie on the face normal
/// assert_eq!(q.volume_ratio.max, 1.0);
/// ```
pub fn quality(mesh: &VolumeMesh, cell_size: impl Fn(u8) -> f64 + Sync) -> QualityReport {
    let g = MeshGeometry::new(mesh);
    let ni = mesh.n_interior_faces();
    let nf = mesh.n_faces();
    let inner: Vec<(f64, f64, f64)> = (0..ni)
        .into_par_iter()
        .map(|f| interior_measures(mesh, &g, f))
        .collect();
    let bnd: Vec<f64> = (ni..nf)
        .into_par_iter()
        .map(|f| {
            let o = mesh.owner[f] as usize;
            angle_deg(g.face_area[f], g.face_centroid[f] - g.cell_centroid[o])
        })
        .collect();
    let cells: Vec<(f64, f64, f64, f64, f64, f64)> = (0..mesh.n_cells())
        .into_par_iter()
        .map(|c| {
            let (mut no, mut sk, mut vr) = (0.0f64, 0.0f64, 1.0f64);
            let (mut dmin, mut dmax) = (f64::INFINITY, 0.0f64);
            let x = g.cell_centroid[c];
            for &f in g.cell_faces.of(c) {
                let f = f as usize;
                if f < ni {
                    let m = inner[f];
                    no = no.max(m.0);
                    sk = sk.max(m.1);
                    vr = vr.max(m.2);
                } else {
                    no = no.max(bnd[f - ni]);
                }
                let a = g.face_area[f];
                let l = a.length();
                if l > 0.0 {
                    let dist = ((g.face_centroid[f] - x).dot(a) / l).abs();
                    dmin = dmin.min(dist);
                    dmax = dmax.max(dist);
                }
            }
            let aspect = if dmin > 0.0 && dmin.is_finite() {
                (dmax / dmin).min(ASPECT_CAP)
            } else {
                ASPECT_CAP
            };
            let h = cell_size(mesh.cell_level[c]);
            let frac = g.cell_volume[c] / (h * h * h);
            (no, sk, vr, frac, aspect, 0.0)
        })
        .collect();

    let face_place = |f: usize, value: f64| Place {
        value,
        face: Some(f as u32),
        cell: mesh.owner[f],
        other_cell: mesh.neighbour.get(f).copied(),
        at: g.face_centroid[f],
    };
    let cell_place = |c: usize, value: f64| Place {
        value,
        face: None,
        cell: c as u32,
        other_cell: None,
        at: g.cell_centroid[c],
    };

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
    QualityReport {
        non_orthogonality: stats(
            "non_orthogonality",
            inner.iter().map(|m| m.0).collect(),
            &deg_bins,
            nonorth_t.clone(),
            &face_place,
        ),
        boundary_non_orthogonality: stats(
            "boundary_non_orthogonality",
            bnd.clone(),
            &deg_bins,
            nonorth_t,
            |i, v| face_place(i + ni, v),
        ),
        skewness: stats(
            "skewness",
            inner.iter().map(|m| m.1).collect(),
            &skew_bins,
            Threshold {
                value: 0.5,
                above: true,
                source: "our choice: no published limit is known to us for this normalisation \
                         (intersection offset of half the centroid distance)"
                    .into(),
            },
            &face_place,
        ),
        volume_ratio: stats(
            "volume_ratio",
            inner.iter().map(|m| m.2).collect(),
            &ratio_bins,
            Threshold {
                value: 8.0,
                above: true,
                source: "exact: 8 is the largest ratio of two uncut cells of a 2:1 balanced octree"
                    .into(),
            },
            &face_place,
        ),
        cut_fraction: stats(
            "cut_fraction",
            cells.iter().map(|c| c.3).collect(),
            &frac_bins,
            Threshold {
                value: 0.1,
                above: false,
                source: "common practice (from memory): cut cells below about a tenth of a full \
                         cell are merged or flagged"
                    .into(),
            },
            &cell_place,
        ),
        aspect_ratio: stats(
            "aspect_ratio",
            cells.iter().map(|c| c.4).collect(),
            &aspect_bins,
            Threshold {
                value: 20.0,
                above: true,
                source: "our choice".into(),
            },
            &cell_place,
        ),
        per_cell: CellQuality {
            non_orthogonality: cells.iter().map(|c| c.0).collect(),
            skewness: cells.iter().map(|c| c.1).collect(),
            volume_ratio: cells.iter().map(|c| c.2).collect(),
            cut_fraction: cells.iter().map(|c| c.3).collect(),
            aspect_ratio: cells.iter().map(|c| c.4).collect(),
        },
    }
}

fn stats(
    name: &str,
    values: Vec<f64>,
    bins: &[f64],
    threshold: Threshold,
    place: impl Fn(usize, f64) -> Place,
) -> MeasureStats {
    let n = values.len();
    let (mut min, mut max, mut sum) = (f64::INFINITY, f64::NEG_INFINITY, 0.0);
    for &v in &values {
        min = min.min(v);
        max = max.max(v);
        sum += v;
    }
    if n == 0 {
        (min, max) = (0.0, 0.0);
    }
    let flagged = values
        .iter()
        .filter(|&&v| {
            let slack = 1e-9 * threshold.value.abs();
            if threshold.above {
                v > threshold.value + slack
            } else {
                v < threshold.value - slack
            }
        })
        .count() as u64;
    let mut order: Vec<usize> = (0..n).collect();
    let bad = |v: f64| if threshold.above { v } else { -v };
    let worse = |a: &usize, b: &usize| bad(values[*b]).total_cmp(&bad(values[*a])).then(a.cmp(b));
    if n > N_WORST {
        order.select_nth_unstable_by(N_WORST, worse);
        order.truncate(N_WORST);
    }
    order.sort_by(worse);
    let worst = order
        .iter()
        .take(N_WORST)
        .map(|&i| place(i, values[i]))
        .collect();
    MeasureStats {
        name: name.into(),
        count: n as u64,
        min,
        max,
        mean: if n > 0 { sum / n as f64 } else { 0.0 },
        histogram: Histogram::new(bins, values.iter().copied()),
        worst,
        threshold,
        flagged,
    }
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
