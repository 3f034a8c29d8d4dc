// The continuous piecewise-linear least squares behind fit_level_lines (internal to src/fitting):
// prefix sums of the points, the hinge-basis normal equations, Bellman's segmented least squares
// for starting knots, knot refinement, and the significance tests of each knee.
#pragma once

#include <algorithm>
#include <array>
#include <cstddef>
#include <optional>
#include <span>
#include <vector>

#include "core/units.hpp"
#include "fitting/envelope_fit.hpp"

namespace wane::knot_search {

/// Largest number of segments the fixed-size normal equations hold.
inline constexpr int max_supported_segments = max_fit_segments;
inline constexpr int max_unknowns = max_supported_segments + 1;
inline constexpr std::size_t max_unknowns_sq = static_cast<std::size_t>(max_unknowns) * max_unknowns;
/// A segment needs at least this many fit points so its slope is determined by data.
inline constexpr int min_points_per_segment = 3;

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

/// Continuous piecewise-linear weighted least squares with the given knots (ascending, relative
/// times): y = theta0 + theta1 x + sum_j theta_{1+j} (x - knot_j)_+ (hinge basis).
continuous_solution solve_continuous(const point_sums& ps, std::span<const double> knots);

/// Bellman's dynamic program for segmented least squares (no continuity): the best split of the
/// points into k runs, for every k up to kmax. Returns, per k, the run starts (k - 1 of them).
std::vector<std::vector<std::size_t>> segmented_least_squares(const point_sums& ps, int kmax,
                                                              double min_run_s);

/// Continuous fit with K - 1 knots started from the DP split, refined by coordinate descent: each
/// knot in turn is scanned over the grid points between its neighbours, then golden-section
/// refined between the grid points around the best one.
struct knot_fit {
    std::vector<double> knots;
    continuous_solution sol;
};

knot_fit refine_knots(const point_sums& ps, std::vector<double> knots, double min_segment_s);

/// The continuous fit's RSS as one knot (j) moves while the others stay, by the Schur complement
/// of the moving hinge column: the fixed columns' normal matrix G (intercept, slope, the other
/// hinges) is factored once, G = L L^T (Cholesky), with v = L^-1 b; for a knot at k with column
/// c(k), diagonal d(k) and right-hand side beta(k) (the suffix sums of build_normal), y = L^-1 c:
///   RSS(k) = (wyy - v.v) - (beta - y.v)^2 / (d - y.y)   [dB^2 x weight],
/// the same least squares as solve_continuous (O(m^2) a position, not O(m^3)); equal to it to
/// rounding (test_knot_search). No value (nullopt) where the fixed columns or the Schur
/// complement are near singular: the caller solves the whole system there.
class moving_knot {
public:
    moving_knot(const point_sums& ps, std::span<const double> knots, std::size_t j);
    /// RSS with knot j at relative time k (between its neighbours, ascending), whose first point
    /// after it is i (point_sums::first_after(k)).
    std::optional<double> rss_at(double k, std::size_t i) const;

private:
    const point_sums* ps_;
    int fixed_ = 0;  ///< fixed unknowns: 2 + the other knots
    std::array<double, max_unknowns> other_knot_{};
    std::array<std::size_t, max_unknowns> other_idx_{};
    std::array<double, max_unknowns_sq> chol_{};  ///< L, row-major, max_unknowns wide
    std::array<double, max_unknowns> v_{};         ///< L^-1 b
    double fixed_rss_ = 0.0;                        ///< wyy - v.v: the RSS without knot j
    bool factored_ = false;
};

/// The K slopes of a continuous solution.
std::vector<double> slopes_of(const continuous_solution& s, int k);
/// Level of the continuous fit at relative time x.
double line_value(const continuous_solution& s, std::span<const double> knots, double x);
/// Practical significance of each knee: the slopes differ by a fraction and an absolute amount,
/// and the change moves the level by min_knee_effect_db over the shorter neighbouring segment.
bool slopes_distinct(std::span<const double> slopes, std::span<const double> knots, double start_x,
                     double end_x, const envelope_fit_params& p);
/// Wald test of each slope change (knot_search.cpp); true when every |change| / SE reaches min_z.
bool changes_significant(const point_sums& ps, const knot_fit& f, double inflation, double min_z);

}  // namespace wane::knot_search
