// The onset glide search's heterodyne (analysis/glide_projection.hpp: its phasors made from their
// phase every few samples and rotated on between them) against the definition y[n] e^(-j 2 pi f n
// / fs) with the phase in long double, on seeded white noise (core/rng.hpp via test_signals.hpp).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <vector>

#include "analysis/glide_projection.hpp"
#include "core/rng.hpp"
#include "test_signals.hpp"

using namespace wane;

TEST_CASE("the glide search's heterodyne is y times its phasor within the phase's rounding and 1e-13 of y's size at every sample", "[analysis][glide]") {
    // Lengths with and without a stretch left over at the end, frequencies from 0 to half the rate
    // (the turn per sample near pi), and a long span (the slow pass's 0.4 s at 96 kHz).
    splitmix64 rng{2024};
    const test::gaussian_draw<double> draw{0.0, 1.0};
    for (const double rate_hz : {44100.0, 48000.0, 96000.0}) {
        for (const std::size_t count : {std::size_t{7}, std::size_t{7200}, std::size_t{7231}, std::size_t{38400}}) {
            std::vector<double> y(count);
            for (double& v : y) v = draw(rng);
            for (const double freq_hz : {0.0, 31.7, 523.25, 4186.0, 0.25 * rate_hz + 0.3, 0.5 * rate_hz}) {
                const glide_projection::heterodyned z = glide_projection::heterodyne(y, freq_hz, rate_hz);
                REQUIRE(z.re.size() == count);
                REQUIRE(z.im.size() == count);
                // The tolerance: the phase's rounding as a double count of cycles (half an ulp
                // of n f / fs, times 2 pi), doubled, plus 1e-13 for the phasors' own.
                double worst = 0.0;
                for (std::size_t n = 0; n < count; ++n) {
                    // The phase's fraction of a cycle in long double, n times the double f / fs the
                    // heterodyne is given (that ratio's own rounding, up to 1e-12 cycles at 38400
                    // samples, is the caller's, not the phasors').
                    const long double cycles = static_cast<long double>(n) * static_cast<long double>(freq_hz / rate_hz);
                    const long double angle = -2.0L * 3.14159265358979323846264338327950288L * (cycles - std::floor(cycles));
                    const double want_re = y[n] * static_cast<double>(std::cos(angle));
                    const double want_im = y[n] * static_cast<double>(std::sin(angle));
                    const double tolerance = 2.0 * 3.141592653589793 * static_cast<double>(cycles) * 0x1p-52 + 1e-13;
                    worst = std::max(worst, std::hypot(z.re[n] - want_re, z.im[n] - want_im) / std::max(std::abs(y[n]), 1e-300) / tolerance);
                }
                INFO("rate " << rate_hz << " Hz, " << count << " samples, " << freq_hz << " Hz: worst error " << worst << " of the tolerance");
                CHECK(worst < 1.0);
            }
        }
    }
}
