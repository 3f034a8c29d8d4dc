// How the process's allocator hands memory back to the system. One `wane analyze` of a note
// allocates and frees many buffers of a few hundred kilobytes to a few megabytes (rendered notes,
// Gram matrices, noise pools); with glibc's defaults each of those past its mmap threshold is a
// fresh mapping whose every page faults in zeroed and is unmapped again when freed.
#pragma once

namespace wane {

/// Buffers up to reused_block_bytes come from the heap and stay there once freed (up to
/// kept_free_bytes left free at its top) to be reused by the next allocation, instead of a fresh
/// mapping each time. Measured on `wane analyze demo-data/steel-string-d3.wav -j 1`: 8594 -> 4645
/// page faults, about 4% of the run's CPU time. Larger buffers (a long recording's samples) are
/// still mapped and unmapped as before (tools/bench_memory's 10-minute held note: peak RSS 805.6
/// -> 813.6 MB at 4 MB; 847.8 MB at 8 MB, whose blocks fragment the heap). A no-op on C libraries
/// other than glibc. Call once, first thing in main.
void keep_freed_memory_for_reuse();

inline constexpr int reused_block_bytes = 4 << 20;
inline constexpr int kept_free_bytes = 16 << 20;
static_assert(kept_free_bytes >= reused_block_bytes, "a freed block at the heap's top must not be trimmed away at once");

}  // namespace wane
