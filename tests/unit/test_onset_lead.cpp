// The onset of a note does not move with what was recorded before it (tracking/onset.hpp): room
// noise or silence before a pluck leaves its onset where it was, plus the lead's length; and a DC
// offset is found and removed (analysis/analyze.hpp).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <vector>

#include "analysis/analyze.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "tracking/onset.hpp"

using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;

/// A 220 Hz pluck of 5 harmonics (amplitude 0.4 / k) whose amplitude rises linearly over rise_s
/// from silence, then decays tail_db over the 1 s it lasts: 15 dB, a cut note (the real notes'
/// cut files end 6-32 dB under their peaks, those that decay to silence 56-83 dB:
/// ../shared/real-notes/README.md); 80 dB, one that decays to silence.
std::vector<double> rising_pluck(double rise_s, double tail_db) {
    const auto count = static_cast<std::size_t>(rate_hz);
    std::vector<double> x(count, 0.0);
    for (std::size_t i = 0; i < count; ++i) {
        const double t = static_cast<double>(i) / rate_hz;
        const double amp = std::min(1.0, t / rise_s) * std::pow(10.0, -tail_db / 20.0 * t);
        for (int k = 1; k <= 5; ++k) x[i] += amp * 0.4 / k * std::cos(two_pi * 220.0 * k * t + 0.3 * k);
    }
    return x;
}

/// lead_n samples of white Gaussian noise of RMS noise_dbfs (the project's seeded generator), then
/// the note, with the same noise going on under it (as a room's noise does) when noise_under.
std::vector<float> after_room_noise(const std::vector<double>& note, std::size_t lead_n, double noise_dbfs,
                                    bool noise_under, std::uint64_t seed) {
    splitmix64 rng{seed};
    const double rms = std::pow(10.0, noise_dbfs / 20.0);
    std::vector<float> out(lead_n + note.size());
    for (std::size_t i = 0; i < out.size(); ++i) {
        const double noise = i < lead_n || noise_under ? rms * rng.gaussian() : 0.0;
        out[i] = static_cast<float>((i >= lead_n ? note[i - lead_n] : 0.0) + noise);
    }
    return out;
}

/// A recording's tail and whether the room's noise goes on under the note.
struct lead_case {
    double tail_db;
    bool noise_under;
};

}  // namespace

TEST_CASE("a pluck's onset after 0.3 s of room noise is its clean onset plus 0.3 s, within 1 ms", "[onset]") {
    // Before the quiet level was measured from the loudest block on, the lead-in's blocks pulled
    // it down to the noise and the threshold with it: 4-8 ms early here (2 ms with noise before a note
    // that decays to silence), up to 4 ms on the real notes
    // (tools/make_variants, lead_noise). A note that decays to silence, with noise only before it,
    // has its quiet level under that noise: the walk back over the rise stops 6 dB over the level
    // before the rise. (Noise under such a note raises its quiet level, and the threshold with it,
    // by design: not a lead-in's effect, so not swept here.)
    const double rise_s = GENERATE(0.01, 0.02);
    const double noise_dbfs = GENERATE(-70.0, -60.0, -50.0);
    const lead_case c = GENERATE(lead_case{15.0, true}, lead_case{15.0, false}, lead_case{80.0, false});
    const std::vector<double> note = rising_pluck(rise_s, c.tail_db);
    const std::vector<float> clean(note.begin(), note.end());
    const std::int64_t clean_onset = detect_onset(clean, rate_hz);
    // A lead of 150 of the onset's 2 ms blocks, so the blocks fall on the clean note's: the
    // tolerance is then the only slack (off the grid, one block, 2 ms, can separate them).
    const auto lead_n = static_cast<std::size_t>(0.3 * rate_hz);
    const std::vector<float> padded = after_room_noise(note, lead_n, noise_dbfs, c.noise_under, 33);
    const std::int64_t padded_onset = detect_onset(padded, rate_hz);
    const double moved_ms = 1000.0 * static_cast<double>(padded_onset - clean_onset - static_cast<std::int64_t>(lead_n)) / rate_hz;
    INFO("rise " << rise_s << " s, tail " << c.tail_db << " dB, noise " << noise_dbfs << " dBFS"
                 << (c.noise_under ? " on under the note" : " before the note only") << ": clean onset " << clean_onset << ", padded "
                 << padded_onset << " (lead " << lead_n << "): moved " << moved_ms << " ms");
    CHECK(std::abs(moved_ms) <= 1.0);
}

TEST_CASE("has_dc_offset finds a mean within 50 dB of the peak and remove_mean takes it off", "[dc]") {
    // A sine of amplitude 0.5 over whole periods (mean 0 to rounding) plus offsets either side of
    // the 50 dB line: 0.5 x 10^(-50/20) = 0.00158.
    const double offset = GENERATE(0.05, -0.01, 0.0025, 0.0010, 0.0);
    std::vector<float> x(48000);
    for (std::size_t i = 0; i < x.size(); ++i)
        x[i] = static_cast<float>(0.5 * std::sin(two_pi * 100.0 * static_cast<double>(i) / rate_hz) + offset);
    const double peak = 0.5 + std::abs(offset);
    const bool within = std::abs(offset) > 0.0 && 20.0 * std::log10(std::abs(offset) / peak) >= -50.0;
    INFO("offset " << offset << ": " << 20.0 * std::log10(std::abs(offset) / peak + 1e-300) << " dB re the peak");
    CHECK(has_dc_offset(x) == within);
    const double removed = remove_mean(x);
    CHECK_THAT(removed, Catch::Matchers::WithinAbs(offset, 1e-6));
    double sum = 0.0;
    for (const float v : x) sum += double(v);
    CHECK(std::abs(sum / static_cast<double>(x.size())) < 1e-7);
    CHECK_FALSE(has_dc_offset(x));
}
