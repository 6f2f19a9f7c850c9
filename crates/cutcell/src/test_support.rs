//! Test support (not part of the stable API): octree refinement towards a surface (through the
//! octree stage), shape generators and an independent mesh check.
//!
//! The check proves each cell closed (outward area vectors sum to zero),
//! positively sized (divergence theorem) and every directed edge of a cell matched by its
//! reverse in the same cell (so the mesh has no T-junction).

use octocut_octree::{refine, Domain, Octree, RefineSpec, SurfaceRule, TagSel};
use octocut_surface::{Surface, SurfaceIndex, TagId, Vec3};
use octocut_volmesh::VolumeMesh;
use std::collections::HashMap;

/// Leaves crossed by the surface refined to `level` and 2:1 balanced over faces, edges and
/// corners, by the octree stage ([`octocut_octree::refine`] with one surface rule for all tags).
pub fn refined_tree(domain: Domain, index: &SurfaceIndex, level: u8) -> Octree {
    let mut spec = RefineSpec::default();
    spec.surface.push(SurfaceRule {
        tag: TagSel::All,
        size: domain.cell_size(level),
        finest_size: None,
    });
    refine(&domain, index, &spec)
        .expect("refinement of a test surface")
        .tree
}

fn from_grid(vertices: Vec<Vec3>, triangles: Vec<[u32; 3]>, name: &str) -> Surface {
    let n = triangles.len();
    Surface {
        vertices,
        triangles,
        tags: vec![TagId(0); n],
        tag_names: vec![name.to_string()],
    }
}

/// An icosphere: the icosahedron subdivided `subdiv` times, vertices pushed onto the sphere.
pub fn icosphere(centre: Vec3, r: f64, subdiv: u32) -> Surface {
    let t = (1.0 + 5f64.sqrt()) / 2.0;
    let mut v: Vec<Vec3> = [
        [-1., t, 0.],
        [1., t, 0.],
        [-1., -t, 0.],
        [1., -t, 0.],
        [0., -1., t],
        [0., 1., t],
        [0., -1., -t],
        [0., 1., -t],
        [t, 0., -1.],
        [t, 0., 1.],
        [-t, 0., -1.],
        [-t, 0., 1.],
    ]
    .iter()
    .map(|a| Vec3::from_array(*a).normalize())
    .collect();
    let mut f: Vec<[u32; 3]> = vec![
        [0, 11, 5],
        [0, 5, 1],
        [0, 1, 7],
        [0, 7, 10],
        [0, 10, 11],
        [1, 5, 9],
        [5, 11, 4],
        [11, 10, 2],
        [10, 7, 6],
        [7, 1, 8],
        [3, 9, 4],
        [3, 4, 2],
        [3, 2, 6],
        [3, 6, 8],
        [3, 8, 9],
        [4, 9, 5],
        [2, 4, 11],
        [6, 2, 10],
        [8, 6, 7],
        [9, 8, 1],
    ];
    for _ in 0..subdiv {
        let mut mid: HashMap<(u32, u32), u32> = HashMap::new();
        let mut m = |a: u32, b: u32, v: &mut Vec<Vec3>| {
            let k = (a.min(b), a.max(b));
            *mid.entry(k).or_insert_with(|| {
                v.push(((v[a as usize] + v[b as usize]) * 0.5).normalize());
                (v.len() - 1) as u32
            })
        };
        let mut nf = Vec::with_capacity(f.len() * 4);
        for &[a, b, c] in &f {
            let ab = m(a, b, &mut v);
            let bc = m(b, c, &mut v);
            let ca = m(c, a, &mut v);
            nf.extend([[a, ab, ca], [b, bc, ab], [c, ca, bc], [ab, bc, ca]]);
        }
        f = nf;
    }
    from_grid(v.into_iter().map(|p| centre + r * p).collect(), f, "sphere")
}

/// A torus about the z axis (major radius `big`, minor `small`), `nu` x `nv` quads split in two.
pub fn torus(centre: Vec3, big: f64, small: f64, nu: u32, nv: u32) -> Surface {
    let mut v = Vec::new();
    for i in 0..nu {
        let u = 2.0 * std::f64::consts::PI * i as f64 / nu as f64;
        for j in 0..nv {
            let w = 2.0 * std::f64::consts::PI * j as f64 / nv as f64;
            let rr = big + small * w.cos();
            v.push(centre + Vec3::new(rr * u.cos(), rr * u.sin(), small * w.sin()));
        }
    }
    let id = |i: u32, j: u32| (i % nu) * nv + (j % nv);
    let mut f = Vec::new();
    for i in 0..nu {
        for j in 0..nv {
            let (a, b, c, d) = (id(i, j), id(i + 1, j), id(i + 1, j + 1), id(i, j + 1));
            f.push([a, b, c]);
            f.push([a, c, d]);
        }
    }
    from_grid(v, f, "torus")
}

/// The cube of edge `a` centred at `centre`, rotated by `rx` about x then `ry` about y.
pub fn rotated_cube(centre: Vec3, a: f64, rx: f64, ry: f64) -> Surface {
    let mut s = Surface::unit_cube();
    let rot = glam::DMat3::from_rotation_y(ry) * glam::DMat3::from_rotation_x(rx);
    for p in &mut s.vertices {
        *p = centre + rot * ((*p - Vec3::splat(0.5)) * a);
    }
    s
}

/// Figures proved by [`check_mesh`].
#[derive(Clone, Debug, Default)]
pub struct MeshCheck {
    pub volume: f64,
    pub min_cell_volume: f64,
    pub max_closure: f64,
}

/// Proves the mesh closed, positive and free of T-junctions; returns its volume.
pub fn check_mesh(m: &VolumeMesh) -> Result<MeshCheck, String> {
    let nc = m.n_cells();
    let nf = m.n_faces();
    if m.face_offsets.len() != nf + 1 || m.cell_cut.len() != nc || m.cell_region.len() != nc {
        return Err("array lengths disagree".into());
    }
    let mut sum = vec![Vec3::ZERO; nc];
    let mut vol = vec![0.0f64; nc];
    let mut scale = vec![0.0f64; nc];
    let mut edges: Vec<(u32, u32, u32)> = Vec::new();
    let mut boundary_start = m.n_interior_faces() as u32;
    for p in &m.patches {
        if p.start != boundary_start {
            return Err(format!(
                "patch {} starts at {} not {}",
                p.name, p.start, boundary_start
            ));
        }
        boundary_start += p.count;
    }
    if boundary_start as usize != nf {
        return Err("patches do not cover the boundary faces".into());
    }
    for f in 0..nf {
        let v = m.face(f);
        if v.len() < 3 {
            return Err(format!("face {f} has {} vertices", v.len()));
        }
        let mut s = v.to_vec();
        s.sort_unstable();
        if s.windows(2).any(|w| w[0] == w[1]) {
            return Err(format!("face {f} repeats a vertex"));
        }
        let mut n = Vec3::ZERO;
        for j in 0..v.len() {
            n += m.points[v[j] as usize].cross(m.points[v[(j + 1) % v.len()] as usize]);
        }
        let a = 0.5 * n;
        let r = m.points[v[0] as usize];
        let mut fv = 0.0;
        for j in 1..v.len() - 1 {
            fv += r.dot(m.points[v[j] as usize].cross(m.points[v[j + 1] as usize])) / 6.0;
        }
        let o = m.owner[f] as usize;
        if o >= nc {
            return Err(format!("face {f} owner {o} out of range"));
        }
        sum[o] += a;
        vol[o] += fv;
        scale[o] += a.length();
        for j in 0..v.len() {
            edges.push((o as u32, v[j], v[(j + 1) % v.len()]));
        }
        if f < m.n_interior_faces() {
            let nb = m.neighbour[f] as usize;
            if nb >= nc || nb == o {
                return Err(format!("face {f} neighbour {nb} invalid (owner {o})"));
            }
            sum[nb] -= a;
            vol[nb] -= fv;
            scale[nb] += a.length();
            for j in 0..v.len() {
                edges.push((nb as u32, v[(j + 1) % v.len()], v[j]));
            }
        }
    }
    edges.sort_unstable();
    for e in &edges {
        if edges.binary_search(&(e.0, e.2, e.1)).is_err() {
            return Err(format!(
                "cell {} edge {}-{} has no reverse: open cell or T-junction",
                e.0, e.1, e.2
            ));
        }
    }
    let mut out = MeshCheck {
        volume: 0.0,
        min_cell_volume: f64::INFINITY,
        max_closure: 0.0,
    };
    for c in 0..nc {
        let closure = sum[c].length() / scale[c].max(1e-300);
        if closure > 1e-9 {
            return Err(format!(
                "cell {c} not closed: |sum of area vectors| / area = {closure:e}"
            ));
        }
        if vol[c].is_nan() || vol[c] <= 0.0 {
            return Err(format!("cell {c} has volume {}", vol[c]));
        }
        out.max_closure = out.max_closure.max(closure);
        out.min_cell_volume = out.min_cell_volume.min(vol[c]);
        out.volume += vol[c];
    }
    Ok(out)
}
