// The process's allocator settings (platform/memory_reuse.hpp): blocks under reused_block_bytes
// come from the heap and stay there once freed; larger ones are still mapped on their own. Read
// through glibc's own counters (mallinfo2: hblkhd, the bytes in mapped blocks; fordblks, the free
// bytes the heap keeps), so the check holds only for glibc without a sanitizer's allocator.
// Huge pages for the heap (back_heap_with_huge_pages) are read in /proc/self/smaps (Linux).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cstddef>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <memory>
#include <sstream>
#include <string>

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

/// The size of the largest mapping /proc/self/smaps shows with "hg" (MADV_HUGEPAGE) in its
/// VmFlags, bytes (0: none).
std::size_t largest_huge_page_advised_mapping() {
    std::ifstream smaps("/proc/self/smaps");
    std::string line;
    std::size_t size = 0, largest = 0;
    while (std::getline(smaps, line)) {
        const auto dash = line.find('-');
        const auto space = line.find(' ');
        if (dash != std::string::npos && space != std::string::npos && dash < space &&
            line.find_first_not_of("0123456789abcdef") == dash) {
            size = std::stoull(line.substr(dash + 1, space - dash - 1), nullptr, 16) - std::stoull(line.substr(0, dash), nullptr, 16);
        } else if (line.rfind("VmFlags:", 0) == 0 && (line + " ").find(" hg ") != std::string::npos) {
            largest = std::max(largest, size);
        }
    }
    return largest;
}

/// Whether the kernel offers transparent huge pages to a mapping that asks for them.
bool kernel_has_huge_pages() {
    std::ifstream f("/sys/kernel/mm/transparent_hugepage/enabled");
    std::stringstream text;
    text << f.rdbuf();
    return f && text.str().find("[never]") == std::string::npos;
}

}  // namespace

// First in the file: the heap must not have grown yet when the whole program runs in one process.
TEST_CASE("memory reuse: the heap's next part is asked for huge pages where the kernel has them") {
    if (!kernel_has_huge_pages()) {
        WARN("no transparent huge pages in this kernel: nothing to check");
        return;
    }
    keep_freed_memory_for_reuse();
    REQUIRE(back_heap_with_huge_pages());
    const std::size_t advised = largest_huge_page_advised_mapping();
    INFO("largest mapping advised for huge pages: " << advised << " bytes");
    CHECK(advised >= static_cast<std::size_t>(huge_page_heap_bytes) / 2);
}

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

TEST_CASE("memory reuse: a block over the threshold that the heap's free top cannot hold is mapped on its own") {
    keep_freed_memory_for_reuse();
    // Over the threshold and over what the heap keeps free at its top (huge_page_heap_bytes, once
    // back_heap_with_huge_pages has run in this process), which a block is carved from first.
    const std::size_t large = static_cast<std::size_t>(std::max(reused_block_bytes, huge_page_heap_bytes)) * 2;
    const std::size_t mapped_before = mallinfo2().hblkhd;
    auto block = touched_block(large);
    const std::size_t mapped_with = mallinfo2().hblkhd;
    INFO("mapped bytes before " << mapped_before << ", with the block of " << large << ": " << mapped_with);
    CHECK(mapped_with >= mapped_before + large);
}

#endif
// Elsewhere (another C library, or a sanitizer's allocator, which ignores glibc's settings) there
// are no counters to read, and no test here.
