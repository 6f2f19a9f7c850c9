//! Feature vertex of a wall loop by the dual-contouring quadratic error function.
//!
//! Follows Ju, Losasso, Schaefer, Warren (2002), "Dual contouring of Hermite data": minimise
//! `sum (n_i . (x - p_i))^2` over the loop's crossings `p_i` with unit normals `n_i`, solved
//! about the mass point (the mean of the loop's points) with a truncated pseudo-inverse from the
//! SVD (singular values below 0.1 of the largest dropped, the usual cut-off), then clamped into
//! the cell box. Invariant: the result lies in the box; with fewer than three independent
//! normals it is the point of the feature's line or plane nearest the mass point.

use nalgebra::{Matrix3, Vector3};
use octocut_surface::{Aabb, Vec3};

/// The QEF minimiser for `planes` (point, unit normal) about `mass`, clamped into `cell`.
pub(crate) fn qef_vertex(planes: &[(Vec3, Vec3)], mass: Vec3, cell: &Aabb) -> Vec3 {
    qef_unclamped(planes, mass).clamp(cell.min, cell.max)
}

/// The QEF minimiser (truncated pseudo-inverse about `mass`) before clamping.
pub(crate) fn qef_unclamped(planes: &[(Vec3, Vec3)], mass: Vec3) -> Vec3 {
    let mut ata = Matrix3::<f64>::zeros();
    let mut atb = Vector3::<f64>::zeros();
    for &(p, n) in planes {
        let nv = Vector3::new(n.x, n.y, n.z);
        ata += nv * nv.transpose();
        atb += nv * n.dot(p - mass);
    }
    let svd = ata.svd(true, true);
    let (Some(u), Some(vt)) = (svd.u, svd.v_t) else {
        return mass;
    };
    let smax = svd.singular_values.max();
    let mut x = Vector3::zeros();
    if smax > 0.0 {
        // singular values of A^T A are squares of those of A: cut-off 0.1 on A is 0.01 here
        for i in 0..3 {
            let s = svd.singular_values[i];
            if s > 0.01 * smax {
                let ui = u.column(i);
                let vi = vt.row(i).transpose();
                x += vi * (ui.dot(&atb) / s);
            }
        }
    }
    mass + Vec3::new(x[0], x[1], x[2])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn qef_finds_corner_and_edge() {
        let cell = Aabb::new(Vec3::ZERO, Vec3::ONE);
        // exact: three planes x=0.3, y=0.6, z=0.2 meet in (0.3, 0.6, 0.2)
        let planes = [
            (Vec3::new(0.3, 0.1, 0.9), Vec3::X),
            (Vec3::new(0.8, 0.6, 0.1), Vec3::Y),
            (Vec3::new(0.2, 0.9, 0.2), Vec3::Z),
        ];
        let x = qef_vertex(&planes, Vec3::splat(0.5), &cell);
        assert!((x - Vec3::new(0.3, 0.6, 0.2)).length() < 1e-12);
        // exact: two planes give the point of their common line nearest the mass point
        let x = qef_vertex(&planes[..2], Vec3::new(0.5, 0.5, 0.7), &cell);
        assert!((x - Vec3::new(0.3, 0.6, 0.7)).length() < 1e-12);
    }
}
