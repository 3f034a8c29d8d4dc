// The subband signals of modes/subband_modes.hpp (make_subband_signals) against their definition
// summed term by term: y_i[m] = sum_j h[j] x[mD + j] exp(-i 2 pi c_i (mD + j) / fs), h the
// Blackman-windowed sinc of cutoff band_hz / 2 with unit gain at DC. At 48 and 32 kHz the
// heterodynes repeat within the taps (every 96 and 64 samples for 500 Hz band steps), at 44.1 kHz
// they do not (441 samples, more than the 353 taps): the sum is regrouped in the first case only.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <cstddef>
#include <vector>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "modes/subband_modes.hpp"

using namespace wane;

namespace {

/// The low-pass taps as documented: Blackman-windowed sinc, cutoff cutoff_hz, sum 1.
std::vector<double> reference_taps(std::size_t taps, double cutoff_hz, double fs) {
    std::vector<double> h(taps);
    double sum = 0.0;
    for (std::size_t j = 0; j < taps; ++j) {
        const double t = static_cast<double>(j) - 0.5 * static_cast<double>(taps - 1);
        const double wc = two_pi * cutoff_hz / fs;
        const double sinc = t == 0.0 ? wc / pi : std::sin(wc * t) / (pi * t);
        const double a = two_pi * static_cast<double>(j) / static_cast<double>(taps - 1);
        h[j] = sinc * (0.42 - 0.5 * std::cos(a) + 0.08 * std::cos(2.0 * a));
        sum += h[j];
    }
    for (double& v : h) v /= sum;
    return h;
}

}  // namespace

TEST_CASE("subband signals equal the heterodyned, filtered and decimated sum of their definition", "[modes]") {
    const double fs = GENERATE(48000.0, 44100.0, 32000.0);
    const std::uint64_t seed = GENERATE(3u, 11u);
    const subband_mode_params params{.span_s = 0.04, .band_hz = 1000.0, .max_freq_hz = 20000.0};
    // Seeded noise and two sinusoids, one near a band edge.
    const auto n = static_cast<std::size_t>(params.span_s * fs);
    std::vector<float> x(n);
    for (std::size_t k = 0; k < n; ++k) {
        const double t = static_cast<double>(k) / fs;
        x[k] = static_cast<float>(0.3 * std::sin(two_pi * 1237.0 * t) + 0.2 * std::cos(two_pi * 4749.0 * t) +
                                  0.05 * hashed_signed(seed, 0, k));
    }
    const subband_signals s = make_subband_signals(x, fs, params);
    REQUIRE(!s.bands.empty());
    const std::size_t decim = s.decimation, taps = s.taps;
    CHECK(taps == static_cast<std::size_t>(std::lround(8.0 * fs / params.band_hz)));
    const std::vector<double> h = reference_taps(taps, 0.5 * params.band_hz, fs);
    double worst = 0.0, scale = 0.0;
    for (const subband_signals::band& b : s.bands) {
        REQUIRE(b.y.size() == (n - taps) / decim + 1);
        for (std::size_t m = 0; m < b.y.size(); ++m) {
            std::complex<double> want{};
            for (std::size_t j = 0; j < taps; ++j) {
                const std::size_t at = m * decim + j;
                want += h[j] * double(x[at]) * std::polar(1.0, -two_pi * b.centre_hz * static_cast<double>(at) / fs);
            }
            worst = std::max(worst, std::abs(b.y[m] - want));
            scale = std::max(scale, std::abs(want));
        }
    }
    // Rounding only: the sums hold 350-400 terms of magnitude up to 0.55 times taps near 0.003.
    CAPTURE(fs, seed, s.bands.size(), worst, scale);
    CHECK(scale > 0.1);
    CHECK(worst <= 1e-12 * scale);
}
