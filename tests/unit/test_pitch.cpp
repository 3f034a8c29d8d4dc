// The root note and the series fit (src/pitch): synthetic notes rendered by the oscillator bank and
// analysed whole, checked against their exact ground truth, and published mode ratios of bars and
// bells against the pitch their sources give.
#include <catch2/catch.hpp>

#include <cmath>
#include <string>
#include <vector>

#include "analysis/analyze.hpp"
#include "core/harmonics.hpp"
#include "core/patch.hpp"
#include "core/pitch_names.hpp"
#include "pitch/root.hpp"
#include "pitch/series_fit.hpp"
#include "synthesis/render.hpp"
#include "core/rng.hpp"
#include "io/audio_file.hpp"
#include "transform/transform.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

namespace {

constexpr double fs_hz = 48000.0;

double cents(double a_hz, double b_hz) { return 1200.0 * std::log2(a_hz / b_hz); }

partial make_partial(double freq_hz, double peak_db, double t60_s, int harmonic = 0) {
    return {.freq_hz = freq_hz, .harmonic = harmonic, .phase_rad = 0.0,
            .env = {.attack_s = 0.002, .peak = {peak_db}, .decay = {{.t60_s = t60_s, .until_s = {}}}}};
}

/// Renders a patch of the given partials (plus 0.05 s of silence before the onset) and analyses it.
analysis_result analyse(const std::vector<partial>& parts, double length_s, std::optional<double> f0_hint = {}) {
    patch p;
    p.note.length_s = length_s;
    p.partials = parts;
    canonicalize(p);
    std::vector<float> x = render_patch(p, {.sample_rate_hz = fs_hz});
    x.insert(x.begin(), static_cast<std::size_t>(0.05 * fs_hz), 0.0f);
    analysis_params params;
    params.tracking.f0_hz = f0_hint;
    params.noise_model = false;
    return analyze_note(x, fs_hz, params);
}

/// Stiff string: f_n = n f0 sqrt(1 + B n^2), n = 1..30, levels falling 1 dB per harmonic, with
/// harmonics 5, 13 and 22 moved 15 cents off the series.
std::vector<partial> stiff_string(double f0_hz, double b, bool move_three) {
    std::vector<partial> out;
    for (int n = 1; n <= 30; ++n) {
        double f = stiff_partial_hz(f0_hz, b, n);
        if (move_three && (n == 5 || n == 13 || n == 22)) f *= std::exp2((n == 13 ? -15.0 : 15.0) / 1200.0);
        out.push_back(make_partial(f, -12.0 - 1.0 * n, 3.0 - 0.05 * n));
    }
    return out;
}

}  // namespace

TEST_CASE("series fit: exact stiff-string frequencies with three partials 15 cents off give f0 and B back",
          "[pitch]") {
    const double b = GENERATE(0.0, 3e-5, 3e-4, 2e-3);
    const double f0 = GENERATE(55.0, 196.0, 466.16);
    std::vector<series_point> pts;
    for (int n = 1; n <= 30; ++n) {
        double f = stiff_partial_hz(f0, b, n);
        if (n == 5 || n == 13 || n == 22) f *= std::exp2(15.0 / 1200.0);
        // A little seeded jitter (+-0.05 cents) so the scale is not exactly zero.
        f *= std::exp2(0.05 * hashed_signed(7, 0, static_cast<std::uint64_t>(n)) / 1200.0);
        pts.push_back({n, f, 1.0 + 0.1 * n});
    }
    const series_fit fit = fit_series(pts);
    CAPTURE(f0, b, fit.f0_hz, fit.inharmonicity_b, fit.scale_cents, fit.rejected);
    CHECK_THAT(cents(fit.f0_hz, f0), WithinAbs(0.0, 0.05));
    CHECK_THAT(fit.inharmonicity_b, WithinAbs(b, std::max(0.01 * b, 2e-7)));
    CHECK(fit.rejected == 3);
}

TEST_CASE("series fit: a single harmonic number gives f0 from it and B = 0", "[pitch]") {
    const std::vector<series_point> pts{{2, 220.0, 1.0}, {2, 221.0, 0.001}};
    const series_fit fit = fit_series(pts);
    CHECK_THAT(fit.f0_hz, WithinRel(110.0, 1e-3));
    CHECK(fit.inharmonicity_b == 0.0);
}

TEST_CASE("analysis: a stiff string with B = 3e-4, 30 partials, 3 moved 15 cents: f0 within 0.05 cents, B within 1%",
          "[pitch]") {
    // Ground truth is the synthesis itself.
    const double f0 = GENERATE(98.0, 146.83);
    constexpr double b = 3e-4;
    const analysis_result r = analyse(stiff_string(f0, b, true), 3.0);
    const patch& p = r.value;
    CAPTURE(f0, p.note.f0_hz, p.note.inharmonicity_b, p.partials.size());
    CHECK_THAT(cents(p.note.f0_hz, f0), WithinAbs(0.0, 0.05));
    CHECK_THAT(p.note.inharmonicity_b, WithinRel(b, 0.01));
    CHECK(p.note.root.method == root_method::harmonic_series);
    // The root is partial 1 as measured, f0 sqrt(1 + B) in truth; its own frequency estimate is
    // less exact than the fit over 30 partials (measured -0.057 cents at 98 Hz), hence 0.1 cents.
    CHECK_THAT(cents(root_hz(p.note), stiff_partial_hz(f0, b, 1)), WithinAbs(0.0, 0.1));
}

TEST_CASE("analysis: a tuned bar with modes 1 : 4 : 10, fundamental 10 dB under mode 2: root = the fundamental",
          "[pitch]") {
    // Marimba tuning 1 : 4 : 10 (Fletcher and Rossing, The Physics of Musical Instruments, 2nd ed.,
    // 1998, ch. 19): the nominal pitch of a tuned bar is its lowest mode.
    const double f1 = GENERATE(130.81, 261.63, 440.0);
    const std::vector<partial> modes{make_partial(f1, -16.0, 1.2), make_partial(4.0 * f1, -6.0, 0.6),
                                     make_partial(10.0 * f1, -18.0, 0.25)};
    const analysis_result r = analyse(modes, 2.0);
    const patch& p = r.value;
    CAPTURE(f1, root_hz(p.note), root_method_name(p.note.root.method), p.note.f0_hz);
    CHECK(p.partials.size() == 3);
    // 1 : 4 : 10 are whole ratios, so the sieve may read them as harmonics 1, 4, 10 of a series:
    // either way the root must be the fundamental.
    CHECK((p.note.root.method == root_method::lowest_mode || p.note.root.method == root_method::harmonic_series));
    CHECK_THAT(cents(root_hz(p.note), f1), WithinAbs(0.0, 1.0));
}

TEST_CASE("analysis: a struck bar whose strike modes sit on another series keeps its fundamental as the root at every padding",
          "[pitch][padding]") {
    // A struck bar (fundamental G6, its second bar mode at 2.756 times it: Fletcher and Rossing
    // 1998, ch. 19) whose hard strike sets off short-lived upper modes 22 dB over the fundamental,
    // at harmonics 4, 6, 8 and 9 of the pitch a semitone below it: the glockenspiel of the real
    // notes has modes at 3.71, 5.64, 7.56 and 8.49 times its fundamental, near those. What rings
    // on after the strike (the heard span, 0.1-1.1 s) is the fundamental, its nominal pitch; the
    // root must be it wherever the note starts in the file (0-0.5 s of silence before it). Before
    // the root was chosen by what is heard, the strike modes' T60 of 0.3 s gave a series a
    // semitone low (F#6, harmonic-series) and 0.15 s the lowest strike mode (F#8, lowest-mode).
    const double f1 = midi_to_hz(91.0);
    const double low = f1 * std::exp2(-1.0 / 12.0);
    const double strike_t60_s = GENERATE(0.15, 0.3);
    const double pad_s = GENERATE(0.0, 0.05, 0.1, 0.2, 0.3, 0.5);
    std::vector<partial> modes{make_partial(f1, -36.0, 2.0), make_partial(2.756 * f1, -48.0, 0.5)};
    for (const int n : {4, 6, 8, 9}) modes.push_back(make_partial(n * low, -14.0, strike_t60_s));
    patch p;
    p.note.length_s = 1.5;
    p.partials = modes;
    canonicalize(p);
    std::vector<float> x = render_patch(p, {.sample_rate_hz = fs_hz});
    x.insert(x.begin(), static_cast<std::size_t>(pad_s * fs_hz), 0.0f);
    analysis_params params;
    params.noise_model = false;
    const patch q = analyze_note(x, fs_hz, params).value;
    CAPTURE(strike_t60_s, pad_s, root_hz(q.note), q.note.root.midi, root_method_name(q.note.root.method), q.note.f0_hz);
    CHECK(q.note.root.midi == 91);
    CHECK(q.note.root.method == root_method::lowest_mode);
    // The root and f0 are the fundamental as tracked: within 1 cent (our tolerance).
    CHECK_THAT(cents(root_hz(q.note), f1), WithinAbs(0.0, 1.0));
    CHECK_THAT(cents(q.note.f0_hz, f1), WithinAbs(0.0, 1.0));
}

TEST_CASE("analysis: a church bell's partials give the strike note an octave below the nominal", "[pitch]") {
    // Partial ratios of a tuned church bell relative to the strike note (prime): hum 0.5, prime 1,
    // tierce 1.2, quint 1.5, nominal 2, twelfth 3, upper octave 4 (Fletcher and Rossing, The Physics
    // of Musical Instruments, 2nd ed., 1998, ch. 21, ratios quoted from memory). The strike note lies
    // at the prime, an octave below the nominal: a virtual pitch of the nominal, twelfth and upper
    // octave (Terhardt and Seewann 1984). Levels: our choice, the nominal strongest.
    const double strike = GENERATE(196.0, 293.66, 523.25);
    const std::vector<std::pair<double, double>> ratio_db{{0.5, -14.0}, {1.0, -12.0}, {1.2, -9.0}, {1.5, -16.0},
                                                           {2.0, -6.0}, {3.0, -12.0}, {4.0, -15.0}};
    std::vector<partial> modes;
    modes.reserve(ratio_db.size());
    for (const auto& [ratio, db] : ratio_db) modes.push_back(make_partial(ratio * strike, db, 2.0 / ratio));
    const analysis_result r = analyse(modes, 2.5);
    const patch& p = r.value;
    CAPTURE(strike, root_hz(p.note), root_method_name(p.note.root.method), p.note.f0_hz);
    CHECK(p.note.root.method == root_method::strike_note);
    CHECK_THAT(cents(root_hz(p.note), strike), WithinAbs(0.0, 10.0));
}

TEST_CASE("root finder: a dense set of unrelated modes (a cymbal's wash) is unpitched", "[pitch]") {
    std::vector<root_mode> modes;
    for (std::uint64_t i = 0; i < 60; ++i) {
        // Log-uniform 400 Hz .. 12 kHz, levels within 10 dB: seeded draws.
        const double f = 400.0 * std::pow(30.0, hashed_unit(11, 0, i));
        modes.push_back({f, -20.0 - 10.0 * hashed_unit(11, 1, i), 0});
    }
    const root_estimate r = find_root(modes, 0.0, false);
    CHECK(r.method == root_method::unpitched);
    CHECK(r.freq_hz == 0.0);
}

TEST_CASE("root finder: a series with no partial 1 and only even-numbered strong partials is heard an octave up, "
          "unless an odd one is strong or the f0 was a hint",
          "[pitch]") {
    // Partials 2 and 4 (and 8) of a 98 Hz series, the odd ones absent or 30 dB under the strongest
    // (outside strong_below_max_db = 20 dB): the pattern of 196 Hz's partials 1, 2 (and 4).
    const double f0_hz = 98.0;
    const int top_even = GENERATE(4, 8);
    std::vector<root_mode> modes = {{2.0 * f0_hz, -10.0, 2}, {4.0 * f0_hz, -18.0, 4}, {11.0 * f0_hz, -40.0, 11}};
    if (top_even == 8) modes.push_back({8.0 * f0_hz, -25.0, 8});
    CAPTURE(top_even);
    root_estimate r = find_root(modes, f0_hz, false);
    CHECK(r.method == root_method::harmonic_series);
    CHECK_THAT(r.freq_hz, WithinRel(2.0 * f0_hz, 1e-12));
    // Partials 4 and 8 only: two octaves up.
    r = find_root(std::vector<root_mode>{{4.0 * f0_hz, -10.0, 4}, {8.0 * f0_hz, -15.0, 8}}, f0_hz, false);
    CHECK_THAT(r.freq_hz, WithinRel(4.0 * f0_hz, 1e-12));
    // A strong odd partial (3, 15 dB under): the series' own f0, the missing fundamental.
    modes.push_back({3.0 * f0_hz, -25.0, 3});
    r = find_root(modes, f0_hz, false);
    CHECK_THAT(r.freq_hz, WithinRel(f0_hz, 1e-12));
    // The user's --f0 stands.
    r = find_root(std::vector<root_mode>{{2.0 * f0_hz, -10.0, 2}, {4.0 * f0_hz, -18.0, 4}}, f0_hz, true);
    CHECK(r.method == root_method::f0_hint);
    CHECK_THAT(r.freq_hz, WithinRel(f0_hz, 1e-12));
}

TEST_CASE("real kalimba tine (G3): root G3 within 5 cents of its measured fundamental, not an octave down", "[pitch][real]") {
    // tests/data/more-notes/README.md: the sampler's root key 55 (G3), measured 195.91 Hz. Its
    // harmonic partials are 196 and 392 Hz; inharmonic modes near 11 x 98 Hz once made G2 its root.
    const mono_audio a = read_audio(std::string(WANE_TEST_DATA_DIR) + "/more-notes/kalimba_g3.wav");
    const analysis_result r = analyze_note(a.samples, a.sample_rate_hz, {});
    const note_root& root = r.value.note.root;
    const double root_hz = midi_to_hz(root.midi + root.tuning_cents / 100.0);
    CAPTURE(root.midi, root.tuning_cents, root_hz);
    CHECK(root.midi == 55);
    CHECK(std::abs(cents(root_hz, 195.91)) <= 5.0);  // the struck bars' tolerance of the real notes' pitch check
}

TEST_CASE("f0 hint: numbers the partials without changing which partials are found", "[pitch]") {
    // A tuned bar has no series; a hint on its fundamental numbers the modes near harmonics and the
    // partial count stays the same.
    const double f1 = 184.93;
    const std::vector<partial> modes{make_partial(f1, -10.0, 1.0), make_partial(3.93 * f1, -14.0, 0.5),
                                     make_partial(9.2 * f1, -22.0, 0.2)};
    const analysis_result plain = analyse(modes, 1.5);
    const double hint = GENERATE(0.99, 1.0, 1.01);
    const analysis_result hinted = analyse(modes, 1.5, hint * f1);
    CAPTURE(hint, plain.value.partials.size(), hinted.value.partials.size(), root_hz(hinted.value.note));
    CHECK(plain.value.partials.size() == hinted.value.partials.size());
    CHECK(hinted.value.note.root.method == root_method::f0_hint);
    CHECK_THAT(cents(root_hz(hinted.value.note), f1), WithinAbs(0.0, 5.0));
}

TEST_CASE("to-note: the root lands exactly on the note and every partial keeps its offset", "[pitch]") {
    patch p;
    p.note.f0_hz = 110.0;
    p.note.root = root_from_hz(110.9, root_method::harmonic_series);
    p.partials = {make_partial(110.9, -10.0, 1.0, 1), make_partial(223.1, -12.0, 1.0, 2)};
    const patch q = transpose_to_note(p, 64);  // E4
    const double ratio = midi_to_hz(64) / 110.9;
    CHECK(q.note.root.midi == 64);
    CHECK(q.note.root.tuning_cents == 0.0);
    CHECK_THAT(root_hz(q.note), WithinRel(midi_to_hz(64), 1e-12));
    CHECK_THAT(q.partials[1].freq_hz, WithinRel(223.1 * ratio, 1e-12));
}

TEST_CASE("analysis: a fundamental of two beating strings within 3 dB of each other has its root at their "
          "power-weighted centre, one 8 dB weaker leaves it at the stronger",
          "[pitch]") {
    // A course of two strings 2.5 Hz apart (a beat every 0.4 s) under nine single harmonics of
    // 293.66 Hz. Reasoned reference: the pair's sum is one tone whose phase advances at the
    // power-weighted mean frequency, the pitch it is heard at; a member 8 dB under the other
    // barely moves it (the louder member's frequency then, within the 2 cents allowed).
    const double weaker_db = GENERATE(0.2, 2.0, 8.0);
    constexpr double f0_hz = 293.66, low_hz = 292.9, high_hz = low_hz + 2.5;
    std::vector<partial> parts{make_partial(high_hz, -12.0, 3.0), make_partial(low_hz, -12.0 - weaker_db, 3.0)};
    for (int n = 2; n <= 10; ++n) parts.push_back(make_partial(n * f0_hz, -12.0 - 2.0 * n, 3.0 - 0.2 * n));
    const analysis_result r = analyse(parts, 2.5);
    const patch& p = r.value;
    const double w_low = std::pow(10.0, -weaker_db / 10.0);
    const double expected_hz = weaker_db <= 3.0 ? (high_hz + w_low * low_hz) / (1.0 + w_low) : high_hz;
    CAPTURE(weaker_db, expected_hz, root_hz(p.note), root_method_name(p.note.root.method), p.note.f0_hz);
    CHECK_THAT(cents(root_hz(p.note), expected_hz), WithinAbs(0.0, 2.0));
}

TEST_CASE("root finder: without a fitted series, a fundamental off the series its upper partials agree on "
          "(strings in unison) takes that series, and tuned bars and a drum head keep their lowest mode",
          "[pitch]") {
    // Exact truth: partials 2..6 at n x 110 Hz, 8-30 dB under a fundamental at 113 Hz (2.7% sharp,
    // as pizz_a3 of tools/more_notes.py), no series from the tracker: the root is 110 Hz.
    const double fundamental_hz = GENERATE(113.0, 107.5, 110.0);
    std::vector<root_mode> strings{{fundamental_hz, -6.0, 0}};
    for (int n = 2; n <= 6; ++n) strings.push_back({110.0 * n, -14.0 - 4.0 * n, 0});
    const root_estimate s = find_root(strings, 0.0, false);
    CAPTURE(fundamental_hz, s.freq_hz);
    CHECK(s.method == root_method::harmonic_series);
    CHECK_THAT(s.freq_hz, WithinRel(110.0, 1e-12));
    // Mode ratios of a marimba bar (1 : 3.9 : 9.2), a xylophone bar (1 : 3 : 6.0), a glockenspiel
    // bar (1 : 2.71 : 5.15) (Fletcher and Rossing 1998, ch. 19) and a timpani head (1 : 1.50 :
    // 1.98 : 2.44 : 2.90, the air-loaded membrane, ch. 18; values from memory of that table):
    // never 2, 3 and a third multiple of the lowest within 2%, so the lowest mode stays the root.
    const std::vector<std::vector<double>> sets{{1.0, 3.9, 9.2}, {1.0, 3.0, 6.0}, {1.0, 2.71, 5.15}, {1.0, 1.50, 1.98, 2.44, 2.90}};
    for (const auto& ratios : sets) {
        std::vector<root_mode> bar;
        for (std::size_t k = 0; k < ratios.size(); ++k) bar.push_back({220.0 * ratios[k], -6.0 - 3.0 * static_cast<double>(k), 0});
        const root_estimate b = find_root(bar, 0.0, false);
        CAPTURE(ratios.size(), ratios[1], b.freq_hz, root_method_name(b.method));
        CHECK(b.method == root_method::lowest_mode);
        CHECK(b.freq_hz == 220.0);
    }
}

TEST_CASE("root finder: a bell without a prime whose nominal is a split pair, one member with a louder strike, "
          "is heard an octave below the pair's centre as the heard span's spectrum weighs them",
          "[pitch]") {
    // Exact truth: strike note 500 Hz with no prime (a tube or a bell tuned without one): hum 250,
    // tierce 600, quint 750, twelfth 1500, upper octave 2000 Hz, and the nominal split into 996 and
    // 1004 Hz (0.8% apart, inside nominal_group_rel) of equal amplitude over the heard span as its
    // spectrum weighs it (span_db -20 dB), one of them with a strike 6 dB louder at its peak whose
    // energy falls in the span's first tenth (mean level over the span -14 dB, as tubular_c7's
    // 2106.87 Hz). Two components of
    // equal level 8 Hz apart are heard as one tone at their midpoint (1000 Hz, whatever the
    // weighting of equal levels), so the strike note is 500 Hz; the nominal read at the
    // louder-peaked member gives 498 or 502 Hz (6.9 cents off), and weighted by the mean
    // levels 498.8 or 501.2 Hz.
    const double struck_hz = GENERATE(996.0, 1004.0);
    std::vector<root_mode> bell{{250.0, -20.0, 0, -24.0}, {600.0, -12.0, 0, -16.0}, {750.0, -16.0, 0, -20.0},
                                {1500.0, -12.0, 0, -16.0}, {2000.0, -15.0, 0, -19.0}};
    for (const double f : {996.0, 1004.0}) {
        const bool struck = f == struck_hz;
        bell.push_back({.freq_hz = f, .level_db = struck ? -4.0 : -10.0, .harmonic = 0, .heard_db = struck ? -14.0 : -20.0,
                        .span_db = -20.0});
    }
    const root_estimate r = find_root(bell, 0.0, false);
    CAPTURE(struck_hz, r.freq_hz, root_method_name(r.method));
    CHECK(r.method == root_method::strike_note);
    CHECK_THAT(cents(r.freq_hz, 500.0), WithinAbs(0.0, 0.01));
}
