#include "pitch/series_fit.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <numeric>
#include <vector>

namespace wane {

namespace {

constexpr double cents_per_ln = 1200.0 / 0.69314718055994530942;  ///< 1200 / ln 2
constexpr double mad_to_sigma = 1.4826;  ///< MAD of a Gaussian times this is its sigma

struct state {
    double ln_f0 = 0.0;
    double b = 0.0;
};

/// Weighted median of v (weights w > 0).
double weighted_median(const std::vector<double>& v, const std::vector<double>& w) {
    std::vector<std::size_t> idx(v.size());
    std::iota(idx.begin(), idx.end(), std::size_t{0});
    std::sort(idx.begin(), idx.end(), [&](auto a, auto c) { return v[a] < v[c]; });
    const double half = 0.5 * std::accumulate(w.begin(), w.end(), 0.0);
    double acc = 0.0;
    for (const std::size_t i : idx)
        if ((acc += w[i]) >= half) return v[i];
    return idx.empty() ? 0.0 : v[idx.back()];
}

/// Weighted linear least squares of y = a + c x, y = (f/n)^2, x = n^2 (a = f0^2, c = f0^2 B).
state linear_start(std::span<const series_point> pts) {
    double sw = 0.0, sx = 0.0, sy = 0.0, sxx = 0.0, sxy = 0.0;
    for (const auto& p : pts) {
        const double n = p.harmonic;
        const double x = n * n;
        const double y = (p.freq_hz / n) * (p.freq_hz / n);
        sw += p.weight, sx += p.weight * x, sy += p.weight * y, sxx += p.weight * x * x, sxy += p.weight * x * y;
    }
    const double det = sw * sxx - sx * sx;
    if (det > 1e-12 * sw * sxx) {
        const double a = (sxx * sy - sx * sxy) / det;
        const double c = (sw * sxy - sx * sy) / det;
        if (a > 0.0 && c >= 0.0) return {0.5 * std::log(a), c / a};
    }
    return {0.5 * std::log(sy / sw), 0.0};
}

/// One weighted Gauss-Newton step on (ln f0, B) for residuals in cents; B clamped at 0 (then
/// ln f0 alone is solved).
state gauss_newton(std::span<const series_point> pts, const std::vector<double>& w, state s, bool fit_b) {
    // r = k (ln f - ln n - u - 0.5 ln(1 + B n^2)); dr/du = -k, dr/dB = -k n^2 / (2 (1 + B n^2)).
    double huu = 0.0, hub = 0.0, hbb = 0.0, gu = 0.0, gb = 0.0;
    for (std::size_t i = 0; i < pts.size(); ++i) {
        if (w[i] <= 0.0) continue;
        const double n2 = double(pts[i].harmonic) * pts[i].harmonic;
        const double r = std::log(pts[i].freq_hz / pts[i].harmonic) - s.ln_f0 - 0.5 * std::log1p(s.b * n2);
        const double ju = 1.0;
        const double jb = 0.5 * n2 / (1.0 + s.b * n2);
        huu += w[i] * ju * ju, hub += w[i] * ju * jb, hbb += w[i] * jb * jb;
        gu += w[i] * ju * r, gb += w[i] * jb * r;
    }
    if (huu <= 0.0) return s;
    const double det = huu * hbb - hub * hub;
    if (fit_b && det > 1e-12 * huu * hbb) {
        state next{s.ln_f0 + (hbb * gu - hub * gb) / det, s.b + (huu * gb - hub * gu) / det};
        if (next.b >= 0.0) return next;
    }
    // B at 0 (or not fitted): the step on ln f0 alone, from B = 0 when B went negative.
    if (s.b > 0.0 && fit_b) return gauss_newton(pts, w, {s.ln_f0, 0.0}, false);
    return {s.ln_f0 + gu / huu, s.b};
}

}  // namespace

double series_residual_cents(double freq_hz, int harmonic, double f0_hz, double inharmonicity_b) {
    assert(harmonic >= 1 && f0_hz > 0.0);
    const double n = harmonic;
    return cents_per_ln * (std::log(freq_hz / (n * f0_hz)) - 0.5 * std::log1p(inharmonicity_b * n * n));
}

series_fit fit_series(std::span<const series_point> points, const series_fit_params& params) {
    std::vector<series_point> pts;
    for (const auto& p : points)
        if (p.harmonic >= 1 && p.weight > 0.0 && p.freq_hz > 0.0) pts.push_back(p);
    if (pts.empty()) return {};
    const bool fit_b = std::any_of(pts.begin(), pts.end(), [&](auto& p) { return p.harmonic != pts[0].harmonic; });
    state s = linear_start(pts);
    if (!fit_b) s.b = 0.0;
    std::vector<double> w(pts.size()), r(pts.size()), abs_r(pts.size()), base(pts.size());
    for (std::size_t i = 0; i < pts.size(); ++i) base[i] = pts[i].weight;
    double scale = params.min_scale_cents;
    for (int it = 0; it < params.max_iterations; ++it) {
        for (std::size_t i = 0; i < pts.size(); ++i) {
            r[i] = series_residual_cents(pts[i].freq_hz, pts[i].harmonic, std::exp(s.ln_f0), s.b);
            abs_r[i] = std::abs(r[i]);
        }
        scale = std::max(mad_to_sigma * weighted_median(abs_r, base), params.min_scale_cents);
        for (std::size_t i = 0; i < pts.size(); ++i) {
            // Tukey biweight: (1 - (r / c s)^2)^2 inside, 0 outside.
            const double z = r[i] / (params.tukey_c * scale);
            w[i] = std::abs(z) < 1.0 ? base[i] * (1.0 - z * z) * (1.0 - z * z) : 0.0;
        }
        const state before = s;
        s = gauss_newton(pts, w, s, fit_b);
        s = gauss_newton(pts, w, s, fit_b);
        const double moved_cents = cents_per_ln * std::abs(s.ln_f0 - before.ln_f0);
        const double moved_b = std::abs(s.b - before.b) / std::max(s.b, 1e-12);
        if (it > 0 && moved_cents < params.converged_cents && moved_b < params.converged_cents) break;
    }
    series_fit out{.f0_hz = std::exp(s.ln_f0), .inharmonicity_b = std::max(0.0, s.b), .scale_cents = scale,
                   .used = static_cast<int>(pts.size()), .b_fitted = fit_b && s.b > 0.0};
    for (const series_point& p : pts)
        if (std::abs(series_residual_cents(p.freq_hz, p.harmonic, out.f0_hz, out.inharmonicity_b)) >= params.tukey_c * scale)
            ++out.rejected;
    return out;
}

}  // namespace wane
