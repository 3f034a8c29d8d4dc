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

namespace {
std::string shape_error(const std::string& text) {
    try {
        wane::guard_toml_text(text, "g.toml", {.max_nesting_depth = 4, .max_line_bytes = 1000});
    } catch (const wane::patch_error& e) {
        return e.what();
    }
    return {};
}
std::string repeat(const std::string& s, int n) {
    std::string out;
    for (int i = 0; i < n; ++i) out += s;
    return out;
}
}  // namespace

// Structures deeper than a patch are refused before the parser recurses into
// them (a 50,000-level dotted key overflowed its stack), with the reader's one-line depth message.
TEST_CASE("deep dotted keys, headers and nesting are refused before parsing", "[toml_guard]") {
    const std::string depth_message = "tables and arrays nest more than 4 levels deep here, deeper than any patch";
    const int levels = GENERATE(5, 50, 50000);
    CAPTURE(levels);
    std::string key = "x";
    key += repeat(".a", levels);
    CHECK_THAT(shape_error("a = 1\n" + key + " = 1\n"), Contains("g.toml:2:") && Contains(depth_message));
    CHECK_THAT(shape_error("[" + key + "]\n"), Contains("g.toml:1:") && Contains(depth_message));
    CHECK_THAT(shape_error("[[" + key + "]]\n"), Contains(depth_message));
    CHECK_THAT(shape_error("t = { " + key + " = 1 }\n"), Contains(depth_message));
    CHECK_THAT(shape_error("\"q\"" + repeat(".\"a\"", levels) + " = 1\n"), Contains(depth_message));
    CHECK_THAT(shape_error("x = " + repeat("[", levels + 4) + repeat("]", levels + 4) + "\n"), Contains(depth_message));
    CHECK_THAT(shape_error("x = " + repeat("{a=", levels + 4) + "1" + repeat("}", levels + 4) + "\n"),
               Contains(depth_message));
}

TEST_CASE("a long line is refused, the shapes of a patch pass", "[toml_guard]") {
    CHECK(shape_error("s = \"" + std::string(2000, 'a') + "\"\n") == "g.toml:1: line of 2006 bytes (key 's'), longer than the 1000 a patch may have");
    // What patches hold: dotted keys within the depth, floats, times, decay arrays of inline tables.
    CHECK(shape_error("a.b.c.d.e = 1\n[source.analysis]\nx = 1.5e-3\nt = 07:32:00.999\n"
                      "decay = [ { t60_s = 1.9, until_s = 0.80 }, { t60_s = 6.4 } ]\n"
                      "s = \"a.b.c.d.e.f.g [[[[[[[[[[\" # ...... [[[[[[[[[[\n")
              .empty());
    // Every example patch passes with the reader's limits (it reads them).
    for (const auto& entry : std::filesystem::directory_iterator(std::filesystem::path(WANE_SOURCE_DIR) / "patches")) {
        if (entry.path().extension() != ".toml") continue;
        CAPTURE(entry.path().string());
        CHECK_NOTHROW(wane::read_patch_file(entry.path()));
    }
}
