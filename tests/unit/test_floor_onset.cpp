// A floor band's run-back to the onset (analysis/floor_onset.hpp): what a frame across the onset
// measures of a band, against an independent integration, and the run-back kept or held.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "analysis/floor_onset.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;

namespace {

/// 4-term Blackman-Harris (Harris 1978, eq. 33 coefficients) at x in [0, 1], written out here.
double bh4(double x) {
    const double pi = 3.14159265358979323846;
    return 0.35875 - 0.48829 * std::cos(2 * pi * x) + 0.14128 * std::cos(4 * pi * x) - 0.01168 * std::cos(6 * pi * x);
}

/// Level a frame centred at centre_s sees of a band of level peak_db falling slope_db_per_s from
/// the onset (zeros before it), by a fine Riemann sum of the window's power: the reference.
double reference_framed_db(double peak_db, double slope_db_per_s, double window_s, double centre_s) {
    double weighted = 0.0, total = 0.0;
    const int n = 20000;
    for (int k = 0; k < n; ++k) {
        const double x = (k + 0.5) / n;
        const double t = centre_s + (x - 0.5) * window_s;
        const double w2 = bh4(x) * bh4(x);
        total += w2;
        if (t >= 0.0) weighted += w2 * std::pow(10.0, 0.1 * (peak_db + slope_db_per_s * t));
    }
    return 10.0 * std::log10(weighted / total);
}

}  // namespace

TEST_CASE("a frame across the onset sees the band's power weighted by its window over the part after it", "[noise]") {
    const double window_s = 0.3;
    const double centre_s = GENERATE(0.0, 0.05, 0.1, 0.15, 0.4);
    const double t60_s = GENERATE(0.4, 2.0, infinity);
    CAPTURE(centre_s, t60_s);
    const envelope env{.attack_s = 0.0, .peak = level_db{-20.0}, .decay = {{.t60_s = t60_s, .until_s = {}}}};
    const double slope = std::isinf(t60_s) ? 0.0 : -60.0 / t60_s;
    // Tolerance 0.05 dB: the 256-point grid against the 20000-point reference.
    CHECK_THAT(framed_level_db(env, window_kind::blackman_harris_4, window_s, centre_s),
               WithinAbs(reference_framed_db(-20.0, slope, window_s, centre_s), 0.05));
    // A steady band seen by a frame centred at the onset: half the (symmetric) window's power, -3.01 dB.
    if (std::isinf(t60_s) && centre_s == 0.0)
        CHECK_THAT(framed_level_db(env, window_kind::blackman_harris_4, window_s, centre_s), WithinAbs(-20.0 - 3.0103, 0.05));
}

TEST_CASE("a steep first line is held where the frames across the onset measured a steady band", "[noise]") {
    // Fitted from frame 8 (0.15 s at 18.75 ms hop) on: T60 0.4 s (150 dB/s), -20 dB at the onset.
    const double window_s = 0.3, hop_s = 0.01875;
    const std::size_t first = 8;
    const envelope run_back{.attack_s = 0.0, .peak = level_db{-20.0}, .decay = {{.t60_s = 0.4, .until_s = {}}}};
    const double at_first_db = -20.0 - 150.0 * static_cast<double>(first) * hop_s;  // -42.5 dB
    // The band truly held at_first_db from the onset: what the frames across the onset measured.
    const envelope truth{.attack_s = 0.0, .peak = level_db{at_first_db},
                         .decay = {{.t60_s = infinity, .until_s = static_cast<double>(first) * hop_s}, {.t60_s = 0.4, .until_s = {}}}};
    std::vector<float> measured;
    for (std::size_t i = 0; i < first; ++i)
        measured.push_back(static_cast<float>(reference_framed_db(at_first_db, 0.0, window_s, static_cast<double>(i) * hop_s)));
    const envelope limited = limit_run_back(run_back, {.window = window_kind::blackman_harris_4, .window_s = window_s,
                                                        .hop_s = hop_s, .level_db = measured, .first = first});
    INFO("run-back at the onset " << run_back.peak.db << " dB, limited " << limited.peak.db << " dB, truth " << at_first_db);
    // Held within the margin (6 dB, mean over the frames) of the truth at the onset, where the
    // run-back stood 22.5 dB over it ...
    CHECK(envelope_level(limited, 0.0).db <= at_first_db + onset_frames{}.margin_db + 0.5);
    CHECK(envelope_level(limited, 0.0).db >= at_first_db - 0.01);
    // ... and the fitted line unchanged from the first fitted frame on.
    for (double t : {0.15, 0.2, 0.5}) CHECK_THAT(envelope_level(limited, t).db, WithinAbs(envelope_level(truth, t).db, 1e-6));
}

TEST_CASE("a first line the frames across the onset agree with runs back to the onset unchanged", "[noise]") {
    const double window_s = 0.3, hop_s = 0.01875;
    const std::size_t first = 8;
    const envelope run_back{.attack_s = 0.0, .peak = level_db{-20.0}, .decay = {{.t60_s = 0.4, .until_s = {}}}};
    // The frames measured what the decaying band gives them, less 1 dB of estimation spread.
    std::vector<float> measured;
    for (std::size_t i = 0; i < first; ++i)
        measured.push_back(static_cast<float>(reference_framed_db(-20.0, -150.0, window_s, static_cast<double>(i) * hop_s) - 1.0));
    const envelope kept = limit_run_back(run_back, {.window = window_kind::blackman_harris_4, .window_s = window_s,
                                                     .hop_s = hop_s, .level_db = measured, .first = first});
    CHECK(kept == run_back);
}
