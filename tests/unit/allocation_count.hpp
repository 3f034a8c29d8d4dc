// Counts the bytes a test program allocates through operator new, so a test can bound the memory
// a piece of work takes by a count instead of by the process's resident size (which depends on
// the machine, the allocator and sanitizers). Include in exactly one file of a test program: it
// replaces the global operator new and delete of that program.
#pragma once

#include <atomic>
#include <cstddef>
#include <cstdlib>
#include <new>

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
/// Each block carries its size in a header of max_align_t size.
inline constexpr std::size_t header = alignof(std::max_align_t) > sizeof(std::size_t) ? alignof(std::max_align_t)
                                                                                      : sizeof(std::size_t);
inline void* allocate(std::size_t n) {
    void* raw = std::malloc(n + header);
    if (raw == nullptr) throw std::bad_alloc();
    *static_cast<std::size_t*>(raw) = n;
    const std::size_t now = allocations().live.fetch_add(n) + n;
    std::size_t p = allocations().peak.load();
    while (now > p && !allocations().peak.compare_exchange_weak(p, now)) {
    }
    return static_cast<char*>(raw) + header;
}
inline void release(void* p) noexcept {
    if (p == nullptr) return;
    void* raw = static_cast<char*>(p) - header;
    allocations().live.fetch_sub(*static_cast<std::size_t*>(raw));
    std::free(raw);
}
}  // namespace allocation_detail

}  // namespace wane::test

void* operator new(std::size_t n) { return wane::test::allocation_detail::allocate(n); }
void* operator new[](std::size_t n) { return wane::test::allocation_detail::allocate(n); }
void operator delete(void* p) noexcept { wane::test::allocation_detail::release(p); }
void operator delete[](void* p) noexcept { wane::test::allocation_detail::release(p); }
void operator delete(void* p, std::size_t) noexcept { wane::test::allocation_detail::release(p); }
void operator delete[](void* p, std::size_t) noexcept { wane::test::allocation_detail::release(p); }
