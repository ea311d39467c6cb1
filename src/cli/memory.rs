//! How freed memory goes back to the system.
//!
//! glibc's allocator raises its threshold for serving a block from `mmap`
//! each time such a block is freed (up to 32 MiB), and with it the free
//! space it keeps at the top of its heap (twice that threshold). pondus
//! reads a table into columns of several megabytes, frees them, and then
//! builds others: with the thresholds raised, ~10 MB of freed columns stayed
//! with the process while the design matrix was built, at the peak of a
//! million-study fit (docs/performance.md). Fixing the threshold at
//! [`MMAP_THRESHOLD`] turns the raising off (so the mallopt(3) manual page
//! says; cited from memory, and checked by the measurement above), so a large block is unmapped when freed
//! and the top of the heap is trimmed past the default 128 KiB. Small
//! blocks, which the many refits of the diagnostics allocate, are served
//! as before.

/// Blocks of at least this size come from `mmap` and go back when freed
/// (256 KiB: twice glibc's starting threshold, far below the columns of a
/// large table, above the buffers of a fit of a few hundred studies).
pub const MMAP_THRESHOLD: i32 = 256 * 1024;

/// Fixes the allocator's `mmap` threshold at [`MMAP_THRESHOLD`]; true when
/// the allocator took it. Does nothing (false) where the allocator is not
/// glibc's.
pub fn return_freed_blocks() -> bool {
    set_mmap_threshold(MMAP_THRESHOLD)
}

#[cfg(all(target_os = "linux", target_env = "gnu"))]
fn set_mmap_threshold(bytes: i32) -> bool {
    use std::os::raw::c_int;
    extern "C" {
        /// glibc's `int mallopt(int param, int value)` (mallopt(3)).
        fn mallopt(param: c_int, value: c_int) -> c_int;
    }
    /// `M_MMAP_THRESHOLD` of glibc's `<malloc.h>`.
    const M_MMAP_THRESHOLD: c_int = -3;
    // SAFETY: mallopt takes two integers and no pointer; glibc accepts any
    // values (it returns 0 for one it refuses) and takes the allocator's
    // lock while it changes the setting, so a call is sound at any time, on
    // any thread. The declaration matches the prototype in <malloc.h>.
    unsafe { mallopt(M_MMAP_THRESHOLD, bytes) == 1 }
}

#[cfg(not(all(target_os = "linux", target_env = "gnu")))]
fn set_mmap_threshold(_bytes: i32) -> bool {
    false
}

#[cfg(all(test, target_os = "linux", target_env = "gnu"))]
mod tests {
    use super::*;
    use std::hint::black_box;
    use std::os::raw::c_int;

    /// glibc's `struct mallinfo` (mallinfo(3)): ten `int`s.
    #[repr(C)]
    struct MallInfo {
        arena: c_int,
        ordblks: c_int,
        smblks: c_int,
        hblks: c_int,
        hblkhd: c_int,
        usmblks: c_int,
        fsmblks: c_int,
        uordblks: c_int,
        fordblks: c_int,
        keepcost: c_int,
    }

    extern "C" {
        fn mallinfo() -> MallInfo;
    }

    /// Bytes in blocks the allocator has from `mmap`.
    fn mapped() -> i64 {
        // SAFETY: mallinfo takes no argument and returns a struct of ten
        // ints by value, as declared above (the prototype in <malloc.h>).
        i64::from(unsafe { mallinfo() }.hblkhd)
    }

    /// With the threshold fixed, a 1 MiB block comes from `mmap` even
    /// after an 8 MiB block was freed; with glibc's dynamic threshold that
    /// free would have raised the threshold to 8 MiB and the block would
    /// have come from the heap (so a setting that did not take, or a wrong
    /// parameter number, fails here).
    ///
    /// The count of mapped bytes is the whole process's, and the other
    /// tests of this binary run on other threads at the same time: one of
    /// them freeing a mapped block between the two readings hides this
    /// block (seen once in a full run). So the reading is tried up to five
    /// times; a block that never comes from `mmap` fails every time.
    #[test]
    fn a_large_block_is_mapped_after_a_larger_one_was_freed() {
        assert!(return_freed_blocks());
        let mut seen = Vec::new();
        for _ in 0..5 {
            drop(black_box(vec![1u8; 8 << 20]));
            let before = mapped();
            let block = black_box(vec![1u8; 1 << 20]);
            let after = mapped();
            drop(block);
            if after - before >= 1 << 20 {
                return;
            }
            seen.push((before, after));
        }
        panic!("mapped bytes (before, after) in five tries: {seen:?}");
    }
}
