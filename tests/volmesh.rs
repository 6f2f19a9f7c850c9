//! Reference checks of the volume-mesh geometry against a general-purpose library: every
//! convex test cell's volume and centroid against parry3d's convex hull mass properties.

use octocut_volmesh::geometry::MeshGeometry;
use octocut_volmesh::testmesh;
use parry3d_f64::shape::{ConvexPolyhedron, Shape};

#[test]
fn cell_volumes_and_centroids_match_parry_convex_hulls() {
    let meshes = [
        testmesh::clipped_cube(),
        testmesh::refined_block(2, 1.0, &[[0, 0, 0]]),
        testmesh::refined_block(3, 0.3, &[[1, 1, 1], [2, 1, 1]]),
    ];
    let mut checked = 0;
    for m in &meshes {
        assert!(m.validate().is_valid());
        let g = MeshGeometry::new(m);
        for c in 0..m.n_cells() {
            let mut ids: Vec<u32> = g
                .cell_faces
                .of(c)
                .iter()
                .flat_map(|&f| m.face(f as usize))
                .copied()
                .collect();
            ids.sort_unstable();
            ids.dedup();
            let pts: Vec<_> = ids.iter().map(|&v| m.points[v as usize]).collect();
            // all test cells here are convex, so the hull is the cell
            let hull = ConvexPolyhedron::from_convex_hull(&pts).expect("hull");
            let mp = hull.mass_properties(1.0);
            let v = mp.mass();
            // parry3d: mass of a unit-density convex polyhedron = its volume
            assert!(
                (g.cell_volume[c] - v).abs() <= 1e-12 * v,
                "cell {c}: {} vs {v}",
                g.cell_volume[c]
            );
            let d = (g.cell_centroid[c] - mp.local_com).length();
            assert!(d <= 1e-12 * v.cbrt(), "cell {c}: centroid off by {d}");
            checked += 1;
        }
    }
    assert_eq!(checked, 1 + 15 + 41);
}
