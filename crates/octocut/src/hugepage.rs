//! A global allocator that asks the kernel for transparent huge pages on large blocks.
//!
//! The mesher's stages build and drop arrays of hundreds of megabytes. With 4 KiB pages every
//! first touch of such an array is one page fault (about 1.3 million faults for a 2M-cell mesh,
//! a third of the process's CPU time spent in the kernel on a virtual machine). Linux's
//! transparent huge pages (THP, kernel documentation `admin-guide/mm/transhuge`) map 2 MiB at
//! a fault, but where the system setting is `madvise` (a common default) only in ranges marked
//! with `madvise(MADV_HUGEPAGE)`. [`HugePageAlloc`] is the system allocator plus that mark on
//! the 2 MiB-aligned interior of every block of at least [`LARGE`] bytes; smaller blocks and
//! other systems are untouched, and a refused `madvise` (THP off) changes nothing.
//!
//! Invariants: every block comes from [`std::alloc::System`] and goes back to it; the mark
//! covers only whole 2 MiB pages inside the block, so no memory outside a block is touched
//! and resident memory grows by at most the unused tail of a block's last huge page.
//!
//! ```
//! use octocut::hugepage::HugePageAlloc;
//! use std::alloc::{GlobalAlloc, Layout};
//! let layout = Layout::from_size_align(8 << 20, 8).unwrap();
//! unsafe {
//!     let p = HugePageAlloc.alloc(layout);
//!     assert!(!p.is_null());
//!     p.write_bytes(1, layout.size());
//!     HugePageAlloc.dealloc(p, layout);
//! }
//! ```
//! A program opts in with `#[global_allocator] static A: HugePageAlloc = HugePageAlloc;`
//! (the `octocut` command does), and may call [`fixed_mmap_threshold`] first.
//!
//! [`fixed_mmap_threshold`] pins glibc's mmap threshold at [`LARGE`] (`mallopt(3)`,
//! `M_MMAP_THRESHOLD`): glibc otherwise raises the threshold to the size of each large block
//! freed (up to 32 MiB), after which blocks of that size come from the heap arenas and stay
//! resident when freed. Pinned, every large block is its own mapping, returned to the system
//! when freed. Measured with the rest of this session's work (benches/README.md): without it
//! the 1.9M-cell case peaks at 1,243 MiB in the cut stage instead of 1,138-1,145, validation
//! at 590 instead of 486; the price is re-faulting freed blocks, about 0.25 s (15%) of the cut
//! stage at 483k cells and within the noise at 1.9M.

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicUsize, Ordering};

/// Live [`AdvicePaused`] guards: [`HugePageAlloc`] marks new large blocks only while none is.
static PAUSES: AtomicUsize = AtomicUsize::new(0);
/// Guards ever made (lets a test tell that no pause overlapped an allocation).
static PAUSES_MADE: AtomicUsize = AtomicUsize::new(0);

/// Pauses [`HugePageAlloc`]'s huge-page advice for new blocks while it lives (blocks marked
/// before keep their mark); guards nest and may live on several threads, the advice resuming
/// when the last is dropped. For a stage that runs slower and larger with the advice: octree
/// refinement (at 7.5M cells 4.14 -> 2.75 s and 764 -> 537 MiB without it, benches/README.md).
/// No effect without the allocator.
///
/// ```
/// let _plain = octocut::hugepage::AdvicePaused::new();
/// // large blocks allocated here get no huge-page advice
/// ```
pub struct AdvicePaused {
    _private: (),
}

impl AdvicePaused {
    pub fn new() -> AdvicePaused {
        PAUSES_MADE.fetch_add(1, Ordering::SeqCst);
        PAUSES.fetch_add(1, Ordering::SeqCst);
        AdvicePaused { _private: () }
    }
}

impl Default for AdvicePaused {
    fn default() -> Self {
        Self::new()
    }
}

impl Drop for AdvicePaused {
    fn drop(&mut self) {
        PAUSES.fetch_sub(1, Ordering::SeqCst);
    }
}

/// Blocks of at least this many bytes get the huge-page mark.
pub const LARGE: usize = 4 << 20;
/// The huge page size of x86-64 and of 4 KiB-granule aarch64.
const HUGE: usize = 2 << 20;

/// The system allocator with `MADV_HUGEPAGE` on large blocks (see the module doc).
///
/// ```
/// #[global_allocator]
/// static A: octocut::hugepage::HugePageAlloc = octocut::hugepage::HugePageAlloc;
/// let v = vec![0u64; 1 << 20];
/// assert_eq!(v.len(), 1 << 20);
/// ```
#[derive(Clone, Copy, Debug, Default)]
pub struct HugePageAlloc;

/// Pins glibc's mmap threshold at [`LARGE`] (see the module doc). Returns whether the C
/// library took the setting (always `false` on other C libraries and systems).
///
/// ```
/// let _ = octocut::hugepage::fixed_mmap_threshold();
/// ```
pub fn fixed_mmap_threshold() -> bool {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    {
        // SAFETY: mallopt only changes the allocator's tuning parameters
        unsafe { libc::mallopt(libc::M_MMAP_THRESHOLD, LARGE as libc::c_int) == 1 }
    }
    #[cfg(not(all(target_os = "linux", target_env = "gnu")))]
    {
        false
    }
}

/// Marks the whole huge pages inside `[p, p + n)`.
fn advise(p: *mut u8, n: usize) {
    if p.is_null() || n < LARGE || PAUSES.load(Ordering::Relaxed) != 0 {
        return;
    }
    #[cfg(target_os = "linux")]
    {
        let a = (p as usize).div_ceil(HUGE) * HUGE;
        let e = (p as usize + n) / HUGE * HUGE;
        if e > a {
            // SAFETY: the range lies inside a live block of ours; MADV_HUGEPAGE only changes
            // how later faults in it are served, never the contents
            unsafe {
                libc::madvise(a as *mut libc::c_void, e - a, libc::MADV_HUGEPAGE);
            }
        }
    }
}

// SAFETY: every call is forwarded to `System` with the same arguments; `advise` does not
// change the memory's contents or ownership
unsafe impl GlobalAlloc for HugePageAlloc {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc(layout) };
        advise(p, layout.size());
        p
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc_zeroed(layout) };
        advise(p, layout.size());
        p
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let p = unsafe { System.realloc(ptr, layout, new_size) };
        advise(p, new_size);
        p
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The kernel's VmFlags of the mapping holding `addr` (`/proc/self/smaps`, proc(5)).
    fn vm_flags(addr: usize) -> Option<String> {
        let smaps = std::fs::read_to_string("/proc/self/smaps").ok()?;
        let mut inside = false;
        for line in smaps.lines() {
            if let Some((range, _)) = line.split_once(' ') {
                if let Some((a, b)) = range.split_once('-') {
                    if let (Ok(a), Ok(b)) =
                        (usize::from_str_radix(a, 16), usize::from_str_radix(b, 16))
                    {
                        inside = a <= addr && addr < b;
                        continue;
                    }
                }
            }
            if inside {
                if let Some(f) = line.strip_prefix("VmFlags:") {
                    return Some(f.trim().to_string());
                }
            }
        }
        None
    }

    #[test]
    fn large_blocks_carry_the_huge_page_advice_and_keep_their_contents() {
        let layout = Layout::from_size_align(16 << 20, 64).unwrap();
        unsafe {
            // a pipeline test on another thread may pause the advice: check the mark only when
            // no pause was live or made around this allocation
            let made = PAUSES_MADE.load(Ordering::SeqCst);
            let idle = PAUSES.load(Ordering::SeqCst) == 0;
            let p = HugePageAlloc.alloc(layout);
            let advised = idle && PAUSES_MADE.load(Ordering::SeqCst) == made;
            assert!(!p.is_null());
            for i in 0..layout.size() {
                *p.add(i) = (i % 251) as u8;
            }
            // proc(5): "hg - huge page advise flag", on kernels with THP compiled in
            let thp = std::fs::read_to_string("/sys/kernel/mm/transparent_hugepage/enabled")
                .map(|s| !s.contains("[never]"))
                .unwrap_or(false);
            if cfg!(target_os = "linux") && thp && advised {
                let inner = (p as usize).div_ceil(HUGE) * HUGE;
                let flags = vm_flags(inner).expect("mapping of the block");
                assert!(flags.split(' ').any(|f| f == "hg"), "VmFlags: {flags}");
            }
            // growing keeps the contents (realloc's contract)
            let q = HugePageAlloc.realloc(p, layout, 32 << 20);
            assert!(!q.is_null());
            assert!((0..layout.size()).all(|i| *q.add(i) == (i % 251) as u8));
            HugePageAlloc.dealloc(q, Layout::from_size_align(32 << 20, 64).unwrap());
        }
    }

    #[test]
    fn a_pause_withholds_the_advice_until_its_last_guard_drops() {
        // above glibc's largest dynamic mmap threshold (32 MiB, mallopt(3)): a fresh mapping,
        // never a heap range an earlier block's advice covers
        let layout = Layout::from_size_align(64 << 20, 64).unwrap();
        let thp = std::fs::read_to_string("/sys/kernel/mm/transparent_hugepage/enabled")
            .map(|s| !s.contains("[never]"))
            .unwrap_or(false);
        if !(cfg!(target_os = "linux") && thp) {
            return;
        }
        let outer = AdvicePaused::new();
        let inner = AdvicePaused::new();
        drop(inner);
        unsafe {
            let p = HugePageAlloc.alloc(layout);
            p.write_bytes(1, layout.size());
            let mid = (p as usize).div_ceil(HUGE) * HUGE;
            let flags = vm_flags(mid).expect("mapping of the block");
            assert!(
                !flags.split(' ').any(|f| f == "hg"),
                "advised while paused: {flags}"
            );
            HugePageAlloc.dealloc(p, layout);
        }
        drop(outer);
    }

    #[test]
    fn the_mmap_threshold_is_taken_on_glibc() {
        // mallopt(3): returns 1 on success
        assert_eq!(
            fixed_mmap_threshold(),
            cfg!(all(target_os = "linux", target_env = "gnu"))
        );
    }

    #[test]
    fn small_blocks_are_plain_system_blocks() {
        let layout = Layout::from_size_align(4096, 8).unwrap();
        unsafe {
            let p = HugePageAlloc.alloc_zeroed(layout);
            assert!((0..4096).all(|i| *p.add(i) == 0));
            HugePageAlloc.dealloc(p, layout);
        }
    }
}
