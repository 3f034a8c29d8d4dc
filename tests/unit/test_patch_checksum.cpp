// The checksum line wane appends to the patches it writes (io/patch_checksum.hpp), which lets it
// refuse to overwrite a patch edited by hand since.
#include <catch2/catch.hpp>

#include <string>

#include "io/patch_checksum.hpp"

TEST_CASE("FNV-1a 64 matches the published test vectors", "[checksum]") {
    // FNV test vectors (www.isthe.com/chongo/tech/comp/fnv), quoted from memory and checked here
    // against an independent Python implementation of the published algorithm.
    CHECK(wane::fnv1a64("") == 0xcbf29ce484222325ULL);
    CHECK(wane::fnv1a64("a") == 0xaf63dc4c8601ec8cULL);
    CHECK(wane::fnv1a64("foobar") == 0x85944171f73967e8ULL);
}

TEST_CASE("a patch as written is unchanged, any edit, also after the mark, is seen", "[checksum]") {
    const std::string body = "format = \"wane-patch\"\nversion = 2\n\n[note]\ngain_db = 0.00\n";
    const std::string written = wane::with_checksum(body);
    CAPTURE(written);
    CHECK(written.starts_with(body));
    CHECK(wane::patch_mark_of(written) == wane::patch_mark::unchanged);
    CHECK(wane::patch_mark_of(body) == wane::patch_mark::unmarked);
    const std::size_t at = GENERATE(0u, 10u, 30u);  // change one byte anywhere in the body
    std::string edited = written;
    edited[at] = edited[at] == 'x' ? 'y' : 'x';
    CAPTURE(at);
    CHECK(wane::patch_mark_of(edited) == wane::patch_mark::edited);
    CHECK(wane::patch_mark_of(written + "gain_db = -6\n") == wane::patch_mark::edited);  // appended
    CHECK(wane::patch_mark_of(wane::with_checksum(written)) == wane::patch_mark::unchanged);
}
