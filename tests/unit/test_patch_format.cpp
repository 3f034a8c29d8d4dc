// The patch format (version 1): canonical writing and byte-identical round trips (the validation
// errors that name file, line and key: test_patch_validate.cpp). The reference for each rule is the format definition
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
#include "base_patch.hpp"
#include "patch_text.hpp"
#include "test_signals.hpp"

using Catch::Matchers::Contains;
using Catch::Matchers::StartsWith;
using Catch::Matchers::WithinAbs;
namespace fs = std::filesystem;
using namespace wane;
using wane::test::base_text;
using wane::test::expect_error;
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

TEST_CASE("partials and bands are returned in canonical order, messages count in file order", "[patch]") {
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
