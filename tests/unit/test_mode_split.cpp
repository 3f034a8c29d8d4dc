// The strongest partials as close modes (analysis/mode_split.hpp): exact truth from synthetic
// notes written out by test_signals.hpp (not by the renderer).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <vector>

#include "analysis/mode_split.hpp"
#include "core/units.hpp"
#include "test_signals.hpp"

using namespace wane;
using wane::test::decaying_partial;

namespace {

constexpr double rate_hz = 48000.0;
constexpr double length_s = 2.0;
constexpr double noise_rms = 1e-4;  // -80 dB re full scale

partial single(double freq_hz, double amp, double t60_s, double phase_rad) {
    return {.freq_hz = freq_hz, .harmonic = 1, .phase_rad = phase_rad,
            .env = {.attack_s = 0.0, .peak = to_level(amp_lin{amp}), .decay = {{.t60_s = t60_s, .until_s = {}}}}};
}

patch note_patch(std::vector<partial> partials) {
    patch p;
    p.note.f0_hz = 200.0;
    p.note.length_s = length_s;
    p.partials = std::move(partials);
    return p;
}

/// The partial of p nearest freq_hz.
const partial& nearest(const patch& p, double freq_hz) {
    return *std::min_element(p.partials.begin(), p.partials.end(), [&](const partial& a, const partial& b) {
        return std::abs(a.freq_hz - freq_hz) < std::abs(b.freq_hz - freq_hz);
    });
}

}  // namespace

TEST_CASE("a partial that is a strong mode and a short close companion becomes both, with their own frequencies, levels and T60s",
          "[mode_split]") {
    const double offset_hz = GENERATE(3.0, -4.5, 7.0);
    const double companion_amp = GENERATE(0.15, 0.3);
    CAPTURE(offset_hz, companion_amp);
    const decaying_partial main{.freq_hz = 200.0, .amp_lin = 0.4, .t60_s = 2.0, .phase_rad = 0.3};
    const decaying_partial companion{.freq_hz = 200.0 + offset_hz, .amp_lin = companion_amp, .t60_s = 0.4, .phase_rad = 2.0};
    const decaying_partial other{.freq_hz = 510.0, .amp_lin = 0.2, .t60_s = 1.0, .phase_rad = -1.0};
    const std::vector<float> x = test::decaying_partials({main, companion, other}, rate_hz, length_s, 0.0, noise_rms, 7);
    // The patch as a tracker sees it: the pair as one partial at the strong mode, the other exact.
    patch p = note_patch({single(200.0, 0.4, 2.0, 0.3), single(510.0, 0.2, 1.0, -1.0)});
    const mode_split_summary s = split_into_modes(p, x, rate_hz, {});
    CHECK(s.split == 1);
    CHECK(s.modes_added == 1);
    REQUIRE(p.partials.size() == 3);
    // Tolerances (our own, from the -80 dB noise and a 2 s span): frequency 0.05 Hz, level 0.5 dB,
    // T60 5% for the strong mode; 0.1 Hz, 1 dB and 10% for the short companion.
    const partial& a = nearest(p, main.freq_hz);
    const partial& b = nearest(p, companion.freq_hz);
    CAPTURE(a.freq_hz, a.env.peak.db, a.env.decay[0].t60_s, b.freq_hz, b.env.peak.db, b.env.decay[0].t60_s);
    CHECK(std::abs(a.freq_hz - main.freq_hz) < 0.05);
    CHECK(std::abs(a.env.peak.db - to_level(amp_lin{main.amp_lin}).db) < 0.5);
    CHECK(std::abs(a.env.decay[0].t60_s / main.t60_s - 1.0) < 0.05);
    CHECK(std::abs(b.freq_hz - companion.freq_hz) < 0.1);
    CHECK(std::abs(b.env.peak.db - to_level(amp_lin{companion.amp_lin}).db) < 1.0);
    CHECK(std::abs(b.env.decay[0].t60_s / companion.t60_s - 1.0) < 0.10);
    // The strong mode keeps the partial's place (index 0); the other partial is left as it was.
    CHECK(&a == &p.partials[0]);
    CHECK(nearest(p, other.freq_hz) == single(510.0, 0.2, 1.0, -1.0));
}

TEST_CASE("partials the recording holds exactly as single modes are left as they are", "[mode_split]") {
    const double t60_s = GENERATE(0.3, 1.5, 5.0);
    CAPTURE(t60_s);
    const decaying_partial a{.freq_hz = 200.0, .amp_lin = 0.4, .t60_s = t60_s, .phase_rad = 0.3};
    const decaying_partial b{.freq_hz = 403.0, .amp_lin = 0.1, .t60_s = 1.0, .phase_rad = 1.1};
    const std::vector<float> x = test::decaying_partials({a, b}, rate_hz, length_s, 0.0, noise_rms, 11);
    const patch before = note_patch({single(200.0, 0.4, t60_s, 0.3), single(403.0, 0.1, 1.0, 1.1)});
    patch p = before;
    const mode_split_summary s = split_into_modes(p, x, rate_hz, {});
    CHECK(s.split == 0);
    CHECK(p == before);
}

TEST_CASE("a note shorter than the span the modes need is left alone", "[mode_split]") {
    const decaying_partial a{.freq_hz = 200.0, .amp_lin = 0.4, .t60_s = 2.0, .phase_rad = 0.3};
    const decaying_partial c{.freq_hz = 204.0, .amp_lin = 0.3, .t60_s = 0.1, .phase_rad = 2.0};
    const std::vector<float> x = test::decaying_partials({a, c}, rate_hz, 0.3, 0.0, noise_rms, 3);
    patch p = note_patch({single(200.0, 0.4, 2.0, 0.3)});
    p.note.length_s = 0.3;
    const patch before = p;
    CHECK(split_into_modes(p, x, rate_hz, {}).split == 0);
    CHECK(p == before);
}

TEST_CASE("a short companion closer than min_separation_hz is split off, and not when every pair is held apart",
          "[mode_split]") {
    // A struck bar's fundamental with a mode that dies within 0.15 s, 1.2-1.6 Hz away: the pole of
    // a mode that short is unsure by more than the separation, and it is gone where the pitch is read.
    const double offset_hz = GENERATE(1.6, -1.2);
    const double companion_t60_s = GENERATE(0.13, 0.2);
    CAPTURE(offset_hz, companion_t60_s);
    const decaying_partial main{.freq_hz = 200.0, .amp_lin = 0.4, .t60_s = 2.0, .phase_rad = 0.3};
    const decaying_partial companion{.freq_hz = 200.0 + offset_hz, .amp_lin = 0.4, .t60_s = companion_t60_s, .phase_rad = 2.0};
    const std::vector<float> x = test::decaying_partials({main, companion}, rate_hz, length_s, 0.0, noise_rms, 5);
    const patch before = note_patch({single(200.0, 0.4, 2.0, 0.3)});
    patch p = before;
    const mode_split_summary s = split_into_modes(p, x, rate_hz, {});
    CHECK(s.split == 1);
    REQUIRE(p.partials.size() == 2);
    const partial& a = nearest(p, main.freq_hz);
    const partial& b = p.partials[&a == &p.partials[0] ? 1 : 0];
    CAPTURE(a.freq_hz, a.env.peak.db, a.env.decay[0].t60_s, b.freq_hz, b.env.peak.db, b.env.decay[0].t60_s);
    // Tolerances (our own, -80 dB noise): the strong mode 0.05 Hz and 5% T60; the short one 0.3 Hz
    // (a 0.13 s mode is 17 Hz wide) and 15% T60.
    CHECK(std::abs(a.freq_hz - main.freq_hz) < 0.05);
    CHECK(std::abs(a.env.decay[0].t60_s / main.t60_s - 1.0) < 0.05);
    CHECK(std::abs(b.freq_hz - companion.freq_hz) < 0.3);
    CHECK(std::abs(b.env.decay[0].t60_s / companion.t60_s - 1.0) < 0.15);
    // With the separation asked of every pair (the rule before min_separation_t60_s) the partial stays.
    patch held = before;
    CHECK(split_into_modes(held, x, rate_hz, {.min_separation_t60_s = 0.0}).split == 0);
    CHECK(held == before);
}
