//! The process's memory allocator: the system allocator, with large freed blocks kept for reuse.
//!
//! A run on large data allocates and frees many blocks of the same few sizes (n-length
//! columns, n × k designs, thin Q factors, scaled copies), one set per specification and
//! diagnostic. The system allocator returns each such block to the operating system when it is
//! freed and asks for it again at the next step, and every page of a fresh block is faulted in
//! and zeroed by the kernel before use: about a third of a 1M-row run's CPU was spent there
//! (docs/scaling.md). [`Recycler`] keeps up to [`CACHE_BYTES`] of freed blocks of at least
//! [`LARGE`] bytes and hands one back when a block of exactly the same size and alignment is
//! asked for, so its pages are already in memory. On Linux a fresh large block is also offered
//! to the kernel for transparent huge pages (one fault per 2 MiB instead of per 4 KiB).
//!
//! Nothing here changes what a computation returns: a reused block is memory like any other
//! (zeroed when zeroed memory is asked for). The kept blocks stay resident, at most
//! [`CACHE_BYTES`] of them; when a large block of a size not kept is asked for, kept blocks of
//! at least that size are given back first, so the cache does not raise the peak by holding
//! blocks nobody asks for while new ones are made.

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::Mutex;

/// Blocks at least this large are kept for reuse when freed (1 MiB).
pub const LARGE: usize = 1 << 20;
/// Most memory held in kept blocks at any time (256 MiB).
pub const CACHE_BYTES: usize = 256 << 20;
/// Most blocks kept at any time.
const SLOTS: usize = 32;
/// Fresh blocks at least this large are offered for transparent huge pages (4 MiB).
const HUGE: usize = 4 << 20;

/// A kept block: its address and layout (size and alignment).
#[derive(Clone, Copy)]
struct Kept {
    addr: usize,
    size: usize,
    align: usize,
}

/// The kept blocks, oldest first, and their total size.
struct Cache {
    blocks: [Option<Kept>; SLOTS],
    bytes: usize,
}

impl Cache {
    /// Take the kept block of exactly this layout, if any (the most recently kept one).
    fn take(&mut self, layout: Layout) -> Option<*mut u8> {
        let slot = self.blocks.iter().rposition(|b| {
            b.is_some_and(|k| k.size == layout.size() && k.align == layout.align())
        })?;
        let kept = self.blocks[slot].take()?;
        self.bytes -= kept.size;
        Some(kept.addr as *mut u8)
    }

    /// Keep a freed block, giving back to the system the oldest kept blocks that would take the
    /// cache past its limits. Returns false when the block itself cannot be kept.
    fn keep(&mut self, block: Kept, limit: usize) -> bool {
        if block.size > limit {
            return false;
        }
        while self.bytes + block.size > limit || self.blocks.iter().all(Option::is_some) {
            let Some(oldest) = self.blocks.iter_mut().find_map(Option::take) else {
                return false;
            };
            self.bytes -= oldest.size;
            release(oldest);
            self.compact();
        }
        self.compact();
        if let Some(free) = self.blocks.iter_mut().find(|b| b.is_none()) {
            *free = Some(block);
            self.bytes += block.size;
            return true;
        }
        false
    }

    /// Give back to the system the oldest kept blocks, at least `size` bytes of them (or all),
    /// so that a fresh block of that size does not add to what the cache already holds.
    fn shed(&mut self, size: usize) {
        let mut freed = 0;
        while freed < size {
            let Some(oldest) = self.blocks.iter_mut().find_map(Option::take) else {
                break;
            };
            self.bytes -= oldest.size;
            freed += oldest.size;
            release(oldest);
        }
        self.compact();
    }

    /// Move the kept blocks to the front, in age order, so new ones go after them.
    fn compact(&mut self) {
        let mut next = 0;
        for i in 0..SLOTS {
            if let Some(b) = self.blocks[i].take() {
                self.blocks[next] = Some(b);
                next += 1;
            }
        }
    }
}

/// Give a kept block back to the system allocator.
fn release(block: Kept) {
    if let Ok(layout) = Layout::from_size_align(block.size, block.align) {
        // SAFETY: the block was allocated by `System` with exactly this layout and is not in use.
        unsafe { System.dealloc(block.addr as *mut u8, layout) };
    }
}

/// Offer a fresh block's whole 2 MiB pages to the kernel as transparent huge pages.
#[cfg(target_os = "linux")]
fn advise_huge(ptr: *mut u8, size: usize) {
    const PAGE: usize = 2 << 20;
    if ptr.is_null() || size < HUGE {
        return;
    }
    let start = (ptr as usize).div_ceil(PAGE) * PAGE;
    let end = (ptr as usize + size) / PAGE * PAGE;
    if end > start {
        // SAFETY: the range lies inside a block this process owns; the advice changes how the
        // kernel backs its pages, never their contents. Failure (no huge page support) is
        // harmless and ignored.
        unsafe { libc::madvise(start as *mut libc::c_void, end - start, libc::MADV_HUGEPAGE) };
    }
}

#[cfg(not(target_os = "linux"))]
fn advise_huge(_ptr: *mut u8, _size: usize) {}

/// The system allocator with a cache of large freed blocks (see the module documentation).
pub struct Recycler {
    cache: Mutex<Cache>,
    limit: usize,
}

impl Recycler {
    /// A recycler keeping at most `limit` bytes of freed blocks.
    pub const fn new(limit: usize) -> Self {
        Recycler {
            cache: Mutex::new(Cache {
                blocks: [None; SLOTS],
                bytes: 0,
            }),
            limit,
        }
    }

    fn cache(&self) -> std::sync::MutexGuard<'_, Cache> {
        self.cache
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
    }

    /// A block for `layout` (zeroed if `zeroed`): a kept one of the same layout if there is
    /// one, else a fresh one from the system (see the module documentation).
    ///
    /// # Safety
    /// As [`GlobalAlloc::alloc`].
    unsafe fn allocate(&self, layout: Layout, zeroed: bool) -> *mut u8 {
        if layout.size() >= LARGE {
            let mut cache = self.cache();
            if let Some(ptr) = cache.take(layout) {
                drop(cache);
                if zeroed {
                    // SAFETY: the kept block is `layout.size()` bytes and now ours alone.
                    unsafe { std::ptr::write_bytes(ptr, 0, layout.size()) };
                }
                return ptr;
            }
            cache.shed(layout.size());
        }
        // SAFETY: forwarded with the caller's layout.
        let ptr = unsafe {
            match zeroed {
                true => System.alloc_zeroed(layout),
                false => System.alloc(layout),
            }
        };
        if layout.size() >= LARGE {
            advise_huge(ptr, layout.size());
        }
        ptr
    }

    /// Bytes held in kept blocks now.
    pub fn kept_bytes(&self) -> usize {
        self.cache().bytes
    }
}

// SAFETY: every block handed out comes from `System` with the requested layout (a kept block
// is only handed back for exactly the layout it was allocated with), and is handed out once.
unsafe impl GlobalAlloc for Recycler {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        // SAFETY: forwarded with the caller's layout.
        unsafe { self.allocate(layout, false) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        // SAFETY: forwarded with the caller's layout.
        unsafe { self.allocate(layout, true) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        if layout.size() >= LARGE {
            let block = Kept {
                addr: ptr as usize,
                size: layout.size(),
                align: layout.align(),
            };
            if self.cache().keep(block, self.limit) {
                return;
            }
        }
        // SAFETY: the block came from `System` with this layout.
        unsafe { System.dealloc(ptr, layout) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        // SAFETY: every live block was allocated by `System` with its current layout.
        let out = unsafe { System.realloc(ptr, layout, new_size) };
        if new_size >= HUGE && new_size > layout.size() {
            advise_huge(out, new_size);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn layout(size: usize) -> Layout {
        Layout::from_size_align(size, 8).unwrap()
    }

    #[test]
    fn a_freed_large_block_is_handed_back_for_the_same_layout_only() {
        let r = Recycler::new(8 * LARGE);
        unsafe {
            let a = r.alloc(layout(2 * LARGE));
            a.write(7);
            r.dealloc(a, layout(2 * LARGE));
            assert_eq!(r.kept_bytes(), 2 * LARGE);
            // The same size is served from the kept block, and zeroed memory is zeroed.
            let c = r.alloc_zeroed(layout(2 * LARGE));
            assert_eq!(a, c);
            assert!(std::slice::from_raw_parts(c, 2 * LARGE)
                .iter()
                .all(|&x| x == 0));
            assert_eq!(r.kept_bytes(), 0);
            r.dealloc(c, layout(2 * LARGE));
            assert_eq!(r.kept_bytes(), 2 * LARGE);
            // Another size is not: it makes the cache give back as much as it asks for.
            let b = r.alloc(layout(3 * LARGE));
            assert_eq!(r.kept_bytes(), 0);
            r.dealloc(b, layout(3 * LARGE));
            assert_eq!(r.kept_bytes(), 3 * LARGE);
        }
    }

    #[test]
    fn the_cache_never_holds_more_than_its_limit_and_small_blocks_pass_through() {
        let r = Recycler::new(4 * LARGE);
        unsafe {
            let blocks: Vec<*mut u8> = (0..5).map(|_| r.alloc(layout(LARGE))).collect();
            for &b in &blocks {
                r.dealloc(b, layout(LARGE));
                assert!(r.kept_bytes() <= 4 * LARGE);
            }
            assert_eq!(r.kept_bytes(), 4 * LARGE);
            // Small blocks are never kept, and do not disturb the kept ones.
            let small = r.alloc(layout(4096));
            r.dealloc(small, layout(4096));
            assert_eq!(r.kept_bytes(), 4 * LARGE);
            // A block larger than the whole limit is given back at once.
            let big = r.alloc(layout(5 * LARGE));
            r.dealloc(big, layout(5 * LARGE));
            assert_eq!(r.kept_bytes(), 0);
            // Growing a block keeps its contents.
            let g = r.alloc(layout(LARGE));
            g.write(42);
            let g2 = r.realloc(g, layout(LARGE), 6 * LARGE);
            assert_eq!(g2.read(), 42);
            r.dealloc(g2, layout(6 * LARGE));
        }
    }

    #[test]
    fn more_blocks_than_slots_evict_the_oldest() {
        let r = Recycler::new(usize::MAX / 2);
        unsafe {
            let blocks: Vec<*mut u8> = (0..SLOTS + 3).map(|_| r.alloc(layout(LARGE))).collect();
            for &b in &blocks {
                r.dealloc(b, layout(LARGE));
            }
            assert_eq!(r.kept_bytes(), SLOTS * LARGE);
            // The newest block is handed out first.
            let again = r.alloc(layout(LARGE));
            assert_eq!(again, blocks[SLOTS + 2]);
            r.dealloc(again, layout(LARGE));
        }
    }
}
