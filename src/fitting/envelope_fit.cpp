#include "fitting/envelope_fit.hpp"
#include "fitting/partial_freq.hpp"

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <vector>

namespace wane {

namespace {

/// Largest number of segments the fixed-size normal equations hold.
constexpr int max_supported_segments = max_fit_segments;
constexpr int max_unknowns = max_supported_segments + 1;
constexpr std::size_t max_unknowns_sq = static_cast<std::size_t>(max_unknowns) * max_unknowns;
/// The dynamic program places run boundaries on at most this many grid points.
constexpr std::size_t dp_grid_points = 32;
/// A segment needs at least this many fit points so its slope is determined by data.
constexpr int min_points_per_segment = 3;
/// Residuals above the line count at most this much in the power-mean level offset, dB
/// (beating maxima of two equal modes reach +6 dB over the dB mean; a spike should not rule).
constexpr double max_offset_residual_db = 9.5;
constexpr int variance_bisection_steps = 40;
/// Model error assumed in the weights of the power-mean level offset, dB.
constexpr double offset_sigma_db = 0.5;
/// Frames in the running mean that gives the first pass its expected level above the floor.
constexpr int excess_smoothing_frames = 9;
/// Frames over which the local roughness of the level is measured (odd).
constexpr std::size_t roughness_frames = 17;
constexpr std::size_t roughness_stride = 4;
/// Median absolute value of a zero-mean Gaussian = 0.6745 sigma, so sigma = 1.4826 median|x|.
constexpr double mad_to_sigma = 1.4826;
/// The noise term may be at most this many times the roughness estimate (overlapping frames
/// smooth the noise, so the roughness understates it).
constexpr double roughness_cap = 2.0;
/// Furthest the first decay line may be run back before the first frame of a late-born track, dB.
constexpr double max_backward_rise_db = 6.0;
/// Refits after moving the fit's end to where the fitted envelope meets the floor margin.
constexpr int end_refit_passes = 2;
/// Frames in the running median that decides where the track reaches the floor.
constexpr int floor_median_frames = 5;
/// Residual lag-1 correlation is clamped to this before the effective sample count is formed.
constexpr double max_residual_correlation = 0.9;
/// Golden-section steps when a knot is refined between grid points.
constexpr int knot_refine_steps = 12;
constexpr double golden = 0.6180339887498949;  // (sqrt(5) - 1) / 2
/// Coordinate-descent sweeps over the knots.
constexpr int knot_sweeps = 2;
/// With more than one knot, each knot is scanned over this many grid points either side of
/// where it is (the dynamic program already placed it near its optimum); a lone knot is
/// scanned over the whole grid.
constexpr std::size_t knot_scan_halfwidth = 6;

/// Standard deviation of a frame's level in dB from additive noise, for a sinusoid whose level
/// exceeds the floor (mean noise power at the peak) by excess_db: the level error is
/// 20 log10 |1 + n / A| ~ db_per_neper Re(n / A), with Var = db_per_neper^2 N / (2 A^2).
double noise_sigma_db(double excess_db) {
    return db_per_neper / std::sqrt(2.0) * std::pow(10.0, -excess_db / 20.0);
}

/// Prefix sums over the fit points of w, w x, w x^2, w y, w x y, w y^2: with them the weighted
/// least-squares line of any run of points, and the hinge-basis normal equations of the
/// continuous fit, cost O(1) to assemble.
struct point_sums {
    std::vector<double> x;  // times relative to x[0]
    std::vector<double> w, wx, wxx, wy, wxy, wyy;  // size n + 1, w[0] = 0
    double y_shift = 0.0;

    point_sums(std::span<const double> times_s, std::span<const double> levels_db,
               std::span<const double> weights) {
        const std::size_t n = times_s.size();
        double ysum = 0.0;
        double wsum = 0.0;
        for (std::size_t i = 0; i < n; ++i) {
            ysum += weights[i] * levels_db[i];
            wsum += weights[i];
        }
        y_shift = wsum > 0.0 ? ysum / wsum : 0.0;
        x.resize(n);
        w.assign(n + 1, 0.0);
        wx = wxx = wy = wxy = wyy = w;
        for (std::size_t i = 0; i < n; ++i) {
            const double xi = times_s[i] - times_s[0];
            const double yi = levels_db[i] - y_shift;
            const double wi = weights[i];
            x[i] = xi;
            w[i + 1] = w[i] + wi;
            wx[i + 1] = wx[i] + wi * xi;
            wxx[i + 1] = wxx[i] + wi * xi * xi;
            wy[i + 1] = wy[i] + wi * yi;
            wxy[i + 1] = wxy[i] + wi * xi * yi;
            wyy[i + 1] = wyy[i] + wi * yi * yi;
        }
    }
    std::size_t size() const { return x.size(); }

    /// Weighted RSS of the least-squares line through points [a, b) (no continuity).
    double line_cost(std::size_t a, std::size_t b) const {
        const double sw = w[b] - w[a];
        if (sw <= 0.0) return 0.0;
        const double sx = wx[b] - wx[a], sxx = wxx[b] - wxx[a];
        const double sy = wy[b] - wy[a], sxy = wxy[b] - wxy[a], syy = wyy[b] - wyy[a];
        const double cxx = sxx - sx * sx / sw;
        const double cxy = sxy - sx * sy / sw;
        const double cyy = syy - sy * sy / sw;
        const double cost = cxx > 0.0 ? cyy - cxy * cxy / cxx : cyy;
        return std::max(cost, 0.0);
    }

    /// Index of the first point with x > t.
    std::size_t first_after(double t) const {
        return static_cast<std::size_t>(std::upper_bound(x.begin(), x.end(), t) - x.begin());
    }
};

struct continuous_solution {
    double rss = infinity;
    std::array<double, max_unknowns> theta{};  // intercept, first slope, slope changes at knots
};

/// Solves the small symmetric system g theta = b (Gaussian elimination with partial pivoting).
/// Returns false when singular.
bool solve_small(int m, std::array<double, max_unknowns_sq>& g,
                 std::array<double, max_unknowns>& b) {
    for (int c = 0; c < m; ++c) {
        int piv = c;
        for (int r = c + 1; r < m; ++r)
            if (std::abs(g[r * max_unknowns + c]) > std::abs(g[piv * max_unknowns + c])) piv = r;
        const double pv = g[piv * max_unknowns + c];
        if (!(std::abs(pv) > 1e-12)) return false;
        if (piv != c) {
            for (int k = 0; k < m; ++k) std::swap(g[c * max_unknowns + k], g[piv * max_unknowns + k]);
            std::swap(b[c], b[piv]);
        }
        for (int r = c + 1; r < m; ++r) {
            const double f = g[r * max_unknowns + c] / pv;
            if (f == 0.0) continue;
            for (int k = c; k < m; ++k) g[r * max_unknowns + k] -= f * g[c * max_unknowns + k];
            b[r] -= f * b[c];
        }
    }
    for (int r = m - 1; r >= 0; --r) {
        double s = b[r];
        for (int k = r + 1; k < m; ++k) s -= g[r * max_unknowns + k] * b[k];
        b[r] = s / g[r * max_unknowns + r];
    }
    return true;
}

/// Continuous piecewise-linear weighted least squares with the given knots (ascending, relative
/// times). Model: y = theta0 + theta1 x + sum_j theta_{1+j} (x - knot_j)_+ (hinge basis).
/// Normal equations from the suffix sums: for x > k, sum w (x - a)(x - k) = Sxx - (a + k) Sx + a k Sw.
using normal_matrix = std::array<double, max_unknowns_sq>;
using normal_vector = std::array<double, max_unknowns>;

void build_normal(const point_sums& ps, std::span<const double> knots, normal_matrix& g, normal_vector& b) {
    const int nk = static_cast<int>(knots.size());
    const std::size_t n = ps.size();
    g.fill(0.0);
    b.fill(0.0);
    std::array<std::size_t, max_supported_segments> idx{};
    auto at = [&](int r, int c) -> double& { return g[r * max_unknowns + c]; };
    at(0, 0) = ps.w[n];
    at(0, 1) = at(1, 0) = ps.wx[n];
    at(1, 1) = ps.wxx[n];
    b[0] = ps.wy[n];
    b[1] = ps.wxy[n];
    for (int j = 0; j < nk; ++j) idx[j] = ps.first_after(knots[j]);
    for (int j = 0; j < nk; ++j) {
        const std::size_t i = idx[j];
        const double k = knots[j];
        const double sw = ps.w[n] - ps.w[i], sx = ps.wx[n] - ps.wx[i], sxx = ps.wxx[n] - ps.wxx[i];
        const double sy = ps.wy[n] - ps.wy[i], sxy = ps.wxy[n] - ps.wxy[i];
        at(0, 2 + j) = at(2 + j, 0) = sx - k * sw;
        at(1, 2 + j) = at(2 + j, 1) = sxx - k * sx;
        b[2 + j] = sxy - k * sy;
        for (int l = 0; l <= j; ++l) {
            const double a = knots[l];
            at(2 + l, 2 + j) = at(2 + j, 2 + l) = sxx - (a + k) * sx + a * k * sw;
        }
    }
}

continuous_solution solve_continuous(const point_sums& ps, std::span<const double> knots) {
    const int m = static_cast<int>(knots.size()) + 2;
    normal_matrix g;
    normal_vector b;
    build_normal(ps, knots, g, b);
    continuous_solution out;
    std::array<double, max_unknowns> rhs = b;
    if (!solve_small(m, g, rhs)) return out;
    double fitted = 0.0;
    for (int r = 0; r < m; ++r) fitted += rhs[r] * b[r];
    out.rss = std::max(ps.wyy[ps.size()] - fitted, 0.0);
    out.theta = rhs;
    return out;
}

/// Feasible range for knot j given its neighbours: every segment lasts min_segment_s and holds
/// min_points_per_segment points.
bool knots_feasible(const point_sums& ps, std::span<const double> knots, double min_segment_s) {
    const double end = ps.x.back();
    double prev = 0.0;
    std::size_t prev_idx = 0;
    for (std::size_t j = 0; j <= knots.size(); ++j) {
        const double k = j < knots.size() ? knots[j] : end;
        const std::size_t idx = j < knots.size() ? ps.first_after(k) : ps.size();
        if (k - prev < min_segment_s) return false;
        if (idx - prev_idx < static_cast<std::size_t>(min_points_per_segment)) return false;
        prev = k;
        prev_idx = idx;
    }
    return true;
}

/// Bellman's dynamic program for segmented least squares (no continuity): the best split of the
/// points into k runs, for every k up to kmax. Returns, per k, the run starts (k - 1 of them).
std::vector<std::vector<std::size_t>> segmented_least_squares(const point_sums& ps, int kmax,
                                                              double min_run_s) {
    const std::size_t n = ps.size();
    const std::size_t min_pts = min_points_per_segment;
    // Run boundaries on a coarse grid: every stride-th point (and the end); run costs stay exact.
    const std::size_t stride = (n + dp_grid_points - 1) / dp_grid_points;
    std::vector<std::size_t> cand;
    for (std::size_t i = 0; i < n; i += stride) cand.push_back(i);
    cand.push_back(n);
    const std::size_t nc = cand.size();
    std::vector<std::vector<double>> cost(kmax + 1, std::vector<double>(nc, infinity));
    std::vector<std::vector<std::size_t>> from(kmax + 1, std::vector<std::size_t>(nc, 0));
    auto run_ok = [&](std::size_t a, std::size_t b) {
        return b - a >= min_pts && ps.x[b - 1] - ps.x[a] >= min_run_s;
    };
    for (std::size_t j = 1; j < nc; ++j)
        if (run_ok(0, cand[j])) cost[1][j] = ps.line_cost(0, cand[j]);
    for (int k = 2; k <= kmax; ++k) {
        // The last layer only needs the full run (j = the end).
        for (std::size_t j = k == kmax ? nc - 1 : 1; j < nc; ++j) {
            for (std::size_t i = 1; i < j; ++i) {
                if (!std::isfinite(cost[k - 1][i]) || !run_ok(cand[i], cand[j])) continue;
                const double c = cost[k - 1][i] + ps.line_cost(cand[i], cand[j]);
                if (c < cost[k][j]) {
                    cost[k][j] = c;
                    from[k][j] = i;
                }
            }
        }
    }
    std::vector<std::vector<std::size_t>> starts(kmax + 1);
    for (int k = 2; k <= kmax; ++k) {
        if (!std::isfinite(cost[k][nc - 1])) continue;
        std::vector<std::size_t> st(k - 1);
        std::size_t j = nc - 1;
        for (int kk = k; kk >= 2; --kk) {
            j = from[kk][j];
            st[kk - 2] = cand[j];
        }
        starts[k] = std::move(st);
    }
    return starts;
}

/// Continuous fit with K - 1 knots started from the DP split, refined by coordinate descent: each
/// knot in turn is scanned over the grid points between its neighbours, then golden-section
/// refined between the grid points around the best one.
struct knot_fit {
    std::vector<double> knots;
    continuous_solution sol;
};

knot_fit refine_knots(const point_sums& ps, std::vector<double> knots, double min_segment_s) {
    knot_fit best{knots, solve_continuous(ps, knots)};
    if (knots.empty()) return best;
    if (!knots_feasible(ps, knots, min_segment_s)) best.sol.rss = infinity;
    const std::size_t n = ps.size();
    for (int sweep = 0; sweep < knot_sweeps; ++sweep) {
        bool moved = false;
        for (std::size_t j = 0; j < knots.size(); ++j) {
            std::vector<double> trial = best.knots;
            double best_rss = best.sol.rss;
            std::size_t best_i = n;
            std::size_t scan_lo = 1, scan_hi = n - 1;
            if (knots.size() > 1) {
                const std::size_t at = ps.first_after(best.knots[j]);
                scan_lo = std::max<std::size_t>(1, at > knot_scan_halfwidth ? at - knot_scan_halfwidth : 0);
                scan_hi = std::min(n - 1, at + knot_scan_halfwidth);
            }
            for (std::size_t i = scan_lo; i < scan_hi; ++i) {
                trial[j] = ps.x[i];
                if (!knots_feasible(ps, trial, min_segment_s)) continue;
                const continuous_solution s = solve_continuous(ps, trial);
                if (s.rss < best_rss) {
                    best_rss = s.rss;
                    best_i = i;
                }
            }
            double center = best.knots[j];
            if (best_i < n) center = ps.x[best_i];
            // Golden section on [left grid point, right grid point] around the best position.
            const std::size_t after = ps.first_after(center);
            const std::size_t ci = after > 0 ? after - 1 : 0;  // grid point at or before center
            double lo = ps.x[ci > 0 ? ci - 1 : 0];
            double hi = ps.x[std::min(ci + 1, n - 1)];
            auto eval = [&](double t) {
                trial[j] = t;
                if (!knots_feasible(ps, trial, min_segment_s)) return infinity;
                return solve_continuous(ps, trial).rss;
            };
            double a = hi - golden * (hi - lo), c = lo + golden * (hi - lo);
            double fa = eval(a), fc = eval(c);
            for (int step = 0; step < knot_refine_steps; ++step) {
                if (fa < fc) {
                    hi = c;
                    c = a;
                    fc = fa;
                    a = hi - golden * (hi - lo);
                    fa = eval(a);
                } else {
                    lo = a;
                    a = c;
                    fa = fc;
                    c = lo + golden * (hi - lo);
                    fc = eval(c);
                }
            }
            double cand = fa < fc ? a : c;
            double cand_rss = std::min(fa, fc);
            if (best_i < n && best_rss <= cand_rss) {
                cand = ps.x[best_i];
                cand_rss = best_rss;
            }
            if (cand_rss < best.sol.rss) {
                trial[j] = cand;
                best.knots = trial;
                best.sol = solve_continuous(ps, trial);
                moved = true;
            }
        }
        // A lone knot has converged after one sweep (its scan covered the whole grid).
        if (!moved || knots.size() == 1) break;
    }
    return best;
}

std::vector<double> slopes_of(const continuous_solution& s, int k) {
    std::vector<double> slopes(k);
    double slope = s.theta[1];
    for (int j = 0; j < k; ++j) {
        if (j > 0) slope += s.theta[1 + j];
        slopes[j] = slope;
    }
    return slopes;
}

/// Level of the continuous fit at relative time x.
double line_value(const continuous_solution& s, std::span<const double> knots, double x) {
    double v = s.theta[0] + s.theta[1] * x;
    for (std::size_t j = 0; j < knots.size(); ++j) v += s.theta[2 + j] * std::max(x - knots[j], 0.0);
    return v;
}

/// Practical significance of each knee: the slopes differ by a fraction and an absolute amount,
/// and the change moves the level by min_knee_effect_db over the shorter neighbouring segment.
bool slopes_distinct(std::span<const double> slopes, std::span<const double> knots, double start_x,
                     double end_x, const envelope_fit_params& p) {
    for (std::size_t j = 1; j < slopes.size(); ++j) {
        const double d = std::abs(slopes[j] - slopes[j - 1]);
        const double steeper = std::max(std::abs(slopes[j]), std::abs(slopes[j - 1]));
        if (d < p.min_slope_change_db_per_s || d < p.min_slope_change_rel * steeper) return false;
        const double before = knots[j - 1] - (j >= 2 ? knots[j - 2] : start_x);
        const double after = (j < knots.size() ? knots[j] : end_x) - knots[j - 1];
        if (d * std::min(before, after) < p.min_knee_effect_db) return false;
    }
    return true;
}

/// Wald test of each slope change: the hinge coefficient theta_{2+j} is the change of slope at
/// knot j; its variance is [G^-1]_{jj} under the calibrated weights, inflated by n / n_eff for
/// correlated residuals. True when every |change| / SE reaches min_z.
bool changes_significant(const point_sums& ps, const knot_fit& f, double inflation, double min_z) {
    const int m = static_cast<int>(f.knots.size()) + 2;
    for (int j = 0; j < static_cast<int>(f.knots.size()); ++j) {
        normal_matrix g;
        normal_vector b;
        build_normal(ps, f.knots, g, b);
        normal_vector e{};
        e[2 + j] = 1.0;
        if (!solve_small(m, g, e)) return false;
        const double var = e[2 + j] * inflation;
        if (!(var > 0.0)) return false;
        if (std::abs(f.sol.theta[2 + j]) < min_z * std::sqrt(var)) return false;
    }
    return true;
}

/// Level of the decay pieces at time t >= the first piece's start (envelope_level without
/// rebuilding the pieces at every call).
double decay_level_db(std::span<const envelope_piece> pieces, double t) {
    for (const envelope_piece& p : pieces)
        if (t < p.end_s) return p.start_level.db + p.slope_db_per_s * (t - p.start_s);
    return -infinity;
}

double wrap_phase(double phase_rad) { return std::remainder(phase_rad, two_pi); }


}  // namespace

namespace {

/// Every K from 1 to kmax fitted to the points with the given weights (index = K; infinite RSS
/// where K is infeasible).
std::vector<knot_fit> fit_all_k(const point_sums& ps, int kmax, const envelope_fit_params& params) {
    const auto splits = segmented_least_squares(ps, kmax, 0.5 * params.min_segment_s);
    std::vector<knot_fit> fits(kmax + 1);
    fits[1] = {{}, solve_continuous(ps, {})};
    for (int k = 2; k <= kmax; ++k) {
        if (splits[k].empty()) continue;
        std::vector<double> knots(k - 1);
        for (int j = 0; j < k - 1; ++j) {
            const std::size_t s = splits[k][j];
            knots[j] = 0.5 * (ps.x[s - 1] + ps.x[s]);
        }
        fits[k] = refine_knots(ps, std::move(knots), params.min_segment_s);
    }
    return fits;
}

int largest_feasible(const std::vector<knot_fit>& fits) {
    for (int k = static_cast<int>(fits.size()) - 1; k >= 1; --k)
        if (std::isfinite(fits[k].sol.rss)) return k;
    return 1;
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
    point_sums ps(times_s, levels_db, weights);
    std::vector<knot_fit> fits = fit_all_k(ps, kmax, params);
    int kbig = largest_feasible(fits);

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
        double lo = 0.0, hi = 0.0;
        for (double r : resid) hi = std::max(hi, r * r);
        auto excess_chi2 = [&](double s2) {
            double sum = 0.0;
            for (std::size_t i = 0; i < n; ++i) sum += resid[i] * resid[i] / (1.0 / weights[i] + s2);
            return sum - dof;
        };
        for (int it = 0; it < variance_bisection_steps; ++it) {
            const double mid = 0.5 * (lo + hi);
            (excess_chi2(mid) > 0.0 ? lo : hi) = mid;
        }
        const double s2 = 0.5 * (lo + hi);
        for (std::size_t i = 0; i < n; ++i) w2[i] = 1.0 / (1.0 / weights[i] + s2);
        // Pass 2 with the calibrated weights.
        ps = point_sums(times_s, levels_db, w2);
        fits = fit_all_k(ps, kmax, params);
        kbig = largest_feasible(fits);
    }

    // Effective number of independent points from the residual lag-1 correlation of the largest
    // feasible model (beating leaves slow, correlated residuals; noise leaves white ones):
    // n_eff = n (1 - rho) / (1 + rho), the variance inflation of the mean of an AR(1) sequence.
    double r_prev = 0.0, num = 0.0, den = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        const double r =
            (levels_db[i] - ps.y_shift - line_value(fits[kbig].sol, fits[kbig].knots, ps.x[i])) * std::sqrt(w2[i]);
        if (i > 0) num += r * r_prev;
        den += r * r;
        r_prev = r;
    }
    const double rho = den > 0.0 ? std::clamp(num / den, 0.0, max_residual_correlation) : 0.0;
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

namespace {

/// The floor can overstate the noise a frame carries (a floor raised by the attack's noise, a
/// band floor far from the partial), so the weights cap the noise term at a multiple of the
/// level's local roughness: sigma ~ 1.4826 median|second difference| / sqrt(6) (for white noise
/// the second difference has variance 6 sigma^2), the median over roughness_frames frames,
/// evaluated every roughness_stride frames and held in between. Infinite on short tracks.
std::vector<double> level_roughness_db(const std::vector<track_point>& pts) {
    const std::size_t n = pts.size();
    std::vector<double> rough(n, infinity);
    if (n < roughness_frames) return rough;
    std::vector<double> d2(n, 0.0);
    for (std::size_t i = 1; i + 1 < n; ++i)
        d2[i] = std::abs(pts[i + 1].level_db - 2.0 * pts[i].level_db + pts[i - 1].level_db);
    d2[0] = d2[1];
    d2[n - 1] = d2[n - 2];
    std::array<double, roughness_frames> win{};
    for (std::size_t i = 0; i < n; i += roughness_stride) {
        const std::size_t a = std::min(i >= roughness_frames / 2 ? i - roughness_frames / 2 : 0, n - roughness_frames);
        std::copy_n(d2.begin() + static_cast<std::ptrdiff_t>(a), roughness_frames, win.begin());
        std::nth_element(win.begin(), win.begin() + roughness_frames / 2, win.end());
        const double sigma = mad_to_sigma * win[roughness_frames / 2] / std::sqrt(6.0);
        for (std::size_t k = i; k < std::min(n, i + roughness_stride); ++k) rough[k] = sigma;
    }
    return rough;
}

/// Envelope of frames [first, end) of a track: weights, decimation, the line fit, the attack and
/// the power-mean offset. Frequency and phase are filled by the caller.
partial_fit fit_region(const std::vector<track_point>& pts, std::span<const double> expected_excess_db,
                       std::span<const double> rough_db, std::size_t peak, std::size_t first, std::size_t end, const envelope_fit_params& params) {
    const std::size_t m = end - first;
    // Frame weight 1 / (model^2 + noise^2), the noise term from the expected (not the measured)
    // level above the floor: weights from the measured level would favour frames that noise
    // pushed up and bias the tail towards a slower decay. The level itself is used as measured:
    // for circular noise n weaker than the sinusoid A, E ln|A + n| = ln A exactly (the mean of
    // ln|1 + z| over a circle of radius < 1 is 0), so the dB level is unbiased down to the floor.
    std::vector<double> level(m), weight(m), time(m);
    for (std::size_t i = 0; i < m; ++i) {
        level[i] = pts[first + i].level_db;
        time[i] = pts[first + i].time_s;
    }
    for (std::size_t i = 0; i < m; ++i) {
        const double sn = std::min(noise_sigma_db(expected_excess_db[first + i]), roughness_cap * rough_db[first + i]);
        weight[i] = 1.0 / (params.model_sigma_db * params.model_sigma_db + sn * sn);
    }

    // Decimate into groups of g consecutive frames (weighted means) for the breakpoint search.
    const std::size_t maxp = static_cast<std::size_t>(params.max_fit_points);
    const std::size_t g = (m + maxp - 1) / maxp;
    const std::size_t np = (m + g - 1) / g;
    std::vector<double> gx(np), gy(np), gw(np);
    for (std::size_t q = 0; q < np; ++q) {
        double sw = 0.0, sx = 0.0, sy = 0.0;
        for (std::size_t i = q * g; i < std::min(m, (q + 1) * g); ++i) {
            sw += weight[i];
            sx += weight[i] * time[i];
            sy += weight[i] * level[i];
        }
        gw[q] = sw;
        gx[q] = sx / sw;
        gy[q] = sy / sw;
    }
    level_line_fit lines = fit_level_lines(gx, gy, gw, params);
    // The level after the fit region continues the last slope; a partial of a decaying note is
    // not extrapolated to grow for ever, so a rising last segment is held level.
    if (lines.slopes_db_per_s.back() > 0.0) lines.slopes_db_per_s.back() = 0.0;

    // Envelope: the attack ends half a window before the level peak (the frame centred there is
    // the first whose window lies wholly after an abrupt onset); the first line runs back to it.
    // A track whose first frame is already its peak shows no rise at all (it was born late, e.g.
    // under the noise of the attack): its decay line runs back to the onset, attack 0.
    partial_fit out;
    envelope& env = out.env;
    const double t_peak = pts[peak].time_s;
    // Running back is trusted over a short way only: when it would climb more than
    // max_backward_rise_db above the first fitted point, the regular attack rule applies.
    const double smeared_attack_s = std::clamp(t_peak - 0.5 * params.window_s, 0.0, t_peak);
    env.attack_s = peak == 0 ? 0.0 : smeared_attack_s;
    if (lines.slopes_db_per_s[0] * (env.attack_s - gx[0]) > max_backward_rise_db) env.attack_s = smeared_attack_s;
    env.peak = level_db{lines.start_level_db + lines.slopes_db_per_s[0] * (env.attack_s - gx[0])};
    const std::size_t k = lines.slopes_db_per_s.size();
    for (std::size_t j = 0; j < k; ++j) {
        decay_segment seg{.t60_s = slope_db_per_s_to_t60(lines.slopes_db_per_s[j]), .until_s = {}};
        if (j + 1 < k) seg.until_s = lines.knots_s[j];
        env.decay.push_back(seg);
    }
    // Level offset to the power mean: the dB line is the geometric mean of the frames (for
    // beating modes, the stronger mode's level); the power mean keeps the partial's energy.
    // offset = 10 log10(sum w 10^(r / 10) / sum w), r = level - line (clipped above).
    {
        // Reliability weights here carry a fixed model error so the strongest frames do not
        // decide alone: 1 / (offset_sigma^2 + noise^2).
        const auto pieces = envelope_pieces(env);
        double sw = 0.0, sp = 0.0;
        for (std::size_t i = 0; i < m; ++i) {
            const double sn = noise_sigma_db(expected_excess_db[first + i]);
            const double w = 1.0 / (offset_sigma_db * offset_sigma_db + sn * sn);
            const double r = level[i] - decay_level_db(pieces, time[i]);
            sp += w * std::pow(10.0, std::min(r, max_offset_residual_db) / 10.0);
            sw += w;
        }
        env.peak.db += power_to_db(sp / sw);
    }
    // Fit error: plain RMS over the fitted frames.
    const auto pieces = envelope_pieces(env);
    double se = 0.0;
    for (std::size_t i = 0; i < m; ++i) {
        const double r = level[i] - decay_level_db(pieces, time[i]);
        se += r * r;
    }
    out.weighted_sq_error_db2 = se;
    out.weight_sum = static_cast<double>(m);
    out.rms_error_db = std::sqrt(se / static_cast<double>(m));
    out.fit_start_s = time.front();
    out.fit_end_s = time.back();
    out.fitted_frames = static_cast<int>(m);
    return out;
}

}  // namespace

std::optional<partial_fit> fit_partial(const partial_track& track, const envelope_fit_params& params) {
    const auto& pts = track.points;
    const std::size_t n = pts.size();
    if (n < 2) return std::nullopt;

    // Peak: maximum of the level smoothed over three frames (mean in dB).
    std::size_t peak = 0;
    double peak_level = -infinity;
    for (std::size_t i = 0; i < n; ++i) {
        const std::size_t a = i > 0 ? i - 1 : i, b = std::min(i + 1, n - 1);
        double s = 0.0;
        for (std::size_t k = a; k <= b; ++k) s += pts[k].level_db;
        s /= static_cast<double>(b - a + 1);
        if (s > peak_level) {
            peak_level = s;
            peak = i;
        }
    }

    // End of the fit, first pass: where the running median of (level - floor) first drops below
    // the margin. Second pass: where the fitted envelope itself comes within the margin of the
    // floor, so the end does not depend on which noisy frames happened to lie high.
    std::vector<double> excess(n);
    for (std::size_t i = 0; i < n; ++i) excess[i] = pts[i].level_db - pts[i].floor_db;
    std::size_t end = n;
    {
        std::array<double, floor_median_frames> win{};
        const int half = floor_median_frames / 2;
        for (std::size_t i = peak; i < n; ++i) {
            int m = 0;
            for (int d = -half; d <= half; ++d) {
                const auto k = static_cast<std::ptrdiff_t>(i) + d;
                if (k < 0 || k >= static_cast<std::ptrdiff_t>(n)) continue;
                win[m++] = excess[static_cast<std::size_t>(k)];
            }
            std::nth_element(win.begin(), win.begin() + m / 2, win.begin() + m);
            if (win[m / 2] < params.floor_margin_db) {
                end = i;
                break;
            }
        }
    }
    if (end < peak + 2) return std::nullopt;
    // Expected level above the floor: first a centred running mean of the measured excess, then
    // the fitted envelope's.
    std::vector<double> expected(n);
    {
        const auto half = static_cast<std::ptrdiff_t>(excess_smoothing_frames / 2);
        for (std::size_t i = 0; i < n; ++i) {
            double sum = 0.0;
            int count = 0;
            for (std::ptrdiff_t d = -half; d <= half; ++d) {
                const auto k = static_cast<std::ptrdiff_t>(i) + d;
                if (k < 0 || k >= static_cast<std::ptrdiff_t>(n)) continue;
                sum += excess[static_cast<std::size_t>(k)];
                ++count;
            }
            expected[i] = sum / count;
        }
    }
    const std::vector<double> rough = level_roughness_db(pts);
    // The first pass only finds the region and the expected levels: a coarser grid will do.
    envelope_fit_params coarse = params;
    coarse.max_fit_points = std::max(min_points_per_segment * params.max_segments, params.max_fit_points / 2);
    partial_fit out = fit_region(pts, expected, rough, peak, peak, end, coarse);
    for (int pass = 0; pass < end_refit_passes; ++pass) {
        std::size_t model_end = n;
        const auto pieces = envelope_pieces(out.env);
        for (std::size_t i = peak; i < n; ++i) {
            expected[i] = decay_level_db(pieces, pts[i].time_s) - pts[i].floor_db;
            if (model_end == n && expected[i] < params.floor_margin_db) model_end = i;
        }
        if (model_end < peak + 2 || (pass > 0 && model_end == end)) break;
        end = model_end;
        out = fit_region(pts, expected, rough, peak, peak, end, params);
    }

    out.freq_hz = heard_freq_hz(pts, peak, end);

    // Phase at t = 0: phi0 = phase - 2 pi f t_c from the first reliable frames after the peak,
    // averaged on the circle with amplitude weights.
    double re = 0.0, im = 0.0;
    int used = 0;
    for (std::size_t i = peak; i < end && used < params.phase_frames; ++i) {
        if (excess[i] < params.floor_margin_db) continue;
        const double a = std::pow(10.0, pts[i].level_db / 20.0);
        const double phi = pts[i].phase_rad - two_pi * out.freq_hz * pts[i].time_s;
        re += a * std::cos(phi);
        im += a * std::sin(phi);
        ++used;
    }
    out.phase_rad = used > 0 ? wrap_phase(std::atan2(im, re)) : 0.0;
    return out;
}

}  // namespace wane
