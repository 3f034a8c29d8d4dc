// fitting/knot_search's continuous piecewise-linear least squares against an independent
// solution: Eigen's QR of the weighted hinge design matrix (Householder reflections on the rows
// sqrt(w) [1, x, (x - knot)_+ ...], no normal equations), on seeded scattered level tracks.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <optional>
#include <vector>

#include <Eigen/Dense>

#include "core/rng.hpp"
#include "fitting/knot_search.hpp"

using namespace wane;
using namespace wane::knot_search;

namespace {

/// A decaying level track: 12.5 ms hops, two slopes and a knee at 0.6 of its length, Gaussian
/// scatter of 1.5 dB, weights between 0.2 and 2 (all from seed).
struct level_track {
    std::vector<double> times_s, levels_db, weights;
};

level_track make_track(std::uint64_t seed, int points) {
    splitmix64 rng{seed};
    level_track t;
    const double knee_s = 0.6 * 0.0125 * points;
    for (int i = 0; i < points; ++i) {
        const double time_s = 0.05 + 0.0125 * i;
        const double clean_db = -10.0 - 30.0 * time_s - 50.0 * std::max(time_s - 0.05 - knee_s, 0.0);
        t.times_s.push_back(time_s);
        t.levels_db.push_back(clean_db + 1.5 * rng.gaussian());
        t.weights.push_back(rng.uniform(0.2, 2.0));
    }
    return t;
}

/// The weighted RSS of the continuous hinge fit with the given knots (relative to the first
/// time) by QR of the weighted design matrix.
double qr_rss(const level_track& t, const std::vector<double>& knots) {
    const auto n = static_cast<Eigen::Index>(t.times_s.size());
    const auto m = static_cast<Eigen::Index>(knots.size()) + 2;
    Eigen::MatrixXd a(n, m);
    Eigen::VectorXd y(n);
    for (Eigen::Index i = 0; i < n; ++i) {
        const double x = t.times_s[i] - t.times_s[0];
        const double sw = std::sqrt(t.weights[i]);
        a(i, 0) = sw;
        a(i, 1) = sw * x;
        for (std::size_t j = 0; j < knots.size(); ++j) a(i, 2 + static_cast<Eigen::Index>(j)) = sw * std::max(x - knots[j], 0.0);
        y(i) = sw * t.levels_db[i];
    }
    const Eigen::VectorXd theta = a.colPivHouseholderQr().solve(y);
    return (a * theta - y).squaredNorm();
}

}  // namespace

TEST_CASE("moving_knot's RSS as one knot moves equals a QR least-squares fit of the same knots",
          "[knot_search]") {
    const std::uint64_t seed = GENERATE(1u, 2u, 3u);
    const int knot_count = GENERATE(1, 2, 4);
    const level_track t = make_track(seed, 120);
    const point_sums ps(t.times_s, t.levels_db, t.weights);
    const double span_s = ps.x.back();
    std::vector<double> knots;
    knots.reserve(static_cast<std::size_t>(knot_count));
    for (int j = 0; j < knot_count; ++j) knots.push_back(span_s * (j + 1) / (knot_count + 1) + 0.0031);
    for (std::size_t j = 0; j < knots.size(); ++j) {
        const moving_knot moving(ps, knots, j);
        const double lo = j == 0 ? 0.05 : knots[j - 1] + 0.05;
        const double hi = j + 1 < knots.size() ? knots[j + 1] - 0.05 : span_s - 0.05;
        for (int step = 0; step <= 16; ++step) {
            std::vector<double> trial = knots;
            trial[j] = lo + (hi - lo) * step / 16.0;
            const std::optional<double> rss = moving.rss_at(trial[j], ps.first_after(trial[j]));
            REQUIRE(rss.has_value());
            const double reference = qr_rss(t, trial);
            const double whole = solve_continuous(ps, trial).rss;
            INFO("knot " << j << " at " << trial[j] << " s: moving " << *rss << ", whole " << whole << ", QR " << reference);
            CHECK(std::abs(*rss - reference) <= 1e-9 * reference);
            CHECK(std::abs(whole - reference) <= 1e-9 * reference);
        }
    }
}

TEST_CASE("refine_knots lands a lone knot on the QR fit's best grid point or better", "[knot_search]") {
    const std::uint64_t seed = GENERATE(4u, 5u, 6u, 7u);
    const level_track t = make_track(seed, 80);
    const point_sums ps(t.times_s, t.levels_db, t.weights);
    // The best feasible grid point by QR (segments of at least 3 points and 0.03 s).
    constexpr double min_segment_s = 0.03;
    double best_grid = INFINITY;
    for (std::size_t i = 3; i + 3 <= ps.size(); ++i) {
        if (ps.x[i] < min_segment_s || ps.x.back() - ps.x[i] < min_segment_s) continue;
        best_grid = std::min(best_grid, qr_rss(t, {ps.x[i]}));
    }
    const knot_fit f = refine_knots(ps, {0.5 * ps.x.back()}, min_segment_s);
    REQUIRE(f.knots.size() == 1);
    const double at_fit = qr_rss(t, f.knots);
    INFO("refined knot " << f.knots[0] << " s: RSS " << f.sol.rss << " (QR " << at_fit << "), best grid point's " << best_grid);
    CHECK(std::abs(f.sol.rss - at_fit) <= 1e-9 * at_fit);
    CHECK(at_fit <= best_grid * (1.0 + 1e-9));
}
