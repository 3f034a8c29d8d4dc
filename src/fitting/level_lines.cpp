// fit_level_lines (see envelope_fit.hpp): every K fitted, the noise scale calibrated, K by BIC
// among the fits whose knees are significant. The least squares machinery is in knot_search.
#include <cassert>
#include <cmath>
#include <vector>

#include "fitting/envelope_fit.hpp"
#include "fitting/knot_search.hpp"

namespace wane {

namespace {

using namespace knot_search;

constexpr int variance_bisection_steps = 40;
/// Residual lag-1 correlation is clamped to this before the effective sample count is formed.
constexpr double max_residual_correlation = 0.9;

/// The fits of K = 1..kmax segments (index = K; infinite RSS where K is infeasible or not yet
/// fitted), each K fitted when asked for from the dynamic program's starting knots (made once for
/// every K): a pass whose fits are replaced by a second pass fits only the largest feasible K.
class k_fits {
public:
    k_fits(const point_sums& ps, int kmax, const envelope_fit_params& params)
        : fits(kmax + 1), ps_(&ps), params_(&params),
          splits_(segmented_least_squares(ps, kmax, 0.5 * params.min_segment_s)) {}

    std::vector<knot_fit> fits;

    /// Fits K from kmax down to the first feasible one and returns that K (1 when none is): the
    /// largest K with a finite RSS, as if every K were fitted.
    int fit_largest_feasible() {
        for (int k = static_cast<int>(fits.size()) - 1; k > 1; --k) {
            fit(k);
            if (std::isfinite(fits[k].sol.rss)) return k;
        }
        fit(1);
        return 1;
    }
    /// Fits every K under k.
    void fit_below(int k) {
        for (int j = 1; j < k; ++j) fit(j);
    }

private:
    const point_sums* ps_;
    const envelope_fit_params* params_;
    std::vector<std::vector<std::size_t>> splits_;

    void fit(int k) {
        const point_sums& ps = *ps_;
        if (k == 1) {
            fits[1] = {{}, solve_continuous(ps, {})};
            return;
        }
        if (splits_[k].empty()) return;
        std::vector<double> knots(k - 1);
        for (int j = 0; j < k - 1; ++j) {
            const std::size_t s = splits_[k][j];
            knots[j] = 0.5 * (ps.x[s - 1] + ps.x[s]);
        }
        fits[k] = refine_knots(ps, std::move(knots), params_->min_segment_s);
    }
};

/// s2 solving sum r_i^2 / (1 / w_i + s2) = dof, by bisection on [0, max r_i^2] (the left side
/// falls with s2).
double model_error_variance(const std::vector<double>& resid, std::span<const double> weights, double dof) {
    const std::size_t n = resid.size();
    // r_i^2 and 1 / w_i once, not at every bisection step (the same values, summed in the same
    // order).
    std::vector<double> r2(n), inv_w(n);
    for (std::size_t i = 0; i < n; ++i) r2[i] = resid[i] * resid[i], inv_w[i] = 1.0 / weights[i];
    double lo = 0.0, hi = 0.0;
    for (double r : r2) hi = std::max(hi, r);
    auto excess_chi2 = [&](double s2) {
        double sum = 0.0;
        for (std::size_t i = 0; i < n; ++i) sum += r2[i] / (inv_w[i] + s2);
        return sum - dof;
    };
    for (int it = 0; it < variance_bisection_steps; ++it) {
        const double mid = 0.5 * (lo + hi);
        (excess_chi2(mid) > 0.0 ? lo : hi) = mid;
    }
    return 0.5 * (lo + hi);
}

/// Lag-1 correlation of the weighted residuals of fit f, clamped to [0, max_residual_correlation].
double residual_correlation(std::span<const double> levels_db, const point_sums& ps, const knot_fit& f,
                            const std::vector<double>& w2) {
    const std::size_t n = levels_db.size();
    double r_prev = 0.0, num = 0.0, den = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        const double r =
            (levels_db[i] - ps.y_shift - line_value(f.sol, f.knots, ps.x[i])) * std::sqrt(w2[i]);
        if (i > 0) num += r * r_prev;
        den += r * r;
        r_prev = r;
    }
    return den > 0.0 ? std::clamp(num / den, 0.0, max_residual_correlation) : 0.0;
}

}  // namespace

level_line_fit fit_level_lines(std::span<const double> times_s, std::span<const double> levels_db,
                               std::span<const double> weights, const envelope_fit_params& params) {
    assert(times_s.size() == levels_db.size() && times_s.size() == weights.size());
    assert(!times_s.empty());
    assert(params.max_segments >= 1 && params.max_segments <= max_supported_segments);
    const std::size_t n = times_s.size();
    level_line_fit out;
    if (n == 1) {
        out.start_level_db = levels_db[0];
        out.slopes_db_per_s = {0.0};
        return out;
    }
    const int kmax_pts = static_cast<int>(n) / min_points_per_segment;
    const int kmax = std::max(1, std::min(params.max_segments, kmax_pts));

    // Pass 1 with the given weights (inverse noise variances of the points).
    // Its fits under the largest feasible K are made only if no second pass replaces them.
    point_sums ps(times_s, levels_db, weights);
    k_fits fitted(ps, kmax, params);
    int kbig = fitted.fit_largest_feasible();
    std::vector<knot_fit>& fits = fitted.fits;

    // Variance model var_i = 1 / w_i + s2: the noise term is trusted (it follows from the level
    // above the floor); when the richest model's residuals exceed it, s2 (model error: beating,
    // a non-exponential decay) solves sum r_i^2 / (1 / w_i + s2) = n - p (method of moments; the
    // left side falls with s2). Residuals below the noise term leave the weights as they are.
    std::vector<double> resid(n);
    for (std::size_t i = 0; i < n; ++i)
        resid[i] = levels_db[i] - ps.y_shift - line_value(fits[kbig].sol, fits[kbig].knots, ps.x[i]);
    const double dof = std::max(static_cast<double>(n) - 2.0 * kbig, 1.0);
    double chi2 = 0.0;
    for (std::size_t i = 0; i < n; ++i) chi2 += weights[i] * resid[i] * resid[i];
    std::vector<double> w2(weights.begin(), weights.end());
    if (chi2 > dof) {
        const double s2 = model_error_variance(resid, weights, dof);
        for (std::size_t i = 0; i < n; ++i) w2[i] = 1.0 / (1.0 / weights[i] + s2);
        // Pass 2 with the calibrated weights.
        ps = point_sums(times_s, levels_db, w2);
        k_fits second(ps, kmax, params);
        kbig = second.fit_largest_feasible();
        second.fit_below(kbig);
        fits = std::move(second.fits);
    } else {
        fitted.fit_below(kbig);
    }

    // Effective number of independent points from the residual lag-1 correlation of the largest
    // feasible model (beating leaves slow, correlated residuals; noise leaves white ones):
    // n_eff = n (1 - rho) / (1 + rho), the variance inflation of the mean of an AR(1) sequence.
    const double rho = residual_correlation(levels_db, ps, fits[kbig], w2);
    const double nd = static_cast<double>(n);
    const double n_eff = std::max(nd * (1.0 - rho) / (1.0 + rho), 2.0);
    // BIC (Schwarz 1978) with the calibrated noise: chi2 (deflated by n_eff / n for correlated
    // residuals) + p ln(n_eff), p = 2K parameters (start level, K slopes, K - 1 knots).
    int best_k = 1;
    double best_bic = infinity;
    for (int k = 1; k <= kmax; ++k) {
        const knot_fit& f = fits[k];
        if (!std::isfinite(f.sol.rss)) continue;
        if (k > 1 && !slopes_distinct(slopes_of(f.sol, k), f.knots, 0.0, ps.x.back(), params)) continue;
        if (k > 1 && !changes_significant(ps, f, nd / n_eff, params.min_change_z)) continue;
        const double bic = n_eff / nd * f.sol.rss + 2.0 * k * std::log(n_eff);
        if (bic < best_bic) {
            best_bic = bic;
            best_k = k;
        }
    }
    const knot_fit& f = fits[best_k];
    out.start_level_db = f.sol.theta[0] + ps.y_shift;
    out.slopes_db_per_s = slopes_of(f.sol, best_k);
    out.knots_s.resize(f.knots.size());
    for (std::size_t j = 0; j < f.knots.size(); ++j) out.knots_s[j] = f.knots[j] + times_s[0];
    out.weighted_rss = f.sol.rss;
    return out;
}

}  // namespace wane
