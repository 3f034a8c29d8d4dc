// find_peaks passes over runs of bins under the threshold several at a time (spectrum/peaks.cpp);
// the peaks it finds must be those of testing every bin: checked here against a plain scan.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <vector>

#include "core/rng.hpp"
#include "spectrum/peaks.hpp"
#include "spectrum/window.hpp"

using namespace wane;

namespace {

/// Random bin powers: exponential noise (mean 1e-6) with a strong line every few dozen bins, some
/// one bin wide, some over two bins (a tie at the top is a peak on its left bin only).
std::vector<float> random_powers(std::size_t bins, std::uint64_t seed) {
    splitmix64 rng{.state = seed};
    std::vector<float> p(bins);
    for (float& v : p) v = static_cast<float>(-1e-6 * std::log(rng.unit_open()));
    for (std::size_t k = 3; k + 3 < bins; k += 5 + static_cast<std::size_t>(rng.unit() * 60.0)) {
        const auto line = static_cast<float>(std::pow(10.0, -1.0 - 8.0 * rng.unit()));  // -10 .. -90 dB
        p[k] = line;
        if (rng.unit() < 0.3) p[k + 1] = line;
    }
    return p;
}

/// The bins find_peaks should report: every k in [first, last] over its threshold with
/// p[k - 1] < p[k] >= p[k + 1]; the threshold per the header's rules (below_max_db under the
/// frame's strongest bin in range, abs_floor_db, above_floor_db over the floor band's power).
std::vector<std::size_t> reference_peaks(const std::vector<float>& p, double bin_hz, const noise_floor* floor,
                                         const peak_params& params, double sample_rate_hz) {
    const auto last = static_cast<std::size_t>(std::min(double(p.size() - 2), std::floor(0.475 * sample_rate_hz / bin_hz)));
    const auto first = static_cast<std::size_t>(std::max(1.0, std::ceil(params.min_freq_hz / bin_hz)));
    float top = 0.0f;
    for (std::size_t k = first; k <= last; ++k) top = std::max(top, p[k]);
    const double base = std::max(double(top) * std::pow(10.0, -params.below_max_db / 10.0), std::pow(10.0, params.abs_floor_db / 10.0));
    std::vector<std::size_t> out;
    for (std::size_t k = first; k <= last; ++k) {
        double thr = base;
        if (floor != nullptr) {
            const auto band_bins = static_cast<std::size_t>(std::lround(floor->band_hz() / bin_hz));
            const std::size_t band_lo = (k / band_bins) * band_bins;
            const std::size_t band = floor->band_of((double(band_lo) + 0.5 * double(band_bins)) * bin_hz);
            thr = std::max(base, floor->band_power(band) * std::pow(10.0, params.above_floor_db / 10.0));
        }
        if (p[k] > static_cast<float>(thr) && p[k] > p[k - 1] && p[k] >= p[k + 1]) out.push_back(k);
    }
    return out;
}

}  // namespace

TEST_CASE("find_peaks reports the same peaks as a scan of every bin, with and without a noise floor", "[spectrum]") {
    const int fft_size = GENERATE(2000, 2002, 5400, 7198);  // bin counts 1001 .. 3600: runs that end mid-stretch
    const std::uint64_t seed = GENERATE(1, 2, 3);
    const double below_max_db = GENERATE(40.0, 90.0);
    const bool with_floor = GENERATE(false, true);
    constexpr double rate_hz = 48000.0;
    const double bin_hz = rate_hz / fft_size;
    const std::size_t bins = static_cast<std::size_t>(fft_size) / 2 + 1;
    const std::vector<float> p = random_powers(bins, seed);
    noise_floor floor(static_cast<int>(bins), bin_hz, 0.0125);
    floor.reset(random_powers(bins, seed + 100));
    const qifft_correction correction(window_kind::hann, fft_size / 2 + 1, fft_size);
    const peak_params params{.below_max_db = below_max_db};
    std::vector<spectral_peak> got;
    find_peaks(p, {}, correction, fft_size, rate_hz, with_floor ? &floor : nullptr, params, got);
    const std::vector<std::size_t> want = reference_peaks(p, bin_hz, with_floor ? &floor : nullptr, params, rate_hz);
    CAPTURE(fft_size, seed, below_max_db, with_floor, want.size(), got.size());
    REQUIRE(got.size() == want.size());
    REQUIRE_FALSE(want.empty());
    for (std::size_t i = 0; i < want.size(); ++i) {
        // The QIFFT moves a peak by at most half a bin from its bin.
        const double at_bins = got[i].freq_hz / bin_hz;
        CAPTURE(i, want[i], at_bins);
        CHECK(std::abs(at_bins - static_cast<double>(want[i])) <= 0.5 + 1e-9);
    }
}
