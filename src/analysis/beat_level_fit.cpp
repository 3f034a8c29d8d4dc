#include "analysis/beat_level_fit.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <vector>

#include <Eigen/Dense>

#include "core/line_fit.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

using vec6 = Eigen::Matrix<double, 6, 1>;
using mat6 = Eigen::Matrix<double, 6, 6>;

/// dB per unit of ln(power): 10 / ln(10).
constexpr double db_per_ln_power = 0.5 * db_per_neper;
/// Largest |u + rho tau| the model evaluates (r up to e^50: the other mode 434 dB down).
constexpr double max_log_ratio = 50.0;

/// Parameters: c (dB), s (dB/s), u = ln r(0), rho (1/s), f_b (Hz), phi (rad).
enum : Eigen::Index { p_c = 0, p_s, p_u, p_rho, p_f, p_phi };

/// Every this many points the walk below starts again from std::exp, std::cos and std::sin.
constexpr std::size_t exact_every = 16;

/// The points read: the track's thinned to at least a spacing apart, times from the first one.
struct points {
    std::vector<double> tau;    ///< seconds from the first point
    std::vector<double> level;  ///< dB
    std::vector<char> walked;   ///< whether point i is one step_s past point i - 1 (and i % exact_every != 0)
    double step_s = 0.0;        ///< tau[1] - tau[0]

    /// Each point at least spacing_s after the last one kept.
    points(std::span<const double> time_s, std::span<const double> level_db, double spacing_s) {
        for (std::size_t i = 0; i < time_s.size(); ++i)
            if (tau.empty() || time_s[i] - time_s.front() >= tau.back() + spacing_s - 1e-9) {
                tau.push_back(time_s[i] - time_s.front());
                level.push_back(level_db[i]);
            }
        if (tau.size() < 2) return;
        // Where ratio_walk may step on: one spacing past the last point, no gap between.
        step_s = tau[1] - tau[0];
        constexpr double same_step_s = 1e-9;
        walked.assign(tau.size(), 0);
        for (std::size_t i = 1; i < tau.size(); ++i)
            walked[i] = static_cast<char>(i % exact_every != 0 && std::abs(tau[i] - tau[i - 1] - step_s) <= same_step_s);
    }
};

/// The second mode relative to the first, z(tau) = r(tau) e^(i theta(tau)) = x + i y, at each
/// point in turn: exactly at the first point, every exact_every-th and after a gap, between them
/// by one complex product with w = e^((rho + i 2 pi f_b) step_s) (z is a geometric sequence over
/// evenly spaced points; a few ulps off at most over exact_every steps). Where u + rho tau leaves
/// [-max_log_ratio, max_log_ratio] anywhere in the stretch every point is made exactly, clamped.
class ratio_walk {
public:
    ratio_walk(const vec6& p, const points& x) : p_(p), x_(x) {
        const double log_end = p(p_u) + p(p_rho) * x.tau.back();
        exact_only_ = std::max(std::abs(p(p_u)), std::abs(log_end)) > max_log_ratio || !std::isfinite(log_end);
        const double m = std::exp(p(p_rho) * x.step_s), a = two_pi * p(p_f) * x.step_s;
        w_re_ = m * std::cos(a), w_im_ = m * std::sin(a);
    }
    /// z at point i (called for i = 0, 1, 2, ... in turn).
    void next(std::size_t i, double& re, double& im) {
        if (exact_only_ || x_.walked[i] == 0) {
            const double tau = x_.tau[i];
            const double r = std::exp(std::clamp(p_(p_u) + p_(p_rho) * tau, -max_log_ratio, max_log_ratio));
            const double theta = two_pi * p_(p_f) * tau + p_(p_phi);
            re_ = r * std::cos(theta), im_ = r * std::sin(theta);
        } else {
            const double next_re = re_ * w_re_ - im_ * w_im_;
            im_ = re_ * w_im_ + im_ * w_re_, re_ = next_re;
        }
        re = re_, im = im_;
    }

private:
    const vec6& p_;
    const points& x_;
    bool exact_only_ = false;
    double w_re_ = 0.0, w_im_ = 0.0, re_ = 0.0, im_ = 0.0;
};

/// |1 + z|^2 for z = re + i im, kept off 0.
double ripple_power(double re, double im) { return std::max((1.0 + re) * (1.0 + re) + im * im, 1e-12); }

/// Sum of squared errors of p; stops summing once it reaches stop_at (any larger sum does as well).
double cost(const points& x, const vec6& p, double stop_at = infinity) {
    ratio_walk z(p, x);
    double e2 = 0.0;
    for (std::size_t i = 0; i < x.tau.size(); ++i) {
        double re = 0.0, im = 0.0;
        z.next(i, re, im);
        const double e = p(p_c) + p(p_s) * x.tau[i] + db_per_ln_power * std::log(ripple_power(re, im)) - x.level[i];
        e2 += e * e;
        if (e2 >= stop_at) return e2;
    }
    return e2;
}

/// Sets c and s of p to the least-squares line through level - ripple (ripple: 20 log10 |1 + z|
/// at each point, dB, a buffer of the points' size); returns the squared error.
double solve_line(const points& x, vec6& p, std::span<double> ripple) {
    ratio_walk z(p, x);
    line_sums sums;
    for (std::size_t i = 0; i < x.tau.size(); ++i) {
        double re = 0.0, im = 0.0;
        z.next(i, re, im);
        ripple[i] = db_per_ln_power * std::log(ripple_power(re, im));
        sums.add(x.tau[i], x.level[i] - ripple[i]);
    }
    p(p_s) = sums.slope().value_or(0.0);
    p(p_c) = sums.intercept(p(p_s));
    double e2 = 0.0;
    for (std::size_t i = 0; i < x.tau.size(); ++i) {
        const double e = p(p_c) + p(p_s) * x.tau[i] + ripple[i] - x.level[i];
        e2 += e * e;
    }
    return e2;
}

/// The normal equations' J^T J (lower triangle) and J^T e at p. The model's gradient: 1 and tau
/// in c and s; with q = |1 + z|^2, d/du = db_per_ln_power 2 (x + |z|^2) / q (r' = r),
/// d/drho = tau d/du, d/dphi = db_per_ln_power (-2 y) / q, d/df = 2 pi tau d/dphi.
void normal_equations(const points& x, const vec6& p, mat6& jtj, vec6& jte) {
    ratio_walk z(p, x);
    std::array<double, 21> sum{};  // lower triangle, row by row
    std::array<double, 6> sum_e{};
    for (std::size_t i = 0; i < x.tau.size(); ++i) {
        double re = 0.0, im = 0.0;
        z.next(i, re, im);
        const double tau = x.tau[i];
        const double q = ripple_power(re, im);
        const double e = p(p_c) + p(p_s) * tau + db_per_ln_power * std::log(q) - x.level[i];
        const double d_u = db_per_ln_power * 2.0 * (re + re * re + im * im) / q;
        const double d_phi = db_per_ln_power * -2.0 * im / q;
        const std::array<double, 6> g{1.0, tau, d_u, d_u * tau, d_phi * two_pi * tau, d_phi};
        std::size_t k = 0;
        for (std::size_t a = 0; a < 6; ++a) {
            for (std::size_t b = 0; b <= a; ++b) sum[k++] += g[a] * g[b];
            sum_e[a] += e * g[a];
        }
    }
    std::size_t k = 0;
    for (Eigen::Index a = 0; a < 6; ++a) {
        for (Eigen::Index b = 0; b <= a; ++b) jtj(a, b) = jtj(b, a) = sum[k++];
        jte(a) = sum_e[static_cast<std::size_t>(a)];
    }
}

/// A Levenberg-Marquardt search: where it stands, its squared error there, its damping, and
/// whether it has stopped (converged, or no step of any damping up to 1e10 lowers the error).
struct lm_state {
    vec6 p;
    double cost = 0.0;
    double lambda = 1e-3;
    bool stopped = false;
};

/// Up to `iterations` more Levenberg-Marquardt steps of s (Marquardt's scaling of the normal
/// equations' diagonal).
void refine(const points& x, lm_state& s, int iterations) {
    for (int it = 0; it < iterations && !s.stopped; ++it) {
        mat6 jtj;
        vec6 jte;
        normal_equations(x, s.p, jtj, jte);
        s.stopped = true;
        while (s.lambda < 1e10) {
            mat6 a = jtj;
            a.diagonal() += s.lambda * (jtj.diagonal().array() + 1e-12).matrix();
            const vec6 trial = s.p - a.ldlt().solve(jte);
            const double c = cost(x, trial, s.cost);
            if (std::isfinite(c) && c < s.cost) {
                s.stopped = s.cost - c < 1e-10 * s.cost;  // converged
                s.p = trial, s.cost = c, s.lambda = std::max(s.lambda * 0.1, 1e-9);
                break;
            }
            s.lambda *= 10.0;
        }
    }
}

}  // namespace

std::optional<beat_level_fit> fit_beat_levels(std::span<const double> time_s, std::span<const double> level_db,
                                              const beat_level_params& params) {
    assert(time_s.size() == level_db.size());
    constexpr std::size_t min_points = 12;
    if (time_s.size() < min_points) return std::nullopt;
    const double span_s = time_s.back() - time_s.front();
    const points x(time_s, level_db, params.point_spacing_s);
    if (x.tau.size() < min_points) return std::nullopt;
    std::vector<double> ripple(x.tau.size());
    const auto n = static_cast<double>(x.tau.size());
    vec6 line = vec6::Zero();
    line(p_u) = -max_log_ratio;  // no second mode
    const double line_rms_db = std::sqrt(solve_line(x, line, ripple) / n);

    // Grid starts: f_b, phi, rho (mode B's decay relative to A's, 1/s) with r(0) = 0.3, scouted on
    // the points thinned further; the best starts_refined go on on all the points read.
    const points scout_x(time_s, level_db, params.scout_point_spacing_s);
    std::vector<lm_state> starts;
    const double first_hz = std::max(params.min_beats / span_s, params.beat_step_hz);
    const auto rates = static_cast<int>(std::floor((params.max_beat_hz - first_hz) / params.beat_step_hz + 1e-9)) + 1;
    for (int j = 0; j < rates; ++j)
        for (int k = 0; k < params.phase_steps; ++k)
            for (const double rho : {-1.0, 0.0, 1.0}) {
                lm_state s;
                s.p << 0.0, 0.0, std::log(0.3), rho, first_hz + j * params.beat_step_hz, two_pi * k / params.phase_steps;
                s.cost = solve_line(scout_x, s.p, ripple);
                refine(scout_x, s, params.scout_iterations);
                starts.push_back(s);
            }
    if (starts.empty()) return std::nullopt;
    const auto refined = std::min(starts.size(), static_cast<std::size_t>(params.starts_refined));
    std::partial_sort(starts.begin(), starts.begin() + static_cast<std::ptrdiff_t>(refined), starts.end(),
                      [](const lm_state& a, const lm_state& b) { return a.cost < b.cost; });
    vec6 best = starts.front().p;
    double best_cost = infinity;
    for (std::size_t k = 0; k < refined; ++k) {
        lm_state s{.p = starts[k].p, .cost = cost(x, starts[k].p)};  // anew from the scout's end
        refine(x, s, params.max_iterations);
        if (s.cost < best_cost) best = s.p, best_cost = s.cost;
    }
    const double rms_db = std::sqrt(best_cost / n);
    if (!(rms_db <= params.max_rms_db) || line_rms_db < params.min_line_ratio * rms_db) return std::nullopt;
    // Refined out of the grid's range: less than a whole beat over the stretch, or too fast to read.
    if (std::abs(best(p_f)) * span_s < params.min_beats || std::abs(best(p_f)) > params.max_beat_hz) return std::nullopt;
    return beat_level_fit{.slope_a_db_per_s = best(p_s),
                          .slope_b_db_per_s = best(p_s) + db_per_neper * best(p_rho),
                          .beat_hz = std::abs(best(p_f)),
                          .rms_db = rms_db,
                          .line_rms_db = line_rms_db};
}

}  // namespace wane
