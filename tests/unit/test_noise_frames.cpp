// The floor measurement's sparse frames (analysis/noise_measure.hpp, band_plan::dense_span_s and
// sparse_hops): past the dense span only every sparse_hops-th frame (and the last) is measured,
// each the same as in the measurement of every frame, and the frames between lie on the straight
// line in dB between their measured neighbours, which for a decaying noise band follows the frames
// the full measurement finds. The floor plan's bins: those clear of every partial.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <utility>
#include <vector>

#include "analysis/noise_measure.hpp"
#include "core/rng.hpp"

using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;

/// White noise (the project's generator) falling 60 dB per t60_s from -20 dB RMS, n samples.
std::vector<float> decaying_noise(std::size_t n, double t60_s, std::uint64_t seed) {
    splitmix64 rng{seed};
    std::vector<float> x(n);
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / rate_hz;
        x[i] = static_cast<float>(0.1 * std::pow(10.0, -3.0 * t / t60_s) * rng.gaussian());
    }
    return x;
}

std::vector<noise_band_track> measured(const std::vector<float>& x, const band_plan& bp) {
    stft_plan stft(plan_config(bp, rate_hz));
    const residual_source source = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(x.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    return measure_bands(x.size(), source, rate_hz, bp, stft);
}

}  // namespace

TEST_CASE("sparse floor frames: measured ones equal the full measurement, the others its line in dB", "[noise]") {
    const int sparse_hops = GENERATE(2, 3, 4);
    const double f0_hz = GENERATE(110.0, 330.0);  // floor windows of 0.22 s and 0.07 s
    const double partials_hz[] = {f0_hz, 2.0 * f0_hz, 3.0 * f0_hz};
    const std::vector<float> x = decaying_noise(static_cast<std::size_t>(2.0 * rate_hz), 1.5, 77);
    const band_plan every = floor_plan(rate_hz, partials_hz, f0_hz, noise_model_params{});
    band_plan sparse = every;
    sparse.dense_span_s = 0.4;
    sparse.sparse_hops = sparse_hops;
    const auto full = measured(x, every);
    const auto part = measured(x, sparse);
    REQUIRE(full.size() == part.size());
    REQUIRE(!full.empty());
    const std::size_t frames = full.front().level_db.size();
    const auto dense = static_cast<std::size_t>(std::ceil(0.4 / full.front().hop_s));
    CAPTURE(sparse_hops, f0_hz, frames, dense);
    REQUIRE(frames > dense + 3 * static_cast<std::size_t>(sparse_hops));
    double diff_sum = 0.0, diff_abs_sum = 0.0;
    std::size_t between = 0;
    for (std::size_t b = 0; b < full.size(); ++b) {
        REQUIRE(part[b].level_db.size() == frames);
        for (std::size_t i = 0; i < frames; ++i) {
            const bool is_measured =
                i < dense || (i - dense) % static_cast<std::size_t>(sparse_hops) == 0 || i + 1 == frames;
            CAPTURE(b, i, full[b].level_db[i], part[b].level_db[i]);
            if (is_measured) {
                CHECK(part[b].level_db[i] == full[b].level_db[i]);
                continue;
            }
            // Reference: the line in dB through the measured neighbours, in long double.
            const std::size_t before = dense + (i - dense) / sparse_hops * sparse_hops;
            const std::size_t after = std::min(frames - 1, before + static_cast<std::size_t>(sparse_hops));
            const long double u = static_cast<long double>(i - before) / static_cast<long double>(after - before);
            const long double line = (1.0L - u) * full[b].level_db[before] + u * full[b].level_db[after];
            CHECK(std::abs(static_cast<long double>(part[b].level_db[i]) - line) < 1e-3L);  // float rounding
            diff_sum += static_cast<double>(part[b].level_db[i] - full[b].level_db[i]);
            diff_abs_sum += std::abs(static_cast<double>(part[b].level_db[i] - full[b].level_db[i]));
            ++between;
        }
    }
    // Against the frames the full measurement finds there: the band decays as a line in dB, so
    // what is left is the frames' own scatter (3-4 dB per frame for a median of a few bins,
    // noise_model.cpp), smaller for the bands with many bins; the line sits neither over nor
    // under them on the mean (project tolerances, reasoned from that scatter over hundreds of frames).
    REQUIRE(between > 0);
    const double mean_diff_db = diff_sum / static_cast<double>(between);
    const double mean_abs_db = diff_abs_sum / static_cast<double>(between);
    CAPTURE(between, mean_diff_db, mean_abs_db);
    CHECK(std::abs(mean_diff_db) < 0.3);
    CHECK(mean_abs_db < 1.5);
}

TEST_CASE("floor plan: a band measures the bins clear of every partial by the guard, or borrows free ones", "[noise]") {
    // Reference: each bin tested against every partial directly (|partial - bin| >= the guard of
    // partial_guard_lobes Blackman-Harris half-lobes, Harris 1978: +-4 bins of the unpadded window).
    // Partials in random order, some on a bin's frequency, some within a bin of each other.
    const auto seed = GENERATE(range(std::uint64_t{1}, std::uint64_t{9}));
    splitmix64 rng{seed};
    const double f0_hz = rng.uniform(60.0, 400.0);
    std::vector<double> partials_hz;
    for (int k = 1; k <= 60; ++k) partials_hz.push_back(k * f0_hz * (1.0 + rng.uniform(-0.01, 0.01)));
    partials_hz.push_back(partials_hz[3] + 0.5);
    const noise_model_params params{};
    const band_plan plan = floor_plan(rate_hz, partials_hz, f0_hz, params);
    const stft_config config = plan_config(plan, rate_hz);
    const double bin_hz = rate_hz / config.fft_size;
    partials_hz.push_back(std::round(partials_hz[10] / bin_hz) * bin_hz);  // one on a bin: a plan of its own
    for (std::size_t i = partials_hz.size() - 1; i > 0; --i)
        std::swap(partials_hz[i], partials_hz[static_cast<std::size_t>(rng.unit() * static_cast<double>(i + 1))]);
    const band_plan shuffled = floor_plan(rate_hz, partials_hz, f0_hz, params);
    const double guard_hz = params.partial_guard_lobes * 4.0 * rate_hz / config.window_length;
    auto is_free = [&](int k) {
        return std::none_of(partials_hz.begin(), partials_hz.end(), [&](double pf) { return std::abs(pf - k * bin_hz) < guard_hz; });
    };
    REQUIRE(plan_config(shuffled, rate_hz).fft_size == config.fft_size);
    int borrowed = 0;
    for (std::size_t b = 0; b < shuffled.bins.size(); ++b) {
        const auto [first, last] = shuffled.ranges[b];
        std::vector<int> inside;
        for (int k = first; k <= last; ++k)
            if (is_free(k)) inside.push_back(k);
        CAPTURE(seed, b, first, last, inside.size(), shuffled.bins[b].size());
        if (inside.size() >= static_cast<std::size_t>(params.min_free_bins)) {
            CHECK(shuffled.bins[b] == inside);
        } else {
            ++borrowed;
            CHECK(std::all_of(shuffled.bins[b].begin(), shuffled.bins[b].end(), is_free));
        }
    }
    CAPTURE(borrowed);
    SUCCEED();
}
