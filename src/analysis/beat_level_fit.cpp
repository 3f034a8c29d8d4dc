#include "analysis/beat_level_fit.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <vector>

#include <Eigen/Dense>

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

/// 20 log10 |1 + r e^(i theta)| (dB) at tau for p, and its gradient in u, rho, f and phi when grad
/// is given (entries p_u .. p_phi; the model is linear in c and s).
double ripple_db(const vec6& p, double tau, vec6* grad) {
    const double r = std::exp(std::clamp(p(p_u) + p(p_rho) * tau, -max_log_ratio, max_log_ratio));
    const double theta = two_pi * p(p_f) * tau + p(p_phi);
    const double cos_t = std::cos(theta), sin_t = std::sin(theta);
    const double q = std::max(1.0 + 2.0 * r * cos_t + r * r, 1e-12);  // |1 + r e^(i theta)|^2
    if (grad != nullptr) {
        const double d_r = db_per_ln_power * (2.0 * cos_t + 2.0 * r) / q * r;  // d/du (r' = r)
        const double d_theta = db_per_ln_power * (-2.0 * r * sin_t) / q;
        (*grad)(p_u) = d_r;
        (*grad)(p_rho) = d_r * tau;
        (*grad)(p_f) = d_theta * two_pi * tau;
        (*grad)(p_phi) = d_theta;
    }
    return db_per_ln_power * std::log(q);
}

struct points {
    std::span<const double> tau;    ///< seconds from the first point
    std::span<const double> level;  ///< dB
};

/// Sum of squared errors of p.
double cost(const points& x, const vec6& p) {
    double e2 = 0.0;
    for (std::size_t i = 0; i < x.tau.size(); ++i) {
        const double e = p(p_c) + p(p_s) * x.tau[i] + ripple_db(p, x.tau[i], nullptr) - x.level[i];
        e2 += e * e;
    }
    return e2;
}

/// Sets c and s of p to the least-squares line through level - ripple; returns the squared error.
double solve_line(const points& x, vec6& p) {
    double n = 0.0, st = 0.0, sy = 0.0, stt = 0.0, sty = 0.0;
    for (std::size_t i = 0; i < x.tau.size(); ++i) {
        const double y = x.level[i] - ripple_db(p, x.tau[i], nullptr);
        n += 1.0, st += x.tau[i], sy += y, stt += x.tau[i] * x.tau[i], sty += x.tau[i] * y;
    }
    const double var = stt - st * st / n;
    p(p_s) = var > 0.0 ? (sty - st * sy / n) / var : 0.0;
    p(p_c) = (sy - p(p_s) * st) / n;
    return cost(x, p);
}

/// Levenberg-Marquardt from p (Marquardt's scaling of the normal equations' diagonal).
double refine(const points& x, vec6& p, int max_iterations) {
    double current = cost(x, p);
    double lambda = 1e-3;
    for (int it = 0; it < max_iterations && lambda < 1e10; ++it) {
        mat6 jtj = mat6::Zero();
        vec6 jte = vec6::Zero();
        for (std::size_t i = 0; i < x.tau.size(); ++i) {
            vec6 g = vec6::Zero();
            const double e = p(p_c) + p(p_s) * x.tau[i] + ripple_db(p, x.tau[i], &g) - x.level[i];
            g(p_c) = 1.0;
            g(p_s) = x.tau[i];
            jtj.selfadjointView<Eigen::Lower>().rankUpdate(g);
            jte += e * g;
        }
        jtj = jtj.selfadjointView<Eigen::Lower>();
        while (lambda < 1e10) {
            mat6 a = jtj;
            a.diagonal() += lambda * (jtj.diagonal().array() + 1e-12).matrix();
            const vec6 trial = p - a.ldlt().solve(jte);
            const double c = cost(x, trial);
            if (std::isfinite(c) && c < current) {
                const bool converged = current - c < 1e-10 * current;
                p = trial, current = c, lambda = std::max(lambda * 0.1, 1e-9);
                if (converged) return current;
                break;
            }
            lambda *= 10.0;
        }
    }
    return current;
}

}  // namespace

std::optional<beat_level_fit> fit_beat_levels(std::span<const double> time_s, std::span<const double> level_db,
                                              const beat_level_params& params) {
    assert(time_s.size() == level_db.size());
    constexpr std::size_t min_points = 12;
    if (time_s.size() < min_points) return std::nullopt;
    const double span_s = time_s.back() - time_s.front();
    // The points read: each at least point_spacing_s after the last one kept.
    std::vector<double> tau, level;
    for (std::size_t i = 0; i < time_s.size(); ++i)
        if (tau.empty() || time_s[i] - time_s.front() >= tau.back() + params.point_spacing_s - 1e-9) {
            tau.push_back(time_s[i] - time_s.front());
            level.push_back(level_db[i]);
        }
    if (tau.size() < min_points) return std::nullopt;
    const points x{.tau = tau, .level = level};
    const auto n = static_cast<double>(tau.size());
    vec6 line = vec6::Zero();
    line(p_u) = -max_log_ratio;  // no second mode
    const double line_rms_db = std::sqrt(solve_line(x, line) / n);

    // Grid starts: f_b, phi, rho (mode B's decay relative to A's, 1/s) with r(0) = 0.3.
    struct start {
        vec6 p;
        double cost;
    };
    std::vector<start> starts;
    const double first_hz = std::max(params.min_beats / span_s, params.beat_step_hz);
    const auto rates = static_cast<int>(std::floor((params.max_beat_hz - first_hz) / params.beat_step_hz + 1e-9)) + 1;
    for (int j = 0; j < rates; ++j)
        for (int k = 0; k < params.phase_steps; ++k)
            for (const double rho : {-1.0, 0.0, 1.0}) {
                vec6 p;
                p << 0.0, 0.0, std::log(0.3), rho, first_hz + j * params.beat_step_hz, two_pi * k / params.phase_steps;
                solve_line(x, p);
                const double c = refine(x, p, params.scout_iterations);
                starts.push_back({.p = p, .cost = c});
            }
    if (starts.empty()) return std::nullopt;
    const auto refined = std::min(starts.size(), static_cast<std::size_t>(params.starts_refined));
    std::partial_sort(starts.begin(), starts.begin() + static_cast<std::ptrdiff_t>(refined), starts.end(),
                      [](const start& a, const start& b) { return a.cost < b.cost; });
    vec6 best = starts.front().p;
    double best_cost = infinity;
    for (std::size_t k = 0; k < refined; ++k) {
        vec6 p = starts[k].p;
        const double c = refine(x, p, params.max_iterations);
        if (c < best_cost) best = p, best_cost = c;
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
