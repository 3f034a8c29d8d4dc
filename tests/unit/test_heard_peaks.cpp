// analysis/heard_peaks: late companions closer than the long spectrum resolves become one partial.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "analysis/heard_peaks.hpp"
#include "core/envelope.hpp"
#include "core/units.hpp"
#include "test_signals.hpp"

using namespace wane;
using Catch::Matchers::WithinAbs;

namespace {

constexpr double rate_hz = 16000.0;
constexpr double note_s = 2.5;

/// One component of the synthetic note: amplitude rises linearly from 0 to amp_lin over
/// attack_s (0: starts at amp_lin), then falls 60 dB per t60_s.
struct component {
    double freq_hz;
    double amp_lin;
    double attack_s;
    double t60_s;
    double phase_rad;
};

double amp_at(const component& c, double t) {
    if (t < c.attack_s) return c.amp_lin * t / c.attack_s;
    return c.amp_lin * std::pow(10.0, -3.0 * (t - c.attack_s) / c.t60_s);
}

std::vector<float> note_of(const std::vector<component>& cs, double length_s = note_s) {
    const auto n = static_cast<std::size_t>(length_s * rate_hz);
    std::vector<float> x(n, 0.0f);
    wane::test::splitmix64 rng{17};
    for (std::size_t i = 0; i < n; ++i) {
        const double t = static_cast<double>(i) / rate_hz;
        double v = 1e-5 * rng.gaussian();  // -100 dB floor
        for (const component& c : cs) v += amp_at(c, t) * std::cos(two_pi * c.freq_hz * t + c.phase_rad);
        x[i] = static_cast<float>(v);
    }
    return x;
}

/// The track a tracker would give the component alone (12.5 ms frames, exact levels and phases).
partial_track track_of(const component& c) {
    partial_track t;
    for (int frame = 0; 0.0125 * frame < note_s; ++frame) {  // 12.5 ms hops
        const double time = 0.0125 * frame;
        const double a = std::max(amp_at(c, time), 1e-9);
        t.points.push_back({.time_s = time, .freq_hz = c.freq_hz, .level_db = 20.0 * std::log10(a),
                            .phase_rad = std::remainder(two_pi * c.freq_hz * time + c.phase_rad, two_pi),
                            .floor_db = -120.0});
    }
    return t;
}

}  // namespace

TEST_CASE("late companion within 2 Hz merges into its partial, which carries the companion's late level, "
          "a pair present from the onset and a companion 3 Hz off stay apart",
          "[heard_peaks]") {
    const std::vector<component> cs = {
        {.freq_hz = 110.0, .amp_lin = 0.5, .attack_s = 0.0, .t60_s = 1.5, .phase_rad = 0.3},
        {.freq_hz = 110.6, .amp_lin = 0.1, .attack_s = 0.9, .t60_s = 2.5, .phase_rad = 1.1},  // late, 0.6 Hz off
        {.freq_hz = 330.0, .amp_lin = 0.3, .attack_s = 0.0, .t60_s = 2.0, .phase_rad = 0.0},
        {.freq_hz = 330.8, .amp_lin = 0.15, .attack_s = 0.0, .t60_s = 2.0, .phase_rad = 2.0},  // from the onset
        {.freq_hz = 550.0, .amp_lin = 0.2, .attack_s = 0.0, .t60_s = 2.0, .phase_rad = 0.5},
        {.freq_hz = 553.0, .amp_lin = 0.05, .attack_s = 0.9, .t60_s = 2.5, .phase_rad = 0.0},  // late, 3 Hz off
    };
    const auto x = note_of(cs);
    std::vector<partial_track> tracks;
    patch p;
    for (const component& c : cs) {
        tracks.push_back(track_of(c));
        p.partials.push_back({.freq_hz = c.freq_hz, .harmonic = 0, .phase_rad = c.phase_rad,
                              .env = {.attack_s = c.attack_s, .peak = to_level(amp_lin{c.amp_lin}),
                                      .decay = {{.t60_s = c.t60_s, .until_s = {}}}},
                              .place = {}});
    }
    std::vector<const partial_track*> ptrs;
    ptrs.reserve(tracks.size());
    for (const partial_track& t : tracks) ptrs.push_back(&t);
    const merge_result m = merge_late_companions(p, ptrs, {}, x, rate_hz, {});

    // The late companion is the stronger over the span (0.1-1.1 s): it is kept, the other merged.
    REQUIRE(m.removed == std::vector<std::size_t>{0});
    REQUIRE(m.kept.size() == 1);
    CHECK(m.kept[0].index == 1);
    REQUIRE(p.partials.size() == 5);
    CHECK(p.partials[0].freq_hz == 110.6);  // the stronger member's frequency: the heard peak
    CHECK(p.partials[1].freq_hz == 330.0);
    CHECK(p.partials[2].freq_hz == 330.8);
    CHECK(p.partials[4].freq_hz == 553.0);
    // The merged partial's level: the group's, i.e. the early member's at first (the companion is
    // 19 dB under it at 0.2 s) and the companion's late (33 dB over the early member at 1.6 s).
    // Tolerance 1.5 dB: the other member's share (<= 0.5 dB at these times).
    for (const double t : {0.2, 1.6, 2.0}) {
        const double truth_db = 10.0 * std::log10(std::pow(amp_at(cs[0], t), 2) + std::pow(amp_at(cs[1], t), 2));
        const double got_db = envelope_level(p.partials[0].env, t).db;
        CAPTURE(t, truth_db, got_db);
        CHECK_THAT(got_db, WithinAbs(truth_db, 1.5));
    }
}

TEST_CASE("a short track's fit held level (track ended early) falls from the fit's end at the narrow band's "
          "rate, to within 2 dB of the true level, a track cut by the file's end is left held by the short-fit "
          "rule (changed only by the band rule, and not when fitted to the note's end)",
          "[heard_peaks]") {
    const double t60_s = GENERATE(0.6, 0.8, 1.0, 1.2, 2.4);  // 100 .. 25 dB/s
    const component c{.freq_hz = 3000.0, .amp_lin = 0.01, .attack_s = 0.0, .t60_s = t60_s, .phase_rad = 0.4};
    const auto x = note_of({c});
    // What the envelope fit gives a track of a few frames under the attack's noise: the level at
    // the first frames, held (its slope came out level or rising) for the whole note.
    partial_track track = track_of(c);
    track.points.resize(7);  // 0 .. 0.075 s: the track ended well before the note
    patch p;
    p.partials.push_back({.freq_hz = c.freq_hz, .harmonic = 0, .phase_rad = c.phase_rad,
                          .env = {.attack_s = 0.0, .peak = to_level(amp_lin{c.amp_lin}),
                                  .decay = {{.t60_s = infinity, .until_s = {}}}},
                          .place = {}});
    const std::vector<cut_part> fitted = {{.env = nullptr, .track = &track, .fit_start_s = 0.0125, .fit_end_s = 0.0375}};
    const heard_peak_params params{};
    const heard_span_spectrum s = heard_spectrum(x, rate_hz, params);
    const envelope_fit_params fit_params{.window_s = 0.05};

    SECTION("track ended early: falls from the fit's end") {
        REQUIRE(follow_band_past_fits(p, fitted, x, rate_hz, s, params, fit_params) == 1);
        // Up to the fit's end the fitted level stays; after it the level follows the recording.
        CHECK_THAT(envelope_level(p.partials[0].env, 0.03).db, WithinAbs(-40.0, 1e-9));
        for (const double t : {0.5, 1.0, 2.0}) {
            const double truth_db = 20.0 * std::log10(amp_at(c, t));
            const double expected_db = truth_db + 20.0 * std::log10(amp_at(c, 0.0)) -
                                       20.0 * std::log10(amp_at(c, 0.0375));  // held until 0.0375 s
            const double got_db = envelope_level(p.partials[0].env, t).db;
            CAPTURE(t60_s, t, truth_db, expected_db, got_db);
            if (truth_db < -95.0) continue;  // under the -100 dB floor the band reads the noise
            CHECK_THAT(got_db, WithinAbs(expected_db, 2.0));
        }
    }
    SECTION("track cut by the file's end, fitted to the note's end: unchanged") {
        track.cut_by_end = true;
        const std::vector<cut_part> to_end = {{.env = nullptr, .track = &track, .fit_start_s = 0.0125, .fit_end_s = note_s}};
        const envelope before = p.partials[0].env;
        CHECK(follow_band_past_fits(p, to_end, x, rate_hz, s, params, fit_params) == 0);
        CHECK(p.partials[0].env == before);
    }
    SECTION("track cut by the file's end, fit ended early: the short-fit rule leaves it, the band rule "
            "(held 6 dB over the band for more than 0.1 s) does not") {
        track.cut_by_end = true;
        heard_peak_params short_rule_only = params;
        short_rule_only.over_band_s = infinity;
        patch q = p;
        CHECK(follow_band_past_fits(q, fitted, x, rate_hz, s, short_rule_only, fit_params) == 0);
        CHECK(q.partials[0].env == p.partials[0].env);
        CHECK(follow_band_past_fits(p, fitted, x, rate_hz, s, params, fit_params) == 1);
    }
}

TEST_CASE("a track's fit that falls slower than the recording (track ended early, fit longer than the short-fit "
          "rule's 0.1 s) follows the narrow band from the fit's end to within 2 dB of the true level, a fit "
          "that falls as the recording does is left alone",
          "[heard_peaks]") {
    const double t60_s = GENERATE(0.5, 0.8, 1.2);  // 120 .. 50 dB/s
    const component c{.freq_hz = 3000.0, .amp_lin = 0.01, .attack_s = 0.0, .t60_s = t60_s, .phase_rad = 0.4};
    const auto x = note_of({c});
    partial_track track = track_of(c);
    track.points.resize(25);  // 0 .. 0.3 s: the track ended well before the note
    const double fit_end_s = 0.3;
    const std::vector<cut_part> fitted = {{.env = nullptr, .track = &track, .fit_start_s = 0.0, .fit_end_s = fit_end_s}};
    const heard_peak_params params{};
    const heard_span_spectrum s = heard_spectrum(x, rate_hz, params);
    const envelope_fit_params fit_params{.window_s = 0.05};
    const auto patch_with_t60 = [&](double fitted_t60_s) {
        patch p;
        p.partials.push_back({.freq_hz = c.freq_hz, .harmonic = 0, .phase_rad = c.phase_rad,
                              .env = {.attack_s = 0.0, .peak = to_level(amp_lin{c.amp_lin}),
                                      .decay = {{.t60_s = fitted_t60_s, .until_s = {}}}},
                              .place = {}});
        return p;
    };

    SECTION("fitted three times too slow: falls at the band's rate from the fit's end") {
        patch p = patch_with_t60(3.0 * t60_s);
        const double at_end_db = envelope_level(p.partials[0].env, fit_end_s).db;
        REQUIRE(follow_band_past_fits(p, fitted, x, rate_hz, s, params, fit_params) == 1);
        CHECK_THAT(envelope_level(p.partials[0].env, 0.2).db, WithinAbs(to_level(amp_lin{c.amp_lin}).db - 60.0 * 0.2 / (3.0 * t60_s), 1e-9));  // kept up to the fit's end
        for (const double t : {0.6, 1.0, 1.5}) {
            const double truth_db = 20.0 * std::log10(amp_at(c, t));
            const double expected_db = at_end_db + truth_db - 20.0 * std::log10(amp_at(c, fit_end_s));
            const double got_db = envelope_level(p.partials[0].env, t).db;
            CAPTURE(t60_s, t, truth_db, expected_db, got_db);
            if (truth_db < -95.0) continue;  // under the -100 dB floor the band reads the noise
            CHECK_THAT(got_db, WithinAbs(expected_db, 2.0));
        }
    }
    SECTION("fitted at the true rate: unchanged") {
        patch p = patch_with_t60(t60_s);
        const envelope before = p.partials[0].env;
        CHECK(follow_band_past_fits(p, fitted, x, rate_hz, s, params, fit_params) == 0);
        CHECK(p.partials[0].env == before);
    }
}

TEST_CASE("a merged partial's fitted stretch ends where the member whose envelope runs on at the end was "
          "fitted to: the earlier member's fit end when the later one is never louder, the note's end when "
          "that member's track was cut by the file's end",
          "[heard_peaks]") {
    // A partial held at its level (-42.5 dB) after a fit that ended at 0.4 s, and a late fragment of it
    // that is never louder (-54 dB at its peak).
    const std::vector<component> cs = {
        {.freq_hz = 440.0, .amp_lin = 0.1, .attack_s = 0.0, .t60_s = 0.8, .phase_rad = 0.3},
        {.freq_hz = 440.4, .amp_lin = 0.002, .attack_s = 0.6, .t60_s = 2.0, .phase_rad = 1.1},
    };
    const auto x = note_of(cs);
    std::vector<partial_track> tracks = {track_of(cs[0]), track_of(cs[1])};
    patch p;
    p.partials.push_back({.freq_hz = 440.0, .harmonic = 0, .phase_rad = 0.3,
                          .env = {.attack_s = 0.0, .peak = to_level(amp_lin{0.1}),
                                  .decay = {{.t60_s = 0.8, .until_s = 0.3}, {.t60_s = infinity, .until_s = {}}}},
                          .place = {}});
    p.partials.push_back({.freq_hz = 440.4, .harmonic = 0, .phase_rad = 1.1,
                          .env = {.attack_s = 0.6, .peak = to_level(amp_lin{0.002}), .decay = {{.t60_s = 2.0, .until_s = {}}}},
                          .place = {}});
    const std::vector<const partial_track*> ptrs = {&tracks[0], &tracks[1]};
    const std::vector<double> fit_end_s = {0.4, 2.2};
    const bool cut = GENERATE(false, true);
    tracks[0].cut_by_end = cut;
    const merge_result m = merge_late_companions(p, ptrs, fit_end_s, x, rate_hz, {});
    REQUIRE(m.kept.size() == 1);
    REQUIRE(p.partials.size() == 1);
    CAPTURE(cut, m.kept[0].fit_end_s);
    CHECK(m.kept[0].fit_end_s == (cut ? note_s : 0.4));
}

TEST_CASE("a short note's partials (0.21-0.25 s after the onset, a span of 0.16-0.2 s) move from a few cents "
          "off to their true frequency within 0.3 cent, and no peak is added over a span that short",
          "[heard_peaks]") {
    const double length_s = GENERATE(0.21, 0.23, 0.25);
    const double off_cents = GENERATE(-3.0, 3.0);
    const std::vector<component> cs = {
        {.freq_hz = 261.5, .amp_lin = 0.5, .attack_s = 0.0, .t60_s = 0.6, .phase_rad = 0.3},
        {.freq_hz = 523.7, .amp_lin = 0.2, .attack_s = 0.0, .t60_s = 0.4, .phase_rad = 1.2},
        {.freq_hz = 1310.0, .amp_lin = 0.1, .attack_s = 0.0, .t60_s = 0.3, .phase_rad = 2.0},
    };
    const auto x = note_of(cs, length_s);
    std::vector<partial_track> tracks;
    patch p;
    for (const component& c : cs) {
        tracks.push_back(track_of(c));
        p.partials.push_back({.freq_hz = c.freq_hz * cents_to_ratio(off_cents), .harmonic = 0, .phase_rad = c.phase_rad,
                              .env = {.attack_s = 0.0, .peak = to_level(amp_lin{c.amp_lin}),
                                      .decay = {{.t60_s = c.t60_s, .until_s = {}}}},
                              .place = {}});
    }
    std::vector<const partial_track*> ptrs;
    ptrs.reserve(tracks.size());
    for (const partial_track& t : tracks) ptrs.push_back(&t);
    const heard_peak_params params{};
    const heard_span_spectrum s = heard_spectrum(x, rate_hz, params);
    REQUIRE(!s.mag.empty());
    CHECK(move_to_heard_peaks(p, ptrs, s, params) == 3);
    for (std::size_t i = 0; i < cs.size(); ++i) {
        const double error_cents = cents_between(p.partials[i].freq_hz, cs[i].freq_hz);
        CAPTURE(length_s, off_cents, cs[i].freq_hz, p.partials[i].freq_hz, error_cents);
        CHECK(std::abs(error_cents) < 0.3);
    }
    // A peak no partial accounts for (the third's, once it is taken away) is not added over this span.
    p.partials.pop_back();
    CHECK(add_heard_peaks(p, x, rate_hz, s, params, {}) == 0);
    CHECK(p.partials.size() == 2);
}
