// The envelope's definition (patch format v1), checked against values computed by hand.
#include <catch2/catch.hpp>

#include <cmath>

#include "core/envelope.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

TEST_CASE("envelope level follows the definition", "[envelope]") {
    // attack 10 ms to -12 dB, then T60 1.9 s until 0.8 s, then T60 6.4 s.
    const envelope env{.attack_s = 0.01, .peak = level_db{-12.0},
                       .decay = {{.t60_s = 1.9, .until_s = 0.8}, {.t60_s = 6.4, .until_s = {}}}};
    // Hand computed: at t = 0.5 s: -12 - 60 * (0.5 - 0.01) / 1.9 = -27.473684...
    CHECK_THAT(envelope_level(env, 0.5).db, WithinAbs(-27.4736842105, 1e-9));
    // At the breakpoint 0.8 s: -12 - 60 * 0.79 / 1.9 = -36.947368...
    const double at_break = -12.0 - 60.0 * 0.79 / 1.9;
    CHECK_THAT(envelope_level(env, 0.8).db, WithinAbs(at_break, 1e-9));
    // At 2.0 s: at_break - 60 * 1.2 / 6.4 = at_break - 11.25
    CHECK_THAT(envelope_level(env, 2.0).db, WithinAbs(at_break - 11.25, 1e-9));
    // Attack is linear in amplitude: half-way the amplitude is half the peak's (-6.0206 dB).
    CHECK_THAT(envelope_amp(env, 0.005).lin, WithinAbs(0.5 * std::pow(10.0, -12.0 / 20.0), 1e-12));
    CHECK_THAT(envelope_level(env, 0.005).db, WithinAbs(-12.0 - 6.0205999133, 1e-9));
    CHECK(envelope_amp(env, 0.0).lin == 0.0);
    CHECK(envelope_amp(env, -1.0).lin == 0.0);
}

TEST_CASE("t60 = inf holds, negative t60 rises", "[envelope]") {
    const envelope env{.attack_s = 0.0, .peak = level_db{-20.0},
                       .decay = {{.t60_s = infinity, .until_s = 1.0}, {.t60_s = -3.0, .until_s = {}}}};
    CHECK_THAT(envelope_level(env, 0.0).db, WithinAbs(-20.0, 1e-12));
    CHECK_THAT(envelope_level(env, 0.9).db, WithinAbs(-20.0, 1e-12));
    // After 1 s rises 60 dB per 3 s: at 1.5 s, -20 + 10 = -10.
    CHECK_THAT(envelope_level(env, 1.5).db, WithinAbs(-10.0, 1e-12));
}
