// Where a gliding partial is heard (see glide_heard.hpp).
#include "analysis/glide_heard.hpp"

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <vector>

#include "core/envelope.hpp"
#include "core/glide.hpp"
#include "core/units.hpp"

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
    for (std::size_t n = 0; n < count; ++n) {
        const double t = start_s + static_cast<double>(n) * out.step_s;
        // Hann over the span: 0 at both ends.
        const double w = 0.5 - 0.5 * std::cos(two_pi * static_cast<double>(n) / static_cast<double>(count - 1));
        const double a = envelope_amp(q.env, t).lin;
        const double phase = glide_phase_offset_rad(q.freq_hz, q.glide_cents, q.glide_s, t);
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
    for (int i = 0; i <= steps; ++i) {
        const double nu = lo_hz + i * params.grid_hz;
        const double pw = power_at(b, nu);
        if (pw > best_power) {
            best_power = pw;
            best_hz = nu;
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
