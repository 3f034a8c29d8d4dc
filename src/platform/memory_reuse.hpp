// How the process's allocator hands memory back to the system. One `wane analyze` of a note
// allocates and frees many buffers of a few hundred kilobytes to a few megabytes (rendered notes,
// Gram matrices, noise pools); with glibc's defaults each of those past its mmap threshold is a
// fresh mapping whose every page faults in zeroed and is unmapped again when freed.
#pragma once

#include <cstddef>

namespace wane {

/// Buffers up to reused_block_bytes come from the heap and stay there once freed (up to
/// kept_free_bytes left free at its top) to be reused by the next allocation, instead of a fresh
/// mapping each time. Measured on `wane analyze demo-data/steel-string-d3.wav -j 1`: 8594 -> 4645
/// page faults, about 4% of the run's CPU time. Larger buffers (a long recording's samples) are
/// still mapped and unmapped as before (tools/bench_memory's 10-minute held note: peak RSS 805.6
/// -> 813.6 MB at 4 MB; 847.8 MB at 8 MB, whose blocks fragment the heap). A no-op on C libraries
/// other than glibc. Call once, first thing in main.
void keep_freed_memory_for_reuse();

/// The heap of the main thread backed by transparent huge pages: the next huge_page_heap_bytes of
/// it are asked for huge pages (madvise MADV_HUGEPAGE), and it grows by that much past what is
/// asked (M_TOP_PAD) from then on, so it keeps up to that much free at its top (as the trim
/// threshold, kept_free_bytes, already let it), and a block over reused_block_bytes that this free
/// top holds is carved from it instead of mapped. An analysis touches about 16 MB of heap, which
/// with 4 KB pages faults in page by page. Measured on `wane analyze demo-data/steel-string-d3.wav
/// -j 1 -q`, six alternating perf stat runs of 10: 4245 -> 870-1180 page faults, CPU median
/// 123.2 -> 118.5 ms; peak RSS 26.3 -> 26.1 MB; tools/bench_memory's 10-minute notes: pluck 357.4
/// -> 359.6 MB, held 584.1 -> 599.7 MB (the top kept free). Half the region (8 MB) took only 2710
/// faults off. Returns whether the advice was taken (false: not glibc on Linux, a sanitizer's
/// allocator, the heap could not grow in place, or no huge pages in the kernel; the allocator then
/// works as before). Call once, right after keep_freed_memory_for_reuse.
bool back_heap_with_huge_pages();

inline constexpr int reused_block_bytes = 4 << 20;
inline constexpr int kept_free_bytes = 16 << 20;
inline constexpr int huge_page_heap_bytes = kept_free_bytes;
/// A block the heap's top cannot hold at start (a fresh heap's top is about 132 KB), under the
/// mmap threshold (so it comes from the heap).
inline constexpr std::size_t heap_nudge_bytes = std::size_t{1} << 20;
static_assert(heap_nudge_bytes < static_cast<std::size_t>(reused_block_bytes), "the nudge must come from the heap");
static_assert(kept_free_bytes >= reused_block_bytes, "a freed block at the heap's top must not be trimmed away at once");

}  // namespace wane
