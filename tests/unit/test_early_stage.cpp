// A strong partial's early stage refitted on the waveform (analysis/early_stage.hpp, through
// analysis/early_refit) on a synthetic note with exact truth: two partials written here from their
// formula in double precision, one of which falls faster over its first 80 ms than later, with
// seeded white noise 80 dB down. The patch handed to the stage gives that partial one segment, its
// later line run back to the onset (as an STFT fit of the later frames draws it), so its first
// 80 ms are too quiet by up to 6.8 dB: more than the start level's own refit may move (3 dB).
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "analysis/early_refit.hpp"
#include "analysis/early_stage.hpp"
#include "core/envelope.hpp"
#include "core/patch.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"

using namespace wane;

namespace {

constexpr double fs = 48000.0;

/// The fast partial's truth: level peak_db at t = 0, falling fast_db over knee_s, then 60 dB per
/// slow_t60_s; the other partial one segment.
struct two_stage {
    double freq_hz = 196.0;
    double peak_db = -8.0;
    double knee_s = 0.08;
    double fast_db = 8.0;
    double slow_t60_s = 2.0;
    double phase_rad = 0.3;
};

double true_level_db(const two_stage& q, double t) {
    if (t < q.knee_s) return q.peak_db - q.fast_db * t / q.knee_s;
    return q.peak_db - q.fast_db - 60.0 * (t - q.knee_s) / q.slow_t60_s;
}

constexpr double other_freq_hz = 311.0, other_db = -14.0, other_t60_s = 1.2, other_phase_rad = -1.1;

std::vector<float> make_note(const two_stage& q, double length_s, double noise_rms) {
    const auto frames = static_cast<std::size_t>(length_s * fs);
    std::vector<float> out(frames);
    splitmix64 rng{23};
    for (std::size_t n = 0; n < frames; ++n) {
        const double t = static_cast<double>(n) / fs;
        double v = noise_rms * rng.gaussian();
        v += std::pow(10.0, true_level_db(q, t) / 20.0) * std::cos(two_pi * std::fmod(q.freq_hz * t, 1.0) + q.phase_rad);
        v += std::pow(10.0, (other_db - 60.0 * t / other_t60_s) / 20.0) *
             std::cos(two_pi * std::fmod(other_freq_hz * t, 1.0) + other_phase_rad);
        out[n] = static_cast<float>(v);
    }
    return out;
}

/// The truth, the fast partial handed one segment: its later line run back to the onset.
patch handed_patch(const two_stage& q) {
    patch p;
    p.note.length_s = 1.0;
    p.note.f0_hz = q.freq_hz;
    const double run_back_db = true_level_db(q, q.knee_s) + 60.0 * q.knee_s / q.slow_t60_s;
    p.partials.push_back({.freq_hz = q.freq_hz, .harmonic = 1, .phase_rad = q.phase_rad,
                          .env = {.attack_s = 0.0, .peak = level_db{run_back_db}, .decay = {{.t60_s = q.slow_t60_s}}},
                          .place = {}});
    p.partials.push_back({.freq_hz = other_freq_hz, .harmonic = 0, .phase_rad = other_phase_rad,
                          .env = {.attack_s = 0.0, .peak = level_db{other_db}, .decay = {{.t60_s = other_t60_s}}},
                          .place = {}});
    return p;
}

}  // namespace

TEST_CASE("an early stage's envelope holds the offsets at its knots and the old level from its join on",
          "[analysis][onset][early_stage]") {
    const envelope env{.attack_s = 0.01, .peak = level_db{-6.0},
                       .decay = {{.t60_s = 0.5, .until_s = 0.12}, {.t60_s = 3.0, .until_s = 0.6}, {.t60_s = 1.0}}};
    const double join_s = GENERATE(0.1, 0.15);
    const early_stage_fit fit{.knee_s = 0.05, .join_s = join_s, .start_db = 2.5, .knee_db = -1.5, .fall = 0.0};
    const envelope got = with_early_stage(env, fit);
    CAPTURE(join_s, got.peak.db, got.decay.size());
    CHECK(got.attack_s == env.attack_s);
    CHECK_THAT(got.peak.db, Catch::Matchers::WithinAbs(env.peak.db + 2.5, 1e-12));
    CHECK_THAT(envelope_level(got, 0.05).db, Catch::Matchers::WithinAbs(envelope_level(env, 0.05).db - 1.5, 1e-9));
    for (const double t : {join_s, 0.16, 0.3, 0.6, 1.5}) {
        CAPTURE(t, envelope_level(got, t).db, envelope_level(env, t).db);
        CHECK_THAT(envelope_level(got, t).db, Catch::Matchers::WithinAbs(envelope_level(env, t).db, 1e-9));
    }
}

TEST_CASE("a partial handed one segment whose first 80 ms fall faster comes out of the early refit within 0.02 dB of "
          "its two-stage truth over 0-80 ms and unchanged from 0.15 s on",
          "[analysis][onset][early_stage]") {
    two_stage q;
    q.fast_db = GENERATE(4.0, 8.0);
    const std::vector<float> x = make_note(q, 0.5, 1e-4);
    patch p = handed_patch(q);
    const envelope handed = p.partials[0].env;
    const early_refit_summary s = refit_early_phases(p, x, fs, early_refit_params{});
    const envelope& got = p.partials[0].env;
    CAPTURE(q.fast_db, s.refitted, s.residual_before_db, s.residual_after_db, got.decay.size());
    for (const double t : {0.0, 0.02, 0.04, 0.06, 0.08}) {
        CAPTURE(t, envelope_level(handed, t).db, envelope_level(got, t).db, true_level_db(q, t));
        CHECK_THAT(envelope_level(got, t).db, Catch::Matchers::WithinAbs(true_level_db(q, t), 0.02));
    }
    for (const double t : {0.15, 0.3, 0.9}) {
        CAPTURE(t, envelope_level(got, t).db, envelope_level(handed, t).db);
        CHECK_THAT(envelope_level(got, t).db, Catch::Matchers::WithinAbs(envelope_level(handed, t).db, 1e-6));
    }
    CHECK(s.residual_after_db < s.residual_before_db - 10.0);
}
