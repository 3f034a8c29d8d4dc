#include "platform/memory_reuse.hpp"

#if __has_include(<malloc.h>)
#include <malloc.h>
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

}  // namespace wane
