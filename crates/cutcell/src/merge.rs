//! Small-cell merging.
//!
//! Follows the cell-merging approach of Quirk (1994), "An alternative to unstructured grids for
//! computing gas dynamic flows around arbitrarily complex two-dimensional bodies": a cut cell
//! whose volume is below `fraction` of its full cube is merged with the face neighbour across its
//! largest interior face; the threshold 1/2 is the stable choice reported by Berger and Giuliani
//! (arXiv:2308.16332). Passes repeat until no small group has a neighbour left. A merged group's
//! reference cube is the largest among its members. Invariants: no surviving group is below its
//! threshold (groups with no fluid neighbour are reported for dropping) and the summed volume
//! of the kept groups plus the dropped ones equals the input volume.

use crate::util::UnionFind;

pub(crate) struct MergeInput<'a> {
    pub volume: &'a [f64],
    pub full: &'a [f64],
    pub alive: &'a [bool],
    /// Interior faces (cell a, cell b, area) with a small cell (by `volume` and `full`) on at
    /// least one side, in face order: the only faces a pass reads while every small group is
    /// made of cells that were small at the start.
    pub faces: &'a [(u32, u32, f64)],
    /// All interior faces in face order, asked for only when a small group holds a cell that
    /// was not small (a coarser member's cube can keep the group below its threshold).
    pub all_faces: &'a (dyn Fn() -> Vec<(u32, u32, f64)> + Sync),
    pub fraction: f64,
}

pub(crate) struct Merged {
    pub uf: UnionFind,
    /// Roots of small groups with no neighbour: to be dropped.
    pub tiny: Vec<u32>,
    /// Cells absorbed into another cell.
    pub merged: usize,
    pub group_volume: Vec<f64>,
}

/// A cell or group of `volume` is small beside its reference cube of volume `full`.
#[inline]
pub(crate) fn is_small(volume: f64, full: f64, fraction: f64) -> bool {
    volume < fraction * full
}

/// Small cells merged into groups. The result is that of passes over all interior faces:
/// faces between two cells that were not small matter only to a small group holding such a
/// cell, and once one exists the passes read every face.
pub(crate) fn merge_small(inp: &MergeInput) -> Merged {
    let n = inp.volume.len();
    let mut uf = UnionFind::new(n);
    let mut vol = inp.volume.to_vec();
    let mut full = inp.full.to_vec();
    let small = |v: f64, f: f64| is_small(v, f, inp.fraction);
    // per root: the group holds a cell that was not small at the start
    let mut grown: Vec<bool> = (0..n).map(|c| !small(vol[c], full[c])).collect();
    let mut all: Option<Vec<(u32, u32, f64)>> = None;
    let mut best: Vec<(f64, u32)> = vec![(-1.0, u32::MAX); n];
    let mut merged = 0;
    loop {
        if all.is_none()
            && (0..n).any(|r| {
                inp.alive[r] && grown[r] && uf.find(r as u32) == r as u32 && small(vol[r], full[r])
            })
        {
            all = Some((inp.all_faces)());
        }
        let faces = all.as_deref().unwrap_or(inp.faces);
        best.iter_mut().for_each(|b| *b = (-1.0, u32::MAX));
        let mut any_small = false;
        for &(a, b, area) in faces {
            if !inp.alive[a as usize] || !inp.alive[b as usize] {
                continue;
            }
            let (ra, rb) = (uf.find(a), uf.find(b));
            if ra == rb {
                continue;
            }
            if small(vol[ra as usize], full[ra as usize]) && area > best[ra as usize].0 {
                best[ra as usize] = (area, rb);
                any_small = true;
            }
            if small(vol[rb as usize], full[rb as usize]) && area > best[rb as usize].0 {
                best[rb as usize] = (area, ra);
                any_small = true;
            }
        }
        if !any_small {
            break;
        }
        let mut changed = false;
        for r in 0..n as u32 {
            let (_, o) = best[r as usize];
            if o == u32::MAX || uf.find(r) != r {
                // a root merged earlier in this pass is revisited in the next pass
                continue;
            }
            if !small(vol[r as usize], full[r as usize]) {
                continue;
            }
            let ro = uf.find(o);
            if ro == r {
                continue;
            }
            let root = uf.union(r, ro);
            let other = if root == r { ro } else { r };
            vol[root as usize] += vol[other as usize];
            full[root as usize] = full[root as usize].max(full[other as usize]);
            grown[root as usize] |= grown[other as usize];
            merged += 1;
            changed = true;
        }
        if !changed {
            break;
        }
    }
    let tiny = (0..n as u32)
        .filter(|&c| {
            inp.alive[c as usize] && uf.find(c) == c && small(vol[c as usize], full[c as usize])
        })
        .collect();
    Merged {
        uf,
        tiny,
        merged,
        group_volume: vol,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The passes over every interior face (the merge before the face filter): with the whole
    /// list as the filtered one, which list a pass reads makes no difference.
    fn merge_all_faces(inp: &MergeInput, faces: &[(u32, u32, f64)]) -> Merged {
        let all = || faces.to_vec();
        merge_small(&MergeInput {
            faces,
            all_faces: &all,
            ..*inp
        })
    }

    fn input<'a>(
        volume: &'a [f64],
        full: &'a [f64],
        alive: &'a [bool],
        faces: &'a [(u32, u32, f64)],
        all_faces: &'a (dyn Fn() -> Vec<(u32, u32, f64)> + Sync),
    ) -> MergeInput<'a> {
        MergeInput {
            volume,
            full,
            alive,
            faces,
            all_faces,
            fraction: 0.5,
        }
    }

    #[test]
    fn small_cells_join_largest_face_and_volume_is_kept() {
        // cells: 0 big, 1 small (touches 0 by area 1 and 2 by area 3), 2 big, 3 small isolated
        let volume = [1.0, 0.1, 1.0, 0.2];
        let full = [1.0; 4];
        let faces = [(0, 1, 1.0), (1, 2, 3.0)];
        let all = || faces.to_vec();
        let m = merge_small(&input(&volume, &full, &[true; 4], &faces, &all));
        let mut uf = m.uf;
        assert_eq!(uf.find(1), uf.find(2));
        assert_ne!(uf.find(0), uf.find(1));
        assert_eq!(m.tiny, vec![3]);
        // exact: volume is conserved by union
        assert!((m.group_volume[1] - 1.1).abs() < 1e-15);
    }

    #[test]
    fn filtered_faces_give_the_all_faces_result() {
        // random cell graphs with mixed cube sizes (a coarse member can keep a group small, so
        // some cases need every face): the filtered passes must match passes over all faces
        let mut z = 7u64;
        let mut next = |m: u64| {
            z = crate::util::mix(z);
            z % m
        };
        let mut switched = 0;
        for case in 0..300 {
            let n = 2 + next(40) as usize;
            let full: Vec<f64> = (0..n).map(|_| [1.0, 8.0, 64.0][next(3) as usize]).collect();
            let volume: Vec<f64> = (0..n)
                .map(|c| full[c] * (next(1000) as f64 + 1.0) / 1000.0)
                .collect();
            let alive: Vec<bool> = (0..n).map(|_| next(10) != 0).collect();
            let faces: Vec<(u32, u32, f64)> = (0..3 * n)
                .filter_map(|_| {
                    let (a, b) = (next(n as u64) as u32, next(n as u64) as u32);
                    (a != b).then(|| (a, b, next(7) as f64 + 1.0))
                })
                .collect();
            let small = |c: u32| volume[c as usize] < 0.5 * full[c as usize];
            let filtered: Vec<_> = faces
                .iter()
                .copied()
                .filter(|&(a, b, _)| small(a) || small(b))
                .collect();
            let asked = std::sync::atomic::AtomicBool::new(false);
            let all = || {
                asked.store(true, std::sync::atomic::Ordering::Relaxed);
                faces.clone()
            };
            let inp = input(&volume, &full, &alive, &filtered, &all);
            let mut got = merge_small(&inp);
            let mut want = merge_all_faces(&inp, &faces);
            switched += asked.load(std::sync::atomic::Ordering::Relaxed) as usize;
            assert_eq!(got.merged, want.merged, "case {case}");
            assert_eq!(got.tiny, want.tiny, "case {case}");
            assert_eq!(got.group_volume, want.group_volume, "case {case}");
            for c in 0..n as u32 {
                assert_eq!(got.uf.find(c), want.uf.find(c), "case {case} cell {c}");
            }
        }
        // both paths were taken
        assert!(switched > 0 && switched < 300, "switched {switched}");
    }
}
