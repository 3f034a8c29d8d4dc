// Where a gliding partial is heard (see glide_heard.hpp).
#include "analysis/glide_heard.hpp"

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <span>
#include <vector>

#include "core/envelope.hpp"
#include "core/glide.hpp"
#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"

namespace wane {

namespace {

/// The windowed baseband a(t_n) w(t_n) e^(j g(t_n)), real and imaginary parts apart, and its step.
struct baseband {
    std::vector<double> re;
    std::vector<double> im;
    double step_s = 0.0;
};

baseband make_baseband(const partial& q, double start_s, double end_s, std::size_t count) {
    baseband out;
    out.re.resize(count);
    out.im.resize(count);
    out.step_s = (end_s - start_s) / static_cast<double>(count - 1);
    const std::vector<envelope_piece> pieces = envelope_pieces(q.env);  // made once (envelope_amp's)
    // glide_phase_offset_rad's first term, the same at every t: made once.
    const double total_rad = glide_total_phase_rad(q.freq_hz, q.glide_cents, q.glide_s);
    for (std::size_t n = 0; n < count; ++n) {
        const double t = start_s + static_cast<double>(n) * out.step_s;
        // Hann over the span: 0 at both ends.
        const double w = 0.5 - 0.5 * std::cos(two_pi * static_cast<double>(n) / static_cast<double>(count - 1));
        const double a = envelope_amp(q.env, pieces, t).lin;
        // glide_phase_offset_rad(q.freq_hz, q.glide_cents, q.glide_s, t), the same difference
        const double phase = total_rad - glide_remaining_phase_rad(q.freq_hz, q.glide_cents, q.glide_s, t);
        out.re[n] = a * w * std::cos(phase);
        out.im[n] = a * w * std::sin(phase);
    }
    return out;
}

/// |A(nu)|^2 (glide_heard.hpp), the factor e^(-j 2 pi nu t_n) walked on from 1 at the span's
/// start (|A| does not depend on that constant phase) by one complex product a step: over a
/// few thousand steps its rounding stays near 1e-13.
double power_at(const baseband& b, double nu_hz) {
    const double r_re = std::cos(two_pi * nu_hz * b.step_s);
    const double r_im = -std::sin(two_pi * nu_hz * b.step_s);
    double c_re = 1.0;
    double c_im = 0.0;
    double sum_re = 0.0;
    double sum_im = 0.0;
    for (std::size_t n = 0; n < b.re.size(); ++n) {
        sum_re += b.re[n] * c_re - b.im[n] * c_im;
        sum_im += b.re[n] * c_im + b.im[n] * c_re;
        const double next_re = c_re * r_re - c_im * r_im;
        c_im = c_re * r_im + c_im * r_re;
        c_re = next_re;
    }
    return sum_re * sum_re + sum_im * sum_im;
}

/// Four doubles side by side (GCC/Clang vector extensions: one AVX register, two SSE registers).
using lanes = double __attribute__((vector_size(32)));

/// power_at for four frequencies at once, each lane power_at's operations in its order (the
/// same numbers): the coarse scan's frequencies four at a time, one pass over the baseband
/// where four took four. Compiled for AVX2 and the baseline (synthesis/kernel_clones.hpp: no
/// FMA, the same bits).
WANE_KERNEL_CLONES
void powers_at_four(const double* __restrict re, const double* __restrict im, std::size_t count, const lanes& r_re,
                    const lanes& r_im, double* __restrict out) {
    lanes c_re{1.0, 1.0, 1.0, 1.0};
    lanes c_im{};
    lanes sum_re{};
    lanes sum_im{};
    for (std::size_t n = 0; n < count; ++n) {
        const double x_re = re[n];
        const double x_im = im[n];
        sum_re += x_re * c_re - x_im * c_im;
        sum_im += x_re * c_im + x_im * c_re;
        const lanes next_re = c_re * r_re - c_im * r_im;
        c_im = c_re * r_im + c_im * r_re;
        c_re = next_re;
    }
    const lanes power = sum_re * sum_re + sum_im * sum_im;
    for (std::size_t k = 0; k < 4; ++k) out[k] = power[k];
}

/// power_at(b, nu_hz[k]) into out[k] for k < nu_hz.size(), four at a time (powers_at_four).
void powers_at(const baseband& b, std::span<const double> nu_hz, std::span<double> out) {
    std::size_t k = 0;
    for (; k + 4 <= nu_hz.size(); k += 4) {
        lanes r_re, r_im;
        for (std::size_t l = 0; l < 4; ++l) {
            r_re[l] = std::cos(two_pi * nu_hz[k + l] * b.step_s);
            r_im[l] = -std::sin(two_pi * nu_hz[k + l] * b.step_s);
        }
        powers_at_four(b.re.data(), b.im.data(), b.re.size(), r_re, r_im, out.data() + k);
    }
    for (; k < nu_hz.size(); ++k) out[k] = power_at(b, nu_hz[k]);
}

}  // namespace

double glide_heard_offset_hz(const partial& q, double start_s, double end_s, const glide_heard_params& params) {
    if (q.glide_cents == 0.0 || !(end_s > start_s)) return 0.0;
    const auto count = static_cast<std::size_t>(std::floor((end_s - start_s) / params.step_s)) + 1;
    if (count < 10) return 0.0;
    const baseband b = make_baseband(q, start_s, end_s, count);
    // The glide's frequency offset at the span's start, the largest over it.
    const double largest_hz = q.freq_hz * glide_freq_excess_at_decay(q.glide_cents, std::exp(-start_s / q.glide_s));
    const double lo_hz = std::min(0.0, largest_hz) - 2.0 * params.grid_hz;
    const double hi_hz = std::max(0.0, largest_hz) + 2.0 * params.grid_hz;
    // The coarse scan, then a golden-section search within a grid step either side of its best.
    double best_hz = 0.0;
    double best_power = power_at(b, 0.0);
    const auto steps = static_cast<int>(std::floor((hi_hz - lo_hz) / params.grid_hz));
    std::vector<double> scan_hz(static_cast<std::size_t>(std::max(steps + 1, 0)));
    for (std::size_t i = 0; i < scan_hz.size(); ++i) scan_hz[i] = lo_hz + static_cast<int>(i) * params.grid_hz;
    std::vector<double> scan_power(scan_hz.size());
    powers_at(b, scan_hz, scan_power);
    for (std::size_t i = 0; i < scan_hz.size(); ++i) {
        if (scan_power[i] > best_power) {
            best_power = scan_power[i];
            best_hz = scan_hz[i];
        }
    }
    const double inv_phi = 0.5 * (std::sqrt(5.0) - 1.0);
    double a = best_hz - params.grid_hz;
    double c = best_hz + params.grid_hz;
    double x1 = c - inv_phi * (c - a);
    double x2 = a + inv_phi * (c - a);
    double p1 = power_at(b, x1);
    double p2 = power_at(b, x2);
    while (c - a > params.tolerance_hz) {
        if (p1 > p2) {
            c = x2;
            x2 = x1;
            p2 = p1;
            x1 = c - inv_phi * (c - a);
            p1 = power_at(b, x1);
        } else {
            a = x1;
            x1 = x2;
            p1 = p2;
            x2 = a + inv_phi * (c - a);
            p2 = power_at(b, x2);
        }
    }
    return 0.5 * (a + c);
}

}  // namespace wane
