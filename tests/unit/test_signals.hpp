// Deterministic test signals shared by the test programs. All randomness comes from the
// project's one generator (core/rng.hpp: splitmix64), never from std:: distributions, whose
// output differs between standard libraries: a test's noise is the same on every machine.
#pragma once

#include <cmath>
#include <cstddef>
#include <cstdint>
#include <vector>

#include "core/rng.hpp"
#include "core/units.hpp"

namespace wane::test {

using wane::splitmix64;

/// Gaussian draws of mean and standard deviation sd: gaussian_draw<double>{0.0, 1.0}(rng).
template <class T = double>
struct gaussian_draw {
    T mean = 0;
    T sd = 1;
    T operator()(splitmix64& rng) const {
        return static_cast<T>(static_cast<double>(mean) + static_cast<double>(sd) * rng.gaussian());
    }
};

/// Uniform draws in [lo, hi): uniform_draw<double>{0.0, 1.0}(rng).
template <class T = double>
struct uniform_draw {
    T lo = 0;
    T hi = 1;
    T operator()(splitmix64& rng) const {
        return static_cast<T>(rng.uniform(static_cast<double>(lo), static_cast<double>(hi)));
    }
};

/// One exponentially decaying sinusoid of a synthetic note.
struct decaying_partial {
    double freq_hz;
    double amp_lin;    ///< at the start
    double t60_s;      ///< amplitude decays by 60 dB in this time
    double phase_rad;  ///< cos phase at the start
};

/// sum_n a_n 10^(-3 t / T60_n) cos(2 pi f_n t + phi_n) for t >= start_s, plus white Gaussian
/// noise of RMS noise_rms (seeded) over the whole file; t counts from the start sample.
inline std::vector<float> decaying_partials(const std::vector<decaying_partial>& partials, double fs,
                                            double duration_s, double start_s, double noise_rms,
                                            std::uint64_t seed) {
    const auto count = static_cast<std::size_t>(std::llround(duration_s * fs));
    const auto start = static_cast<std::size_t>(std::llround(start_s * fs));
    std::vector<double> x(count, 0.0);
    for (const auto& p : partials) {
        for (std::size_t i = start; i < count; ++i) {
            const double t = static_cast<double>(i - start) / fs;
            x[i] += p.amp_lin * std::pow(10.0, -3.0 * t / p.t60_s) * std::cos(two_pi * p.freq_hz * t + p.phase_rad);
        }
    }
    splitmix64 rng{seed};
    std::vector<float> out(count);
    for (std::size_t i = 0; i < count; ++i) out[i] = static_cast<float>(x[i] + noise_rms * rng.gaussian());
    return out;
}

}  // namespace wane::test
