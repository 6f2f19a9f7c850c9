//! Feature vertex of a wall loop by the dual-contouring quadratic error function.
//!
//! Follows Ju, Losasso, Schaefer, Warren (2002), "Dual contouring of Hermite data": minimise
//! `sum (n_i . (x - p_i))^2` over the loop's crossings `p_i` with unit normals `n_i`, solved
//! about the mass point (the mean of the loop's points) with a truncated pseudo-inverse from the
//! SVD (singular values below 0.1 of the largest dropped, the usual cut-off), then clamped into
//! the cell box (the coordinates a bound stops are fixed on the box and the rest re-minimised).
//! Invariant: the result lies in the box; with fewer than three independent
//! normals it is the point of the feature's line or plane nearest the mass point.

use nalgebra::{Matrix3, Vector3};
use octocut_surface::{Aabb, Vec3};

/// The QEF minimiser for `planes` (point, unit normal) about `mass`, clamped into `cell`.
pub(crate) fn qef_vertex(planes: &[(Vec3, Vec3)], mass: Vec3, cell: &Aabb) -> Vec3 {
    let mut x = qef_unclamped(planes, mass);
    // outside the cell: fix the violated coordinates on the box and minimise over the others
    // (the box-constrained minimiser when one or two bounds are active)
    let mut fixed = [false; 3];
    for _ in 0..3 {
        if cell.contains_point(x) {
            return x;
        }
        for i in 0..3 {
            if x[i] < cell.min[i] || x[i] > cell.max[i] {
                fixed[i] = true;
            }
        }
        let xf = x.clamp(cell.min, cell.max);
        x = qef_masked(planes, mass, xf, fixed);
    }
    x.clamp(cell.min, cell.max)
}

/// The QEF minimiser over the coordinates not `fixed`, the fixed ones taken from `xf`.
fn qef_masked(planes: &[(Vec3, Vec3)], mass: Vec3, xf: Vec3, fixed: [bool; 3]) -> Vec3 {
    let mut base = mass;
    for i in 0..3 {
        if fixed[i] {
            base[i] = xf[i];
        }
    }
    let mut ata = Matrix3::<f64>::zeros();
    let mut atb = Vector3::<f64>::zeros();
    for &(p, n) in planes {
        let mut m = n;
        for i in 0..3 {
            if fixed[i] {
                m[i] = 0.0;
            }
        }
        let mv = Vector3::new(m.x, m.y, m.z);
        ata += mv * mv.transpose();
        atb += mv * n.dot(p - base);
    }
    base + truncated_solve(ata, atb)
}

/// `pinv(ata) atb` with singular values below 0.01 of the largest dropped.
fn truncated_solve(ata: Matrix3<f64>, atb: Vector3<f64>) -> Vec3 {
    let svd = ata.svd(true, true);
    let (Some(u), Some(vt)) = (svd.u, svd.v_t) else {
        return Vec3::ZERO;
    };
    let smax = svd.singular_values.max();
    let mut x = Vector3::zeros();
    if smax > 0.0 {
        for i in 0..3 {
            let s = svd.singular_values[i];
            if s > 0.01 * smax {
                x += vt.row(i).transpose() * (u.column(i).dot(&atb) / s);
            }
        }
    }
    Vec3::new(x[0], x[1], x[2])
}

/// The QEF minimiser (truncated pseudo-inverse about `mass`) before clamping.
pub(crate) fn qef_unclamped(planes: &[(Vec3, Vec3)], mass: Vec3) -> Vec3 {
    qef_masked(planes, mass, mass, [false; 3])
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
        // the line x = 1.2, y = 0.6 lies outside the box: the minimiser on the face x = 1 is
        // the face point nearest the line's plane y = 0.6 (exact: (1, 0.6, mass z))
        let out = [
            (Vec3::new(1.2, 0.0, 0.0), Vec3::X),
            (Vec3::new(0.0, 0.6, 0.0), Vec3::Y),
        ];
        let x = qef_vertex(&out, Vec3::new(0.5, 0.5, 0.4), &cell);
        assert!((x - Vec3::new(1.0, 0.6, 0.4)).length() < 1e-12, "{x}");
    }
}
