// Band-limited test noise for the noise model's tests: white noise from the project's seeded
// generator, band-passed by FFTW (the reference FFT), scaled to unit power.
#pragma once

#include <fftw3.h>

#include <cmath>
#include <cstdint>
#include <vector>

#include "core/rng.hpp"

namespace wane {

/// White noise band-passed by FFTW (bins outside [low, high) zeroed), scaled to unit power.
inline std::vector<double> band_noise(std::size_t n, double low_hz, double high_hz, std::uint64_t seed,
                                      double rate_hz = 48000.0) {
    splitmix64 rng{seed};  // the project's generator (core/rng.hpp)
    std::vector<double> x(n);
    for (double& v : x) v = rng.gaussian();
    const std::size_t bins = n / 2 + 1;
    auto* spec = static_cast<fftw_complex*>(fftw_malloc(sizeof(fftw_complex) * bins));
    fftw_plan fwd = fftw_plan_dft_r2c_1d(static_cast<int>(n), x.data(), spec, FFTW_ESTIMATE);
    fftw_execute(fwd);
    for (std::size_t k = 0; k < bins; ++k) {
        const double f = static_cast<double>(k) * rate_hz / static_cast<double>(n);
        if (f < low_hz || f >= high_hz) spec[k][0] = spec[k][1] = 0.0;
    }
    fftw_plan inv = fftw_plan_dft_c2r_1d(static_cast<int>(n), spec, x.data(), FFTW_ESTIMATE);
    fftw_execute(inv);
    fftw_destroy_plan(fwd);
    fftw_destroy_plan(inv);
    fftw_free(spec);
    double power = 0.0;
    for (double v : x) power += v * v;
    const double scale = 1.0 / std::sqrt(power / static_cast<double>(n));
    for (double& v : x) v *= scale;
    return x;
}

}  // namespace wane
