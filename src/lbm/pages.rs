//! Large solver arrays backed by huge pages where the OS offers them.
//!
//! The odd step of the AA pattern reads and writes, for every block of nodes, stretches of all
//! 19 slot arrays and nine rows of the node map, so one block touches a few dozen 4 KiB pages
//! spread over hundreds of megabytes; with 2 MiB pages the same accesses need a few TLB
//! entries. Linux's transparent huge pages are often enabled only for memory that asks for
//! them (`madvise` mode), so the arrays ask before their first touch. Measured with
//! `voxperm bench` on the development machine (README, "Performance"). Elsewhere, or if the
//! request is refused, the arrays simply keep normal pages.

/// Bytes of a huge page on Linux with 4 KiB base pages (x86-64, most AArch64; common
/// practice). On kernels with other base pages the advice covers whole 2 MiB spans anyway and
/// does no harm.
#[cfg(target_os = "linux")]
const HUGE_PAGE: usize = 2 << 20;

/// A vector of `len` copies of `value` whose storage asked for huge pages before it was
/// written.
pub fn filled<T: Clone>(len: usize, value: T) -> Vec<T> {
    let mut v = with_capacity(len);
    v.resize(len, value);
    v
}

/// A vector of `len` default values (zeros for numbers) whose storage asked for huge pages.
/// For numbers large enough to be mapped fresh (the binary sets glibc's mmap threshold to
/// 1 MiB at start-up, lbm::memory), the pages are first touched by whoever writes them first,
/// not here; a heap block that was touched before keeps its pages.
pub fn zeros<T: Clone + Default>(len: usize) -> Vec<T> {
    let v = vec![T::default(); len];
    advise(v.as_ptr() as usize, len * std::mem::size_of::<T>());
    v
}

/// An empty vector with room for `capacity` elements whose storage asked for huge pages; the
/// pages are taken as elements are pushed.
pub fn with_capacity<T>(capacity: usize) -> Vec<T> {
    let v = Vec::with_capacity(capacity);
    advise(v.as_ptr() as usize, capacity * std::mem::size_of::<T>());
    v
}

/// Asks for huge pages over the whole 2 MiB pages inside `start..start + bytes`. Best effort:
/// the answer is ignored, a refusal only costs speed.
#[cfg(target_os = "linux")]
fn advise(start: usize, bytes: usize) {
    let lo = start.div_ceil(HUGE_PAGE) * HUGE_PAGE;
    let hi = (start + bytes) / HUGE_PAGE * HUGE_PAGE;
    if hi > lo {
        // SAFETY: the range lies inside one live allocation of this process; MADV_HUGEPAGE
        // changes only how the kernel backs it, never its contents.
        unsafe {
            libc::madvise(lo as *mut libc::c_void, hi - lo, libc::MADV_HUGEPAGE);
        }
    }
}

#[cfg(not(target_os = "linux"))]
fn advise(_start: usize, _bytes: usize) {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn vectors_hold_what_was_asked() {
        let v = filled(3 << 20, 7u32);
        assert_eq!(v.len(), 3 << 20);
        assert!(v.iter().all(|&x| x == 7));
        let mut w: Vec<[u16; 3]> = with_capacity(1 << 20);
        assert!(w.capacity() >= 1 << 20);
        w.push([1, 2, 3]);
        assert_eq!(w, vec![[1, 2, 3]]);
        assert!(filled(0, 0.0f32).is_empty());
        let z: Vec<f64> = zeros(5 << 20);
        assert!(z.iter().all(|&x| x == 0.0));
    }

    /// The advice reaches the kernel: the mapping holding a large vector carries the `hg`
    /// (huge-page advised) flag in /proc/self/smaps. Skipped where the kernel has no
    /// transparent huge pages.
    #[cfg(target_os = "linux")]
    #[test]
    fn large_vectors_are_advised() {
        if !std::path::Path::new("/sys/kernel/mm/transparent_hugepage/enabled").exists() {
            return;
        }
        let v: Vec<f32> = zeros(8 << 20);
        let at = v.as_ptr() as usize + (v.len() * 4) / 2;
        let smaps = std::fs::read_to_string("/proc/self/smaps").unwrap();
        let mut inside = false;
        let mut flags = None;
        for line in smaps.lines() {
            let first = line.split_whitespace().next().unwrap_or("");
            if let Some((lo, hi)) = first.split_once('-')
                && let (Ok(lo), Ok(hi)) =
                    (usize::from_str_radix(lo, 16), usize::from_str_radix(hi, 16))
            {
                inside = (lo..hi).contains(&at);
            } else if inside && line.starts_with("VmFlags:") {
                flags = Some(line.to_string());
                break;
            }
        }
        let flags = flags.expect("no mapping holds the vector");
        assert!(flags.split_whitespace().any(|f| f == "hg"), "{flags}");
        std::hint::black_box(&v);
    }
}
