// The non-ASCII guard run before toml++ (io/toml_guard.hpp): refuses a non-ASCII byte outside
// strings and comments with its line and column (TOML 1.0, toml.io/en/v1.0.0: bare keys are
// A-Za-z0-9_- and whitespace is space or tab), and lets every valid use through.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>

#include "io/errors.hpp"
#include "io/patch_toml.hpp"
#include "io/toml_guard.hpp"

using Catch::Matchers::Contains;

namespace {
std::string guard_error(const std::string& text) {
    try {
        wane::refuse_non_ascii_outside_strings(text, "g.toml");
    } catch (const wane::patch_error& e) {
        return e.what();
    }
    return {};
}
}  // namespace

TEST_CASE("non-ASCII outside strings and comments is refused with its position", "[toml_guard]") {
    // U+01FE (bytes C7 BE) inside a number, as in the fuzz finding.
    CHECK(guard_error("a = 1\nf0_hz = 195.\xC7\xBE" "7718\n") ==
          "g.toml:2:13: not valid TOML: a non-ASCII character outside a string or a comment");
    CHECK_THAT(guard_error("k\xC3\xA9y = 1\n"), Contains("g.toml:1:2:"));           // a non-ASCII bare key
    CHECK_THAT(guard_error("a = 1\xC2\xA0\n"), Contains("g.toml:1:6:"));            // no-break space after a value
    CHECK_THAT(guard_error("s = \"x\" \xE3\x80\x80# c\n"), Contains("g.toml:1:9:"));  // ideographic space
    CHECK_THAT(guard_error("s = \"\"\"a\n\"\"\" \xC3\xA9\n"), Contains("g.toml:2:5:")); // after a multi-line string
}

TEST_CASE("non-ASCII inside strings and comments passes", "[toml_guard]") {
    CHECK(guard_error("name = \"Glocke \xC3\xA9t\xC3\xA9 \\\" \xE2\x99\xAA\"  # caf\xC3\xA9\n").empty());
    CHECK(guard_error("name = 'C:\\caf\xC3\xA9'\n").empty());
    CHECK(guard_error("t = \"\"\"\n\xC3\xA9 \"quoted\" \"\" \\\"\"\"\n\xC3\xA9\n\"\"\"\"\"\nk = 1\n").empty());
    CHECK(guard_error("t = '''\n\xC3\xA9 'x' ''\n''''' # \xC3\xA9\n").empty());
    CHECK(guard_error("").empty());
}

TEST_CASE("the fuzz finding is refused by the guard and the example patches pass it", "[toml_guard]") {
    const std::filesystem::path src(WANE_SOURCE_DIR);
    const auto text_of = [](const std::filesystem::path& p) {
        std::ifstream f(p, std::ios::binary);
        return std::string(std::istreambuf_iterator<char>(f), std::istreambuf_iterator<char>());
    };
    const std::string crash = text_of(src / "tests/fuzz/regressions/patch/toml-unicode-unreachable.toml");
    REQUIRE(!crash.empty());
    CHECK_THAT(guard_error(crash), Contains("non-ASCII character outside a string"));
    int examples = 0;
    for (const auto& e : std::filesystem::directory_iterator(src / "tests/fuzz/corpus/patch")) {
        INFO(e.path().string());
        CHECK(guard_error(text_of(e.path())).empty());
        ++examples;
    }
    CHECK(examples > 0);
}
