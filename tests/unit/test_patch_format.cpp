// The patch format (version 1): canonical writing, byte-identical round trips, and validation
// errors that name file, line and key. The reference for each rule is the format definition
// (patches/README.md); TOML syntax facts cite the TOML v1.0.0 specification.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "core/envelope.hpp"
#include "core/patch.hpp"
#include "io/errors.hpp"
#include "io/patch_toml.hpp"
#include "patch_text.hpp"
#include "test_signals.hpp"

using Catch::Matchers::Contains;
using Catch::Matchers::StartsWith;
using Catch::Matchers::WithinAbs;
namespace fs = std::filesystem;
using namespace wane;
using wane::test::with;

namespace {

std::string read_text(const fs::path& path) {
    std::ifstream in(path, std::ios::binary);
    std::stringstream ss;
    ss << in.rdbuf();
    return ss.str();
}

std::vector<fs::path> example_patches() {
    std::vector<fs::path> out;
    for (const auto& e : fs::directory_iterator(fs::path(WANE_SOURCE_DIR) / "patches")) {
        if (e.path().extension() == ".toml") out.push_back(e.path());
    }
    std::sort(out.begin(), out.end());
    return out;
}

// A small valid patch, one key per line so each rule's line is easy to find.
const std::string base_text = R"(format = "wane-patch"
version = 1

[note]
name = "test pluck"
f0_hz = 146.832
length_s = 4.0
inharmonicity_b = 2.1e-4
gain_db = 0.0

[source]
file = "pluck.wav"
sample_rate_hz = 48000
onset_s = 0.512

[source.analysis]
window = "blackman-harris"
fft_size = 8192
window_s = 0.085
hop_s = 0.005

[[partial]]
freq_hz = 146.901
harmonic = 1
phase_rad = 1.2301
attack_s = 0.004
peak_db = -12.0
decay = [ { t60_s = 1.9, until_s = 0.8 }, { t60_s = 6.4 } ]

[[partial]]
freq_hz = 293.9
harmonic = 2
phase_rad = -0.5
attack_s = 0.003
peak_db = -18.0
decay = [ { t60_s = 1.2, until_s = 0.5 }, { t60_s = 2.5, until_s = 1.5 }, { t60_s = 4.0 } ]

[[noise]]
low_hz = 1000.0
high_hz = 4000.0
attack_s = 0.0005
peak_db = -40.0
decay = [ { t60_s = 0.08 } ]
)";

/// 1-based line of the first occurrence of needle, as ":N:" (the form in messages).
std::string line_tag(const std::string& text, const std::string& needle) {
    const std::size_t at = text.find(needle);
    REQUIRE(at != std::string::npos);
    std::string tag(1, ':');  // built by appends: GCC 12 warns falsely (-Wrestrict) on ":" + string
    tag += std::to_string(std::count(text.begin(), text.begin() + static_cast<long>(at), '\n') + 1);
    tag += ':';
    return tag;
}

std::string error_of(const std::string& text) { return test::error_of(text, "pluck.toml"); }

/// Expects the text to be refused with a message naming the file, the line of `line_of` and `key`.
void expect_error(const std::string& text, const std::string& line_of, const std::string& key,
                  const std::string& words = "") {
    const std::string msg = error_of(text);
    const std::string tag = line_tag(text, line_of);
    INFO("message: " << msg);
    CAPTURE(tag, key, words);
    REQUIRE_FALSE(msg.empty());
    CHECK_THAT(msg, StartsWith("pluck.toml" + tag));
    CHECK_THAT(msg, Contains(key));
    if (!words.empty()) CHECK_THAT(msg, Contains(words));
}

}  // namespace

TEST_CASE("the base test patch loads without warnings", "[patch]") {
    // Guards the rule tests below: each fails for the reason it names.
    const auto r = parse_patch(base_text, "pluck.toml");
    CHECK(r.warnings.empty());
    CHECK(r.value.partials.size() == 2);
    CHECK(r.value.noise.size() == 1);
    CHECK(r.value.partials[1].env.decay.size() == 3);
    CHECK(r.value.source.analysis.has_value());
}

TEST_CASE("every example patch loads, validates without warnings and round-trips byte for byte", "[patch]") {
    const auto files = example_patches();
    REQUIRE(files.size() >= 3);
    for (const fs::path& f : files) {
        INFO(f.string());
        const std::string text = read_text(f);
        const patch_read_result r = read_patch_file(f);
        CHECK(r.warnings.empty());
        CHECK(!r.value.partials.empty());
        // The examples are written in canonical form: writing what was read gives the same bytes.
        const std::string again = format_patch(r.value);
        CHECK(again == text);
        CHECK(parse_patch(again, "again").value == r.value);
    }
}

TEST_CASE("writing is canonical: comment block, key order, sorted partials and bands", "[patch]") {
    patch p = parse_patch(base_text, "pluck.toml").value;
    std::swap(p.partials[0], p.partials[1]);  // out of order: the writer sorts by frequency
    const std::string text = format_patch(p);
    INFO(text);
    CHECK_THAT(text, StartsWith("# wane patch"));
    CHECK_THAT(text, Contains("Edit freely; wane validates on load"));
    CHECK(text.find("freq_hz = 146.901000") < text.find("freq_hz = 293.900000"));
    CHECK(text.find("[note]") < text.find("[source]"));
    CHECK(text.find("[source.analysis]") < text.find("[[partial]]"));
    CHECK(text.find("[[partial]]") < text.find("[[noise]]"));
    // Fixed formats per quantity (src/io/patch_toml.cpp): freq 6 decimals, phase 5, times 4, dB 2.
    CHECK_THAT(text, Contains("phase_rad = 1.23010\n"));
    CHECK_THAT(text, Contains("attack_s = 0.0040\n"));
    CHECK_THAT(text, Contains("peak_db = -12.00\n"));
    CHECK_THAT(text, Contains("inharmonicity_b = 2.1000e-04\n"));
    CHECK_THAT(text, Contains("sample_rate_hz = 48000\n"));
    CHECK_THAT(text, Contains("onset_s = 0.512000\n"));
    CHECK_THAT(text, Contains("decay = [ { t60_s = 1.9000, until_s = 0.8000 }, { t60_s = 6.4000 } ]\n"));
    CHECK(format_patch(parse_patch(text, "x").value) == text);
}

TEST_CASE("parse(format(p)) == p for a generated patch with noise bands and inf T60", "[patch]") {
    splitmix64 rng{12345};  // fixed seed
    const test::uniform_draw<double> u{0.0, 1.0};
    // Values on the file's grid (k / 10^d is the double nearest that decimal, as strtod gives).
    const auto grid = [](double v, int decimals) {
        const double s = std::pow(10.0, decimals);
        return std::round(v * s) / s;
    };
    patch p;
    p.note = {.name = "generated \"quote\" \\ back\ttab\nnew line \x01 caf\xc3\xa9",
              .f0_hz = grid(80.0 + 400.0 * u(rng), 6),
              .length_s = grid(1.0 + 9.0 * u(rng), 4),
              .inharmonicity_b = std::round(10000.0 + 89999.0 * u(rng)) / 1e9,  // 5 significant digits
              .gain_db = grid(-6.0 * u(rng), 2)};
    p.source = {.file = "dir/note one.wav", .sample_rate_hz = 44100.0, .onset_s = grid(u(rng), 6), .cut_s = grid(1.0 + u(rng), 4),
                .analysis = analysis_settings{.window = "hann", .fft_size = 4096, .window_s = 0.046440, .hop_s = 0.011610}};
    for (int i = 0; i < 40; ++i) {
        partial q;
        q.freq_hz = grid(p.note.f0_hz * (i + 1) * (1.0 + 0.001 * u(rng)), 6);
        q.harmonic = i % 7 == 6 ? 0 : i + 1;
        q.phase_rad = grid(-pi + two_pi * u(rng), 5);
        q.env.attack_s = grid(0.01 * u(rng), 4);
        q.env.peak = level_db{grid(-60.0 * u(rng), 2)};
        double t = q.env.attack_s;
        const int segments = 1 + i % 3;
        for (int k = 0; k + 1 < segments; ++k) {
            t = grid(t + 0.01 + u(rng), 4);
            q.env.decay.push_back({.t60_s = grid(0.1 + 5.0 * u(rng), 4), .until_s = t});
        }
        q.env.decay.push_back({.t60_s = i % 5 == 0 ? infinity : grid(0.1 + 5.0 * u(rng), 4), .until_s = {}});
        if (i % 11 == 3) q.env.decay.front().t60_s = -grid(1.0 + u(rng), 4);  // a rising segment
        p.partials.push_back(q);
    }
    for (int i = 0; i < 5; ++i) {
        const double low = grid(100.0 * std::pow(2.0, i), 2);
        p.noise.push_back({.low_hz = low, .high_hz = grid(low * 2.0, 2),
                           .env = {.attack_s = 0.0005, .peak = level_db{grid(-30.0 - 5.0 * i, 2)},
                                   .decay = {{.t60_s = 0.05, .until_s = 0.02}, {.t60_s = infinity, .until_s = {}}}}});
    }
    canonicalize(p);
    const std::string text = format_patch(p);
    INFO(text.substr(0, 1200));
    const patch_read_result r = parse_patch(text, "generated.toml");
    CHECK(r.warnings.empty());
    CHECK(r.value == p);
    CHECK(format_patch(r.value) == text);
    CHECK_THAT(text, Contains("t60_s = inf"));  // TOML v1.0.0, Float: inf is a valid float
    CHECK_THAT(text, Contains("t60_s = -"));
    CHECK_THAT(text, Contains(R"(name = "generated \"quote\" \\ back\ttab\nnew line \u0001 caf)"));
}

TEST_CASE("values off the file's grid are rounded on load, so the writer round-trips them", "[patch]") {
    splitmix64 rng{777};  // fixed seed
    const test::uniform_draw<double> u{0.0, 1.0};
    patch p = parse_patch(base_text, "pluck.toml").value;
    for (partial& q : p.partials) q.freq_hz *= 1.0 + 1e-3 * u(rng);  // full double precision
    const std::string text = format_patch(p);
    const patch back = parse_patch(text, "x").value;
    CHECK(format_patch(back) == text);
    CHECK(parse_patch(format_patch(back), "y").value == back);
    // Hand-written extra digits: 220.1234567 is kept as 220.123457 (1e-6 Hz grid).
    const auto r = parse_patch(with(base_text, "freq_hz = 146.901", "freq_hz = 220.1234567"), "pluck.toml");
    CHECK(r.value.partials[0].freq_hz == 220.123457);
}

TEST_CASE("strings are escaped per TOML and invalid UTF-8 becomes U+FFFD", "[patch]") {
    patch p = parse_patch(base_text, "pluck.toml").value;
    p.note.name = std::string("del\x7f bell \xe2\x99\xaa");
    p.source.file = std::string("bad\xff.wav");
    const std::string text = format_patch(p);
    // TOML v1.0.0, String: control characters other than tab must be escaped (U+007F included).
    CHECK_THAT(text, Contains(R"(name = "del\u007F bell )" "\xe2\x99\xaa\""));
    CHECK_THAT(text, Contains("file = \"bad\xef\xbf\xbd.wav\""));
    const patch back = parse_patch(text, "x").value;
    CHECK(back.note.name == p.note.name);
    CHECK(format_patch(back) == text);
}

TEST_CASE("the envelope read from a file follows the definition", "[patch][envelope]") {
    const patch p = parse_patch(base_text, "pluck.toml").value;
    const envelope& env = p.partials[1].env;  // attack 3 ms to -18 dB; T60 1.2 to 0.5, 2.5 to 1.5, 4.0
    // Hand computed from the definition: -18 - 60 (0.5 - 0.003) / 1.2 = -42.85
    CHECK_THAT(envelope_level(env, 0.5).db, WithinAbs(-42.85, 1e-9));
    // -42.85 - 60 (1.5 - 0.5) / 2.5 = -66.85; then 60 dB per 4 s: at 2.5 s, -66.85 - 15 = -81.85
    CHECK_THAT(envelope_level(env, 1.5).db, WithinAbs(-66.85, 1e-9));
    CHECK_THAT(envelope_level(env, 2.5).db, WithinAbs(-81.85, 1e-9));
    // Linear attack: at 1.5 ms the amplitude is half the peak's, 10^(-18/20) / 2.
    CHECK_THAT(envelope_amp(env, 0.0015).lin, WithinAbs(0.5 * std::pow(10.0, -18.0 / 20.0), 1e-12));
}

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

TEST_CASE("partials and bands are returned in canonical order; messages count in file order", "[patch]") {
    // Swap the two partials' frequencies in the text: the file lists 293.9 Hz first.
    std::string text = with(base_text, "freq_hz = 146.901", "freq_hz = XXX");
    text = with(text, "freq_hz = 293.9", "freq_hz = 146.901");
    text = with(text, "freq_hz = XXX", "freq_hz = 293.9");
    const patch p = parse_patch(text, "pluck.toml").value;
    CHECK(p.partials[0].freq_hz == 146.901);
    CHECK(p.partials[0].harmonic == 2);  // the second table in the file
    CHECK(parse_patch(format_patch(p), "again").value == p);
    // An error in the second table of the file is "partial 2", whatever its frequency.
    expect_error(with(text, "peak_db = -18.0", "peak_db = 30.0"), "peak_db = 30.0", "partial 2: peak_db");
}

TEST_CASE("the writer refuses a model that would not load", "[patch][write]") {
    patch p = parse_patch(base_text, "pluck.toml").value;
    patch zero = p;
    zero.partials[0].env.decay[0].t60_s = 0.0;
    CHECK_THROWS_WITH(format_patch(zero), Contains("partial 1: decay[1].t60_s must not be 0"));
    patch merged = p;  // until_s 20 us after attack_s: equal on the file's 0.1 ms grid
    merged.partials[0].env.attack_s = 0.00400;
    merged.partials[0].env.decay[0].until_s = 0.00402;
    CHECK_THROWS_WITH(format_patch(merged), Contains("once rounded"));
    patch nan_freq = p;
    nan_freq.partials[1].freq_hz = std::nan("");
    CHECK_THROWS_WITH(format_patch(nan_freq), Contains("freq_hz must not be NaN"));
}

TEST_CASE("read_patch_file names an unreadable file in an io_error", "[patch][io]") {
    const fs::path missing = fs::path(WANE_SOURCE_DIR) / "patches/no-such-patch.toml";
    CHECK_THROWS_AS(read_patch_file(missing), io_error);
    CHECK_THROWS_WITH(read_patch_file(missing), Contains("no-such-patch.toml"));
}

TEST_CASE("the worked hand edit in patches/README.md gives the levels it states", "[patch][envelope]") {
    patch p = read_patch_file(fs::path(WANE_SOURCE_DIR) / "patches/steel-pluck.toml").value;
    REQUIRE(p.partials.size() >= 3);
    partial& third = p.partials[2];
    REQUIRE(third.harmonic == 3);
    REQUIRE(third.env.decay.size() == 2);
    CHECK(third.env.decay[1].t60_s == 5.52);
    const envelope before = third.env;
    third.env.decay[1].t60_s *= 2.0;
    const envelope& fund = p.partials[0].env;
    // The README's table, hand computed from the definition to 0.01 dB (tolerance 0.005 dB).
    const double times_s[] = {1.0, 2.0, 4.0, 6.0};
    const double before_db[] = {-30.57, -41.44, -63.18, -84.92};
    const double after_db[] = {-28.40, -33.83, -44.70, -55.57};
    const double fund_db[] = {-20.73, -28.60, -44.35, -60.10};
    for (int i = 0; i < 4; ++i) {
        CAPTURE(times_s[i]);
        CHECK_THAT(envelope_level(before, times_s[i]).db, WithinAbs(before_db[i], 0.005));
        CHECK_THAT(envelope_level(third.env, times_s[i]).db, WithinAbs(after_db[i], 0.005));
        CHECK_THAT(envelope_level(fund, times_s[i]).db, WithinAbs(fund_db[i], 0.005));
    }
    CHECK_THAT(envelope_level(third.env, 0.6).db, WithinAbs(-26.22, 0.005));
    third.env.decay[1].t60_s = 1.5 * 5.52;  // the gentler variant
    CHECK_THAT(envelope_level(third.env, 4.0).db, WithinAbs(-50.86, 0.005));
    // The edited patch is written with the new value in canonical form.
    third.env.decay[1].t60_s = 11.04;
    CHECK_THAT(format_patch(p), Contains("decay = [ { t60_s = 3.0300, until_s = 0.6000 }, { t60_s = 11.0400 } ]"));
}
