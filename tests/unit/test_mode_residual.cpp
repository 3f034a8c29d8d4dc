// The residual of a fit of modes and the band energies the new-mode rule reads from it
// (modes/mode_residual.hpp), against sums written out here term by term: each mode's samples from
// std::exp / std::cos in double, and the DFT bins by their defining sum.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdint>
#include <vector>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "modes/mode_projection.hpp"
#include "modes/mode_residual.hpp"
#include "modes/narrowband.hpp"

using namespace wane;

namespace {

constexpr double fs = 44100.0;

/// Re(amp a[n] exp(i 2 pi f n / fs)), a[n] = exp(-d n / fs) or the shape's samples.
double mode_sample(const damped_mode& m, const std::vector<double>* shape, std::size_t n) {
    const double t = static_cast<double>(n) / fs;
    const double a = shape != nullptr ? (*shape)[n] : std::exp(-m.decay_per_s * t);
    return a * (m.amp * std::polar(1.0, two_pi * m.freq_hz * t)).real();
}

/// count samples uniform in [-scale, scale] from the project's seeded generator.
std::vector<float> seeded_noise(std::size_t count, std::uint64_t seed, double scale) {
    splitmix64 rng{seed};
    std::vector<float> x(count);
    for (float& v : x) v = static_cast<float>(scale * rng.uniform_pm1());
    return x;
}

}  // namespace

TEST_CASE("fit_residual subtracts plain and shaped modes sample by sample", "[modes][residual]") {
    const std::size_t count = 6615;  // 150 ms: past the re-anchoring of the phasors
    const std::vector<float> x = seeded_noise(count, 7, 0.1);
    std::vector<damped_mode> modes;
    std::vector<mode_shape> shapes;
    for (int k = 0; k < 6; ++k) {
        modes.push_back({.freq_hz = 110.0 * (k + 1) + 3.7 * k, .decay_per_s = 5.0 + 20.0 * k,
                         .amp = std::polar(0.2 / (k + 1), 0.9 * k)});
        // Every other mode rises over 2 ms, then decays (a shaped mode), the others are plain.
        shapes.push_back(k % 2 == 1 ? mode_shape{{.start = 0, .count = 88, .scale = 1.0 / 88.0, .rho = 0.0, .power = 1},
                                                 {.start = 88, .count = count - 88, .scale = 1.0, .rho = -modes.back().decay_per_s / fs, .power = 0}}
                                    : mode_shape{});
    }
    const std::vector<float> r = fit_residual(x, fs, modes, shapes);
    REQUIRE(r.size() == count);
    std::vector<std::vector<double>> samples(modes.size());
    for (std::size_t k = 0; k < modes.size(); ++k)
        if (!shapes[k].empty()) shape_samples(shapes[k], count, samples[k]);
    double worst = 0.0;
    for (std::size_t n = 0; n < count; ++n) {
        double want = x[n];
        for (std::size_t k = 0; k < modes.size(); ++k) want -= mode_sample(modes[k], shapes[k].empty() ? nullptr : &samples[k], n);
        worst = std::max(worst, std::abs(double(r[n]) - want));
    }
    CAPTURE(worst);
    // Tolerance: float storage of samples under 1 (2^-24 relative, 6e-8), with room.
    CHECK(worst < 2e-7);
}

TEST_CASE("band_energy_left gives the band's energy of the residual plus the mode, and of the mode, as its DFT bins do",
          "[modes][residual]") {
    const std::size_t count = 6615;
    const std::vector<float> r = seeded_noise(count, 19, 0.05);
    const damped_mode m{.freq_hz = 523.3, .decay_per_s = 40.0, .amp = std::polar(0.3, -1.1)};
    const note_spectrum spectrum(r, fs);
    const auto size = static_cast<std::size_t>(spectrum.fft_size());
    const double low_hz = 490.0, high_hz = 560.0;
    const band_energies e = band_energy_left(spectrum, count, fs, m, low_hz, high_hz);
    // The bins energy_between counts, by the DFT's defining sum over the zero-padded signal.
    const double bin_hz = fs / static_cast<double>(size);
    double left = 0.0, own = 0.0;
    for (auto k = static_cast<std::size_t>(std::ceil(low_hz / bin_hz)); k <= static_cast<std::size_t>(std::floor(high_hz / bin_hz)); ++k) {
        std::complex<double> with{}, alone{};
        for (std::size_t n = 0; n < count; ++n) {
            const std::complex<double> w = std::polar(1.0, -two_pi * static_cast<double>(k * n % size) / static_cast<double>(size));
            const double mode_n = mode_sample(m, nullptr, n);
            with += (double(r[n]) + mode_n) * w;
            alone += mode_n * w;
        }
        left += std::norm(with);
        own += std::norm(alone);
    }
    left *= 2.0 / static_cast<double>(size), own *= 2.0 / static_cast<double>(size);
    CAPTURE(e.left, left, e.mode, own);
    REQUIRE(own > 0.0);
    // Tolerance: the residual's bins come from a float FFT (relative error ~1e-6 of the band).
    CHECK(std::abs(e.mode - own) <= 1e-9 * own);
    CHECK(std::abs(e.left - left) <= 1e-4 * left);
}

TEST_CASE("many modes subtracted and projected by block products equal the sums written out sample by sample",
          "[modes][residual]") {
    // 40 plain modes (the block products' path) over a span that is not a whole number of blocks.
    const std::size_t count = 7203;
    const std::vector<float> x = seeded_noise(count, 23, 0.2);
    std::vector<damped_mode> modes(40);
    for (std::size_t k = 0; k < modes.size(); ++k) {
        const auto kd = static_cast<double>(k);
        modes[k] = {.freq_hz = 97.0 + 523.7 * kd, .decay_per_s = 2.0 + 9.0 * kd, .amp = std::polar(0.05, 0.37 * kd)};
    }
    const std::vector<mode_shape> plain(modes.size());
    std::vector<double> left(x.begin(), x.end());
    subtract_fitted_modes(left, fs, modes, plain);
    std::vector<double> rho, omega;
    for (const damped_mode& m : modes) rho.push_back(-m.decay_per_s / fs), omega.push_back(two_pi * m.freq_hz / fs);
    std::vector<std::complex<double>> proj(modes.size());
    project_many(x, rho, omega, proj);
    // Reference: each sample of each mode from std::exp / std::polar at its own n.
    double worst_left = 0.0, worst_proj = 0.0, scale = 0.0;
    std::vector<std::complex<double>> want(modes.size());
    for (std::size_t n = 0; n < count; ++n) {
        double v = x[n];
        for (std::size_t k = 0; k < modes.size(); ++k) {
            v -= mode_sample(modes[k], nullptr, n);
            want[k] += double(x[n]) * std::exp(static_cast<double>(n) * std::complex<double>{rho[k], omega[k]});
        }
        worst_left = std::max(worst_left, std::abs(left[n] - v));
        scale += std::abs(double(x[n]));
    }
    for (std::size_t k = 0; k < modes.size(); ++k) worst_proj = std::max(worst_proj, std::abs(proj[k] - want[k]));
    CAPTURE(worst_left, worst_proj, scale);
    // Tolerances: rounding of products over at most 64 samples and powers re-anchored every 16
    // blocks, far under float resolution (6e-8) of samples under 1; sums of 7203 terms to 1e-12 of
    // their absolute sum.
    CHECK(worst_left < 1e-11);
    CHECK(worst_proj < 1e-12 * scale);
}
