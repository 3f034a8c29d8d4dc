#include "modes/subband_modes.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>

#include "core/units.hpp"

namespace wane {

namespace {

/// Blackman-windowed sinc, cutoff cutoff_hz (half amplitude), unit gain at DC.
std::vector<double> lowpass_taps(std::size_t taps, double cutoff_hz, double sample_rate_hz) {
    std::vector<double> h(taps);
    const double centre = 0.5 * static_cast<double>(taps - 1);
    const double wc = two_pi * cutoff_hz / sample_rate_hz;
    double sum = 0.0;
    for (std::size_t j = 0; j < taps; ++j) {
        const double t = static_cast<double>(j) - centre;
        const double sinc = t == 0.0 ? wc / pi : std::sin(wc * t) / (pi * t);
        const double phase = two_pi * static_cast<double>(j) / static_cast<double>(taps - 1);
        const double blackman = 0.42 - 0.5 * std::cos(phase) + 0.08 * std::cos(2.0 * phase);
        h[j] = sinc * blackman;
        sum += h[j];
    }
    for (double& v : h) v /= sum;
    return h;
}

}  // namespace

std::vector<damped_mode> find_subband_modes(std::span<const float> x, double sample_rate_hz,
                                            const subband_mode_params& params) {
    assert(sample_rate_hz > 0.0 && params.band_hz > 0.0);
    const double fs = sample_rate_hz;
    const auto seg_n = std::min(x.size(), static_cast<std::size_t>(params.span_s * fs));
    const auto decim = std::max<std::size_t>(1, static_cast<std::size_t>(fs / (2.0 * params.band_hz)));
    const auto taps = std::max<std::size_t>(8, static_cast<std::size_t>(std::lround(8.0 * fs / params.band_hz)));
    if (seg_n < taps + 9 * decim) return {};
    const std::size_t outputs = (seg_n - taps) / decim + 1;
    const std::vector<double> h = lowpass_taps(taps, 0.5 * params.band_hz, fs);
    const double top_hz = std::min(params.max_freq_hz, 0.45 * fs);
    const double step_hz = 0.5 * params.band_hz;

    // The heterodyne of band i at sample n is w_i^n with w_i = exp(-i 2 pi c_i / fs); the windowed
    // taps are shared by all bands, so each output is sum_j (h[j] x[mD + j]) w_i^(mD + j).
    struct band_signal {
        double centre_hz;
        std::vector<std::complex<double>> y;
        double energy;
    };
    std::vector<band_signal> bands;
    std::vector<std::complex<double>> phasor(taps);
    for (int i = 0; static_cast<double>(i) * step_hz - 0.25 * params.band_hz < top_hz; ++i) {
        const double centre = static_cast<double>(i) * step_hz;
        const double w = -two_pi * centre / fs;
        band_signal b{.centre_hz = centre, .y = std::vector<std::complex<double>>(outputs), .energy = 0.0};
        for (std::size_t j = 0; j < taps; ++j) phasor[j] = h[j] * std::polar(1.0, w * static_cast<double>(j));
        for (std::size_t m = 0; m < outputs; ++m) {
            const std::size_t start = m * decim;
            std::complex<double> acc{};
            for (std::size_t j = 0; j < taps; ++j) acc += double(x[start + j]) * phasor[j];
            acc *= std::polar(1.0, std::fmod(w * static_cast<double>(start), two_pi));
            b.y[m] = acc;
            b.energy += std::norm(acc);
        }
        bands.push_back(std::move(b));
    }
    double loudest = 0.0;
    for (const auto& b : bands) loudest = std::max(loudest, b.energy);
    std::vector<damped_mode> out;
    if (!(loudest > 0.0)) return out;
    const double keep = loudest * std::pow(10.0, -params.band_range_db / 10.0);
    const double fs_d = fs / static_cast<double>(decim);
    const double max_decay = ln1000 / params.min_t60_s;
    for (const auto& b : bands) {
        if (b.energy < keep) continue;
        for (const std::complex<double> z : esprit_poles(b.y, params.esprit)) {
            if (std::abs(z) <= 0.0) continue;
            const double freq = b.centre_hz + std::arg(z) * fs_d / two_pi;
            const double decay = -std::log(std::abs(z)) * fs_d;
            if (freq < b.centre_hz - 0.25 * params.band_hz || freq >= b.centre_hz + 0.25 * params.band_hz) continue;
            if (freq < params.min_freq_hz || freq >= 0.5 * fs || decay > max_decay) continue;
            out.push_back({.freq_hz = freq, .decay_per_s = decay});
        }
    }
    std::sort(out.begin(), out.end(), [](const damped_mode& a, const damped_mode& b) { return a.freq_hz < b.freq_hz; });
    return out;
}

}  // namespace wane
