#include "platform/memory_reuse.hpp"

#include <cstdint>
#include <cstdlib>

#if __has_include(<malloc.h>)
#include <malloc.h>
#endif
#if defined(__linux__) && __has_include(<sys/mman.h>) && __has_include(<unistd.h>)
#include <sys/mman.h>
#include <unistd.h>
#endif

namespace wane {

void keep_freed_memory_for_reuse() {
#if defined(__GLIBC__) && defined(M_MMAP_THRESHOLD) && defined(M_TRIM_THRESHOLD)
    // Setting either turns off glibc's own adjustment of both (which raises the mmap threshold
    // only after a mapped block has been freed, and only up to the size of that block).
    mallopt(M_MMAP_THRESHOLD, reused_block_bytes);
    mallopt(M_TRIM_THRESHOLD, kept_free_bytes);
#endif
}

bool back_heap_with_huge_pages() {
#if defined(__GLIBC__) && defined(__linux__) && defined(M_TOP_PAD) && defined(MADV_HUGEPAGE) && \
    !defined(__SANITIZE_ADDRESS__)
    // The heap grows by what is asked plus the pad from now on; one block that does not fit its
    // top makes it grow now, and the new part (from its first huge page boundary) is asked for
    // huge pages. Its end is read with sbrk(0) only (the allocator's own growth is left alone).
    mallopt(M_TOP_PAD, huge_page_heap_bytes);
    auto* const before = static_cast<char*>(sbrk(0));
    void* volatile nudge = std::malloc(heap_nudge_bytes);  // volatile: the pair is not optimized away
    std::free(nudge);
    auto* const after = static_cast<char*>(sbrk(0));
    constexpr std::uintptr_t huge_page_bytes = std::uintptr_t{2} << 20;  // x86-64's transparent huge page
    const std::uintptr_t from = (reinterpret_cast<std::uintptr_t>(before) + huge_page_bytes - 1) & ~(huge_page_bytes - 1);
    const auto to = reinterpret_cast<std::uintptr_t>(after);
    if (to <= from + huge_page_bytes) return false;
    return madvise(reinterpret_cast<void*>(from), to - from, MADV_HUGEPAGE) == 0;  // NOLINT(performance-no-int-to-ptr): the heap's own address
#else
    return false;
#endif
}

}  // namespace wane
