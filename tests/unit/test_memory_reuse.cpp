// The process's allocator settings (platform/memory_reuse.hpp): blocks under reused_block_bytes
// come from the heap and stay there once freed; larger ones are still mapped on their own. Read
// through glibc's own counters (mallinfo2: hblkhd, the bytes in mapped blocks; fordblks, the free
// bytes the heap keeps), so the check holds only for glibc without a sanitizer's allocator.
#include <catch2/catch.hpp>

#include <cstddef>
#include <cstring>
#include <memory>

#if __has_include(<malloc.h>)
#include <malloc.h>
#endif

#include "platform/memory_reuse.hpp"

using namespace wane;

#if defined(__GLIBC__) && (__GLIBC__ > 2 || __GLIBC_MINOR__ >= 33) && !defined(__SANITIZE_ADDRESS__)

namespace {

/// A block of `bytes`, every page written (so it is really there).
std::unique_ptr<char[]> touched_block(std::size_t bytes) {
    auto block = std::make_unique<char[]>(bytes);
    std::memset(block.get(), 1, bytes);
    return block;
}

}  // namespace

TEST_CASE("memory reuse: a block under the threshold comes from the heap and is kept there once freed") {
    keep_freed_memory_for_reuse();
    const std::size_t small = static_cast<std::size_t>(reused_block_bytes) * 3 / 4;
    const std::size_t mapped_before = mallinfo2().hblkhd;
    auto block = touched_block(small);
    const std::size_t mapped_with = mallinfo2().hblkhd;
    INFO("mapped bytes before " << mapped_before << ", with the block of " << small << ": " << mapped_with);
    CHECK(mapped_with < mapped_before + small);
    block.reset();
    const std::size_t kept_free = mallinfo2().fordblks;
    INFO("free bytes the heap keeps after freeing it: " << kept_free);
    CHECK(kept_free >= small);
}

TEST_CASE("memory reuse: a block over the threshold is still mapped on its own") {
    keep_freed_memory_for_reuse();
    const std::size_t large = static_cast<std::size_t>(reused_block_bytes) * 2;
    const std::size_t mapped_before = mallinfo2().hblkhd;
    auto block = touched_block(large);
    const std::size_t mapped_with = mallinfo2().hblkhd;
    INFO("mapped bytes before " << mapped_before << ", with the block of " << large << ": " << mapped_with);
    CHECK(mapped_with >= mapped_before + large);
}

#endif
// Elsewhere (another C library, or a sanitizer's allocator, which ignores glibc's settings) there
// are no counters to read, and no test here.
