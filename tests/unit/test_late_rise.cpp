// A partial that rises late: a struck string's harmonic dies away while a sympathetic string at
// the same pitch swells, and where the two cancel the track's level dips to the noise floor before
// it comes back for good (fitting/envelope_fit.hpp: late_part_start, fit_track). Reference: the
// exact ground truth of the synthetic dB track written here (a straight decay and a straight rise
// in dB, summed as powers; the cancellation itself as a stretch at the floor).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <vector>

#include "core/envelope.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "fitting/envelope_fit.hpp"
#include "test_signals.hpp"

using namespace wane;

namespace {

constexpr double hop_s = 0.01;
constexpr double floor_db = -60.0;

/// Truth: the struck part from start_db falling struck_db_per_s; the swell rising 16 dB/s to
/// swell_db at 1.4 s, then decaying 1 dB/s (straight in dB, as banjo_g3's second harmonic rises);
/// the two cancel (a dip to the floor) from dip_from_s to dip_to_s.
struct late_rise_truth {
    double start_db = -20.0;
    double struck_db_per_s = 120.0;
    double swell_db = -35.0;
    double dip_from_s = 0.3;
    double dip_to_s = 0.45;
    double swell_level_db(double t) const {
        constexpr double peak_s = 1.4, rise_db_per_s = 16.0, decay_db_per_s = 1.0;
        return t < peak_s ? swell_db - rise_db_per_s * (peak_s - t) : swell_db - decay_db_per_s * (t - peak_s);
    }
    double level_db(double t) const {
        if (t >= dip_from_s && t < dip_to_s) return floor_db + 3.0;
        const double struck = start_db - struck_db_per_s * t;
        return power_to_db(db_to_power(struck) + db_to_power(swell_level_db(t)));
    }
};

/// The truth's track over 2.5 s, hop 10 ms, with seeded Gaussian level noise of 0.5 dB.
partial_track late_rise_track(const late_rise_truth& truth, unsigned seed) {
    partial_track track;
    splitmix64 rng{seed};
    const test::gaussian_draw<double> jitter{0.0, 0.5};
    for (int i = 0; i * hop_s < 2.5; ++i) {
        const double t = i * hop_s;
        track.points.push_back({.time_s = t, .freq_hz = 392.0, .level_db = truth.level_db(t) + jitter(rng),
                                .phase_rad = 0.0, .floor_db = floor_db});
    }
    track.cut_by_end = true;
    return track;
}

}  // namespace

TEST_CASE("a track that dips to the floor and swells again keeps the swell's level after the dip",
          "[fitting]") {
    const late_rise_truth truth{.start_db = -20.0, .struck_db_per_s = GENERATE(100.0, 130.0),
                                .swell_db = GENERATE(-30.0, -38.0)};
    const unsigned seed = GENERATE(1u, 2u);
    CAPTURE(truth.struck_db_per_s, truth.swell_db, seed);
    const partial_track track = late_rise_track(truth, seed);
    const envelope_fit_params params{.max_segments = 3, .window_s = 0.04};
    const auto first = fit_partial(track, params);
    REQUIRE(first);
    const partial_fit fit = fit_track(*first, track, params);
    CAPTURE(fit.fit_end_s, fit.env.attack_s, fit.env.peak.db, fit.env.decay.size());
    for (const double t : {0.1, 0.2, 1.0, 1.5, 2.0, 2.4}) {
        const double copy_db = envelope_level(fit.env, t).db;
        const double truth_db = truth.level_db(t);
        CAPTURE(t, copy_db, truth_db);
        // Within 4 dB: the project's 3 dB for fitted levels, plus 1 dB for the corner at the swell's
        // peak, which the copy cuts (its rise is one straight dB line up to the late fit's peak,
        // placed half a window before the smoothed level's maximum).
        CHECK(std::abs(copy_db - truth_db) < 4.0);
    }
}

TEST_CASE("a beat's next maximum after a dip to the floor is no late part", "[fitting]") {
    // Two equal modes 4 Hz apart beating down to the floor: after the first dip the level comes
    // back within a beat period (0.25 s) and peaks at once: fit_track keeps fit_partial's envelope.
    partial_track track;
    for (int i = 0; i * hop_s < 2.0; ++i) {
        const double t = i * hop_s;
        const double beat = std::abs(std::cos(two_pi * 2.0 * t + 0.3));
        const double level = -20.0 - 20.0 * t + to_level(amp_lin{std::max(beat, 1e-3)}).db;
        track.points.push_back({.time_s = t, .freq_hz = 392.0, .level_db = std::max(level, floor_db + 2.0),
                                .phase_rad = 0.0, .floor_db = floor_db});
    }
    const envelope_fit_params params{.max_segments = 3, .window_s = 0.04};
    const auto first = fit_partial(track, params);
    REQUIRE(first);
    const partial_fit fit = fit_track(*first, track, params);
    CHECK(fit.env == first->env);
}
