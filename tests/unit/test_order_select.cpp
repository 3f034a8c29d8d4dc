// Order statistics' bracket pass: split_range (the AVX2 path where the CPU has it) and its
// one-value-at-a-time baseline against a plain filter, and select_order through it against
// std::nth_element, over sizes around the eight-value vector width.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <vector>

#include "core/order_select.hpp"
#include "core/rng.hpp"

using namespace wane;

namespace {

/// n values of a kind: unit exponentials (a noise bin's power), quantized to quarters (ties), or
/// with zeros; kind 3 also puts a NaN at every 11th value.
std::vector<float> test_values(std::size_t n, int kind, std::uint64_t seed) {
    splitmix64 rng{seed};
    std::vector<float> values(n);
    for (std::size_t i = 0; i < n; ++i) {
        double x = -std::log(rng.unit_open());
        if (kind == 1) x = std::floor(4.0 * x) / 4.0;
        if (kind == 2 && rng.unit() < 0.3) x = 0.0;
        values[i] = static_cast<float>(x);
        if (kind == 3 && i % 11 == 5) values[i] = std::numeric_limits<float>::quiet_NaN();
    }
    return values;
}

}  // namespace

TEST_CASE("split_range copies the values inside the range in order and counts those under, as a plain filter does",
          "[core][order]") {
    const int n = GENERATE(0, 1, 7, 8, 9, 16, 23, 64, 1001);
    const int kind = GENERATE(0, 1, 2, 3);
    const double low = GENERATE(0.0, 0.25, 0.5, 2.0);
    const double width = GENERATE(0.0, 0.5, 1.0, 100.0);
    const std::uint64_t seed = 31 * static_cast<std::uint64_t>(n) + static_cast<std::uint64_t>(kind);
    const std::vector<float> values = test_values(static_cast<std::size_t>(n), kind, seed);
    const auto lo = static_cast<float>(low), hi = static_cast<float>(low + width);
    // Reference: a filter one value at a time (the range closed at both ends, a NaN in neither count).
    std::vector<float> expected;
    std::copy_if(values.begin(), values.end(), std::back_inserter(expected), [&](float v) { return v >= lo && v <= hi; });
    const auto under = static_cast<std::size_t>(std::count_if(values.begin(), values.end(), [&](float v) { return v < lo; }));
    for (const bool baseline : {false, true}) {
        std::vector<float> inside(values.size(), -1.0f);
        const range_split got = baseline ? split_range_baseline(values, lo, hi, inside) : split_range(values, lo, hi, inside);
        CAPTURE(n, kind, low, width, baseline);
        CHECK(got.under == under);
        REQUIRE(got.inside == expected.size());
        CHECK(std::equal(expected.begin(), expected.end(), inside.begin()));
    }
}

TEST_CASE("select_order with a bracket finds the k-th and (k-1)-th smallest that std::nth_element finds",
          "[core][order]") {
    const int n = GENERATE(9, 15, 16, 17, 40, 257);
    const int kind = GENERATE(0, 1, 2);
    const double guess_scale = GENERATE(0.5, 0.97, 1.0, 1.03, 2.0);  // the bracket's centre over the answer
    const std::uint64_t seed = 77 * static_cast<std::uint64_t>(n) + static_cast<std::uint64_t>(kind);
    const std::vector<float> values = test_values(static_cast<std::size_t>(n), kind, seed);
    std::vector<float> scratch;
    for (std::size_t k = 8; k < values.size(); k += 3) {
        std::vector<float> reference = values;
        const auto kth = reference.begin() + static_cast<std::ptrdiff_t>(k);
        std::nth_element(reference.begin(), kth, reference.end());
        const float expected = *kth;
        const float expected_below = *std::max_element(reference.begin(), kth);
        const order_bracket bracket = bracket_around(static_cast<float>(guess_scale * static_cast<double>(expected)), 1.05);
        std::vector<float> work = values;
        const order_values got = select_order(work, k, true, bracket, scratch);
        CAPTURE(n, kind, guess_scale, k, bracket.low, bracket.high);
        CHECK(got.kth == expected);
        CHECK(got.below == expected_below);
    }
}
