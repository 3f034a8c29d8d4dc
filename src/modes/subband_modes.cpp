#include "modes/subband_modes.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <cstdint>
#include <limits>
#include <numeric>

#include "core/units.hpp"
#include "modes/tile_products.hpp"

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

/// The least P > 0 with step_hz P / fs_hz a whole number, when both are whole numbers of Hz (the
/// band heterodynes' common period in samples); the largest std::size_t otherwise.
std::size_t repeat_period(double fs_hz, double step_hz) {
    const auto whole = [](double v) { return v > 0.0 && v < 1e9 && v == std::round(v); };
    if (!whole(fs_hz) || !whole(step_hz)) return std::numeric_limits<std::size_t>::max();
    const auto fs = static_cast<std::uint64_t>(fs_hz), step = static_cast<std::uint64_t>(step_hz);
    return static_cast<std::size_t>(fs / std::gcd(fs, step));
}

bool wanted_band(double centre_hz, double band_hz, std::span<const double> near_hz, double near_tol_hz) {
    if (near_hz.empty()) return true;
    const double lo = centre_hz - 0.25 * band_hz - near_tol_hz, hi = centre_hz + 0.25 * band_hz + near_tol_hz;
    return std::any_of(near_hz.begin(), near_hz.end(), [&](double f) { return f >= lo && f < hi; });
}

}  // namespace

subband_signals make_subband_signals(std::span<const float> x, double sample_rate_hz, const subband_mode_params& params) {
    assert(sample_rate_hz > 0.0 && params.band_hz > 0.0);
    const double fs = sample_rate_hz;
    const auto seg_n = std::min(x.size(), static_cast<std::size_t>(params.span_s * fs));
    const auto decim = std::max<std::size_t>(1, static_cast<std::size_t>(fs / (2.0 * params.band_hz)));
    const auto taps = std::max<std::size_t>(8, static_cast<std::size_t>(std::lround(8.0 * fs / params.band_hz)));
    subband_signals out{.rate_hz = fs / static_cast<double>(decim), .input_rate_hz = fs, .decimation = decim,
                        .taps = taps, .band_hz = params.band_hz, .bands = {}};
    if (seg_n < taps + 9 * decim) return out;
    const std::size_t outputs = (seg_n - taps) / decim + 1;
    const std::vector<double> h = lowpass_taps(taps, 0.5 * params.band_hz, fs);
    const double top_hz = std::min(params.max_freq_hz, 0.45 * fs);
    const double step_hz = 0.5 * params.band_hz;
    // The heterodyne of band i at sample n is w_i^n with w_i = exp(-i 2 pi c_i / fs); the windowed
    // taps are shared by all bands, so each output is sum_j (h[j] x[mD + j]) w_i^(mD + j). With
    // c_i = i step_hz, w_i^j repeats every `period` taps (the least P with step_hz P / fs whole,
    // when fs and step_hz are whole numbers of Hz; else no repeat within the taps), so the taps
    // j = r + k P share one phase: each output is sum_{r < depth} (sum_k h[r + k P] x[mD + r + k P])
    // w_i^r. For all bands at once the product Y = X P, X(m, r) = that folded sum (outputs x
    // depth), P(r, i) = w_i^r (depth x bands; real parts in columns 0 .. bands - 1, imaginary
    // parts after), by modes/tile_products.hpp (it subtracts: Y = -(0 - X P)), then w_i^(mD).
    std::vector<double> centres;
    for (int i = 0; static_cast<double>(i) * step_hz - 0.25 * params.band_hz < top_hz; ++i) centres.push_back(static_cast<double>(i) * step_hz);
    const std::size_t bands = centres.size();
    const std::size_t depth = std::min(taps, repeat_period(fs, step_hz));
    const std::size_t rows_pad = (outputs + product_tile_rows - 1) / product_tile_rows * product_tile_rows;
    const std::size_t cols_pad = (2 * bands + product_tile_cols - 1) / product_tile_cols * product_tile_cols;
    std::vector<double> segment(rows_pad * depth, 0.0), phased(cols_pad * depth, 0.0), minus_y(outputs * 2 * bands, 0.0);
    for (std::size_t j = 0; j < taps; ++j) {
        double* column = segment.data() + (j % depth) * rows_pad;
        for (std::size_t m = 0; m < outputs; ++m) column[m] += h[j] * double(x[m * decim + j]);
    }
    for (std::size_t i = 0; i < bands; ++i) {
        const double w = -two_pi * centres[i] / fs;
        for (std::size_t r = 0; r < depth; ++r) {
            const std::complex<double> ph = std::polar(1.0, w * static_cast<double>(r));
            phased[r * cols_pad + i] = ph.real(), phased[r * cols_pad + bands + i] = ph.imag();
        }
    }
    subtract_products(minus_y.data(), outputs,
                      {.a = segment.data(), .a_rows = rows_pad, .b = phased.data(), .b_rows = cols_pad, .depth = depth},
                      outputs, 2 * bands, false);
    const auto y = [&](std::size_t m, std::size_t column) { return -minus_y[column * outputs + m]; };
    for (std::size_t i = 0; i < bands; ++i) {
        const double centre = centres[i];
        const double w = -two_pi * centre / fs;
        subband_signals::band b{.centre_hz = centre, .y = std::vector<std::complex<double>>(outputs)};
        // w^(mD) by a rotation per output, re-anchored every 64 outputs.
        const std::complex<double> turn = std::polar(1.0, std::fmod(w * static_cast<double>(decim), two_pi));
        std::complex<double> at{1.0, 0.0};
        for (std::size_t m = 0; m < outputs; ++m) {
            if (m % 64 == 0) at = std::polar(1.0, std::fmod(w * static_cast<double>(m * decim), two_pi));
            b.y[m] = std::complex<double>{y(m, i), y(m, bands + i)} * at;
            at *= turn;
        }
        out.bands.push_back(std::move(b));
    }
    return out;
}

std::vector<damped_mode> subband_modes(const subband_signals& s, const subband_mode_params& params, double span_s,
                                       std::span<const double> near_hz, double near_tol_hz) {
    const double fs = s.input_rate_hz;
    const auto seg_n = static_cast<std::size_t>(span_s * fs);
    std::vector<damped_mode> out;
    if (s.bands.empty() || seg_n < s.taps + 9 * s.decimation) return out;
    // The outputs whose taps lie within the first span_s: the band signals of that span.
    const std::size_t outputs = std::min(s.bands.front().y.size(), (seg_n - s.taps) / s.decimation + 1);
    std::vector<double> energy(s.bands.size(), 0.0);
    double loudest = 0.0;
    for (std::size_t i = 0; i < s.bands.size(); ++i) {
        for (std::size_t m = 0; m < outputs; ++m) energy[i] += std::norm(s.bands[i].y[m]);
        loudest = std::max(loudest, energy[i]);
    }
    if (!(loudest > 0.0)) return out;
    const double keep = loudest * std::pow(10.0, -params.band_range_db / 10.0);
    const double fs_d = s.rate_hz;
    const double max_decay = ln1000 / params.min_t60_s;
    for (std::size_t i = 0; i < s.bands.size(); ++i) {
        const subband_signals::band& b = s.bands[i];
        if (energy[i] < keep || !wanted_band(b.centre_hz, s.band_hz, near_hz, near_tol_hz)) continue;
        for (const std::complex<double> z : esprit_poles(std::span(b.y).first(outputs), params.esprit)) {
            if (std::abs(z) <= 0.0) continue;
            const double freq = b.centre_hz + std::arg(z) * fs_d / two_pi;
            const double decay = -std::log(std::abs(z)) * fs_d;
            if (freq < b.centre_hz - 0.25 * s.band_hz || freq >= b.centre_hz + 0.25 * s.band_hz) continue;
            if (freq < params.min_freq_hz || freq >= 0.5 * fs || decay > max_decay) continue;
            out.push_back({.freq_hz = freq, .decay_per_s = decay});
        }
    }
    std::sort(out.begin(), out.end(), [](const damped_mode& a, const damped_mode& b) { return a.freq_hz < b.freq_hz; });
    return out;
}

std::vector<damped_mode> find_subband_modes(std::span<const float> x, double sample_rate_hz,
                                            const subband_mode_params& params) {
    return subband_modes(make_subband_signals(x, sample_rate_hz, params), params, params.span_s);
}

}  // namespace wane
