// The render plan's lane powers (src/synthesis/phasor_powers.cpp) against the formulas made
// directly with std::polar and std::exp (the renderer's own definition): kept rows must be the
// rows made anew bit for bit (tolerance 0), also after other arguments have taken their places.
#include <catch2/catch.hpp>

#include <bit>
#include <cmath>
#include <complex>
#include <cstddef>
#include <cstdint>
#include <vector>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "synthesis/phasor_powers.hpp"

using namespace wane;

namespace {

/// Whether a and b have the same bits (tolerance 0: -0 and 0 differ, as do NaNs of other payloads).
bool same_bits(double a, double b) { return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b); }

/// Arguments over a range, more of them than rows are kept (so later calls find others' slots).
std::vector<double> arguments(double lo, double hi, std::uint64_t seed) {
    splitmix64 rng{seed};
    std::vector<double> x(1500);
    for (double& v : x) v = rng.uniform(lo, hi);
    return x;
}

bool same_turns(double cycles_per_frame) {
    const lane_turns got = lane_turns_of(cycles_per_frame);
    for (std::size_t l = 0; l <= render_lanes; ++l) {
        const std::complex<double> want = std::polar(1.0, two_pi * cycles_per_frame * static_cast<double>(l));
        if (!same_bits(got[l].real(), want.real()) || !same_bits(got[l].imag(), want.imag())) return false;
    }
    return true;
}

bool same_decays(double ln_amp_per_frame) {
    const lane_decays got = lane_decays_of(ln_amp_per_frame);
    for (std::size_t l = 0; l <= render_lanes; ++l) {
        const double want = ln_amp_per_frame == 0.0 ? 1.0 : std::exp(ln_amp_per_frame * static_cast<double>(l));
        if (!same_bits(got[l], want)) return false;
    }
    return true;
}

}  // namespace

TEST_CASE("lane turns are std::polar's bits whether made or kept") {
    const std::vector<double> x = arguments(0.0, 0.5, 11);
    int wrong = 0;
    for (int pass = 0; pass < 2; ++pass)
        for (const double v : x) wrong += same_turns(v) ? 0 : 1;
    for (std::size_t i = 0; i < 40; ++i) wrong += same_turns(x[i % 4]) ? 0 : 1;  // a few asked for again and again
    CHECK(wrong == 0);
}

TEST_CASE("lane decays are std::exp's bits whether made or kept and exactly 1 without a decay") {
    const std::vector<double> x = arguments(-1e-2, 0.0, 12);
    int wrong = 0;
    for (int pass = 0; pass < 2; ++pass)
        for (const double v : x) wrong += same_decays(v) ? 0 : 1;
    for (std::size_t i = 0; i < 40; ++i) wrong += same_decays(x[i % 4]) ? 0 : 1;
    CHECK(wrong == 0);
    for (const double zero : {0.0, -0.0}) {
        const lane_decays ones = lane_decays_of(zero);
        for (const double v : ones) CHECK(v == 1.0);
    }
}
