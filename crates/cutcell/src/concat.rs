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
}
