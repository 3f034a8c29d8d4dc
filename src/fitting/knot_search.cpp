// The continuous piecewise-linear least squares behind fit_level_lines (see knot_search.hpp).
#include "fitting/knot_search.hpp"

#include <cassert>
#include <cmath>
#include <utility>

namespace wane::knot_search {

namespace {

/// The dynamic program places run boundaries on at most this many grid points.
constexpr std::size_t dp_grid_points = 32;
/// Golden-section steps when a knot is refined between grid points.
constexpr int knot_refine_steps = 12;
constexpr double golden = 0.6180339887498949;  // (sqrt(5) - 1) / 2
/// Coordinate-descent sweeps over the knots.
constexpr int knot_sweeps = 2;
/// With more than one knot, each knot is scanned over this many grid points either side of
/// where it is (the dynamic program already placed it near its optimum); a lone knot is
/// scanned over the whole grid.
constexpr std::size_t knot_scan_halfwidth = 6;
/// moving_knot gives no value where a pivot of its Cholesky factor, or its Schur complement,
/// falls under this fraction of the diagonal entry it comes from (the whole system is solved there).
constexpr double cholesky_min_pivot_rel = 1e-9;

/// Solves the small symmetric system g theta = b (Gaussian elimination with partial pivoting).
/// Returns false when singular. M unknowns known at compile time (solve_small picks it): the
/// loops unrolled, the same operations in the same order.
template <int M>
bool solve_fixed(std::array<double, max_unknowns_sq>& g, std::array<double, max_unknowns>& b) {
    constexpr int m = M;
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

bool solve_small(int m, std::array<double, max_unknowns_sq>& g, std::array<double, max_unknowns>& b) {
    static_assert(max_unknowns <= 9);
    switch (m) {
        case 1: return solve_fixed<1>(g, b);
        case 2: return solve_fixed<2>(g, b);
        case 3: return solve_fixed<3>(g, b);
        case 4: return solve_fixed<4>(g, b);
        case 5: return solve_fixed<5>(g, b);
        case 6: return solve_fixed<6>(g, b);
        case 7: return solve_fixed<7>(g, b);
        case 8: return solve_fixed<8>(g, b);
        case 9: return solve_fixed<9>(g, b);
        default: assert(false); return false;
    }
}

/// Continuous piecewise-linear weighted least squares with the given knots (ascending, relative
/// times). Model: y = theta0 + theta1 x + sum_j theta_{1+j} (x - knot_j)_+ (hinge basis).
/// Normal equations from the suffix sums: for x > k, sum w (x - a)(x - k) = Sxx - (a + k) Sx + a k Sw.
using normal_matrix = std::array<double, max_unknowns_sq>;
using normal_vector = std::array<double, max_unknowns>;
/// Each knot's first point after it (point_sums::first_after), knot by knot.
using knot_indices = std::array<std::size_t, max_supported_segments>;

knot_indices indices_of(const point_sums& ps, std::span<const double> knots) {
    knot_indices idx{};
    for (std::size_t j = 0; j < knots.size(); ++j) idx[j] = ps.first_after(knots[j]);
    return idx;
}

/// The normal equations of the knots whose first points after them are idx: every entry of g's
/// leading (nk + 2) x (nk + 2) block is written (solve_small reads no other), b whole.
void build_normal(const point_sums& ps, std::span<const double> knots, const knot_indices& idx, normal_matrix& g,
                  normal_vector& b) {
    const int nk = static_cast<int>(knots.size());
    const std::size_t n = ps.size();
    b.fill(0.0);
    auto at = [&](int r, int c) -> double& { return g[r * max_unknowns + c]; };
    at(0, 0) = ps.w[n];
    at(0, 1) = at(1, 0) = ps.wx[n];
    at(1, 1) = ps.wxx[n];
    b[0] = ps.wy[n];
    b[1] = ps.wxy[n];
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

/// solve_continuous with each knot's first point after it given (idx).
continuous_solution solve_at(const point_sums& ps, std::span<const double> knots, const knot_indices& idx) {
    const int m = static_cast<int>(knots.size()) + 2;
    normal_matrix g;
    normal_vector b;
    build_normal(ps, knots, idx, g, b);
    continuous_solution out;
    std::array<double, max_unknowns> rhs = b;
    if (!solve_small(m, g, rhs)) return out;
    double fitted = 0.0;
    for (int r = 0; r < m; ++r) fitted += rhs[r] * b[r];
    out.rss = std::max(ps.wyy[ps.size()] - fitted, 0.0);
    out.theta = rhs;
    return out;
}

}  // namespace

continuous_solution solve_continuous(const point_sums& ps, std::span<const double> knots) {
    return solve_at(ps, knots, indices_of(ps, knots));
}

namespace {

/// Feasible range for knot j given its neighbours: every segment lasts min_segment_s and holds
/// min_points_per_segment points (idx_of: each knot's first point after it).
bool knots_feasible(const point_sums& ps, std::span<const double> knots, const knot_indices& idx_of,
                    double min_segment_s) {
    const double end = ps.x.back();
    double prev = 0.0;
    std::size_t prev_idx = 0;
    for (std::size_t j = 0; j <= knots.size(); ++j) {
        const double k = j < knots.size() ? knots[j] : end;
        const std::size_t idx = j < knots.size() ? idx_of[j] : ps.size();
        if (k - prev < min_segment_s) return false;
        if (idx - prev_idx < static_cast<std::size_t>(min_points_per_segment)) return false;
        prev = k;
        prev_idx = idx;
    }
    return true;
}

}  // namespace

/// Bellman's dynamic program for segmented least squares (no continuity): the best split of the
/// points into k runs, for every k up to kmax. Returns, per k, the run starts (k - 1 of them).
std::vector<std::vector<std::size_t>> segmented_least_squares(const point_sums& ps, int kmax,
                                                              double min_run_s) {
    const std::size_t n = ps.size();
    const std::size_t min_pts = min_points_per_segment;
    // Run boundaries on a coarse grid: every stride-th point (and the end); run costs stay exact.
    const std::size_t stride = (n + dp_grid_points - 1) / dp_grid_points;
    // The grid and the tables in fixed arrays (at most dp_grid_points + 1 candidates and
    // max_supported_segments runs): no allocation per fit.
    assert(kmax <= max_supported_segments);
    std::array<std::size_t, dp_grid_points + 1> cand{};
    std::size_t nc = 0;
    for (std::size_t i = 0; i < n; i += stride) cand[nc++] = i;
    cand[nc++] = n;
    using table = std::array<std::array<double, dp_grid_points + 1>, max_supported_segments + 1>;
    table cost;
    for (auto& row : cost) row.fill(infinity);
    std::array<std::array<std::size_t, dp_grid_points + 1>, max_supported_segments + 1> from{};
    auto run_ok = [&](std::size_t a, std::size_t b) {
        return b - a >= min_pts && ps.x[b - 1] - ps.x[a] >= min_run_s;
    };
    for (std::size_t j = 1; j < nc; ++j)
        if (run_ok(0, cand[j])) cost[1][j] = ps.line_cost(0, cand[j]);
    for (int k = 2; k <= kmax; ++k) {
        // The last layer only needs the full run (j = the end).
        for (std::size_t j = k == kmax ? nc - 1 : 1; j < nc; ++j) {
            for (std::size_t i = 1; i < j; ++i) {
                // A run's cost is never negative (line_cost), so a split whose first runs alone
                // cost no less than the best so far cannot beat it: its run is not costed (the
                // same choices; callgrind, `wane analyze` of the synthetic note:
                // segmented_least_squares 4.91 -> 4.22 M instructions).
                if (!std::isfinite(cost[k - 1][i]) || !(cost[k - 1][i] < cost[k][j]) || !run_ok(cand[i], cand[j])) continue;
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

moving_knot::moving_knot(const point_sums& ps, std::span<const double> knots, std::size_t j) : ps_(&ps) {
    // The fixed columns are the normal equations of the fit without knot j.
    std::array<double, max_supported_segments> others{};
    std::size_t count = 0;
    for (std::size_t l = 0; l < knots.size(); ++l)
        if (l != j) others[count++] = knots[l];
    const std::span<const double> fixed_knots(others.data(), count);
    const knot_indices idx = indices_of(ps, fixed_knots);
    for (std::size_t q = 0; q < count; ++q) {
        other_knot_[q] = others[q];
        other_idx_[q] = idx[q];
    }
    fixed_ = static_cast<int>(count) + 2;
    normal_matrix g;
    normal_vector b;
    build_normal(ps, fixed_knots, idx, g, b);
    auto lower = [&](int r, int c) -> double& { return chol_[r * max_unknowns + c]; };
    for (int r = 0; r < fixed_; ++r) {
        for (int c = 0; c <= r; ++c) {
            double sum = g[r * max_unknowns + c];
            for (int k = 0; k < c; ++k) sum -= lower(r, k) * lower(c, k);
            if (c < r) {
                lower(r, c) = sum / lower(c, c);
            } else {
                if (!(sum > cholesky_min_pivot_rel * g[r * max_unknowns + r])) return;  // near singular
                lower(r, r) = std::sqrt(sum);
            }
        }
    }
    double vv = 0.0;
    for (int r = 0; r < fixed_; ++r) {
        double sum = b[r];
        for (int k = 0; k < r; ++k) sum -= lower(r, k) * v_[k];
        v_[r] = sum / lower(r, r);
        vv += v_[r] * v_[r];
    }
    fixed_rss_ = ps.wyy[ps.size()] - vv;
    factored_ = true;
}

std::optional<double> moving_knot::rss_at(double k, std::size_t i) const {
    if (!factored_) return std::nullopt;
    const point_sums& ps = *ps_;
    const std::size_t n = ps.size();
    // The moving hinge's column against the fixed ones (build_normal's entries, the suffix sums
    // from the later of the two knots).
    std::array<double, max_unknowns> c{};
    {
        const double sw = ps.w[n] - ps.w[i], sx = ps.wx[n] - ps.wx[i], sxx = ps.wxx[n] - ps.wxx[i];
        c[0] = sx - k * sw;
        c[1] = sxx - k * sx;
    }
    for (int q = 0; q + 2 < fixed_; ++q) {
        const std::size_t from = std::max(i, other_idx_[q]);
        const double sw = ps.w[n] - ps.w[from], sx = ps.wx[n] - ps.wx[from], sxx = ps.wxx[n] - ps.wxx[from];
        const double a = other_knot_[q];
        c[2 + q] = sxx - (a + k) * sx + a * k * sw;
    }
    const double sw = ps.w[n] - ps.w[i], sx = ps.wx[n] - ps.wx[i], sxx = ps.wxx[n] - ps.wxx[i];
    const double sy = ps.wy[n] - ps.wy[i], sxy = ps.wxy[n] - ps.wxy[i];
    const double d = sxx - (k + k) * sx + k * k * sw;
    const double beta = sxy - k * sy;
    // y = L^-1 c by forward substitution; the Schur complement d - y.y and the residual beta - y.v.
    std::array<double, max_unknowns> y{};
    double yy = 0.0, yv = 0.0;
    for (int r = 0; r < fixed_; ++r) {
        double sum = c[r];
        for (int q = 0; q < r; ++q) sum -= chol_[r * max_unknowns + q] * y[q];
        y[r] = sum / chol_[r * max_unknowns + r];
        yy += y[r] * y[r];
        yv += y[r] * v_[r];
    }
    const double schur = d - yy;
    if (!(schur > cholesky_min_pivot_rel * d)) return std::nullopt;
    const double r = beta - yv;
    return std::max(fixed_rss_ - r * r / schur, 0.0);
}

namespace {

/// Golden-section search for the least of f over [lo, hi] in knot_refine_steps steps: the better
/// of its last two points, and f there.
template <class F>
std::pair<double, double> golden_least(double lo, double hi, F&& f) {
    double a = hi - golden * (hi - lo), c = lo + golden * (hi - lo);
    double fa = f(a), fc = f(c);
    for (int step = 0; step < knot_refine_steps; ++step) {
        if (fa < fc) {
            hi = c;
            c = a;
            fc = fa;
            a = hi - golden * (hi - lo);
            fa = f(a);
        } else {
            lo = a;
            a = c;
            fa = fc;
            c = lo + golden * (hi - lo);
            fc = f(c);
        }
    }
    return {fa < fc ? a : c, std::min(fa, fc)};
}

}  // namespace

knot_fit refine_knots(const point_sums& ps, std::vector<double> knots, double min_segment_s) {
    // Each knot's first point after it is looked up once per knot position (a trial moves one).
    knot_indices best_idx = indices_of(ps, knots);
    knot_fit best{knots, solve_at(ps, knots, best_idx)};
    if (knots.empty()) return best;
    if (!knots_feasible(ps, knots, best_idx, min_segment_s)) best.sol.rss = infinity;
    const std::size_t n = ps.size();
    for (int sweep = 0; sweep < knot_sweeps; ++sweep) {
        bool moved = false;
        for (std::size_t j = 0; j < knots.size(); ++j) {
            std::array<double, max_supported_segments> trial_knots{};  // best.knots, not allocated
            std::copy(best.knots.begin(), best.knots.end(), trial_knots.begin());
            const std::span<double> trial(trial_knots.data(), best.knots.size());
            knot_indices trial_idx = best_idx;
            auto move_to = [&](double t) {
                trial[j] = t;
                trial_idx[j] = ps.first_after(t);
            };
            // The trials' RSS with the other knots fixed (the whole system where that is near singular).
            const moving_knot moving(ps, best.knots, j);
            auto trial_rss = [&](double t) {  // t where move_to put knot j
                const std::optional<double> rss = moving.rss_at(t, trial_idx[j]);
                return rss ? *rss : solve_at(ps, trial, trial_idx).rss;
            };
            // The knot where it is, by the same arithmetic as its trials.
            const double current_rss = std::isfinite(best.sol.rss) ? trial_rss(best.knots[j]) : infinity;
            double best_rss = current_rss;
            std::size_t best_i = n;
            std::size_t scan_lo = 1, scan_hi = n - 1;
            if (knots.size() > 1) {
                const std::size_t at = ps.first_after(best.knots[j]);
                scan_lo = std::max<std::size_t>(1, at > knot_scan_halfwidth ? at - knot_scan_halfwidth : 0);
                scan_hi = std::min(n - 1, at + knot_scan_halfwidth);
            }
            for (std::size_t i = scan_lo; i < scan_hi; ++i) {
                // The first point after x[i] by a step from i (the times ascend): first_after's index.
                std::size_t after = i + 1;
                while (after < n && ps.x[after] <= ps.x[i]) ++after;
                trial[j] = ps.x[i];
                trial_idx[j] = after;
                if (!knots_feasible(ps, trial, trial_idx, min_segment_s)) continue;
                const double rss = trial_rss(ps.x[i]);
                if (rss < best_rss) {
                    best_rss = rss;
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
                move_to(t);
                if (!knots_feasible(ps, trial, trial_idx, min_segment_s)) return infinity;
                return trial_rss(t);
            };
            auto [cand, cand_rss] = golden_least(lo, hi, eval);
            if (best_i < n && best_rss <= cand_rss) {
                cand = ps.x[best_i];
                cand_rss = best_rss;
            }
            if (cand_rss < current_rss) {
                move_to(cand);
                best.knots.assign(trial.begin(), trial.end());
                best_idx = trial_idx;
                best.sol = solve_at(ps, trial, trial_idx);
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
        build_normal(ps, f.knots, indices_of(ps, f.knots), g, b);
        normal_vector e{};
        e[2 + j] = 1.0;
        if (!solve_small(m, g, e)) return false;
        const double var = e[2 + j] * inflation;
        if (!(var > 0.0)) return false;
        if (std::abs(f.sol.theta[2 + j]) < min_z * std::sqrt(var)) return false;
    }
    return true;
}

}  // namespace wane::knot_search
