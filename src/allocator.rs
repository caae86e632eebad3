//! The binary's allocator: mimalloc, asked the way its own C callers ask it.
//!
//! The `mimalloc` crate hands every request to `mi_malloc_aligned`, whatever
//! its alignment. For the alignments of nearly every Rust type (8 or less)
//! that is the slow road: whenever the thread's free list for the size is
//! empty it goes through the aligned allocator's general path (a size-class
//! lookup and a second try) before the plain allocation it ends in. Under
//! callgrind on `kimech ic50` (2 000 curves) 13 800 of 35 500 allocations
//! took it, at about 150 instructions each. Every mimalloc block is a whole
//! number of 8-byte words from an aligned start, so a request aligned to 8
//! or less is served by `mi_malloc` itself (the same blocks, the same free);
//! larger alignments still go to `mi_malloc_aligned`.

use std::alloc::{GlobalAlloc, Layout};
use std::ffi::c_void;

/// The alignment every mimalloc block has (its smallest block is one
/// pointer-sized word, and every block size a whole number of words).
const WORD: usize = std::mem::size_of::<usize>();

/// mimalloc, with plain calls for word-aligned requests.
pub struct Allocator;

// SAFETY: each call keeps GlobalAlloc's contract as `mimalloc::MiMalloc`
// does: memory comes from mimalloc and goes back to it through `mi_free`
// (which takes blocks of either allocation function), and a request is
// given to the plain functions only when its alignment is at most
// `WORD`, which every mimalloc block has.
unsafe impl GlobalAlloc for Allocator {
    #[inline]
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        // SAFETY: plain C calls; the block is aligned to `WORD` ≥ layout.align() on the first road.
        unsafe {
            if layout.align() <= WORD {
                libmimalloc_sys::mi_malloc(layout.size()) as *mut u8
            } else {
                libmimalloc_sys::mi_malloc_aligned(layout.size(), layout.align()) as *mut u8
            }
        }
    }

    #[inline]
    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        // SAFETY: as `alloc`.
        unsafe {
            if layout.align() <= WORD {
                libmimalloc_sys::mi_zalloc(layout.size()) as *mut u8
            } else {
                libmimalloc_sys::mi_zalloc_aligned(layout.size(), layout.align()) as *mut u8
            }
        }
    }

    #[inline]
    unsafe fn dealloc(&self, ptr: *mut u8, _layout: Layout) {
        // SAFETY: `ptr` came from this allocator, hence from mimalloc.
        unsafe { libmimalloc_sys::mi_free(ptr as *mut c_void) }
    }

    #[inline]
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        // SAFETY: `ptr` came from mimalloc; a moved block is again aligned to `WORD` on the first road.
        unsafe {
            if layout.align() <= WORD {
                libmimalloc_sys::mi_realloc(ptr as *mut c_void, new_size) as *mut u8
            } else {
                libmimalloc_sys::mi_realloc_aligned(ptr as *mut c_void, new_size, layout.align()) as *mut u8
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every size and alignment a program asks for gets a block aligned as
    /// asked that holds what was written, through allocation, zeroed
    /// allocation and growth and shrinking in place or moved.
    #[test]
    fn blocks_are_aligned_and_keep_their_bytes() {
        let a = Allocator;
        let mut blocks = Vec::new();
        for size in (1..600).chain([1000, 1024, 1025, 4096, 5000, 70_000, 1 << 20]) {
            for align in [1, 2, 4, 8, 16, 32, 64, 4096] {
                let layout = Layout::from_size_align(size, align).unwrap();
                // SAFETY: non-zero sizes; every block is freed below with its layout.
                unsafe {
                    let zeroed = a.alloc_zeroed(layout);
                    assert!(!zeroed.is_null() && (zeroed as usize).is_multiple_of(align), "{size} {align}");
                    assert!(std::slice::from_raw_parts(zeroed, size).iter().all(|&b| b == 0));
                    a.dealloc(zeroed, layout);
                    let p = a.alloc(layout);
                    assert!(!p.is_null() && (p as usize).is_multiple_of(align), "{size} {align}");
                    for k in 0..size {
                        *p.add(k) = (k % 251) as u8;
                    }
                    blocks.push((p, layout));
                }
            }
        }
        for (k, (p, layout)) in blocks.into_iter().enumerate() {
            let new_size = if k % 2 == 0 { 2 * layout.size() + 3 } else { layout.size().div_ceil(2) };
            // SAFETY: `p` was allocated above with `layout`; it is freed once, with the layout it then has.
            unsafe {
                let q = a.realloc(p, layout, new_size);
                assert!(!q.is_null() && (q as usize).is_multiple_of(layout.align()), "{layout:?}");
                let kept = layout.size().min(new_size);
                assert!((0..kept).all(|i| *q.add(i) == (i % 251) as u8), "{layout:?}");
                a.dealloc(q, Layout::from_size_align(new_size, layout.align()).unwrap());
            }
        }
    }
}
