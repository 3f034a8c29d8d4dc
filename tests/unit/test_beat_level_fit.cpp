// Two close modes read from a level track (analysis/beat_level_fit). Reference: exact ground truth,
// the dB level of a sum of two damped phasors written here from its definition,
// 20 log10 |a e^(-alpha t) + b e^(-beta t) e^(i (2 pi f_b t + phi))|, independently of the fit's
// own parametrization; noise from the project's generator (core/rng.hpp).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <vector>

#include "analysis/beat_level_fit.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

namespace {

struct pair_truth {
    double a_db, a_db_per_s;  ///< mode A: level at t = 0 and slope
    double b_db, b_db_per_s;  ///< mode B
    double beat_hz, phase_rad;
};

/// The pair's level (dB) every hop_s from 0 to end_s, plus Gaussian noise of noise_db RMS.
void pair_levels(const pair_truth& m, double end_s, double noise_db, std::vector<double>& time_s,
                 std::vector<double>& level_db) {
    constexpr double hop_s = 0.01;
    splitmix64 rng{17};
    for (int k = 0; k * hop_s <= end_s; ++k) {
        const double t = k * hop_s;
        const double a = std::pow(10.0, (m.a_db + m.a_db_per_s * t) / 20.0);
        const double b = std::pow(10.0, (m.b_db + m.b_db_per_s * t) / 20.0);
        const std::complex<double> z = a + b * std::polar(1.0, two_pi * m.beat_hz * t + m.phase_rad);
        time_s.push_back(t);
        level_db.push_back(20.0 * std::log10(std::abs(z)) + noise_db * rng.gaussian());
    }
}

}  // namespace

TEST_CASE("beat level fit: two decaying modes beating, both slopes and the beat rate within 0.1 of the truth",
          "[beat_level_fit]") {
    // A louder fast mode and a weaker slow one (they cross within the stretch or after it), beat
    // rates from under one beat per stretch-half to 2.5 Hz, with 0.1 dB of noise on the levels.
    const pair_truth m = GENERATE(pair_truth{-20.0, -16.0, -26.0, -4.0, 0.8, 1.0},
                                  pair_truth{-20.0, -12.0, -30.0, -5.0, 1.1, 2.5},
                                  pair_truth{-20.0, -4.0, -22.0, -16.0, 0.7, -0.5},
                                  pair_truth{-18.0, -9.0, -24.0, -3.0, 2.5, 0.3});
    const double end_s = 1.9;
    std::vector<double> time_s, level_db;
    pair_levels(m, end_s, 0.1, time_s, level_db);
    const auto fit = fit_beat_levels(time_s, level_db);
    CAPTURE(m.a_db_per_s, m.b_db_per_s, m.beat_hz);
    REQUIRE(fit.has_value());
    const double slower = std::max(fit->slope_a_db_per_s, fit->slope_b_db_per_s);
    const double faster = std::min(fit->slope_a_db_per_s, fit->slope_b_db_per_s);
    CAPTURE(fit->slope_a_db_per_s, fit->slope_b_db_per_s, fit->beat_hz, fit->rms_db, fit->line_rms_db);
    // Tolerance: 0.1 of the truth; 0.1 dB of noise on 190 points moves the slopes by a few hundredths.
    CHECK_THAT(slower, WithinAbs(std::max(m.a_db_per_s, m.b_db_per_s), 0.1 * std::abs(std::max(m.a_db_per_s, m.b_db_per_s))));
    CHECK_THAT(faster, WithinAbs(std::min(m.a_db_per_s, m.b_db_per_s), 0.1 * std::abs(std::min(m.a_db_per_s, m.b_db_per_s))));
    CHECK_THAT(fit->beat_hz, WithinAbs(m.beat_hz, 0.1 * m.beat_hz));
    CHECK(fit->rms_db < 0.15);  // the noise's 0.1 dB, and no more
}

TEST_CASE("beat level fit: a plain decay with noise is no beat (a line explains it)", "[beat_level_fit]") {
    // One mode (mode B 200 dB down) and 0.3 dB of noise: no second mode can explain twice as much
    // as the line does.
    std::vector<double> time_s, level_db;
    pair_levels({-20.0, -6.0, -220.0, -6.0, 1.0, 0.0}, 1.9, 0.3, time_s, level_db);
    const auto fit = fit_beat_levels(time_s, level_db);
    INFO("fitted: " << (fit ? fit->rms_db : 0.0) << " dB RMS against the line's " << (fit ? fit->line_rms_db : 0.0));
    CHECK_FALSE(fit.has_value());
}

TEST_CASE("beat level fit: a track with dropouts (points missing) still gives both slopes and the beat rate within 0.1",
          "[beat_level_fit]") {
    // The fit walks the second mode's phasor from point to evenly spaced point and computes it
    // anew after a gap: frames missing at a gap_start_s for gap_s must not throw it off.
    const double gap_start_s = GENERATE(0.13, 0.71, 1.5);
    const double gap_s = GENERATE(0.03, 0.25);
    const pair_truth m{-20.0, -12.0, -30.0, -5.0, 1.1, 2.5};
    std::vector<double> time_all, level_all, time_s, level_db;
    pair_levels(m, 1.9, 0.1, time_all, level_all);
    for (std::size_t i = 0; i < time_all.size(); ++i)
        if (time_all[i] < gap_start_s || time_all[i] >= gap_start_s + gap_s) {
            time_s.push_back(time_all[i]);
            level_db.push_back(level_all[i]);
        }
    const auto fit = fit_beat_levels(time_s, level_db);
    CAPTURE(gap_start_s, gap_s, time_s.size());
    REQUIRE(fit.has_value());
    CAPTURE(fit->slope_a_db_per_s, fit->slope_b_db_per_s, fit->beat_hz, fit->rms_db);
    // Tolerance: as for the full track (0.1 of the truth; the noise moves the slopes by hundredths).
    CHECK_THAT(std::max(fit->slope_a_db_per_s, fit->slope_b_db_per_s), WithinAbs(-5.0, 0.5));
    CHECK_THAT(std::min(fit->slope_a_db_per_s, fit->slope_b_db_per_s), WithinAbs(-12.0, 1.2));
    CHECK_THAT(fit->beat_hz, WithinAbs(1.1, 0.11));
    CHECK(fit->rms_db < 0.15);
}
