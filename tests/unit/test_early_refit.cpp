// The early refit of the partials' phases and start levels (analysis/early_refit.hpp) on a
// synthetic note with exact truth: three partials written here from their formula in double
// precision (an instant start or a linear rise, one decay), with seeded white noise 80 dB down.
// The patch handed to the stage is the truth with one partial's phase or level put off, as a
// later stage's change around a partial leaves it; the stage must bring it back.
#include <catch2/catch.hpp>

#include <array>
#include <cmath>
#include <vector>

#include "analysis/early_refit.hpp"
#include "core/envelope.hpp"
#include "core/patch.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"

using namespace wane;

namespace {

constexpr double fs = 48000.0;

struct true_partial {
    double freq_hz;
    double amp_lin;
    double attack_s;   ///< linear rise from silence (0: an instant start)
    double t60_s;
    double phase_rad;  ///< at t = 0
};

constexpr std::array<true_partial, 3> truth{{
    {.freq_hz = 196.0, .amp_lin = 0.4, .attack_s = 0.0, .t60_s = 2.0, .phase_rad = 0.3},
    {.freq_hz = 311.0, .amp_lin = 0.2, .attack_s = 0.02, .t60_s = 1.2, .phase_rad = -1.1},
    {.freq_hz = 523.0, .amp_lin = 0.1, .attack_s = 0.0, .t60_s = 0.8, .phase_rad = 2.4},
}};

/// sum_k a_k(t) cos(2 pi f_k t + phi_k), a_k rising linearly over attack_k, then falling 60 dB per
/// T60_k; plus white noise of RMS noise_rms from the project's generator.
std::vector<float> make_note(double length_s, double noise_rms) {
    const auto frames = static_cast<std::size_t>(length_s * fs);
    std::vector<float> out(frames);
    splitmix64 rng{11};
    for (std::size_t n = 0; n < frames; ++n) {
        const double t = static_cast<double>(n) / fs;
        double v = noise_rms * rng.gaussian();
        for (const true_partial& q : truth) {
            const double a = t < q.attack_s ? q.amp_lin * t / q.attack_s
                                            : q.amp_lin * std::pow(10.0, -3.0 * (t - q.attack_s) / q.t60_s);
            v += a * std::cos(two_pi * std::fmod(q.freq_hz * t, 1.0) + q.phase_rad);
        }
        out[n] = static_cast<float>(v);
    }
    return out;
}

patch patch_of_truth() {
    patch p;
    p.note.length_s = 1.0;
    p.note.f0_hz = truth.front().freq_hz;
    for (const true_partial& q : truth) {
        p.partials.push_back({.freq_hz = q.freq_hz, .harmonic = 0, .phase_rad = q.phase_rad,
                              .env = {.attack_s = q.attack_s, .peak = to_level(amp_lin{q.amp_lin}),
                                      .decay = {{.t60_s = q.t60_s}}},
                              .place = {}});
    }
    return p;
}

double phase_error_rad(double a, double b) { return std::abs(std::remainder(a - b, two_pi)); }

}  // namespace

TEST_CASE("a partial whose phase or start level was put off is refitted to the note's own (within 0.003 rad and 0.02 dB)",
          "[analysis][onset][early_refit]") {
    const std::vector<float> x = make_note(0.5, 1e-4);
    const early_refit_params params{};
    const std::size_t which = GENERATE(0U, 1U, 2U);
    // The phase put off by 0.7 rad, the level by -2 dB, or both (the level within the stage's
    // 3 dB limit, so the truth can be reached).
    const double phase_off_rad = GENERATE(0.0, 0.7);
    const double level_off_db = GENERATE(0.0, -2.0);
    patch p = patch_of_truth();
    p.partials[which].phase_rad += phase_off_rad;
    p.partials[which].env.peak.db += level_off_db;
    const early_refit_summary s = refit_early_phases(p, x, fs, params);
    CAPTURE(which, phase_off_rad, level_off_db, s.refitted, s.residual_before_db, s.residual_after_db);
    // Noise 80 dB under the strongest partial bounds what the fit cannot explain.
    CHECK(s.residual_after_db < -60.0);
    for (std::size_t k = 0; k < truth.size(); ++k) {
        const double want_db = to_level(amp_lin{truth[k].amp_lin}).db;
        CAPTURE(k, p.partials[k].phase_rad, truth[k].phase_rad, p.partials[k].env.peak.db, want_db);
        CHECK(phase_error_rad(p.partials[k].phase_rad, truth[k].phase_rad) < 0.003);
        CHECK_THAT(p.partials[k].env.peak.db, Catch::Matchers::WithinAbs(want_db, 0.02));
    }
}

TEST_CASE("an early refit moves a partial's start level by at most max_level_change_db, and its later level not at all",
          "[analysis][onset][early_refit]") {
    const std::vector<float> x = make_note(0.5, 1e-4);
    early_refit_params params{};
    params.stage.enabled = false;  // the early stage's own refit is checked in test_early_stage
    patch p = patch_of_truth();
    // The loudest partial 6 dB low, with a first segment that ends at 0.3 s at the true level
    // there: the refit may raise its start by 3 dB only, and the level at 0.3 s stays.
    partial& q = p.partials[0];
    const double end_db = envelope_level(q.env, 0.3).db;
    q.env.peak.db -= 6.0;
    q.env.decay = {{.t60_s = 60.0 * 0.3 / (q.env.peak.db - end_db), .until_s = 0.3}, {.t60_s = truth[0].t60_s}};
    const double start_db = q.env.peak.db;
    refit_early_phases(p, x, fs, params);
    CAPTURE(start_db, p.partials[0].env.peak.db, end_db, envelope_level(p.partials[0].env, 0.3).db);
    CHECK_THAT(p.partials[0].env.peak.db, Catch::Matchers::WithinAbs(start_db + params.max_level_change_db, 1e-9));
    CHECK_THAT(envelope_level(p.partials[0].env, 0.3).db, Catch::Matchers::WithinAbs(end_db, 1e-6));
}

TEST_CASE("an early refit shortens a partial's attack that was drawn out to the note's own (0 or half), its later level kept",
          "[analysis][onset][early_refit]") {
    const std::vector<float> x = make_note(0.5, 1e-4);
    const early_refit_params params{};
    // Partial 0 starts at once and is handed a 50 ms rise; partial 1 rises over 20 ms and is
    // handed a 40 ms rise. Each handed level at the end of its rise is the truth's there, so only
    // the first 50 / 40 ms differ: the stage's tries at 0 and half the attack hold the truth.
    const std::size_t which = GENERATE(0U, 1U);
    const double handed_attack_s = which == 0 ? 0.05 : 0.04;
    patch p = patch_of_truth();
    partial& q = p.partials[which];
    const envelope true_env = q.env;
    q.env.attack_s = handed_attack_s;
    q.env.peak = envelope_level(true_env, handed_attack_s);
    const early_refit_summary s = refit_early_phases(p, x, fs, params);
    const envelope& got = p.partials[which].env;
    CAPTURE(which, s.refitted, s.residual_before_db, s.residual_after_db, got.attack_s, got.peak.db, true_env.peak.db);
    CHECK_THAT(got.attack_s, Catch::Matchers::WithinAbs(truth[which].attack_s, 1e-12));
    CHECK_THAT(got.peak.db, Catch::Matchers::WithinAbs(true_env.peak.db, 0.02));
    CHECK_THAT(envelope_level(got, 0.2).db, Catch::Matchers::WithinAbs(envelope_level(true_env, 0.2).db, 0.02));
    CHECK(phase_error_rad(p.partials[which].phase_rad, truth[which].phase_rad) < 0.003);
    CHECK(s.residual_after_db < -60.0);
}
