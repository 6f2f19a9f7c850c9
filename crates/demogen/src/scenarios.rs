//! The demo scenarios: a parcel-delivery drone in a crosswind and a rooftop ventilation unit,
//! plus the reference shapes the docs use, and the case file proposed for each scenario.
//!
//! Method: union (without boolean merging) of the closed primitives of [`crate::shapes`],
//! overlapping each other as CAD parts do, then the defects of [`crate::defects`] in the numbers
//! of [`DroneDefects`]. Coordinates are in metres and quantised to 1e-7 m before writing.
//! Invariants: the same options give the same bytes on every run and platform (no clocks, fixed
//! seeds); every part is closed and outward before its defects are applied.

use crate::defects::{duplicate_facets, flip_facets, pick_distinct, remove_facets};
use crate::shapes::{cuboid, cylinder, superellipsoid, Part};
use crate::stl::{ascii_stl, binary_stl};
use glam::DVec3 as Vec3;

/// Every demo coordinate is rounded to a multiple of 1 / QUANTA_PER_METRE m (0.1 micrometre).
pub const QUANTA_PER_METRE: f64 = 1e7;

/// A named multi-part scenario.
#[derive(Clone, Debug, Default)]
pub struct Scenario {
    /// Parts in file order: (solid name, triangles).
    pub parts: Vec<(String, Part)>,
}

impl Scenario {
    /// Total triangle count.
    pub fn n_triangles(&self) -> usize {
        self.parts.iter().map(|(_, p)| p.triangles.len()).sum()
    }

    /// The part named `name`.
    pub fn part(&self, name: &str) -> Option<&Part> {
        self.parts.iter().find(|(n, _)| n == name).map(|(_, p)| p)
    }

    fn part_mut(&mut self, name: &str) -> &mut Part {
        &mut self
            .parts
            .iter_mut()
            .find(|(n, _)| n == name)
            .expect("known part")
            .1
    }

    /// Bounding box (min, max) of all vertices used.
    pub fn bounds(&self) -> (Vec3, Vec3) {
        let mut lo = Vec3::splat(f64::INFINITY);
        let mut hi = Vec3::splat(f64::NEG_INFINITY);
        for (_, p) in &self.parts {
            for t in &p.triangles {
                for &i in t {
                    lo = lo.min(p.vertices[i as usize]);
                    hi = hi.max(p.vertices[i as usize]);
                }
            }
        }
        (lo, hi)
    }

    /// One ASCII STL text, one `solid` per part.
    pub fn to_ascii_stl(&self) -> String {
        let parts: Vec<(&str, &Part)> = self.parts.iter().map(|(n, p)| (n.as_str(), p)).collect();
        ascii_stl(&parts)
    }

    fn quantise(&mut self) {
        for (_, p) in &mut self.parts {
            p.quantise(QUANTA_PER_METRE);
        }
    }
}

/// Options of the drone geometry.
#[derive(Clone, Copy, Debug, Default)]
pub struct DroneOptions {
    /// Add a `rotors` solid: four thin rotor discs above the hubs.
    pub rotor_discs: bool,
}

/// How many defects the drone export carries, and where.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct DroneDefects {
    /// Facets missing along the longitude seam of `body` (+y flank): an open gap.
    pub body_missing: usize,
    /// Facets of `arms` with reversed vertex order.
    pub arms_flipped: usize,
    /// Facets of `hubs` present twice.
    pub hubs_duplicated: usize,
}

/// The defects of the committed `drone.stl`.
pub const DRONE_DEFECTS: DroneDefects = DroneDefects {
    body_missing: 4,
    arms_flipped: 5,
    hubs_duplicated: 6,
};

/// Body grid of the drone (longitude sectors, latitude bands).
const BODY_GRID: (usize, usize) = (64, 32);
/// Hub centres lie at (+-HUB, +-HUB); the hub-to-hub diagonal is 2 sqrt(2) HUB = 0.594 m.
const HUB: f64 = 0.21;

/// The drone's parts before any defect: closed, outward, overlapping (arms run into the body
/// and into the hubs, struts into the body and the rails, the pod into the body).
pub fn drone_clean(opts: DroneOptions) -> Scenario {
    let mut s = Scenario::default();
    // fuselage: ellipsoid 0.26 x 0.15 x 0.10 m, nose along +x (the flight direction)
    let body = superellipsoid(
        Vec3::ZERO,
        Vec3::new(0.13, 0.075, 0.05),
        1.0,
        BODY_GRID.0,
        BODY_GRID.1,
    );
    s.parts.push(("body".into(), body));

    let corners = [(1.0, 1.0), (-1.0, 1.0), (-1.0, -1.0), (1.0, -1.0)];
    let mut arms = Part::default();
    let mut hubs = Part::default();
    let mut rotors = Part::default();
    for (sx, sy) in corners {
        // arm: from inside the body to the hub axis
        arms.append(&cylinder(
            Vec3::new(0.03 * sx, 0.03 * sy, 0.015),
            Vec3::new(HUB * sx, HUB * sy, 0.015),
            0.010,
            20,
        ));
        // motor hub: short vertical cylinder the arm ends inside
        hubs.append(&cylinder(
            Vec3::new(HUB * sx, HUB * sy, -0.005),
            Vec3::new(HUB * sx, HUB * sy, 0.040),
            0.022,
            32,
        ));
        if opts.rotor_discs {
            rotors.append(&cylinder(
                Vec3::new(HUB * sx, HUB * sy, 0.039),
                Vec3::new(HUB * sx, HUB * sy, 0.045),
                0.10,
                48,
            ));
        }
    }
    s.parts.push(("arms".into(), arms));
    s.parts.push(("hubs".into(), hubs));

    // landing skids: two rails along x, four struts from the rails into the body
    let mut skids = Part::default();
    for sy in [1.0, -1.0] {
        skids.append(&cylinder(
            Vec3::new(-0.14, 0.07 * sy, -0.12),
            Vec3::new(0.14, 0.07 * sy, -0.12),
            0.006,
            16,
        ));
        for sx in [1.0, -1.0] {
            skids.append(&cylinder(
                Vec3::new(0.08 * sx, 0.07 * sy, -0.12),
                Vec3::new(0.06 * sx, 0.04 * sy, -0.01),
                0.005,
                12,
            ));
        }
    }
    s.parts.push(("skids".into(), skids));

    // payload pod: rounded box under the body, its top inside the body
    let pod = superellipsoid(
        Vec3::new(0.0, 0.0, -0.058),
        Vec3::new(0.07, 0.045, 0.028),
        0.4,
        40,
        20,
    );
    s.parts.push(("pod".into(), pod));
    if opts.rotor_discs {
        s.parts.push(("rotors".into(), rotors));
    }
    s.quantise();
    s
}

/// Facet ids of the body that [`drone`] removes: both triangles of the first longitude sector
/// (next to the grid seam on the +y flank) in the latitude bands just above the equator.
pub fn drone_body_gap(count: usize) -> Vec<usize> {
    let (n_u, n_v) = BODY_GRID;
    // layout of `superellipsoid`: n_u pole triangles, then 2 per (band, sector)
    let first_band = n_v / 2 - count.div_ceil(2);
    (0..count)
        .map(|k| n_u + 2 * ((first_band + k / 2 - 1) * n_u) + k % 2)
        .collect()
}

/// The drone as exported: [`drone_clean`] with the defects `d`.
pub fn drone(opts: DroneOptions, d: DroneDefects) -> Scenario {
    let mut s = drone_clean(opts);
    remove_facets(s.part_mut("body"), &drone_body_gap(d.body_missing));
    let arms = s.part_mut("arms");
    let ids = pick_distinct(arms.triangles.len(), d.arms_flipped, 0x0c70_0001);
    flip_facets(arms, &ids);
    let hubs = s.part_mut("hubs");
    let ids = pick_distinct(hubs.triangles.len(), d.hubs_duplicated, 0x0c70_0002);
    duplicate_facets(hubs, &ids);
    s
}

/// The rooftop ventilation unit: a lower housing whose base sits 5 cm below the roof (z = 0),
/// a raised upper housing on four short legs leaving a 3 cm gap above the lower housing, and a
/// round exhaust stack on top. Closed, outward, overlapping parts; no defects.
pub fn rooftop() -> Scenario {
    let mut s = Scenario::default();
    s.parts.push((
        "housing".into(),
        cuboid(Vec3::new(-0.6, -0.4, -0.05), Vec3::new(0.6, 0.4, 0.50)),
    ));
    let mut legs = Part::default();
    for (x, y) in [(-0.45, -0.3), (0.45, -0.3), (0.45, 0.3), (-0.45, 0.3)] {
        legs.append(&cuboid(
            Vec3::new(x - 0.02, y - 0.02, 0.49),
            Vec3::new(x + 0.02, y + 0.02, 0.54),
        ));
    }
    s.parts.push(("legs".into(), legs));
    s.parts.push((
        "upper".into(),
        cuboid(Vec3::new(-0.5, -0.35, 0.53), Vec3::new(0.55, 0.35, 0.80)),
    ));
    s.parts.push((
        "stack".into(),
        cylinder(
            Vec3::new(0.2, 0.0, 0.79),
            Vec3::new(0.2, 0.0, 1.30),
            0.12,
            48,
        ),
    ));
    s.quantise();
    s
}

/// Width of the gap between the lower housing top (z = 0.50) and the upper housing (z = 0.53).
pub const ROOFTOP_GAP: f64 = 0.03;

/// The cube [0,1]^3 as 12 triangles (solid `cube`).
pub fn cube() -> Scenario {
    Scenario {
        parts: vec![("cube".into(), cuboid(Vec3::ZERO, Vec3::ONE))],
    }
}

/// A sphere of radius 0.5 at the origin, 32 x 16 grid (960 triangles).
pub fn sphere() -> Scenario {
    let mut s = Scenario {
        parts: vec![(
            "sphere".into(),
            superellipsoid(Vec3::ZERO, Vec3::splat(0.5), 1.0, 32, 16),
        )],
    };
    s.quantise();
    s
}

/// Largest extent of a scenario's bounding box (the body length the case files scale by).
pub fn body_length(s: &Scenario) -> f64 {
    let (lo, hi) = s.bounds();
    (hi - lo).max_element()
}

fn drone_case(length: f64) -> String {
    format!(
        r#"# octocut case: parcel-delivery drone in a crosswind.
# Generated by octocut-demogen; coordinates in metres, flight direction +x.
# Body length L = {length:.3} m (largest extent of all solids); the domain distances are in L.
# The crosswind (about 20 degrees from -y) is a solver inflow setting; the mesh follows it with a
# wake region skewed towards +y.
# Run: octocut mesh demo-geometry/drone.toml --out out/drone

[surfaces]
files = ["drone.stl"]
# cell size at the surface, for every solid without its own size below
size = 0.01
# normals spreading more than this inside a cell ask for finer cells, down to finest_size
feature_angle = 30.0
finest_size = 0.005

[surfaces.sizes]
hubs = 0.005
skids = 0.005

[domain]
# the box in body lengths around the bodies, along the flow direction
around = {{ flow = "+x", upstream = 2.0, downstream = 5.0, sides = 2.0, above = 2.0 }}
# edge of the coarsest (base) cells
base_size = 0.16

[fluid]
side = "outside"

[[regions]]
name = "wake"
shape = "cylinder"
a = [0.25, 0.0, 0.0]
b = [1.6, 0.5, 0.0]
radius = 0.3
size = 0.04
# distance over which the size grows back to the surrounding size (m)
grow = 0.1

[[regions]]
name = "near"
shape = "box"
min = [-0.35, -0.35, -0.2]
max = [0.5, 0.4, 0.15]
size = 0.02
grow = 0.05

[refinement]
# cells of each level kept before the next coarser level may start (1 = plain 2:1)
transition_layers = 2

[cells]
# cut cells below this fraction of their full cube are merged into a neighbour
small_cell_fraction = 0.5

[sides]
xmin = "inflow"
xmax = "outflow"
ymin = "side_windward"
ymax = "side_leeward"
zmin = "bottom"
zmax = "top"

[output]
formats = ["vtu", "vtp", "png", "report"]

[limits]
max_cells = 5_000_000
max_memory_gb = 8
"#
    )
}

fn rooftop_case(length: f64) -> String {
    format!(
        r#"# octocut case: rooftop ventilation unit on a flat roof (the domain floor, z = 0).
# Generated by octocut-demogen; coordinates in metres, wind along +x.
# Body length L = {length:.3} m (largest extent); the housing base lies 5 cm below the roof, so
# the floor of the domain cuts the body. Under the raised upper housing there is a 3 cm gap.
# Run: octocut mesh demo-geometry/rooftop.toml --out out/rooftop

[surfaces]
files = ["rooftop.stl"]
size = 0.04
feature_angle = 30.0
finest_size = 0.02

[surfaces.sizes]
legs = 0.02
stack = 0.02

[gaps]
# a gap between facing surfaces holds at least this many cells across
cells = 3
finest_size = 0.005

[domain]
# an explicit box whose floor is the roof (z = 0): it cuts the housing, whose base lies below;
# 32 x 19 x 13 base cells of 0.3 m, so the box is used as given
box = [-3.0, -2.85, 0.0, 6.6, 2.85, 3.9]
base_size = 0.3

[fluid]
side = "outside"

[[regions]]
name = "wake"
shape = "box"
min = [0.6, -0.6, 0.0]
max = [3.0, 0.6, 1.6]
size = 0.08
grow = 0.2

[refinement]
transition_layers = 2

[cells]
small_cell_fraction = 0.5

[sides]
xmin = "inflow"
xmax = "outflow"
ymin = "side_south"
ymax = "side_north"
zmin = "roof"
zmax = "top"

[output]
formats = ["vtu", "vtp", "png", "report"]

[limits]
max_cells = 5_000_000
max_memory_gb = 8
"#
    )
}

/// Every file of `demo-geometry/` as (file name, bytes), in a fixed order.
pub fn demo_files() -> Vec<(String, Vec<u8>)> {
    let drone = drone(DroneOptions::default(), DRONE_DEFECTS);
    let roof = rooftop();
    let sphere = sphere();
    let sphere_part = &sphere.parts[0].1;
    let readme = format!(
        "# demo-geometry\n\nGenerated by `cargo run -p octocut-demogen` (deterministic; do not edit by hand).\n\n\
         | file | what | triangles |\n|---|---|---|\n\
         | drone.stl | parcel-delivery drone, ASCII, solids {}; defects: {} facets missing on the body (+y seam), {} arm facets flipped, {} hub facets duplicated; parts overlap | {} |\n\
         | rooftop.stl | rooftop ventilation unit, ASCII, solids {}; base 5 cm below z = 0, 3 cm gap under the upper housing | {} |\n\
         | cube.stl | unit cube [0,1]^3, ASCII, clean | 12 |\n\
         | sphere.stl | sphere radius 0.5 at the origin, binary | {} |\n\
         | drone.toml, rooftop.toml | case files (see the case-file reference in the project README) | |\n",
        drone.parts.iter().map(|(n, _)| n.as_str()).collect::<Vec<_>>().join(", "),
        DRONE_DEFECTS.body_missing,
        DRONE_DEFECTS.arms_flipped,
        DRONE_DEFECTS.hubs_duplicated,
        drone.n_triangles(),
        roof.parts.iter().map(|(n, _)| n.as_str()).collect::<Vec<_>>().join(", "),
        roof.n_triangles(),
        sphere.n_triangles(),
    );
    vec![
        ("drone.stl".into(), drone.to_ascii_stl().into_bytes()),
        (
            "drone.toml".into(),
            drone_case(body_length(&drone)).into_bytes(),
        ),
        ("rooftop.stl".into(), roof.to_ascii_stl().into_bytes()),
        (
            "rooftop.toml".into(),
            rooftop_case(body_length(&roof)).into_bytes(),
        ),
        ("cube.stl".into(), cube().to_ascii_stl().into_bytes()),
        ("sphere.stl".into(), binary_stl(&[sphere_part])),
        ("README.md".into(), readme.into_bytes()),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::shapes::tests::is_closed_oriented;
    use crate::stl::read_ascii_stl;
    use std::collections::HashMap;

    type Key = [[u64; 3]; 3];

    fn key(t: &[Vec3; 3]) -> Key {
        t.map(|v| v.to_array().map(f64::to_bits))
    }

    /// Same corner set in a rotation of the same cyclic order (not flipped).
    fn rotations(t: &[Vec3; 3]) -> [Key; 3] {
        [key(t), key(&[t[1], t[2], t[0]]), key(&[t[2], t[0], t[1]])]
    }

    #[test]
    fn generation_is_deterministic() {
        let a = demo_files();
        let b = demo_files();
        assert_eq!(a, b);
        let total: usize = a.iter().map(|(_, b)| b.len()).sum();
        assert!(total < 2_000_000, "demo files take {total} bytes");
    }

    #[test]
    fn drone_has_its_solids_and_modest_size() {
        let text = drone(DroneOptions::default(), DRONE_DEFECTS).to_ascii_stl();
        let solids = read_ascii_stl(&text).unwrap();
        let names: Vec<&str> = solids.iter().map(|(n, _)| n.as_str()).collect();
        assert_eq!(names, ["body", "arms", "hubs", "skids", "pod"]);
        let n: usize = solids.iter().map(|(_, t)| t.len()).sum();
        assert!((5_000..20_000).contains(&n), "{n} triangles");
        let s = drone_clean(DroneOptions::default());
        let (lo, hi) = s.bounds();
        // hub-to-hub diagonal about 0.6 m, body centre at the origin
        assert!(((2.0 * HUB) * 2f64.sqrt() - 0.6).abs() < 0.01);
        assert!((hi.x - lo.x) > 0.4 && (hi.x - lo.x) < 0.6);
        assert!(
            s.part("body")
                .unwrap()
                .vertices
                .iter()
                .sum::<Vec3>()
                .length()
                < 1e-6 * 2000.0
        );
    }

    #[test]
    fn clean_parts_are_closed_with_positive_volume() {
        let mut scenarios = vec![
            drone_clean(DroneOptions { rotor_discs: true }),
            rooftop(),
            cube(),
            sphere(),
        ];
        scenarios[0].quantise();
        for s in &scenarios {
            for (name, p) in &s.parts {
                assert!(is_closed_oriented(p), "{name} not closed");
                assert!(p.signed_volume() > 0.0, "{name}");
            }
        }
        // exact: four inscribed 32-gon prisms, (n/2) r^2 sin(2 pi / n) h each (to the 1e-7 m grid)
        let hubs = scenarios[0].part("hubs").unwrap();
        let prism = 16.0 * 0.022f64.powi(2) * (std::f64::consts::TAU / 32.0).sin() * 0.045;
        assert!(
            (hubs.signed_volume() - 4.0 * prism).abs() < 1e-4 * prism,
            "{}",
            hubs.signed_volume()
        );
        // exact: the rooftop housing box 1.2 x 0.8 x 0.55
        let housing = scenarios[1].part("housing").unwrap();
        assert!((housing.signed_volume() - 1.2 * 0.8 * 0.55).abs() < 1e-9);
        // exact: sphere volume 4/3 pi r^3, the inscribed 32 x 16 polyhedron is within 3 % below it
        let v = scenarios[3].parts[0].1.signed_volume();
        let exact = 4.0 / 3.0 * std::f64::consts::PI * 0.125;
        assert!(v < exact && v > 0.97 * exact, "{v}");
    }

    #[test]
    fn drone_defects_are_present_in_the_stated_numbers() {
        let clean = drone_clean(DroneOptions::default());
        let text = drone(DroneOptions::default(), DRONE_DEFECTS).to_ascii_stl();
        let written = read_ascii_stl(&text).unwrap();
        let (mut missing, mut flipped, mut duplicated) =
            (HashMap::new(), HashMap::new(), HashMap::new());
        for ((name, part), (wname, wtris)) in clean.parts.iter().zip(&written) {
            assert_eq!(name, wname);
            // count written copies of each clean facet, in its own orientation and reversed
            let mut same: HashMap<Key, usize> = HashMap::new();
            let mut rev: HashMap<Key, usize> = HashMap::new();
            for t in wtris {
                for k in rotations(t) {
                    *same.entry(k).or_default() += 1;
                }
                for k in rotations(&[t[0], t[2], t[1]]) {
                    *rev.entry(k).or_default() += 1;
                }
            }
            let (mut m, mut f, mut d) = (0, 0, 0);
            for t in 0..part.triangles.len() {
                let k = key(&part.corners(t));
                let (s, r) = (
                    same.get(&k).copied().unwrap_or(0),
                    rev.get(&k).copied().unwrap_or(0),
                );
                match (s, r) {
                    (0, 0) => m += 1,
                    (0, 1) => f += 1,
                    (1, 0) => {}
                    (2, 0) => d += 1,
                    other => panic!("{name}: facet {t} written as {other:?}"),
                }
            }
            assert_eq!(
                wtris.len(),
                part.triangles.len() - m + d,
                "{name}: extra facets"
            );
            missing.insert(name.clone(), m);
            flipped.insert(name.clone(), f);
            duplicated.insert(name.clone(), d);
        }
        let sum = |h: &HashMap<String, usize>| h.values().sum::<usize>();
        assert_eq!(missing["body"], DRONE_DEFECTS.body_missing);
        assert_eq!(sum(&missing), DRONE_DEFECTS.body_missing);
        assert_eq!(flipped["arms"], DRONE_DEFECTS.arms_flipped);
        assert_eq!(sum(&flipped), DRONE_DEFECTS.arms_flipped);
        assert_eq!(duplicated["hubs"], DRONE_DEFECTS.hubs_duplicated);
        assert_eq!(sum(&duplicated), DRONE_DEFECTS.hubs_duplicated);
        // the missing facets form one gap along the +y seam of the body
        let body = clean.part("body").unwrap();
        for t in drone_body_gap(DRONE_DEFECTS.body_missing) {
            let c = body.corners(t);
            assert!(
                c.iter()
                    .all(|v| v.y > 0.07 && v.x.abs() < 0.02 && v.z.abs() < 0.02),
                "{c:?}"
            );
        }
    }

    #[test]
    fn rooftop_gap_and_floor() {
        let s = rooftop();
        let (lo, _) = s.bounds();
        assert!(lo.z < 0.0); // the roof z = 0 cuts the base
        let (h, u) = (s.part("housing").unwrap(), s.part("upper").unwrap());
        let top = h.vertices.iter().map(|v| v.z).fold(f64::MIN, f64::max);
        let bottom = u.vertices.iter().map(|v| v.z).fold(f64::MAX, f64::min);
        assert!((bottom - top - ROOFTOP_GAP).abs() < 1e-9);
    }
}

#[cfg(test)]
mod case_tests {
    use super::*;

    #[test]
    fn case_files_are_valid_toml_sizing_known_solids() {
        for (name, bytes) in demo_files() {
            if !name.ends_with(".toml") {
                continue;
            }
            let v: toml::Table = toml::from_str(std::str::from_utf8(&bytes).unwrap()).unwrap();
            let sizes = v["surfaces"]["sizes"].as_table().unwrap();
            let s = if name.starts_with("drone") {
                drone_clean(DroneOptions::default())
            } else {
                rooftop()
            };
            let solids: Vec<&str> = s.parts.iter().map(|(n, _)| n.as_str()).collect();
            // every per-tag size names a solid of the scenario
            assert!(!sizes.is_empty(), "{name}");
            assert!(sizes.keys().all(|k| solids.contains(&k.as_str())), "{name}");
            assert!(v["domain"]["base_size"].as_float().unwrap() > 0.0);
        }
    }
}
