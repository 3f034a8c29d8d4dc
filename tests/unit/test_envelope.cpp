// The envelope's definition (patch format v1), checked against values computed by hand.
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "core/envelope.hpp"
#include "core/units.hpp"

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

TEST_CASE("held_before holds the level a decay reaches at the time given, and keeps the line after it", "[envelope]") {
    // Peak 0 dB at the onset, T60 0.5 s (120 dB/s) until 0.2 s, then T60 6 s (10 dB/s).
    const envelope env{.attack_s = 0.0, .peak = level_db{0.0},
                       .decay = {{.t60_s = 0.5, .until_s = 0.2}, {.t60_s = 6.0, .until_s = {}}}};
    const double from_s = GENERATE(0.05, 0.15, 0.3);
    CAPTURE(from_s);
    const envelope held = held_before(env, from_s);
    // Hand computed: the level at from_s; before it held there, after it env's own line.
    const double at_from_db = from_s <= 0.2 ? -120.0 * from_s : -24.0 - 10.0 * (from_s - 0.2);
    CHECK_THAT(held.peak.db, WithinAbs(at_from_db, 1e-9));
    CHECK_THAT(envelope_level(held, 0.0).db, WithinAbs(at_from_db, 1e-9));
    CHECK_THAT(envelope_level(held, 0.5 * from_s).db, WithinAbs(at_from_db, 1e-9));
    for (double t : {from_s, from_s + 0.01, from_s + 0.1, 1.0, 3.0}) {
        CAPTURE(t);
        CHECK_THAT(envelope_level(held, t).db, WithinAbs(envelope_level(env, t).db, 1e-9));
    }
}

TEST_CASE("held_before leaves a rise past the time given, and a level that does not fall, alone", "[envelope]") {
    const envelope slow_rise{.attack_s = 0.3, .peak = level_db{-6.0}, .decay = {{.t60_s = 2.0, .until_s = {}}}};
    CHECK(held_before(slow_rise, 0.1) == slow_rise);
    const envelope rising{.attack_s = 0.0, .peak = level_db{-30.0}, .decay = {{.t60_s = -1.0, .until_s = 0.5}, {.t60_s = 3.0, .until_s = {}}}};
    CHECK(held_before(rising, 0.2) == rising);
}

TEST_CASE("to_amp and db_to_power are 10^(dB / 20) and 10^(dB / 10) to the rounding of their argument, -400..+40 dB", "[envelope][units]") {
    // The reference: powl in long double (64-bit mantissa, the quotient dB / 20 rounded 11 bits
    // finer than in double). The double result e^x, x = dB ln(10) / 20 (or / 10) in nepers, is off
    // by the rounding of x (|x| 2^-53 relative, twice: the constant and the product) and exp's own
    // half ulp: a relative error under (|x| + 1) 2^-52. (pow(10, dB / 20), the earlier form, errs
    // by the same amount: dB / 20 is rounded too.)
    const double db = GENERATE(range(-400.0, 40.0, 0.37));
    const auto rel_error = [](double got, long double want) {
        return static_cast<double>(std::fabs(static_cast<long double>(got) - want) / want);
    };
    const double eps = std::ldexp(1.0, -52);
    const long double amp = std::pow(10.0L, static_cast<long double>(db) / 20.0L);
    const long double power = std::pow(10.0L, static_cast<long double>(db) / 10.0L);
    const double amp_nepers = std::abs(db) * std::numbers::ln10 / 20.0;
    CAPTURE(db, to_amp(level_db{db}).lin, db_to_power(db), rel_error(to_amp(level_db{db}).lin, amp), rel_error(db_to_power(db), power));
    CHECK(rel_error(to_amp(level_db{db}).lin, amp) <= (amp_nepers + 1.0) * eps);
    CHECK(rel_error(db_to_power(db), power) <= (2.0 * amp_nepers + 1.0) * eps);
    CHECK(to_amp(level_db{0.0}).lin == 1.0);
    CHECK(db_to_power(0.0) == 1.0);
    CHECK(to_amp(level_db{-INFINITY}).lin == 0.0);
    CHECK(db_to_power(-INFINITY) == 0.0);
}
