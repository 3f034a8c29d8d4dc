// The branch-free sin and cos (core/sincos_poly.hpp) against the library's std::sin and std::cos:
// angles drawn from the project's seeded generator over the range the analysis uses (glide phases
// of up to thousands of radians, heterodyne phases in [-2 pi, 0]), the quadrant boundaries, and
// small angles. Tolerance: 1e-15 absolute (the header states a few units in the last place of 1).
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>
#include <vector>

#include "core/rng.hpp"
#include "core/sincos_poly.hpp"

using namespace wane;

namespace {

constexpr double tolerance = 1e-15;

void check(double x) {
    double s = 0.0, c = 0.0;
    sincos_poly(x, s, c);
    const double want_s = std::sin(x), want_c = std::cos(x);
    CAPTURE(x, s, want_s, c, want_c);
    CHECK(std::abs(s - want_s) <= tolerance);
    CHECK(std::abs(c - want_c) <= tolerance);
}

}  // namespace

TEST_CASE("sincos_poly matches the library's sin and cos", "[sincos_poly]") {
    splitmix64 rng{.state = 20261203};
    for (int i = 0; i < 20000; ++i) check(rng.uniform(-2.0 * std::numbers::pi, 0.0));
    for (int i = 0; i < 20000; ++i) check(rng.uniform(-5000.0, 5000.0));
    for (int i = 0; i < 2000; ++i) check(rng.uniform(-1e6, 1e6));
    for (int i = 0; i < 2000; ++i) check(rng.uniform(-1e-6, 1e-6));
    // Around the quadrant boundaries k pi / 4 (where the reduction switches polynomials).
    for (int k = -40; k <= 40; ++k)
        for (const double e : {-1e-12, 0.0, 1e-12}) check(k * std::numbers::pi / 4.0 + e);
    check(0.0);
}
