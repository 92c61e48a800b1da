//! The global allocator: mimalloc, entered through its plain functions wherever they give the
//! alignment asked for.
//!
//! A cell's evaluation makes many small, short-lived allocations (values, keys, texts), which
//! mimalloc serves faster than the system allocator. The `mimalloc` crate's `GlobalAlloc`
//! hands every request to `mi_malloc_aligned`, even for the word alignment nearly every Rust
//! value has. Under mimalloc 3 that path takes extra steps for every allocation, and when the
//! size class has no free block at hand and the size is not a power of two, it over-allocates
//! from a larger class (`alloc-aligned.c`, `mi_theap_malloc_zero_aligned_at_generic`).
//! `mi_malloc` needs neither: every mimalloc block is aligned to at least a machine word
//! (block sizes are whole words, `_mi_wsize_from_size`, and a page's first block is
//! 16-byte aligned, `MI_PAGE_MIN_START_BLOCK_ALIGN`; mimalloc 3 sources in libmimalloc-sys
//! 0.1.49). Larger alignments still take the aligned functions.
//!
//! The `figures` bench of worksheet-lang includes this file, so the in-process figures run on
//! the allocator the kernel runs on.

use libmimalloc_sys as mi;
use std::alloc::{GlobalAlloc, Layout};

/// The alignment every mimalloc block has.
const WORD: usize = std::mem::size_of::<usize>();

pub struct Mimalloc;

// SAFETY: each function returns memory from mimalloc aligned as `layout` asks (the plain
// functions only where `layout.align()` is at most a word, which every block satisfies);
// blocks from either family are freed and resized by `mi_free` and the `mi_realloc` pair.
unsafe impl GlobalAlloc for Mimalloc {
    #[inline]
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if layout.align() <= WORD {
            mi::mi_malloc(layout.size()).cast()
        } else {
            mi::mi_malloc_aligned(layout.size(), layout.align()).cast()
        }
    }

    #[inline]
    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        if layout.align() <= WORD {
            mi::mi_zalloc(layout.size()).cast()
        } else {
            mi::mi_zalloc_aligned(layout.size(), layout.align()).cast()
        }
    }

    #[inline]
    unsafe fn dealloc(&self, ptr: *mut u8, _layout: Layout) {
        mi::mi_free(ptr.cast());
    }

    #[inline]
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        if layout.align() <= WORD {
            mi::mi_realloc(ptr.cast(), new_size).cast()
        } else {
            mi::mi_realloc_aligned(ptr.cast(), new_size, layout.align()).cast()
        }
    }
}

#[cfg(test)]
mod tests {
    /// Blocks of every small size and of a few large ones come back aligned as asked, keep
    /// their contents through growth, and are all distinct.
    #[test]
    fn allocations_are_aligned_and_keep_their_contents() {
        #[repr(align(64))]
        struct Wide([u8; 64]);
        let mut held: Vec<Vec<u8>> = Vec::new();
        for size in (1..=1024).chain([4096, 65_536, 1 << 20]) {
            let mut v = vec![0u8; size];
            v[size - 1] = (size % 251) as u8;
            let words: Vec<u64> = Vec::with_capacity(size);
            assert_eq!(words.as_ptr() as usize % 8, 0, "size {size}");
            v.reserve(size * 3);
            assert_eq!(v[size - 1], (size % 251) as u8);
            held.push(v);
        }
        let wide: Vec<Wide> = (0..100).map(|_| Wide([7; 64])).collect();
        assert_eq!(wide.as_ptr() as usize % 64, 0);
        assert!(wide.iter().all(|w| w.0[63] == 7));
        let mut starts: Vec<usize> = held.iter().map(|v| v.as_ptr() as usize).collect();
        starts.sort_unstable();
        starts.dedup();
        assert_eq!(starts.len(), held.len());
    }
}
