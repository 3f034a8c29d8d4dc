// Counts the bytes a test program allocates through operator new, so a test can bound the memory
// a piece of work takes by a count instead of by the process's resident size (which depends on
// the machine, the allocator and sanitizers). Include in exactly one file of a test program: it
// replaces the global operator new and delete of that program.
#pragma once

#include <atomic>
#include <cstddef>
#include <cstdlib>
#include <new>

#include <malloc.h>

namespace wane::test {

/// Bytes allocated through operator new and not yet freed, and the highest value it reached.
struct allocation_totals {
    std::atomic<std::size_t> live{0};
    std::atomic<std::size_t> peak{0};
};

inline allocation_totals& allocations() {
    static allocation_totals totals;
    return totals;
}

/// The peak of live bytes while it exists, counted from its construction.
class allocation_peak_scope {
public:
    allocation_peak_scope() : base_(allocations().live.load()) { allocations().peak.store(base_); }
    /// Highest number of bytes live at once since construction, beyond those live before it.
    std::size_t peak_bytes() const {
        const std::size_t p = allocations().peak.load();
        return p > base_ ? p - base_ : 0;
    }

private:
    std::size_t base_;
};

namespace allocation_detail {
/// Each block is counted by the size its allocator gives it (malloc_usable_size: glibc's and the
/// sanitizers' allocators both answer it), so no header is written in front of a block and a
/// block that some other path allocated can still be freed here.
inline void* allocate(std::size_t n) {
    void* p = std::malloc(n == 0 ? 1 : n);
    if (p == nullptr) throw std::bad_alloc();
    const std::size_t size = malloc_usable_size(p);
    const std::size_t now = allocations().live.fetch_add(size) + size;
    std::size_t peak = allocations().peak.load();
    while (now > peak && !allocations().peak.compare_exchange_weak(peak, now)) {
    }
    return p;
}
inline void release(void* p) noexcept {
    if (p == nullptr) return;
    const std::size_t size = malloc_usable_size(p);
    std::size_t live = allocations().live.load();
    while (!allocations().live.compare_exchange_weak(live, live > size ? live - size : 0)) {
    }
    std::free(p);
}
}  // namespace allocation_detail

}  // namespace wane::test

#if !defined(__SANITIZE_ADDRESS__)
// Under AddressSanitizer the sanitizer's allocator owns operator new and delete: nothing is
// counted there (peak_bytes() reads 0) and the byte bounds are checked by the plain build.
void* operator new(std::size_t n) { return wane::test::allocation_detail::allocate(n); }
void* operator new[](std::size_t n) { return wane::test::allocation_detail::allocate(n); }
void operator delete(void* p) noexcept { wane::test::allocation_detail::release(p); }
void operator delete[](void* p) noexcept { wane::test::allocation_detail::release(p); }
void operator delete(void* p, std::size_t) noexcept { wane::test::allocation_detail::release(p); }
void operator delete[](void* p, std::size_t) noexcept { wane::test::allocation_detail::release(p); }
#endif
