// The patch format's validation (version 1): every rule's refusal names file, line and key, and
// unknown keys warn with the nearest known one. The reference for each rule is the format definition
// (patches/README.md); TOML syntax facts cite the TOML v1.0.0 specification.
#include <catch2/catch.hpp>

#include <cmath>
#include <string>
#include <vector>

#include "core/patch.hpp"
#include "io/errors.hpp"
#include "io/patch_toml.hpp"
#include "base_patch.hpp"
#include "patch_text.hpp"

using Catch::Matchers::Contains;
using Catch::Matchers::StartsWith;
using namespace wane;
using wane::test::base_text;
using wane::test::error_of;
using wane::test::expect_error;
using wane::test::line_tag;
using wane::test::with;

TEST_CASE("integers are accepted where floats are wanted", "[patch][validate]") {
    // TOML v1.0.0 keeps integers and floats apart; the format accepts both for numbers.
    const auto r = parse_patch(with(base_text, "length_s = 4.0", "length_s = 4"), "pluck.toml");
    CHECK(r.value.note.length_s == 4.0);
    CHECK(parse_patch(with(base_text, "length_s = 4.0", "length_s = 600"), "pluck.toml").value.note.length_s == 600.0);
}

TEST_CASE("TOML syntax errors name the line and column", "[patch][validate]") {
    const std::string bad = with(base_text, "harmonic = 2", "harmonic = 2 2");
    const std::string msg = error_of(bad);
    INFO(msg);
    CHECK_THAT(msg, StartsWith("pluck.toml" + line_tag(bad, "harmonic = 2 2")));
    CHECK_THAT(msg, Contains("not valid TOML"));
    const std::string dup = with(base_text, "gain_db = 0.0", "gain_db = 0.0\nf0_hz = 3.0");
    expect_error(dup, "f0_hz = 3.0", "f0_hz");  // TOML v1.0.0, Keys: defining a key twice is invalid
}

TEST_CASE("wrong types are refused naming the key", "[patch][validate]") {
    expect_error(with(base_text, "freq_hz = 146.901", "freq_hz = \"146.901\""), "freq_hz = \"", "partial 1: freq_hz",
                 "must be a number, not a string");
    expect_error(with(base_text, "peak_db = -18.0", "peak_db = true"), "peak_db = true", "partial 2: peak_db", "boolean");
    expect_error(with(base_text, "harmonic = 2", "harmonic = 2.0"), "harmonic = 2.0", "partial 2: harmonic",
                 "must be an integer");
    expect_error(with(base_text, "name = \"test pluck\"", "name = 3"), "name = 3", "note.name", "must be a string");
    expect_error(with(base_text, "decay = [ { t60_s = 0.08 } ]", "decay = 0.08"), "decay = 0.08", "noise 1: decay",
                 "must be an array");
    expect_error(with(base_text, "{ t60_s = 6.4 }", "6.4"), "6.4 ]", "partial 1: decay[2]", "must be a table");
    expect_error(with(base_text, "fft_size = 8192", "fft_size = \"8192\""), "fft_size", "source.analysis.fft_size");
}

TEST_CASE("required keys", "[patch][validate]") {
    expect_error(with(base_text, "freq_hz = 293.9\n", ""), "[[partial]]\nharmonic = 2", "partial 2",
                 "missing required key freq_hz");
    expect_error(with(base_text, "peak_db = -40.0\n", ""), "[[noise]]", "noise 1", "missing required key peak_db");
    expect_error(with(base_text, "decay = [ { t60_s = 0.08 } ]\n", ""), "[[noise]]", "noise 1",
                 "missing required key decay");
    expect_error(with(base_text, "{ t60_s = 6.4 }", "{ }"), "{ } ]", "partial 1: decay[2]", "missing required key t60_s");
    expect_error(with(base_text, "length_s = 4.0\n", ""), "[note]", "note", "missing required key length_s");
    expect_error(with(base_text, "hop_s = 0.005\n", ""), "[source.analysis]", "source.analysis",
                 "missing required key hop_s");
    // A misspelt required key is pointed at.
    const std::string typo = with(base_text, "length_s = 4.0", "lenght_s = 4.0");
    const std::string msg = error_of(typo);
    INFO(msg);
    CHECK_THAT(msg, Contains("'lenght_s' at line " + std::to_string(std::stoi(line_tag(typo, "lenght_s").substr(1)))));
}

TEST_CASE("format and version", "[patch][validate]") {
    const std::string no_format = with(base_text, "format = \"wane-patch\"\n", "");
    CHECK_THAT(error_of(no_format), StartsWith("pluck.toml:1:1: not a wane patch"));
    expect_error(with(base_text, "\"wane-patch\"", "\"other-patch\""), "format =", "format", "'other-patch'");
    // The newest version read moved from 2 to 3 with stereo patches (issue 19): one past it is refused.
    const std::string newer = "version = " + std::to_string(patch_format_version + 1);
    expect_error(with(base_text, "version = 1", newer), newer, "version",
                 "made by a newer wane; this one reads versions 1 to " + std::to_string(patch_format_version));
    expect_error(with(base_text, "version = 1", "version = 0"), "version = 0", "version");
    expect_error(with(base_text, "version = 1", "version = 1.0"), "version = 1.0", "version", "must be an integer");
    CHECK_THAT(error_of(with(base_text, "version = 1\n", "")), Contains("version"));
}

TEST_CASE("root keys: version 1 has none (f0 serves), version 2 round-trips them, bad ones are refused",
          "[patch][validate][pitch]") {
    // Version 1 (no root keys): the root is unstated and f0_hz is the root's frequency.
    const patch v1 = parse_patch(base_text, "pluck.toml").value;
    CHECK(v1.note.root.method == root_method::unstated);
    CHECK(root_hz(v1.note) == v1.note.f0_hz);
    // Version 2 with a root: read, then written byte for byte the same.
    const std::string v2 = with(with(base_text, "version = 1", "version = 2"), "f0_hz = 146.832\n",
                                "f0_hz = 146.832\nroot = \"D3\"\ntuning_cents = -1.25\na4_hz = 442\n"
                                "root_found_by = \"harmonic-series\"\n");
    const patch p = parse_patch(v2, "pluck.toml").value;
    CHECK(p.note.root.midi == 50);
    CHECK(p.note.root.tuning_cents == -1.25);
    CHECK(p.note.root.method == root_method::harmonic_series);
    // 442 x 2^((50 - 1.25 / 100 - 69) / 12): equal temperament (ISO 16 with A4 = 442 Hz).
    CHECK_THAT(root_hz(p.note), Catch::Matchers::WithinRel(442.0 * std::exp2((50.0 - 0.0125 - 69.0) / 12.0), 1e-12));
    const std::string written = format_patch(p);
    CHECK(format_patch(parse_patch(written, "again").value) == written);
    CHECK(parse_patch(written, "again").value == p);
    // A root alone was set by hand.
    CHECK(parse_patch(with(base_text, "f0_hz = 146.832\n", "f0_hz = 146.832\nroot = \"C4\"\n"), "x").value.note.root.method ==
          root_method::by_hand);
    expect_error(with(v2, "root = \"D3\"", "root = \"H3\""), "root = \"H3\"", "note.root", "note name");
    expect_error(with(v2, "\"harmonic-series\"", "\"guessed\""), "\"guessed\"", "note.root_found_by");
    expect_error(with(v2, "\"harmonic-series\"", "\"unpitched\""), "root = \"D3\"", "note.root", "unpitched");
    expect_error(with(v2, "tuning_cents = -1.25", "tuning_cents = 250"), "tuning_cents = 250", "note.tuning_cents");
    expect_error(with(v2, "a4_hz = 442", "a4_hz = 44"), "a4_hz = 44", "note.a4_hz");
    const std::string unpitched = with(base_text, "f0_hz = 146.832\n", "f0_hz = 0\nroot_found_by = \"unpitched\"\n");
    CHECK(parse_patch(unpitched, "x").value.note.root.method == root_method::unpitched);
    CHECK(root_hz(parse_patch(unpitched, "x").value.note) == 0.0);
}

TEST_CASE("decay segments: until_s increasing and after attack_s, t60_s not 0", "[patch][validate]") {
    expect_error(with(base_text, "{ t60_s = 2.5, until_s = 1.5 }", "{ t60_s = 2.5, until_s = 0.4 }"), "until_s = 0.4",
                 "partial 2: decay[2].until_s", "must be after decay[1].until_s");
    expect_error(with(base_text, "{ t60_s = 2.5, until_s = 1.5 }", "{ t60_s = 2.5, until_s = 0.5 }"),
                 "{ t60_s = 2.5, until_s = 0.5 }", "partial 2: decay[2].until_s", "must be after");
    expect_error(with(base_text, "until_s = 0.8", "until_s = 0.002"), "until_s = 0.002", "partial 1: decay[1].until_s",
                 "must be after attack_s");
    expect_error(with(base_text, "{ t60_s = 1.2, until_s = 0.5 }", "{ t60_s = 0, until_s = 0.5 }"), "t60_s = 0,",
                 "partial 2: decay[1].t60_s", "must not be 0");
    expect_error(with(base_text, "{ t60_s = 6.4 }", "{ t60_s = 0.0 }"), "{ t60_s = 0.0 }", "partial 1: decay[2].t60_s",
                 "must not be 0");
    // A T60 too short for the file's 0.1 ms grid rounds to 0 and is refused, saying so.
    expect_error(with(base_text, "{ t60_s = 0.08 }", "{ t60_s = 0.00001 }"), "0.00001", "noise 1: decay[1].t60_s",
                 "once rounded");
    expect_error(with(base_text, "{ t60_s = 1.9, until_s = 0.8 }", "{ t60_s = 1.9 }"), "{ t60_s = 1.9 }",
                 "partial 1: decay[1]", "needs until_s");
    expect_error(with(base_text, "{ t60_s = 6.4 }", "{ t60_s = 6.4, until_s = 3.0 }"), "until_s = 3.0",
                 "partial 1: decay[2].until_s", "last segment");
    expect_error(with(base_text, "decay = [ { t60_s = 0.08 } ]", "decay = [ ]"), "decay = [ ]", "noise 1: decay",
                 "at least one segment");
}

TEST_CASE("envelope and partial ranges", "[patch][validate]") {
    expect_error(with(base_text, "attack_s = 0.003", "attack_s = -0.001"), "attack_s = -0.001", "partial 2: attack_s",
                 ">= 0");
    expect_error(with(base_text, "freq_hz = 293.9", "freq_hz = 0"), "freq_hz = 0", "partial 2: freq_hz", "> 0");
    expect_error(with(base_text, "freq_hz = 293.9", "freq_hz = -5.0"), "freq_hz = -5.0", "partial 2: freq_hz", "> 0");
    expect_error(with(base_text, "peak_db = -12.0", "peak_db = 24.5"), "peak_db = 24.5", "partial 1: peak_db", "+24");
    CHECK(error_of(with(base_text, "peak_db = -12.0", "peak_db = 24.0")).empty());
    expect_error(with(base_text, "harmonic = 2", "harmonic = -1"), "harmonic = -1", "partial 2: harmonic", ">= 0");
    expect_error(with(base_text, "f0_hz = 146.832", "f0_hz = -1.0"), "f0_hz = -1.0", "note.f0_hz");
    expect_error(with(base_text, "inharmonicity_b = 2.1e-4", "inharmonicity_b = -1e-4"), "inharmonicity_b",
                 "note.inharmonicity_b");
}

TEST_CASE("length_s must be above 0 and at most 600 s", "[patch][validate]") {
    expect_error(with(base_text, "length_s = 4.0", "length_s = 0"), "length_s = 0", "note.length_s", "(0, 600]");
    expect_error(with(base_text, "length_s = 4.0", "length_s = -2.0"), "length_s = -2.0", "note.length_s", "(0, 600]");
    expect_error(with(base_text, "length_s = 4.0", "length_s = 600.5"), "length_s = 600.5", "note.length_s", "(0, 600]");
}

TEST_CASE("NaN is refused anywhere, infinity where it makes no sense", "[patch][validate]") {
    // TOML v1.0.0, Float: nan and inf are valid floats, so the format must refuse them itself.
    expect_error(with(base_text, "freq_hz = 146.901", "freq_hz = nan"), "freq_hz = nan", "partial 1: freq_hz", "NaN");
    expect_error(with(base_text, "peak_db = -40.0", "peak_db = nan"), "peak_db = nan", "noise 1: peak_db", "NaN");
    expect_error(with(base_text, "{ t60_s = 6.4 }", "{ t60_s = nan }"), "t60_s = nan", "partial 1: decay[2].t60_s", "NaN");
    expect_error(with(base_text, "until_s = 0.8", "until_s = -nan"), "until_s = -nan", "partial 1: decay[1].until_s", "NaN");
    expect_error(with(base_text, "f0_hz = 146.832", "f0_hz = +nan"), "f0_hz = +nan", "note.f0_hz", "NaN");
    expect_error(with(base_text, "onset_s = 0.512", "onset_s = nan"), "onset_s = nan", "source.onset_s", "NaN");
    expect_error(with(base_text, "phase_rad = -0.5", "phase_rad = nan"), "phase_rad = nan", "partial 2: phase_rad", "NaN");
    expect_error(with(base_text, "low_hz = 1000.0", "low_hz = nan"), "low_hz = nan", "noise 1: low_hz", "NaN");
    expect_error(with(base_text, "freq_hz = 146.901", "freq_hz = inf"), "freq_hz = inf", "partial 1: freq_hz", "inf");
    expect_error(with(base_text, "until_s = 0.8", "until_s = inf"), "until_s = inf", "partial 1: decay[1].until_s");
    CHECK(error_of(with(base_text, "{ t60_s = 6.4 }", "{ t60_s = inf }")).empty());
    CHECK(error_of(with(base_text, "{ t60_s = 6.4 }", "{ t60_s = -inf }")).empty());
}

TEST_CASE("noise bands: 0 <= low_hz < high_hz", "[patch][validate]") {
    expect_error(with(base_text, "low_hz = 1000.0", "low_hz = -10.0"), "low_hz = -10.0", "noise 1: low_hz", "must be in [0, ");
    expect_error(with(base_text, "high_hz = 4000.0", "high_hz = 1000.0"), "high_hz = 1000.0", "noise 1: high_hz",
                 "must be above low_hz");
    CHECK(error_of(with(base_text, "low_hz = 1000.0", "low_hz = 0")).empty());
}

TEST_CASE("at most 4096 partials", "[patch][validate]") {
    std::string partial_block = base_text.substr(base_text.find("[[partial]]"));
    partial_block = partial_block.substr(0, partial_block.find("\n\n") + 2);
    std::string text = base_text;
    for (std::size_t i = 0; i < max_partials - 1; ++i) text += "\n" + partial_block;  // 4097 with the two
    const std::string msg = error_of(text);
    INFO(msg);
    // The 4097th [[partial]] header: count header lines up to it.
    std::size_t line = 1;
    std::size_t headers = 0;
    for (std::size_t i = 0; i < text.size(); ++i) {
        if (text.compare(i, 12, "[[partial]]\n") == 0 && (i == 0 || text[i - 1] == '\n') && ++headers == max_partials + 1) break;
        if (text[i] == '\n') ++line;
    }
    CHECK_THAT(msg, StartsWith("pluck.toml:" + std::to_string(line) + ":1:"));
    CHECK_THAT(msg, Contains("4096"));
    // Exactly 4096 load (2 in the base + 4094).
    std::string ok = base_text;
    for (std::size_t i = 0; i < max_partials - 2; ++i) ok += "\n" + partial_block;
    CHECK(parse_patch(ok, "ok.toml").value.partials.size() == max_partials);
    // The inline-array form is counted too.
    std::string array = "partial = [\n";  // at the top level, before [note]
    for (std::size_t i = 0; i <= max_partials; ++i) {
        array += "  { freq_hz = 100.0, peak_db = -20.0, decay = [ { t60_s = 1.0 } ] },\n";
    }
    array += "]\n";
    std::string inline_form = base_text.substr(0, base_text.find("[[partial]]"));
    inline_form.insert(inline_form.find("[note]"), array);
    CHECK_THAT(error_of(inline_form), Contains("4096"));
}

TEST_CASE("files above 16 MiB and deep nesting are refused before parsing", "[patch][validate]") {
    const std::string big = base_text + "# " + std::string(std::size_t{16} << 20, 'x') + "\n";
    const std::string msg = error_of(big);
    INFO(msg.substr(0, 200));
    CHECK_THAT(msg, StartsWith("pluck.toml: "));
    CHECK_THAT(msg, Contains("16 MiB"));
    const std::string deep = with(base_text, "[source.analysis]", "[source.analysis.a.b.c]\nx = 1\n[source.analysis]");
    expect_error(deep, "[source.analysis.a.b.c]", "nest");
}

TEST_CASE("a patch with nothing to render is refused", "[patch][validate]") {
    const std::string only_head = base_text.substr(0, base_text.find("[[partial]]"));
    CHECK_THAT(error_of(only_head), Contains("no [[partial]] and no [[noise]]"));
}

TEST_CASE("unknown keys warn with file:line:col and the nearest known key", "[patch][warn]") {
    struct case_t {
        std::string from, to, needle, expect;
    };
    const case_t cases[] = {
        {"gain_db = 0.0", "gain_db = 0.0\nlenght_s = 4.0", "lenght_s", "unknown key 'lenght_s' (did you mean 'length_s'?)"},
        {"phase_rad = -0.5", "phase_rad = -0.5\npeak = 3", "peak = 3", "partial 2: unknown key 'peak' (did you mean 'peak_db'?)"},
        {"{ t60_s = 6.4 }", "{ t60_s = 6.4, untill_s = 9.0 }", "untill_s",
         "partial 1: decay[2]: unknown key 'untill_s' (did you mean 'until_s'?)"},
        {"hop_s = 0.005", "hop_s = 0.005\nwindow_size = 4", "window_size", "source.analysis: unknown key 'window_size'"},
        {"low_hz = 1000.0", "low_hz = 1000.0\nhigh = 3", "high = 3", "noise 1: unknown key 'high' (did you mean 'high_hz'?)"},
        {"version = 1", "version = 1\ncomment = \"x\"", "comment", "unknown key 'comment' (known keys here: format"},
        {"onset_s = 0.512", "onset_s = 0.512\nf0_hz = 3.0", "f0_hz = 3.0", "source: unknown key 'f0_hz'"},
        {"harmonic = 2", "harmonic = 2\nuntil_s = 3.0", "until_s = 3.0", "'until_s' belongs in a decay segment"},
    };
    for (const case_t& c : cases) {
        const std::string text = with(base_text, c.from, c.to);
        const auto r = parse_patch(text, "pluck.toml");
        CAPTURE(c.expect);
        REQUIRE(r.warnings.size() == 1);
        INFO(r.warnings[0]);
        CHECK_THAT(r.warnings[0], StartsWith("pluck.toml" + line_tag(text, c.needle)));
        CHECK_THAT(r.warnings[0], Contains(c.expect));
    }
}
