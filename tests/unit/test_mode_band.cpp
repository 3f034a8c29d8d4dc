// The mode split's band of a target (analysis/mode_band.hpp: one pass of block moments) against its
// definition written out: the target moved to 0 Hz, three causal running means of d samples, every
// d-th output from the first whose means lie wholly inside the target, in long double, on a
// decaying sinusoid in seeded white noise (core/rng.hpp via test_signals.hpp).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstddef>
#include <numbers>
#include <vector>

#include "analysis/mode_band.hpp"
#include "core/rng.hpp"
#include "test_signals.hpp"

using namespace wane;

namespace {

using lcomplex = std::complex<long double>;

/// m[n] = (1/d) sum_{j < d, j <= n} in[n - j] (a causal running mean), by a running sum.
std::vector<lcomplex> running_mean(const std::vector<lcomplex>& in, std::size_t d) {
    std::vector<lcomplex> out(in.size());
    lcomplex sum{};
    for (std::size_t n = 0; n < in.size(); ++n) {
        sum += in[n];
        if (n >= d) sum -= in[n - d];
        out[n] = sum / static_cast<long double>(d);
    }
    return out;
}

}  // namespace

TEST_CASE("the mode split's band equals three running means of the target moved to 0 Hz within 1e-12 of its peak",
          "[analysis][modes]") {
    constexpr long double pi_l = 3.14159265358979323846264338327950288L;
    splitmix64 rng{4242};
    const test::gaussian_draw<double> draw{0.0, 0.1};
    for (const double rate_hz : {44100.0, 48000.0}) {
        // d as the mode split takes it (rate / 200 Hz), an odd d (a block's last samples one at a
        // time), and lengths that end inside a block.
        for (const std::size_t d : {static_cast<std::size_t>(rate_hz / 200.0), std::size_t{221}, std::size_t{7}}) {
            const std::size_t size = 40 * d + d / 3 + 5;
            const double freq_hz = 523.25;
            std::vector<float> x(size);
            for (std::size_t n = 0; n < size; ++n) {
                const double t = static_cast<double>(n) / rate_hz;
                x[n] = static_cast<float>(std::exp(-3.0 * t) * std::cos(2.0 * std::numbers::pi * (freq_hz + 1.5) * t + 0.4) + draw(rng));
            }
            std::vector<lcomplex> v(size);
            for (std::size_t n = 0; n < size; ++n)
                v[n] = static_cast<long double>(x[n]) *
                       std::polar(1.0L, -2.0L * pi_l * static_cast<long double>(freq_hz) * static_cast<long double>(n) /
                                            static_cast<long double>(rate_hz));
            const std::vector<lcomplex> means = running_mean(running_mean(running_mean(v, d), d), d);
            const std::vector<std::complex<double>> got = band_of(x, freq_hz, rate_hz, d);
            const std::size_t first = 3 * (d - 1);
            REQUIRE(got.size() == (size - 1 - first) / d + 1);
            float peak = 0.0F;
            for (const float s : x) peak = std::max(peak, std::abs(s));
            double worst = 0.0;
            for (std::size_t m = 0; m < got.size(); ++m) {
                const lcomplex want = means[first + m * d];
                worst = std::max(worst, static_cast<double>(std::abs(lcomplex(got[m].real(), got[m].imag()) - want)));
            }
            INFO("rate " << rate_hz << " Hz, d " << d << ": worst error " << worst << " against a peak of " << peak);
            CHECK(worst <= 1e-12 * static_cast<double>(peak));
        }
    }
}
