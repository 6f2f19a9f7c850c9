//! Order-preserving parallel concatenation: the gather step after a chunked parallel map.
//!
//! [`concat`] joins per-chunk vectors and [`offsets`] turns per-chunk length lists into one CSR
//! offset array (an exclusive prefix sum, starting at 0). Both copy the chunks in parallel
//! into their final places, computed from the chunk sizes first (common practice). Invariant:
//! the result equals the serial concatenation, whatever the thread count.

use rayon::prelude::*;

/// Splits `out` into consecutive slices of the given lengths.
pub(crate) fn split_by<T>(mut out: &mut [T], lens: impl Iterator<Item = usize>) -> Vec<&mut [T]> {
    lens.map(|n| take_front(&mut out, n)).collect()
}

/// The first `n` items of `rest`, which keeps the others.
pub(crate) fn take_front<'a, T>(rest: &mut &'a mut [T], n: usize) -> &'a mut [T] {
    let (a, b) = std::mem::take(rest).split_at_mut(n);
    *rest = b;
    a
}

/// The concatenation of `parts`, in order.
///
/// ```ignore
/// assert_eq!(concat(&[vec![1, 2], vec![], vec![3]]), vec![1, 2, 3]);
/// ```
pub(crate) fn concat<T: Copy + Default + Send + Sync>(parts: &[Vec<T>]) -> Vec<T> {
    let n = parts.iter().map(Vec::len).sum();
    let mut out = vec![T::default(); n];
    split_by(&mut out, parts.iter().map(Vec::len))
        .into_par_iter()
        .zip(parts.par_iter())
        .for_each(|(o, p)| o.copy_from_slice(p));
    out
}

/// `(0..n).filter_map(f)` collected in order, in parallel, at the size of the result: a first
/// pass counts the kept items of each run of indices, the second writes them in place. A
/// parallel `collect` of a filtered iterator gathers a list of vectors first, so that the
/// result is briefly resident twice (peak memory); here `f` runs twice instead.
///
/// ```ignore
/// assert_eq!(filter_map_sized(10, |i| (i % 3 == 0).then_some(i)), vec![0, 3, 6, 9]);
/// ```
pub(crate) fn filter_map_sized<T: Copy + Default + Send + Sync>(
    n: usize,
    f: impl Fn(usize) -> Option<T> + Sync,
) -> Vec<T> {
    const RUN: usize = 1 << 14;
    let runs = n.div_ceil(RUN);
    let range = |r: usize| r * RUN..((r + 1) * RUN).min(n);
    let counts: Vec<usize> = (0..runs)
        .into_par_iter()
        .map(|r| range(r).filter(|&i| f(i).is_some()).count())
        .collect();
    let mut out = vec![T::default(); counts.iter().sum()];
    split_by(&mut out, counts.iter().copied())
        .into_par_iter()
        .enumerate()
        .for_each(|(r, o)| {
            for (x, y) in o.iter_mut().zip(range(r).filter_map(&f)) {
                *x = y;
            }
        });
    out
}

/// CSR offsets of the lengths `lens` (all chunks in order): `[0, l0, l0 + l1, ...]`.
pub(crate) fn offsets(lens: &[Vec<u32>]) -> Vec<u32> {
    let n: usize = lens.iter().map(Vec::len).sum();
    let mut base = Vec::with_capacity(lens.len());
    let mut acc = 0u32;
    for l in lens {
        base.push(acc);
        acc += l.iter().sum::<u32>();
    }
    let mut out = vec![0u32; n + 1];
    out[n] = acc;
    split_by(&mut out[..n], lens.iter().map(Vec::len))
        .into_par_iter()
        .zip(lens.par_iter().zip(base.par_iter()))
        .for_each(|(o, (l, &b))| {
            let mut a = b;
            for (x, &len) in o.iter_mut().zip(l) {
                *x = a;
                a += len;
            }
        });
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn equals_the_serial_concatenation() {
        // reference: Iterator::flatten and a running sum (the definitions)
        let parts: Vec<Vec<u32>> = (0..300u32)
            .map(|i| (0..(i * 7919) % 13).map(|j| i * 100 + j).collect())
            .collect();
        let flat: Vec<u32> = parts.iter().flatten().copied().collect();
        assert_eq!(concat(&parts), flat);
        let mut want = vec![0u32];
        for &x in &flat {
            want.push(want.last().unwrap() + x);
        }
        assert_eq!(offsets(&parts), want);
        assert_eq!(offsets(&[]), vec![0]);
    }

    #[test]
    fn sized_filter_equals_the_serial_filter() {
        // reference: Iterator::filter_map (the definition), across run boundaries
        for n in [0usize, 1, 5, (1 << 14) - 1, 1 << 14, 3 * (1 << 14) + 17] {
            let f = |i: usize| (crate::util::mix(i as u64) % 3 == 0).then_some((i, i as u32 ^ 7));
            let want: Vec<(usize, u32)> = (0..n).filter_map(f).collect();
            assert_eq!(filter_map_sized(n, f), want, "n {n}");
        }
    }
}
