// A short note keeps short tracks (tracker_tuning::short_note_s): a note heard for only 0.25 s
// after its onset, whose upper harmonics die within a few frames, keeps every one of them, each
// numbered and at its true frequency (median over its points within 0.5 cents: the tracker reads
// them within 0.02 cents); the same partials followed by noise to 1 s (a long note) keep the long
// rule, which drops some of them. The note is written from its formula (exact truth).
#include <catch2/catch.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdint>
#include <vector>

#include "core/units.hpp"
#include "tracking/tracker.hpp"
#include "test_signals.hpp"

using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;
constexpr double f0_hz = 262.0;
constexpr double start_s = 0.05;
constexpr int low_count = 4;     ///< harmonics 1-4: slow (T60 1 s), 0.3 / n
constexpr double high_t60_s = 0.08;  ///< the fast ones fall 60 dB in 80 ms: 3-9 frames heard
constexpr double high_amp = 0.1;
constexpr std::array high_numbers{9, 14, 19, 24, 29};  ///< fast harmonics, a few frames long

/// The note's partials: exact harmonics of f0_hz, 1-4 slow (T60 1 s, 0.3 / n), and high_numbers
/// fast (T60 high_t60_s, amplitude high_amp), so they last a few frames.
std::vector<test::decaying_partial> note_partials() {
    std::vector<test::decaying_partial> partials;
    for (int n = 1; n <= low_count; ++n) {
        const double nd = n;
        partials.push_back({.freq_hz = nd * f0_hz, .amp_lin = 0.3 / nd, .t60_s = 1.0, .phase_rad = 0.7 * nd});
    }
    for (const int n : high_numbers) {
        const double nd = n;
        partials.push_back({.freq_hz = nd * f0_hz, .amp_lin = high_amp, .t60_s = high_t60_s, .phase_rad = 0.7 * nd});
    }
    return partials;
}

/// Median frequency of a track's points.
double median_freq_hz(const partial_track& t) {
    std::vector<double> f;
    for (const auto& p : t.points) f.push_back(p.freq_hz);
    std::nth_element(f.begin(), f.begin() + static_cast<std::ptrdiff_t>(f.size() / 2), f.end());
    return f[f.size() / 2];
}

/// The track numbered n, or nullptr.
const partial_track* numbered(const tracking_result& r, int n) {
    const auto it = std::find_if(r.tracks.begin(), r.tracks.end(), [&](const partial_track& t) { return t.harmonic == n; });
    return it == r.tracks.end() ? nullptr : &*it;
}

}  // namespace

TEST_CASE("a 0.25 s note keeps its fast upper harmonics numbered and in tune and a 1 s note drops some",
          "[tracking][short]") {
    const std::uint64_t seed = GENERATE(11U, 12U, 13U, 14U);
    const auto partials = note_partials();
    const double noise_rms = 0.3 * std::pow(10.0, -70.0 / 20.0);  // 70 dB under the fundamental
    const auto short_x = test::decaying_partials(partials, rate_hz, start_s + 0.25, start_s, noise_rms, seed);
    const auto long_x = test::decaying_partials(partials, rate_hz, start_s + 1.0, start_s, noise_rms, seed);
    const tracking_result s = track_note(short_x, rate_hz, {});
    const tracking_result l = track_note(long_x, rate_hz, {});
    CAPTURE(seed, s.f0_hz, s.window_s, s.hop_s, s.tracks.size(), l.tracks.size());
    int kept_long = 0;
    for (const int n : high_numbers) {
        const double true_hz = n * f0_hz;
        const partial_track* t = numbered(s, n);
        CAPTURE(n, true_hz);
        REQUIRE(t != nullptr);
        const double err_cents = cents_between(median_freq_hz(*t), true_hz);
        CAPTURE(t->points.size(), median_freq_hz(*t), err_cents);
        CHECK(std::abs(err_cents) <= 0.5);
        kept_long += numbered(l, n) != nullptr ? 1 : 0;
    }
    // The long note keeps the long rule (tracker_tuning::min_track_windows), which drops some.
    CAPTURE(kept_long);
    CHECK(kept_long < static_cast<int>(high_numbers.size()));
}
