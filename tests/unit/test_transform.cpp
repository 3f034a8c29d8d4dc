// Tests of the patch edits and blending (src/transform; keymap planning in test_keymap.cpp).
// References: the definitions these edits implement (exact ground truth on synthetic patches),
// ISO 16 / equal temperament for note frequencies, FFTW as the reference FFT for renders,
// Schroeder integration (ISO 3382-1, src/measure) for T30.
#include <catch2/catch.hpp>
#include <fftw3.h>

#include <cmath>
#include <cstdlib>
#include <set>
#include <string>
#include <vector>

#include "core/patch.hpp"
#include "core/pitch_names.hpp"
#include "measure/decay.hpp"
#include "synthesis/render.hpp"
#include "transform/blend.hpp"
#include "core/rng.hpp"
#include "transform/transform.hpp"
#include "patch_builders.hpp"
#include "test_support.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;
using wane::test::harmonic_patch;

namespace {

double cents_off(double got_hz, double want_hz) { return std::abs(cents_between(got_hz, want_hz)); }

}  // namespace

TEST_CASE("splitmix64 gives the published first output for state 0", "[transform][rng]") {
    splitmix64 g{0};
    // First output of splitmix64 seeded with 0, 0xe220a8397b1dcdaf: quoted from memory.
    CHECK(g.next() == 0xe220a8397b1dcdafULL);
    // unit_interval is exact: the top 53 bits over 2^53.
    CHECK(unit_interval(~std::uint64_t{0}) < 1.0);
    CHECK(unit_interval(0) == 0.0);
}

TEST_CASE("transpose +12 semitones doubles every frequency exactly", "[transform][pitch]") {
    const patch p = harmonic_patch(196.0, 12, 1e-4);
    const patch t = apply_transforms(p, {.transpose_semitones = 12.0}, 0.0);
    REQUIRE(t.partials.size() == p.partials.size());
    CHECK_THAT(t.note.f0_hz, WithinRel(2.0 * p.note.f0_hz, 1e-15));
    CHECK(t.note.inharmonicity_b == p.note.inharmonicity_b);  // B is scale invariant
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        CAPTURE(i, p.partials[i].freq_hz, t.partials[i].freq_hz);
        CHECK(cents_off(t.partials[i].freq_hz, 2.0 * p.partials[i].freq_hz) < 0.01);
        CHECK(t.partials[i].env == p.partials[i].env);  // no decay change without the rule of thumb
    }
}

TEST_CASE("transpose to C4 puts f0 at 261.6256 Hz", "[transform][pitch]") {
    const patch p = harmonic_patch(146.832, 6);
    const auto c4 = parse_note("C4");
    REQUIRE(c4);
    const patch t = apply_transforms(p, {.to_midi = *c4}, 48000.0);
    CAPTURE(t.note.f0_hz);
    CHECK_THAT(t.note.f0_hz, WithinAbs(261.6256, 5e-5));  // equal temperament, A4 = 440 Hz (ISO 16)
    CHECK_THAT(t.partials[2].freq_hz, WithinRel(3.0 * 261.6255653, 1e-9));
    // A4 = 432 Hz moves C4 by the same ratio: 261.6255653 * 432 / 440.
    const patch t432 = apply_transforms(p, {.to_midi = *c4, .a4_hz = 432.0}, 48000.0);
    CHECK_THAT(t432.note.f0_hz, WithinRel(261.6255653 * 432.0 / 440.0, 1e-9));
}

TEST_CASE("to-note on an unpitched patch is refused", "[transform][pitch]") {
    patch p = harmonic_patch(200.0, 3);
    p.note.f0_hz = 0.0;
    CHECK_THROWS_AS(apply_transforms(p, {.to_midi = 60}, 48000.0), transform_error);
}

TEST_CASE("partials at or above Nyquist are dropped, none left is an error", "[transform][pitch]") {
    const patch p = harmonic_patch(1000.0, 30);  // 1..30 kHz
    transform_report report;
    const patch t = apply_transforms(p, {}, 48000.0, &report);
    CAPTURE(t.partials.size(), report.dropped_above_nyquist);
    CHECK(t.partials.size() == 23);  // 1..23 kHz below 24 kHz
    CHECK(report.dropped_above_nyquist == 7);  // 24..30 kHz
    for (const partial& q : t.partials) CHECK(q.freq_hz < 24000.0);
    try {
        (void)apply_transforms(p, {.transpose_semitones = 60.0}, 48000.0);  // f0 -> 32 kHz
        FAIL("expected a transform_error");
    } catch (const transform_error& e) {
        INFO(e.what());
        CHECK(e.param == "transpose_semitones");
        CHECK(std::string(e.what()).find("Nyquist") != std::string::npos);
    }
}

TEST_CASE("decay scale stretches the level curve after the attack", "[transform][decay]") {
    const double factor = GENERATE(0.5, 2.0, 3.0);
    const patch p = harmonic_patch(220.0, 4);
    const patch t = apply_transforms(p, {.decay_scale = factor}, 0.0);
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        const envelope& a = p.partials[i].env;
        const envelope& b = t.partials[i].env;
        CHECK(b.attack_s == a.attack_s);
        CHECK(b.peak == a.peak);
        for (std::size_t s = 0; s < a.decay.size(); ++s) CHECK_THAT(b.decay[s].t60_s, WithinRel(a.decay[s].t60_s * factor, 1e-12));
        // Definition: level'(attack + X tau) = level(attack + tau), for tau across both segments.
        for (double tau : {0.0, 0.1, 0.29, 0.5, 1.0}) {
            const double old_db = envelope_level(a, a.attack_s + tau).db;
            const double new_db = envelope_level(b, a.attack_s + factor * tau).db;
            CAPTURE(factor, i, tau, old_db, new_db);
            CHECK_THAT(new_db, WithinAbs(old_db, 1e-9));
        }
    }
}

TEST_CASE("rule-of-thumb decay follows pitch with exponent 1", "[transform][decay]") {
    const patch p = harmonic_patch(220.0, 3);
    const patch t = apply_transforms(p, {.transpose_semitones = 12.0, .decay_follows_pitch = true}, 0.0);
    // Rule of thumb (no source), p = 1: an octave up halves every T60.
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        CHECK_THAT(t.partials[i].env.decay[1].t60_s, WithinRel(0.5 * p.partials[i].env.decay[1].t60_s, 1e-12));
    }
}

TEST_CASE("decay tilt scales T60 by 2^(k octaves above f0)", "[transform][decay]") {
    const double k = GENERATE(-1.0, -0.5, 0.25);
    const patch p = harmonic_patch(110.0, 8);
    const patch t = apply_transforms(p, {.decay_tilt = k}, 0.0);
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        const double octaves = std::log2(static_cast<double>(p.partials[i].harmonic));
        const double want = p.partials[i].env.decay[0].t60_s * std::exp2(k * octaves);
        CAPTURE(k, i, want, t.partials[i].env.decay[0].t60_s);
        CHECK_THAT(t.partials[i].env.decay[0].t60_s, WithinRel(want, 1e-12));
    }
}

TEST_CASE("brightness -6 dB/octave lowers the 4th harmonic by 12 dB and keeps f0", "[transform][level]") {
    const patch p = harmonic_patch(220.0, 8);
    const patch t = apply_transforms(p, {.brightness_db_per_oct = -6.0}, 0.0);
    CHECK_THAT(t.partials[0].env.peak.db, WithinAbs(p.partials[0].env.peak.db, 1e-12));
    CHECK_THAT(t.partials[3].env.peak.db - p.partials[3].env.peak.db, WithinAbs(-12.0, 0.1));
    // An inharmonic partial at 3 octaves above f0 moves by 3 * tilt.
    patch q = p;
    q.partials.push_back({.freq_hz = 1760.0, .harmonic = 0, .phase_rad = 0.0, .env = p.partials[0].env});
    canonicalize(q);
    const patch tq = apply_transforms(q, {.brightness_db_per_oct = -6.0}, 0.0);
    bool found = false;
    for (const partial& r : tq.partials) {
        if (r.harmonic == 0) {
            found = true;
            CHECK_THAT(r.env.peak.db - p.partials[0].env.peak.db, WithinAbs(-18.0, 1e-9));
        }
    }
    CHECK(found);
}

TEST_CASE("partial selection: strongest, parity, ceiling", "[transform][select]") {
    patch p = harmonic_patch(100.0, 10);
    p.partials[6].env.peak = level_db{0.0};  // harmonic 7 is now the loudest
    p.partials.push_back({.freq_hz = 333.0, .harmonic = 0, .phase_rad = 0.0, .env = p.partials[9].env});
    canonicalize(p);

    const patch strongest = apply_transforms(p, {.keep_strongest = 3}, 0.0);
    std::set<int> harmonics;
    for (const partial& q : strongest.partials) harmonics.insert(q.harmonic);
    CHECK(harmonics == std::set<int>{1, 2, 7});  // peaks -15, -18 dB and the raised 7th

    const patch odd = apply_transforms(p, {.parity = harmonic_parity::odd_only}, 0.0);
    for (const partial& q : odd.partials) CHECK((q.harmonic == 0 || q.harmonic % 2 == 1));
    CHECK(odd.partials.size() == 6);  // 1 3 5 7 9 and the one off the series
    const patch even = apply_transforms(p, {.parity = harmonic_parity::even_only}, 0.0);
    CHECK(even.partials.size() == 6);  // 2 4 6 8 10 and the one off the series

    const patch low = apply_transforms(p, {.max_freq_hz = 450.0}, 0.0);
    CHECK(low.partials.size() == 5);  // 100 200 300 333 400
    CHECK_THROWS_AS(apply_transforms(p, {.max_freq_hz = 50.0}, 0.0), transform_error);
}

TEST_CASE("set or scale B moves harmonic partials to n f0 sqrt(1 + B n^2)", "[transform][inharmonicity]") {
    const patch p = harmonic_patch(110.0, 20, 1e-4);
    const patch set = apply_transforms(p, {.set_b = 4e-4}, 0.0);
    const patch scaled = apply_transforms(p, {.scale_b = 4.0}, 0.0);
    CHECK(set.note.inharmonicity_b == 4e-4);
    CHECK_THAT(scaled.note.inharmonicity_b, WithinRel(4e-4, 1e-12));
    for (std::size_t i = 0; i < set.partials.size(); ++i) {
        const double n = set.partials[i].harmonic;
        const double want = n * 110.0 * std::sqrt(1.0 + 4e-4 * n * n);  // stiff string (patch format v1)
        CAPTURE(n, want, set.partials[i].freq_hz, scaled.partials[i].freq_hz);
        CHECK_THAT(set.partials[i].freq_hz, WithinRel(want, 1e-12));
        CHECK_THAT(scaled.partials[i].freq_hz, WithinRel(want, 1e-12));
    }
}

TEST_CASE("variation: same seed same patch, other seeds differ, draws within bounds", "[transform][variation]") {
    const patch p = harmonic_patch(220.0, 16);
    const variation_params v{.seed = 42, .detune_cents = 5.0, .level_jitter_db = 1.5, .decay_jitter = 0.2, .random_phase = true};
    const patch a = apply_transforms(p, {.variation = v}, 48000.0);
    const patch b = apply_transforms(p, {.variation = v}, 48000.0);
    CHECK(a == b);
    variation_params v2 = v;
    v2.seed = 43;
    const patch c = apply_transforms(p, {.variation = v2}, 48000.0);
    CHECK_FALSE(a == c);
    int changed = 0;
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        // a is in canonical (frequency) order; a 5-cent detune cannot reorder harmonics of 220 Hz.
        const partial& q = p.partials[i];
        const partial& r = a.partials[i];
        CAPTURE(i, q.freq_hz, r.freq_hz);
        CHECK(cents_off(r.freq_hz, q.freq_hz) <= 5.0);
        CHECK(std::abs(r.env.peak.db - q.env.peak.db) <= 1.5);
        const double stretch = r.env.decay[0].t60_s / q.env.decay[0].t60_s;
        CHECK((stretch >= 0.8 && stretch <= 1.2));
        CHECK((r.phase_rad >= 0.0 && r.phase_rad < two_pi));
        if (r.freq_hz != c.partials[i].freq_hz) ++changed;
    }
    CHECK(changed == static_cast<int>(p.partials.size()));
    // Turning one jitter off leaves the others' draws unchanged (counter-based draws).
    variation_params no_detune = v;
    no_detune.detune_cents = 0.0;
    const patch d = apply_transforms(p, {.variation = no_detune}, 48000.0);
    for (std::size_t i = 0; i < p.partials.size(); ++i) CHECK(d.partials[i].env == a.partials[i].env);
}

TEST_CASE("blend: paired partials interpolate, unpaired fade, versions must agree", "[transform][blend]") {
    patch a = harmonic_patch(200.0, 4);
    patch b = harmonic_patch(300.0, 6);
    for (partial& q : b.partials) q.env.decay = {{.t60_s = 3.0, .until_s = {}}};
    const double mix = 0.3;
    const patch c = blend(a, b, {.mix = mix});
    // Harmonics 1..4 paired, 5 and 6 of B faded by 20 log10(0.3).
    REQUIRE(c.partials.size() == 6);
    CHECK_THAT(c.note.f0_hz, WithinRel(std::pow(200.0, 0.7) * std::pow(300.0, 0.3), 1e-12));
    for (int n = 1; n <= 4; ++n) {
        const partial& q = c.partials[static_cast<std::size_t>(n - 1)];
        CHECK(q.harmonic == n);
        CHECK_THAT(q.freq_hz, WithinRel(std::pow(200.0 * n, 0.7) * std::pow(300.0 * n, 0.3), 1e-12));
        CHECK_THAT(q.env.peak.db, WithinAbs(a.partials[n - 1].env.peak.db, 1e-12));  // same peaks in A and B
        // First piece: T60 between 1.5/n (A) and 3 (B) on a log scale.
        const double want_t60 = std::exp(0.7 * std::log(1.5 / n) + 0.3 * std::log(3.0));
        CHECK_THAT(q.env.decay[0].t60_s, WithinRel(want_t60, 1e-12));
        REQUIRE(q.env.decay[0].until_s);
        CHECK_THAT(*q.env.decay[0].until_s, WithinAbs(0.3, 1e-12));
    }
    for (int n = 5; n <= 6; ++n) {
        const partial& q = c.partials[static_cast<std::size_t>(n - 1)];
        CHECK_THAT(q.env.peak.db - b.partials[n - 1].env.peak.db, WithinAbs(20.0 * std::log10(mix), 1e-12));
    }
    CHECK(blend(a, b, {.mix = 0.0}) == a);
    CHECK(blend(a, b, {.mix = 1.0}) == b);
    patch newer = b;
    newer.version = patch_format_version + 1;
    CHECK_THROWS_AS(blend(a, newer, {.mix = 0.5}), transform_error);
}

TEST_CASE("blend of unpitched patches pairs by nearest frequency within the tolerance", "[transform][blend]") {
    patch a;
    patch b;
    const envelope env{.attack_s = 0.0, .peak = level_db{-20.0}, .decay = {{.t60_s = 2.0, .until_s = {}}}};
    for (double f : {500.0, 1370.0, 2800.0}) a.partials.push_back({.freq_hz = f, .harmonic = 0, .phase_rad = 0.0, .env = env});
    for (double f : {505.0, 2000.0}) b.partials.push_back({.freq_hz = f, .harmonic = 0, .phase_rad = 0.0, .env = env});
    const patch c = blend(a, b, {.mix = 0.5, .match_tolerance_cents = 50.0});
    // 500 and 505 Hz are 17 cents apart: paired; the rest fade by 20 log10(0.5).
    REQUIRE(c.partials.size() == 4);
    CHECK_THAT(c.partials[0].freq_hz, WithinRel(std::sqrt(500.0 * 505.0), 1e-12));
    CHECK_THAT(c.partials[0].env.peak.db, WithinAbs(-20.0, 1e-12));
    for (std::size_t i = 1; i < 4; ++i) CHECK_THAT(c.partials[i].env.peak.db, WithinAbs(-20.0 + 20.0 * std::log10(0.5), 1e-12));
}

// ---------------------------------------------------------------- on renders

namespace {

constexpr double test_rate_hz = 48000.0;

/// A patch of steady partials (T60 = inf: the level holds), so a long FFT shows clean peaks.
patch steady_patch(double f0_hz, int n, double b) {
    patch p = harmonic_patch(f0_hz, n, b);
    for (partial& q : p.partials) q.env.decay = {{.t60_s = infinity, .until_s = {}}};
    p.note.length_s = 3.0;
    return p;
}

struct spectrum_peak {
    double freq_hz = 0.0;
    double level_db = 0.0;  ///< of the windowed, zero-padded FFT magnitude (relative use only)
};

/// Reference long FFT (FFTW): Hann window, zero padding to fft_size, then a parabola through the
/// log magnitudes of the largest bin near want_hz and its neighbours (quadratic interpolation).
class long_fft {
public:
    explicit long_fft(const std::vector<float>& x, std::size_t fft_size = std::size_t{1} << 22) : size_(fft_size) {
        REQUIRE(x.size() <= fft_size);
        double* in = fftw_alloc_real(fft_size);
        fftw_complex* out = fftw_alloc_complex(fft_size / 2 + 1);
        fftw_plan plan = fftw_plan_dft_r2c_1d(static_cast<int>(fft_size), in, out, FFTW_ESTIMATE);
        const std::size_t n = x.size();
        for (std::size_t i = 0; i < fft_size; ++i) {
            // Hann window w[i] = 0.5 (1 - cos(2 pi i / (n - 1))) (Harris 1978, symmetric form).
            in[i] = i < n ? static_cast<double>(x[i]) * 0.5 * (1.0 - std::cos(two_pi * static_cast<double>(i) / static_cast<double>(n - 1))) : 0.0;
        }
        fftw_execute(plan);
        mag_db_.resize(fft_size / 2 + 1);
        for (std::size_t k = 0; k < mag_db_.size(); ++k) mag_db_[k] = 10.0 * std::log10(out[k][0] * out[k][0] + out[k][1] * out[k][1] + 1e-300);
        fftw_destroy_plan(plan);
        fftw_free(in);
        fftw_free(out);
    }

    /// The largest peak within +-search_hz of want_hz.
    spectrum_peak peak_near(double want_hz, double search_hz = 20.0) const {
        const double bin_hz = test_rate_hz / static_cast<double>(size_);
        const auto lo = static_cast<std::size_t>(std::max(1.0, (want_hz - search_hz) / bin_hz));
        const auto hi = std::min(mag_db_.size() - 2, static_cast<std::size_t>((want_hz + search_hz) / bin_hz));
        std::size_t k = lo;
        for (std::size_t i = lo; i <= hi; ++i) {
            if (mag_db_[i] > mag_db_[k]) k = i;
        }
        const double a = mag_db_[k - 1], b = mag_db_[k], c = mag_db_[k + 1];
        const double d = 0.5 * (a - c) / (a - 2.0 * b + c);  // vertex offset in bins
        return {.freq_hz = (static_cast<double>(k) + d) * bin_hz, .level_db = b - 0.25 * (a - c) * d};
    }

private:
    std::size_t size_;
    std::vector<double> mag_db_;
};

std::vector<float> render(const patch& p, double length_s = 0.0) {
    return render_patch(p, {.sample_rate_hz = test_rate_hz, .length_s = length_s, .include_noise = false});
}

}  // namespace

TEST_CASE("render: transpose +12 puts every partial at twice its frequency (FFTW)", "[transform][render]") {
    const patch p = steady_patch(440.0, 8, 2e-4);
    const patch t = apply_transforms(p, {.transpose_semitones = 12.0}, test_rate_hz);
    const long_fft before(render(p));
    const long_fft after(render(t));
    for (const partial& q : p.partials) {
        const spectrum_peak a = before.peak_near(q.freq_hz);
        const spectrum_peak b = after.peak_near(2.0 * q.freq_hz);
        const double cents = cents_between(b.freq_hz, 2.0 * a.freq_hz);
        CAPTURE(q.harmonic, q.freq_hz, a.freq_hz, b.freq_hz, cents);
        CHECK(std::abs(cents) < 0.01);
        CHECK(std::abs(cents_between(b.freq_hz, 2.0 * q.freq_hz)) < 0.01);  // and where the model puts it
    }
}

TEST_CASE("render: to-note C4 puts f0 at 261.6256 Hz (FFTW)", "[transform][render]") {
    const patch p = steady_patch(146.832, 4, 0.0);
    const patch t = apply_transforms(p, {.to_midi = 60}, test_rate_hz);
    const spectrum_peak f0 = long_fft(render(t)).peak_near(261.6256);
    CAPTURE(f0.freq_hz);
    CHECK(std::abs(cents_between(f0.freq_hz, 261.6256)) < 0.01);  // ISO 16: A4 = 440 Hz, equal temperament
}

TEST_CASE("render: brightness -6 dB/octave lowers the 4th harmonic by 12 dB (FFTW)", "[transform][render]") {
    const patch p = steady_patch(440.0, 6, 0.0);
    const patch t = apply_transforms(p, {.brightness_db_per_oct = -6.0}, test_rate_hz);
    const long_fft before(render(p));
    const long_fft after(render(t));
    const double d1 = after.peak_near(440.0).level_db - before.peak_near(440.0).level_db;
    const double d4 = after.peak_near(1760.0).level_db - before.peak_near(1760.0).level_db;
    CAPTURE(d1, d4);
    CHECK_THAT(d1, WithinAbs(0.0, 0.1));
    CHECK_THAT(d4, WithinAbs(-12.0, 0.1));
}

TEST_CASE("render: decay scale 2 doubles T30 (Schroeder integration, ISO 3382-1)", "[transform][render]") {
    patch p = harmonic_patch(220.0, 5);
    for (partial& q : p.partials) q.env.decay = {{.t60_s = 0.6, .until_s = 0.2}, {.t60_s = 1.2, .until_s = {}}};
    const patch t = apply_transforms(p, {.decay_scale = 2.0}, test_rate_hz);
    const decay_times a = measure_decay(render(p, 4.0), test_rate_hz);
    const decay_times b = measure_decay(render(t, 4.0), test_rate_hz);
    CAPTURE(a.t30_s, b.t30_s);
    REQUIRE(std::isfinite(a.t30_s));
    REQUIRE(std::isfinite(b.t30_s));
    CHECK_THAT(b.t30_s / a.t30_s, WithinRel(2.0, 0.02));
}

TEST_CASE("render: same seed gives the same samples, another seed differs", "[transform][render]") {
    const patch p = harmonic_patch(220.0, 12);
    const transform_params v{.variation = {.seed = 7, .detune_cents = 3.0, .level_jitter_db = 1.0, .decay_jitter = 0.1, .random_phase = true}};
    transform_params w = v;
    w.variation.seed = 8;
    const auto a = render(apply_transforms(p, v, test_rate_hz), 1.0);
    const auto b = render(apply_transforms(p, v, test_rate_hz), 1.0);
    const auto c = render(apply_transforms(p, w, test_rate_hz), 1.0);
    CHECK(a == b);
    double diff = 0.0;
    for (std::size_t i = 0; i < a.size(); ++i) diff = std::max(diff, static_cast<double>(std::abs(a[i] - c[i])));
    CAPTURE(diff);
    CHECK(diff > 1e-3);
}
