//! Curvature and sharp-feature detection: does the surface inside a cell turn by more than the
//! feature angle?
//!
//! The spread of a set of unit normals is the largest angle between two of them. It is decided
//! exactly (pairwise, with early exit) for up to [`EXACT_LIMIT`] normals; a quick bound first
//! accepts sets whose component-wise bounding box has a diagonal below the chord `2 sin(a/2)`
//! (any two normals then differ by less than that chord, hence by less than the angle). Larger
//! sets that fail the bound count as spread (conservative: the cell is refined and its children,
//! holding fewer triangles, are decided again). Zero normals (degenerate triangles) are ignored.

use octocut_surface::Vec3;

/// Most normals compared pairwise.
pub const EXACT_LIMIT: usize = 256;

/// A feature-angle test.
///
/// ```
/// use octocut_octree::feature::FeatureTest;
/// use octocut_surface::Vec3;
/// let f = FeatureTest::new(30.0);
/// let n = [Vec3::X, Vec3::new(1.0, 0.1, 0.0).normalize(), Vec3::Y];
/// assert!(!f.spread_exceeds(&n, [0u32, 1].into_iter()));
/// assert!(f.spread_exceeds(&n, [0u32, 1, 2].into_iter()));
/// ```
#[derive(Clone, Copy, Debug)]
pub struct FeatureTest {
    cos: f64,
    chord: f64,
}

impl FeatureTest {
    pub fn new(angle_deg: f64) -> FeatureTest {
        let a = angle_deg.to_radians();
        FeatureTest {
            cos: a.cos(),
            chord: 2.0 * (0.5 * a).sin(),
        }
    }

    /// True when the normals `normals[i]` for `i` in `ids` spread by more than the angle.
    pub fn spread_exceeds(&self, normals: &[Vec3], ids: impl Iterator<Item = u32> + Clone) -> bool {
        let mut lo = Vec3::splat(f64::INFINITY);
        let mut hi = Vec3::splat(f64::NEG_INFINITY);
        let mut count = 0usize;
        for i in ids.clone() {
            let n = normals[i as usize];
            if n != Vec3::ZERO {
                lo = lo.min(n);
                hi = hi.max(n);
                count += 1;
            }
        }
        if count < 2 || (hi - lo).length() <= self.chord {
            return false;
        }
        if count > EXACT_LIMIT {
            return true;
        }
        let v: Vec<Vec3> = ids
            .map(|i| normals[i as usize])
            .filter(|n| *n != Vec3::ZERO)
            .collect();
        for i in 0..v.len() {
            for j in i + 1..v.len() {
                if v[i].dot(v[j]) < self.cos {
                    return true;
                }
            }
        }
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spread_is_the_largest_pairwise_angle() {
        let f = FeatureTest::new(45.0);
        // exact: normals 40 degrees apart do not exceed 45, 50 degrees apart do
        let at = |deg: f64| Vec3::new(deg.to_radians().cos(), deg.to_radians().sin(), 0.0);
        let n = [at(0.0), at(20.0), at(40.0), at(50.0), Vec3::ZERO];
        assert!(!f.spread_exceeds(&n, [0u32, 1, 2, 4].into_iter()));
        assert!(f.spread_exceeds(&n, [0u32, 1, 3].into_iter()));
        // many identical normals pass the quick bound
        let flat = vec![Vec3::Z; 1000];
        assert!(!f.spread_exceeds(&flat, 0..1000u32));
    }
}
