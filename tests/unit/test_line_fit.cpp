// core/line_fit's least-squares line against an independent solution: Eigen's QR of the design
// matrix [1 x] (least squares by Householder reflections, no normal equations), on seeded
// scattered points, and exact truth on points that lie on a line.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <vector>

#include <Eigen/Dense>

#include "core/line_fit.hpp"
#include "core/rng.hpp"
#include "test_signals.hpp"

using namespace wane;

TEST_CASE("line_sums gives the slope and intercept of levels on an exact dB line", "[line_fit]") {
    const double slope_db_per_s = GENERATE(-300.0, -20.0, 0.0, 4.5);
    const double start_db = GENERATE(-90.0, -6.0);
    line_sums sums;
    for (int i = 0; i < 17; ++i) {
        const double time_s = 0.5 + 0.0057 * i;  // a hop of 5.7 ms, away from zero
        sums.add(time_s, start_db + slope_db_per_s * time_s);
    }
    const auto slope = sums.slope();
    REQUIRE(slope.has_value());
    INFO("slope " << *slope << " dB/s, truth " << slope_db_per_s);
    CHECK(std::abs(*slope - slope_db_per_s) < 1e-9 * (1.0 + std::abs(slope_db_per_s)));
    CHECK(std::abs(sums.intercept(*slope) - start_db) < 1e-9);
}

TEST_CASE("line_sums agrees with a QR least-squares solve on scattered points", "[line_fit]") {
    const std::uint64_t seed = GENERATE(1u, 2u, 3u, 4u);
    const int count = GENERATE(3, 8, 40);
    splitmix64 rng{seed};
    const test::gaussian_draw<double> scatter{0.0, 3.0};
    Eigen::MatrixXd design(count, 2);
    Eigen::VectorXd level(count);
    line_sums sums;
    for (int i = 0; i < count; ++i) {
        const double time_s = 0.0125 * i + 0.01 * unit_interval(rng.next());
        const double level_db = -40.0 - 35.0 * time_s + scatter(rng);
        design(i, 0) = 1.0, design(i, 1) = time_s, level(i) = level_db;
        sums.add(time_s, level_db);
    }
    const Eigen::VectorXd reference = design.colPivHouseholderQr().solve(level);
    const auto slope = sums.slope();
    REQUIRE(slope.has_value());
    INFO("slope " << *slope << " vs QR " << reference(1) << "; intercept " << sums.intercept(*slope) << " vs "
                  << reference(0));
    // Tolerance: the normal equations lose about cond([1 x])^2 of double precision, far under 1e-9 here.
    CHECK(std::abs(*slope - reference(1)) < 1e-9 * (1.0 + std::abs(reference(1))));
    CHECK(std::abs(sums.intercept(*slope) - reference(0)) < 1e-9 * (1.0 + std::abs(reference(0))));
}

TEST_CASE("line_sums has no slope without enough points or without a spread of x", "[line_fit]") {
    line_sums sums;
    CHECK_FALSE(sums.slope().has_value());
    sums.add(0.1, -3.0);
    CHECK_FALSE(sums.slope().has_value());
    sums.add(0.1, -9.0);  // two points at one time: no spread
    CHECK_FALSE(sums.slope().has_value());
    sums.add(0.2, -9.0);
    CHECK(sums.slope().has_value());
    CHECK_FALSE(sums.slope(4.0).has_value());  // a caller's minimum of four points
}
