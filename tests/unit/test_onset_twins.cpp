// The onset fit (analysis/onset_refine.hpp) and close partials: a partial with a twin closer than
// one resolution cell is left as rendered, unless the twin stays twin_ignore_db under it over the
// fit span. The note is written here from its formula (one damped mode, exact truth), the patch
// by hand with the STFT-like envelope the fit should correct.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "analysis/onset_refine.hpp"
#include "core/envelope.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"

using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;
constexpr double true_freq_hz = 1000.0;
constexpr double true_level_db = -10.0;
constexpr double true_t60_s = 0.3;

/// The mode from t = 0 for 1 s, plus noise 80 dB under it (the project's generator).
std::vector<float> true_note() {
    std::vector<float> x(static_cast<std::size_t>(rate_hz));
    const double amp = std::pow(10.0, true_level_db / 20.0);
    for (std::size_t i = 0; i < x.size(); ++i) {
        const double t = static_cast<double>(i) / rate_hz;
        const double v = amp * std::pow(10.0, -3.0 * t / true_t60_s) * std::cos(two_pi * true_freq_hz * t + 0.4);
        x[i] = static_cast<float>(v + 1e-5 * hashed_signed(3, 0, i));
    }
    return x;
}

/// The mode as an STFT fit might leave it (10 dB low, T60 1 s) and a twin 3 Hz above it.
patch twin_patch(double twin_peak_db) {
    patch p;
    p.note.length_s = 1.0;
    p.partials.push_back({.freq_hz = true_freq_hz, .harmonic = 1, .phase_rad = 0.0,
                          .env = {.attack_s = 0.0, .peak = level_db{-20.0}, .decay = {{.t60_s = 1.0, .until_s = {}}}}});
    p.partials.push_back({.freq_hz = true_freq_hz + 3.0, .harmonic = 0, .phase_rad = 0.0,
                          .env = {.attack_s = 0.0, .peak = level_db{twin_peak_db}, .decay = {{.t60_s = 1.0, .until_s = {}}}}});
    return p;
}

}  // namespace

TEST_CASE("a partial whose twin stays 30 dB under it gets its start fitted, a near-equal twin keeps both as they are",
          "[analysis][onset]") {
    const std::vector<float> note = true_note();
    const onset_refine_params params{};
    REQUIRE(rate_hz / (params.fit_span_s * rate_hz) > 3.0);  // the twin is inside one resolution cell
    SECTION("a weak twin (70 dB under the partial's fitted level)") {
        patch p = twin_patch(-90.0);
        refine_onset(p, note, rate_hz, params);
        const envelope& env = p.partials.front().env;
        // The early stage as the note has it: within 1 dB at 0 and 50 ms (-10 and -20 dB).
        CAPTURE(envelope_level(env, 0.0).db, envelope_level(env, 0.05).db);
        CHECK(std::abs(envelope_level(env, 0.0).db - true_level_db) < 1.0);
        CHECK(std::abs(envelope_level(env, 0.05).db - (true_level_db - 60.0 * 0.05 / true_t60_s)) < 1.0);
    }
    SECTION("a twin 5 dB under it: a pair the span cannot split, left as rendered") {
        patch p = twin_patch(-25.0);
        const patch before = p;
        refine_onset(p, note, rate_hz, params);
        CHECK(p.partials.front().env == before.partials.front().env);
        CHECK(p.partials.front().phase_rad == before.partials.front().phase_rad);
    }
}
