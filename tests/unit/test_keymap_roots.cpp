// Tests of a set from several recorded notes (src/transform/key_blend, keymap_roots): the
// interpolation between two roots on synthetic patches with known parameters, and the recipes.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "core/patch.hpp"
#include "core/pitch_names.hpp"
#include "transform/key_blend.hpp"
#include "transform/keymap_roots.hpp"

using namespace wane;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

/// A stiff-string patch at f0_hz with the given harmonics: harmonic n has peak_db = level0 - 2 n and
/// one decay segment of T60 t60_1 / n (known parameters for the checks).
patch root_patch(double f0_hz, double b, const std::vector<int>& harmonics, double level0_db, double t60_1_s) {
    patch p;
    p.note.name = "synthetic root";
    p.note.f0_hz = f0_hz;
    p.note.inharmonicity_b = b;
    p.note.length_s = 2.0;
    for (const int n : harmonics) {
        partial q;
        q.harmonic = n;
        q.freq_hz = n * f0_hz * std::sqrt(1.0 + b * n * n);
        q.env.attack_s = 0.004;
        q.env.peak = level_db{level0_db - 2.0 * n};
        q.env.decay = {{.t60_s = t60_1_s / n, .until_s = {}}};
        p.partials.push_back(q);
    }
    return p;
}

const partial* find_harmonic(const patch& p, int n) {
    for (const partial& q : p.partials) {
        if (q.harmonic == n) return &q;
    }
    return nullptr;
}

}  // namespace

TEST_CASE("halfway between roots an octave apart: levels and T60s are the means in dB and log time",
          "[transform][keymap_roots]") {
    // Roots C3 (48) and C4 (60); harmonic 4 only in the lower, 5 only in the upper.
    const patch lo = root_patch(midi_to_hz(48), 1e-4, {1, 2, 3, 4}, -10.0, 3.0);
    const patch hi = root_patch(midi_to_hz(60), 4e-4, {1, 2, 3, 5}, -20.0, 1.2);
    const int key = 54;  // F#3: halfway
    const patch mid = interpolate_patches(lo, hi, 0.5, midi_to_hz(key));
    CHECK(mid.note.root.midi == key);
    CHECK_THAT(mid.note.root.tuning_cents, WithinAbs(0.0, 1e-9));
    const double b = std::sqrt(1e-4 * 4e-4);  // B in log: the geometric mean
    CHECK_THAT(mid.note.inharmonicity_b, WithinRel(b, 1e-12));
    for (const int n : {1, 2, 3}) {
        const partial* q = find_harmonic(mid, n);
        REQUIRE(q != nullptr);
        const double want_db = 0.5 * ((-10.0 - 2.0 * n) + (-20.0 - 2.0 * n));
        const double want_t60 = std::sqrt((3.0 / n) * (1.2 / n));
        const double want_hz = n * midi_to_hz(key) * std::sqrt(1.0 + b * n * n);  // the key's series
        CAPTURE(n, q->env.peak.db, want_db, q->env.decay[0].t60_s, want_t60, q->freq_hz, want_hz);
        CHECK_THAT(q->env.peak.db, WithinAbs(want_db, 0.01));
        CHECK_THAT(q->env.decay[0].t60_s, WithinRel(want_t60, 0.001));
        CHECK_THAT(q->freq_hz, WithinRel(want_hz, 1e-12));
    }
}

TEST_CASE("a partial present in one root only fades across the interval", "[transform][keymap_roots]") {
    const patch lo = root_patch(midi_to_hz(48), 0.0, {1, 2, 3, 4}, -10.0, 3.0);
    const patch hi = root_patch(midi_to_hz(60), 0.0, {1, 2, 3, 5}, -20.0, 1.2);
    const int key = GENERATE(49, 51, 54, 57, 59);
    const double w = (key - 48) / 12.0;
    const patch p = interpolate_patches(lo, hi, w, midi_to_hz(key));
    const partial* only_lo = find_harmonic(p, 4);
    const partial* only_hi = find_harmonic(p, 5);
    REQUIRE(only_lo != nullptr);
    REQUIRE(only_hi != nullptr);
    // Amplitude scaled by its root's weight: 20 log10(1 - w) below it for the lower, 20 log10(w) for the upper.
    CAPTURE(key, w, only_lo->env.peak.db, only_hi->env.peak.db);
    CHECK_THAT(only_lo->env.peak.db, WithinAbs(-18.0 + 20.0 * std::log10(1.0 - w), 1e-9));
    CHECK_THAT(only_hi->env.peak.db, WithinAbs(-30.0 + 20.0 * std::log10(w), 1e-9));
    CHECK_THAT(only_lo->freq_hz, WithinRel(4.0 * midi_to_hz(key), 1e-12));
    CHECK_THAT(only_lo->env.decay[0].t60_s, WithinRel(3.0 / 4.0, 1e-12));
    // At the roots themselves the one-sided partial of the other root is gone.
    CHECK(find_harmonic(interpolate_patches(lo, hi, 0.0, midi_to_hz(48)), 5) == nullptr);
    CHECK(find_harmonic(interpolate_patches(lo, hi, 1.0, midi_to_hz(60)), 4) == nullptr);
}

TEST_CASE("inharmonic notes match partials by frequency ratio, and decays with holds stay within their roots",
          "[transform][keymap_roots]") {
    // A bar: modes at 1, 3.93, 9.7 (ratios of a tuned bar, common practice); unmatched mode 6.1 in one.
    patch lo = root_patch(200.0, 0.0, {1, 2, 3}, -10.0, 2.0);
    patch hi = root_patch(400.0, 0.0, {1, 2, 3}, -16.0, 1.0);
    const double ratios_lo[] = {1.0, 3.93, 9.7};
    const double ratios_hi[] = {1.0, 3.95, 6.1};
    for (int i = 0; i < 3; ++i) {
        lo.partials[i].harmonic = 0;
        lo.partials[i].freq_hz = 200.0 * ratios_lo[i];
        hi.partials[i].harmonic = 0;
        hi.partials[i].freq_hz = 400.0 * ratios_hi[i];
    }
    hi.partials[1].env.decay = {{.t60_s = 0.5, .until_s = 0.3}, {.t60_s = infinity, .until_s = 0.6}, {.t60_s = 2.0, .until_s = {}}};
    const patch mid = interpolate_patches(lo, hi, 0.5, 300.0);
    // 1 and 3.93/3.95 matched (their ratio in log), 9.7 and 6.1 one-sided: 4 partials.
    for (const partial& q : mid.partials) UNSCOPED_INFO(q.freq_hz << " Hz " << q.env.peak.db << " dB");
    REQUIRE(mid.partials.size() == 4);
    CHECK_THAT(mid.partials[0].freq_hz, WithinRel(300.0, 1e-12));
    CHECK_THAT(mid.partials[1].freq_hz, WithinRel(300.0 * std::sqrt(3.93 * 3.95), 1e-12));
    // The mode with a hold: its level lies between the two roots' levels at every time.
    for (int step = 0; step < 40; ++step) {  // 0 .. 1.95 s in 50 ms steps
        const double t = 0.05 * step;
        const double a = envelope_level(lo.partials[1].env, t + 0.004).db;
        const double b = envelope_level(hi.partials[1].env, t + 0.004).db;
        const double m = envelope_level(mid.partials[1].env, mid.partials[1].env.attack_s + t).db;
        CAPTURE(t, a, b, m);
        CHECK(m <= std::max(a, b) + 1e-9);
        CHECK(m >= std::min(a, b) - 1e-9);
    }
}

TEST_CASE("recipes: roots by key, layers by level, nearest and interpolated keys", "[transform][keymap_roots]") {
    std::vector<patch> patches{root_patch(midi_to_hz(60), 0.0, {1, 2}, -6.0, 2.0),
                               root_patch(midi_to_hz(48), 0.0, {1, 2}, -10.0, 2.0),
                               root_patch(midi_to_hz(60), 0.0, {1, 2}, -18.0, 2.0)};
    const auto roots = group_roots(patches);
    REQUIRE(roots.size() == 2);
    CHECK(roots[0].key_midi == 48);
    CHECK(roots[1].key_midi == 60);
    REQUIRE(roots[1].layers.size() == 2);
    CHECK(roots[1].layers[0] == 2);  // the softer recording first
    CHECK(roots[1].layers[1] == 0);
    const job_recipe half = recipe_for(roots, 54, 1, 3, between_roots::interpolated);
    CHECK(half.weight_upper == 0.5);
    CHECK(half.lower.single);
    CHECK(half.upper.soft == 2);
    CHECK(half.upper.weight_loud == 0.0);  // layer 1 of 3: the softest recording
    const job_recipe middle_layer = recipe_for(roots, 60, 2, 3, between_roots::interpolated);
    CHECK(middle_layer.weight_upper == 0.0);
    CHECK(middle_layer.lower.weight_loud == 0.5);  // between the two recordings
    const job_recipe nearest = recipe_for(roots, 55, 3, 3, between_roots::nearest);
    CHECK(nearest.weight_upper == 0.0);
    CHECK(nearest.lower_key == 60);
    CHECK(recipe_for(roots, 54, 1, 1, between_roots::nearest).lower_key == 48);  // exactly between: the lower
    CHECK(recipe_for(roots, 30, 1, 1, between_roots::interpolated).lower_key == 48);
    CHECK(recipe_for(roots, 90, 1, 1, between_roots::interpolated).lower_key == 60);
}
