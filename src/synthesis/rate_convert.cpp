#include "synthesis/rate_convert.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <map>
#include <memory>
#include <mutex>
#include <vector>

#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

constexpr double stopband_db = 60.0;
/// Transition half width as a fraction of the output's Nyquist frequency (formula in the header).
constexpr double transition_half_fraction = 0.1;
constexpr int kernel_phases = 1024;

/// Kaiser's beta for a stopband over 50 dB (header).
double kaiser_beta() { return 0.1102 * (stopband_db - 8.7); }

/// Taps come in whole groups of this many (the dot product's independent lanes).
constexpr int tap_group = 8;

/// sum_t x[t] h[t], t < taps (a multiple of tap_group), accumulated in double over tap_group
/// independent lanes (so the loop vectorizes without reordering one sum).
WANE_KERNEL_CLONES
double dot(const float* __restrict x, const float* __restrict h, std::size_t taps) {
    std::array<double, tap_group> lanes{};
    for (std::size_t t = 0; t < taps; t += tap_group) {
        for (std::size_t l = 0; l < tap_group; ++l) lanes[l] += static_cast<double>(x[t + l] * h[t + l]);
    }
    for (std::size_t width = tap_group / 2; width > 0; width /= 2) {  // pairwise: vector adds
        for (std::size_t l = 0; l < width; ++l) lanes[l] += lanes[l + width];
    }
    return lanes[0];
}

/// The modified Bessel function I0 by its power series sum_k ((x/2)^k / k!)^2 (Abramowitz and
/// Stegun 9.6.12), to a relative 1e-12 (x <= 10 here: beta = 5.65).
double bessel_i0(double x) {
    const double q = 0.25 * x * x;
    double term = 1.0, sum = 1.0;
    for (int k = 1; term > 1e-12 * sum; ++k) {
        term *= q / (static_cast<double>(k) * k);
        sum += term;
    }
    return sum;
}

/// Rows q = 0..kernel_phases of taps values: row q holds h(q / kernel_phases + taps/2 - 1 - t),
/// t = 0..taps-1, the taps for input samples floor(p) - taps/2 + 1 + t at frac(p) = q / phases.
std::vector<float> kernel_table(double ratio, int taps) {
    const double half = 0.5 * taps;
    const double beta = kaiser_beta();
    const double i0_beta = bessel_i0(beta);
    std::vector<float> table(static_cast<std::size_t>(kernel_phases + 1) * static_cast<std::size_t>(taps));
    std::vector<double> row(static_cast<std::size_t>(taps));
    for (int q = 0; q <= kernel_phases; ++q) {
        double sum = 0.0;
        for (int t = 0; t < taps; ++t) {
            const double d = static_cast<double>(q) / kernel_phases + half - 1.0 - t;
            const double r = d / half;
            const double w = r * r < 1.0 ? bessel_i0(beta * std::sqrt(1.0 - r * r)) / i0_beta : 0.0;
            const double x = ratio * d;
            const double sinc = x == 0.0 ? 1.0 : std::sin(pi * x) / (pi * x);
            row[static_cast<std::size_t>(t)] = ratio * sinc * w;
            sum += row[static_cast<std::size_t>(t)];
        }
        for (int t = 0; t < taps; ++t) {
            table[static_cast<std::size_t>(q) * static_cast<std::size_t>(taps) + static_cast<std::size_t>(t)] =
                static_cast<float>(row[static_cast<std::size_t>(t)] / sum);
        }
    }
    return table;
}

/// kernel_table for a ratio, made once per ratio in a process (renders repeat the same few).
std::shared_ptr<const std::vector<float>> shared_kernel_table(double ratio, int taps) {
    static std::mutex lock;
    static std::map<double, std::shared_ptr<const std::vector<float>>> tables;
    const std::lock_guard<std::mutex> hold(lock);
    auto& table = tables[ratio];
    if (!table) table = std::make_shared<const std::vector<float>>(kernel_table(ratio, taps));
    return table;
}

}  // namespace

int rate_convert_taps(double from_rate_hz, double to_rate_hz) {
    const double transition_rad = two_pi * 2.0 * transition_half_fraction * 0.5 * to_rate_hz / from_rate_hz;
    const int length = static_cast<int>(std::ceil((stopband_db - 8.0) / (2.285 * transition_rad))) + 1;
    return (length + tap_group - 1) / tap_group * tap_group;
}

double rate_convert_gain(double from_rate_hz, double to_rate_hz) {
    const int taps = rate_convert_taps(from_rate_hz, to_rate_hz);
    const std::shared_ptr<const std::vector<float>> kernel = shared_kernel_table(to_rate_hz / from_rate_hz, taps);
    const auto n_taps = static_cast<std::size_t>(taps);
    double gain = 0.0;
    for (std::size_t row = 0; row < kernel->size(); row += n_taps) {
        double sum = 0.0;
        for (std::size_t t = 0; t < n_taps; ++t) sum += std::abs(static_cast<double>((*kernel)[row + t]));
        gain = std::max(gain, sum);
    }
    return gain;
}

namespace {

/// The first input sample output sample n reads, and its kernel row (the nearest phase).
struct first_tap {
    long first = 0;
    std::size_t row = 0;
};
first_tap first_tap_of(std::size_t n, double step, int taps) {
    const double p = static_cast<double>(n) * step;  // >= 0: truncation is floor
    const auto whole = static_cast<long>(p);
    const auto q = std::lround((p - static_cast<double>(whole)) * kernel_phases);
    return {.first = whole + (q == kernel_phases ? 1 : 0) - taps / 2 + 1,
            .row = static_cast<std::size_t>(q == kernel_phases ? 0 : q)};
}

}  // namespace

void add_rate_converted(std::span<const float> x, double from_rate_hz, double to_rate_hz, std::span<float> out) {
    add_rate_converted_part(x, 0, x.size(), from_rate_hz, to_rate_hz, 0, out);
}

void add_rate_converted_part(std::span<const float> x, std::size_t x_first, std::size_t x_total, double from_rate_hz,
                             double to_rate_hz, std::size_t out_first, std::span<float> out) {
    assert(to_rate_hz > 0.0 && to_rate_hz <= from_rate_hz);
    assert(x_first + x.size() <= x_total);
    const double step = from_rate_hz / to_rate_hz;  // input samples per output sample
    const int taps = rate_convert_taps(from_rate_hz, to_rate_hz);
    const std::shared_ptr<const std::vector<float>> kernel = shared_kernel_table(to_rate_hz / from_rate_hz, taps);
    const std::vector<float>& table = *kernel;
    const auto n_taps = static_cast<std::size_t>(taps);
    const auto size = static_cast<long>(x_total);
    const auto x_from = static_cast<long>(x_first);
    [[maybe_unused]] const auto x_to = static_cast<long>(x_first + x.size());
    std::vector<float> edge(n_taps);  // the taps' input near either end, zero outside x
    for (std::size_t n = 0; n < out.size(); ++n) {
        const first_tap tap = first_tap_of(out_first + n, step, taps);
        const long first = tap.first;
        const float* row = table.data() + tap.row * n_taps;
        if (first >= size) break;
        // The window x must hold every tap read that lies inside [0, x_total).
        assert(std::max(first, 0L) >= x_from && std::min(first + taps, size) <= x_to);
        const float* in = edge.data();
        if (first >= 0 && first + taps <= size) {
            in = x.data() + (first - x_from);
        } else {
            for (long t = 0; t < taps; ++t) {
                const long j = first + t;
                edge[static_cast<std::size_t>(t)] = j >= 0 && j < size ? x[static_cast<std::size_t>(j - x_from)] : 0.0f;
            }
        }
        out[n] += static_cast<float>(dot(in, row, n_taps));
    }
}

rate_convert_reach rate_convert_reads(double from_rate_hz, double to_rate_hz, std::size_t out_first, std::size_t out_count,
                                      std::size_t x_total) {
    assert(out_count > 0);
    const double step = from_rate_hz / to_rate_hz;
    const int taps = rate_convert_taps(from_rate_hz, to_rate_hz);
    const long first = first_tap_of(out_first, step, taps).first;
    const long last = first_tap_of(out_first + out_count - 1, step, taps).first + taps;
    const auto total = static_cast<long>(x_total);
    const long from = std::clamp(first, 0L, total);
    return {.first = static_cast<std::size_t>(from), .end = static_cast<std::size_t>(std::clamp(last, from, total))};
}

}  // namespace wane
