//! A global allocator that counts the allocations each thread makes, so a benchmark or
//! a test can say how many heap allocations one filter step costs. Counting per thread
//! keeps tests that run in parallel from seeing each other's allocations.
//!
//! A binary opts in with
//! `#[global_allocator] static ALLOCATOR: Counting = Counting;`.

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;

thread_local! {
    static ALLOCATIONS: Cell<u64> = const { Cell::new(0) };
}

/// The system allocator, counting allocations (and reallocations) per thread.
pub struct Counting;

// SAFETY: every call is forwarded unchanged to the system allocator; the counter is a
// const-initialised thread-local without a destructor, so touching it never allocates.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        bump();
        // SAFETY: the caller upholds `GlobalAlloc::alloc`'s contract, which is System's.
        unsafe { System.alloc(layout) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        bump();
        // SAFETY: as for `alloc`.
        unsafe { System.alloc_zeroed(layout) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        bump();
        // SAFETY: as for `alloc`; `ptr` came from this allocator, hence from System.
        unsafe { System.realloc(ptr, layout, new_size) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: `ptr` came from this allocator, hence from System.
        unsafe { System.dealloc(ptr, layout) }
    }
}

fn bump() {
    // `try_with` fails only while the thread is being torn down; those allocations
    // belong to no measured step.
    let _ = ALLOCATIONS.try_with(|count| count.set(count.get() + 1));
}

/// How many allocations the current thread made while running `work`.
pub fn allocations_during(work: impl FnOnce()) -> u64 {
    let before = ALLOCATIONS.with(Cell::get);
    work();
    ALLOCATIONS.with(Cell::get) - before
}
