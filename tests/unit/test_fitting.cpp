// Envelope fits of partial tracks against the exact ground truth of synthetic partials (the demo
// notes' analysis against their physical models: test_fitting_demo.cpp).
// The dB tracks are made here the way an STFT peak sees a damped sinusoid in noise: the level is
// 20 log10 |A(t) e^{i phi} + n| with n complex Gaussian of the floor's mean power, the phase the
// sinusoid's own at each frame centre.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <sstream>
#include <vector>

#include "core/envelope.hpp"
#include "fitting/envelope_fit.hpp"
#include "tracking/tracker.hpp"
#include "analysis/analyze.hpp"
#include "io/patch_toml.hpp"
#include "envelope_text.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;
using wane::test::describe;

namespace {

struct stage {
    double t60_s;
    double until_s;  // infinity for the last stage
};

struct db_track_spec {
    double peak_db = -6.0;
    double snr_db = 70.0;  // peak level above the noise floor
    std::vector<stage> stages;
    double freq_hz = 440.0;
    double phase0_rad = 0.3;
    double hop_s = 0.01;
    double length_s = 4.0;
    unsigned seed = 1;
};

/// True level in dB at time t of a piecewise exponential decay (continuous in dB).
double true_level_db(const db_track_spec& s, double t) {
    double level = s.peak_db;
    double start = 0.0;
    for (const stage& st : s.stages) {
        const double end = std::min(st.until_s, t);
        level -= 60.0 * (end - start) / st.t60_s;
        if (t <= st.until_s) break;
        start = st.until_s;
    }
    return level;
}

partial_track make_db_track(const db_track_spec& s) {
    splitmix64 rng{s.seed};
    const double floor_db = s.peak_db - s.snr_db;
    // Complex Gaussian noise whose mean power is the floor's: each part has variance N / 2.
    const test::gaussian_draw<double> gauss{0.0, std::sqrt(std::pow(10.0, floor_db / 10.0) / 2.0)};
    partial_track tr;
    const int frames = static_cast<int>(s.length_s / s.hop_s);
    for (int i = 0; i < frames; ++i) {
        const double t = i * s.hop_s;
        const double amp = std::pow(10.0, true_level_db(s, t) / 20.0);
        const double phase = s.phase0_rad + two_pi * s.freq_hz * t;
        const std::complex<double> z = std::polar(amp, phase) + std::complex<double>(gauss(rng), gauss(rng));
        tr.points.push_back({.time_s = t, .freq_hz = s.freq_hz, .level_db = 20.0 * std::log10(std::abs(z)),
                             .phase_rad = std::arg(z), .floor_db = floor_db});
    }
    tr.cut_by_end = true_level_db(s, s.length_s) > floor_db + 10.0;
    return tr;
}

double log_uniform(splitmix64& rng, double lo, double hi) {
    const test::uniform_draw<double> u{std::log(lo), std::log(hi)};
    return std::exp(u(rng));
}

}  // namespace

TEST_CASE("two-stage decay: T60s, breakpoint and peak", "[fitting]") {
    // Ground truth: T60 = 1.0 s until 0.6 s, then T60 = 6.0 s; noise 70 dB below the peak.
    const auto seed = GENERATE(1u, 2u, 3u);
    db_track_spec spec{.peak_db = -6.0, .snr_db = 70.0, .stages = {{1.0, 0.6}, {6.0, infinity}}, .seed = seed};
    const auto fit = fit_partial(make_db_track(spec), {});
    REQUIRE(fit);
    const envelope& env = fit->env;
    CAPTURE(seed, describe(env), fit->rms_error_db, fit->fit_end_s);
    REQUIRE(env.decay.size() == 2);
    CAPTURE(env.decay[0].t60_s, *env.decay[0].until_s, env.decay[1].t60_s);
    CHECK_THAT(env.decay[0].t60_s, WithinRel(1.0, 0.03));   // the project's requirement for T60: within 3 %
    CHECK_THAT(env.decay[1].t60_s, WithinRel(6.0, 0.03));
    CHECK_THAT(*env.decay[0].until_s, WithinAbs(0.6, 0.030));  // 30 ms
    CHECK_THAT(env.peak.db, WithinAbs(-6.0, 0.3));           // 0.3 dB
    CHECK(env.attack_s == 0.0);
}

TEST_CASE("frequency and phase at t = 0 from the track's phases", "[fitting]") {
    // Exact ground truth: cos(2 pi 440 t + 0.3) sampled at the frame centres; noise 70 dB down.
    db_track_spec spec{.peak_db = -10.0, .snr_db = 70.0, .stages = {{2.0, infinity}}, .phase0_rad = 0.3};
    const auto fit = fit_partial(make_db_track(spec), {});
    REQUIRE(fit);
    CAPTURE(fit->freq_hz, fit->phase_rad);
    // The frequency is the peak of the frames' own spectrum over 0.1-1.1 s (fitting/partial_freq),
    // read from their phases. The level falls 30 dB over that span, so the SNR falls from 67 to
    // 37 dB: mid-span (52 dB) the noise puts about 1.8e-3 rad on a frame's phase, and a slope over
    // ~100 frames spanning 1 s is then known to about 1.8e-3 sqrt(12 / 100) / (2 pi) = 1e-4 Hz;
    // 5e-4 Hz is 5 of those.
    CHECK_THAT(fit->freq_hz, WithinAbs(440.0, 5e-4));
    // Noise 70 dB down moves the phase by about 10^(-70/20) rad.
    CHECK_THAT(fit->phase_rad, WithinAbs(0.3, 1e-3));
}

TEST_CASE("single-slope partials choose one segment", "[fitting]") {
    // 100 seeded random partials: T60 0.2-20 s (log-uniform), SNR 30-70 dB, peak -40..0 dBFS.
    splitmix64 rng{20261201};
    const test::uniform_draw<double> snr{30.0, 70.0}, peak{-40.0, 0.0};
    std::ostringstream misses;
    int one = 0;
    int t60_ok = 0;
    const int trials = 100;
    for (int i = 0; i < trials; ++i) {
        const double t60 = log_uniform(rng, 0.2, 20.0);
        db_track_spec spec{.peak_db = peak(rng), .snr_db = snr(rng), .stages = {{t60, infinity}},
                           .seed = static_cast<unsigned>(1000 + i)};
        const auto fit = fit_partial(make_db_track(spec), {});
        REQUIRE(fit);
        const auto k = fit->env.decay.size();
        if (k == 1) ++one;
        else
            misses << "trial " << i << ": T60 " << t60 << " s, SNR " << spec.snr_db << " dB -> "
                   << describe(fit->env) << "\n";
        if (std::abs(fit->env.decay[0].t60_s / t60 - 1.0) < 0.1) ++t60_ok;
    }
    INFO(misses.str());
    CAPTURE(one, t60_ok);
    CHECK(one >= 95);     // project requirement: at least 95 of 100 single-decay tracks
    CHECK(t60_ok >= 95);  // first-segment T60 within 10 % (our own check)
}

TEST_CASE("two-stage partials choose two segments", "[fitting]") {
    // 100 seeded random two-stage partials: first T60 0.3-2 s, second 3-8 times longer, the knee
    // 12-30 dB below the peak, SNR 60-70 dB (both stages clearly above the floor).
    splitmix64 rng{777};
    const test::uniform_draw<double> snr{60.0, 70.0}, ratio{3.0, 8.0}, drop{12.0, 30.0};
    std::ostringstream misses;
    int two = 0;
    const int trials = 100;
    for (int i = 0; i < trials; ++i) {
        const double t60a = log_uniform(rng, 0.3, 2.0);
        const double t60b = t60a * ratio(rng);
        const double knee_s = drop(rng) * t60a / 60.0;
        db_track_spec spec{.peak_db = -6.0, .snr_db = snr(rng), .stages = {{t60a, knee_s}, {t60b, infinity}},
                           .seed = static_cast<unsigned>(5000 + i)};
        const auto fit = fit_partial(make_db_track(spec), {});
        REQUIRE(fit);
        const auto k = fit->env.decay.size();
        if (k == 2) ++two;
        else
            misses << "trial " << i << ": T60 " << t60a << " -> " << t60b << " at " << knee_s << " s, SNR "
                   << spec.snr_db << " dB -> " << describe(fit->env) << "\n";
    }
    INFO(misses.str());
    CAPTURE(two);
    CHECK(two >= 90);  // project requirement: at least 90 of 100 two-stage tracks
}

// ---- Real signals through the tracker (tracking/tracker.hpp) and the whole analysis ----

namespace {

constexpr double test_rate_hz = 48000.0;
constexpr double lead_s = 0.1;  // noise alone before the note, so the onset has something to find

struct mode {
    double freq_hz;
    double amp_lin;    // peak amplitude at the onset
    double phase_rad;  // of cos at the onset
    std::vector<stage> stages;
};

/// Sum of damped cosines starting at lead_s, plus white Gaussian noise of the given RMS.
std::vector<float> make_signal(const std::vector<mode>& modes, double length_s, double noise_rms, unsigned seed) {
    const auto n = static_cast<std::size_t>((lead_s + length_s) * test_rate_hz);
    std::vector<double> acc(n, 0.0);
    for (const mode& m : modes) {
        const db_track_spec shape{.peak_db = 0.0, .stages = m.stages};
        for (std::size_t i = static_cast<std::size_t>(lead_s * test_rate_hz); i < n; ++i) {
            const double t = static_cast<double>(i) / test_rate_hz - lead_s;
            acc[i] += m.amp_lin * std::pow(10.0, true_level_db(shape, t) / 20.0) *
                      std::cos(two_pi * m.freq_hz * t + m.phase_rad);
        }
    }
    splitmix64 rng{seed};
    const test::gaussian_draw<double> gauss{0.0, noise_rms};
    std::vector<float> out(n);
    for (std::size_t i = 0; i < n; ++i) out[i] = static_cast<float>(acc[i] + gauss(rng));
    return out;
}

/// The track nearest freq_hz.
const partial_track* nearest_track(const tracking_result& tr, double freq_hz) {
    const partial_track* best = nullptr;
    double best_d = infinity;
    for (const partial_track& t : tr.tracks) {
        if (t.points.empty()) continue;
        const double d = std::abs(t.points.front().freq_hz - freq_hz);
        if (d < best_d) {
            best_d = d;
            best = &t;
        }
    }
    return best;
}

envelope_fit_params fit_params_for(const tracking_result& tr) {
    return {.window_s = tr.window_s};
}

}  // namespace

TEST_CASE("two-stage decay through the tracker", "[fitting][tracker]") {
    // Ground truth: 440 Hz at -6.02 dBFS (amplitude 0.5), T60 = 1.0 s until 0.6 s, then 6.0 s;
    // white noise with RMS 70 dB below the partial's peak RMS.
    const double amp = 0.5;
    const double noise_rms = amp / std::sqrt(2.0) * std::pow(10.0, -70.0 / 20.0);
    const auto x = make_signal({{440.0, amp, 0.7, {{1.0, 0.6}, {6.0, infinity}}}}, 4.0, noise_rms, 11);
    const tracking_result tr = track_note(x, test_rate_hz, {});
    const partial_track* t = nearest_track(tr, 440.0);
    REQUIRE(t);
    const auto fit = fit_partial(*t, fit_params_for(tr));
    REQUIRE(fit);
    const envelope& env = fit->env;
    const double onset_error_s = tr.onset_s - lead_s;
    CAPTURE(tr.onset_s, tr.window_s, tr.hop_s, describe(env), fit->fit_end_s, fit->rms_error_db);
    REQUIRE(env.decay.size() == 2);
    CHECK_THAT(env.decay[0].t60_s, WithinRel(1.0, 0.03));        // the project's requirement for T60: within 3 %
    CHECK_THAT(env.decay[1].t60_s, WithinRel(6.0, 0.03));
    CHECK_THAT(*env.decay[0].until_s + onset_error_s, WithinAbs(0.6, 0.030));  // 30 ms, source time
    CHECK_THAT(env.peak.db, WithinAbs(20.0 * std::log10(amp), 0.3));            // 0.3 dB
    CHECK_THAT(fit->freq_hz, WithinAbs(440.0, 0.01));
    // Phase at the detected onset: the source's 0.7 rad advanced by 2 pi f (onset error).
    const double expected_phase = std::remainder(0.7 + two_pi * 440.0 * onset_error_s, two_pi);
    CAPTURE(fit->phase_rad, expected_phase);
    CHECK_THAT(std::remainder(fit->phase_rad - expected_phase, two_pi), WithinAbs(0.0, 0.05));
}

TEST_CASE("beating pair through the tracker is fitted through its mean level", "[fitting][tracker]") {
    // Two modes 1.5 Hz apart, both T60 = 4 s, in phase at the onset, the second as strong as the
    // first or weaker: far too close for the window to part them, so one track beats. Mean level
    // of the pair: 10 log10(a1^2 + a2^2) - 60 t / T60 (power sum, dBFS on the sinusoid peak scale).
    const double a1 = 0.3, t60 = 4.0;
    const double a2 = GENERATE(0.3, 0.18);
    const auto x = make_signal({{440.0, a1, 0.0, {{t60, infinity}}}, {441.5, a2, 0.0, {{t60, infinity}}}}, 4.0,
                               1e-5, 12);
    const tracking_result tr = track_note(x, test_rate_hz, {});
    const partial_track* t = nearest_track(tr, 440.75);
    REQUIRE(t);
    const auto fit = fit_partial(*t, fit_params_for(tr));
    REQUIRE(fit);
    const envelope& env = fit->env;
    const double mean0_db = 10.0 * std::log10(a1 * a1 + a2 * a2);
    CAPTURE(a2, describe(env), fit->fit_start_s, fit->fit_end_s, t->points.size(), mean0_db);
    // The track does beat: its level dips well below the mean curve between the beat maxima.
    double deepest_dip_db = 0.0;
    for (const track_point& p : t->points) {
        if (p.time_s < fit->fit_start_s || p.time_s > fit->fit_end_s) continue;
        deepest_dip_db = std::min(deepest_dip_db, p.level_db - (mean0_db - 60.0 * (p.time_s + tr.onset_s - lead_s) / t60));
    }
    CAPTURE(deepest_dip_db);
    CHECK(deepest_dip_db < -6.0);
    double worst_db = 0.0;
    for (int step = 0; fit->fit_start_s + 0.01 * step <= fit->fit_end_s; ++step) {
        const double ts = fit->fit_start_s + 0.01 * step;
        const double truth = mean0_db - 60.0 * (ts + tr.onset_s - lead_s) / t60;
        worst_db = std::max(worst_db, std::abs(envelope_level(env, ts).db - truth));
    }
    CAPTURE(worst_db);
    CHECK(worst_db <= 3.0);  // project requirement: within 3 dB of the mean level curve
    for (const decay_segment& d : env.decay) CHECK_THAT(d.t60_s, WithinRel(t60, 0.10));  // T60 within 10 %
    CHECK(env.decay.size() == 1);
}

TEST_CASE("a 4 s note with 40 partials gives a patch under 10 KB", "[fitting][analysis]") {
    // 40 harmonics of 110 Hz, levels falling 0.8 dB per harmonic, T60 from 6 s down, the lower
    // ten decaying in two stages; seeded random phases; scaled to a 0.9 peak.
    splitmix64 rng{40};
    const test::uniform_draw<double> phase{-pi, pi};
    std::vector<mode> modes;
    for (int n = 1; n <= 40; ++n) {
        const double t60 = 6.0 / (1.0 + 0.08 * n);
        std::vector<stage> st = {{t60, infinity}};
        if (n <= 10) st = {{0.4 * t60, 0.3}, {t60, infinity}};
        modes.push_back({110.0 * n, 0.1 * std::pow(10.0, -0.8 * (n - 1) / 20.0), phase(rng), st});
    }
    auto x = make_signal(modes, 4.0, 1e-5, 13);
    float peak = 0.0f;
    for (float v : x) peak = std::max(peak, std::abs(v));
    for (float& v : x) v *= 0.9f / peak;
    const analysis_result r = analyze_note(x, test_rate_hz, {.tracking = {}, .source_file = "note40.wav", .note_name = "note40"});
    const std::string text = format_patch(r.value);
    CAPTURE(r.summary.partials, r.summary.segments, r.summary.fit_error_db, text.size());
    // Every harmonic is in the patch (the tracker may add a stray track; the size must hold anyway).
    for (int n = 1; n <= 40; ++n) {
        bool found = false;
        for (const partial& q : r.value.partials) found = found || std::abs(q.freq_hz - 110.0 * n) < 0.5;
        CAPTURE(n);
        CHECK(found);
    }
    CHECK(r.summary.partials >= 40);
    CHECK(text.size() < 10000);  // project requirement: under 10 KB (the 24-bit WAV is ~576 KB)
    // The patch reads back to the same values (io/patch_toml's reader; canonical text round trip).
    CHECK(format_patch(parse_patch(text, "note40.toml").value) == text);
}

// ---- The demo notes (demo-data/, physical models of our own; README.md there) ----

TEST_CASE("segment count through the tracker over random partials", "[fitting][tracker]") {
    // The same sweeps as on the dB tracks, as signals through the tracker: one damped cosine at
    // 16 kHz (fast enough for 200 notes), 4 s, random frequency 200-2000 Hz and phase; SNR is the
    // partial's peak RMS over the RMS of white noise across the band. Seeded.
    constexpr double rate_hz = 16000.0;
    splitmix64 rng{4242};
    const test::uniform_draw<double> freq{200.0, 2000.0}, ph{-pi, pi}, unit{0.0, 1.0};
    auto run = [&](const std::vector<stage>& stages, double snr_db, unsigned seed) {
        const double amp = 0.5;
        const double noise_rms = amp / std::sqrt(2.0) * std::pow(10.0, -snr_db / 20.0);
        const double f = freq(rng), phase0 = ph(rng);
        const db_track_spec shape{.peak_db = 0.0, .stages = stages};
        const auto n = static_cast<std::size_t>((lead_s + 4.0) * rate_hz);
        splitmix64 nrng{seed};
        const test::gaussian_draw<double> gauss{0.0, noise_rms};
        std::vector<float> x(n);
        for (std::size_t i = 0; i < n; ++i) {
            const double t = static_cast<double>(i) / rate_hz - lead_s;
            const double s = t < 0.0 ? 0.0 : amp * std::pow(10.0, true_level_db(shape, t) / 20.0) * std::cos(two_pi * f * t + phase0);
            x[i] = static_cast<float>(s + gauss(nrng));
        }
        const tracking_result tr = track_note(x, rate_hz, {});
        const partial_track* t = nearest_track(tr, f);
        REQUIRE(t);
        return fit_partial(*t, fit_params_for(tr));
    };
    std::ostringstream misses;
    int one = 0, two = 0;
    const int trials = 100;
    for (int i = 0; i < trials; ++i) {
        const double t60 = log_uniform(rng, 0.2, 20.0);
        const double snr_db = 30.0 + 40.0 * unit(rng);
        const auto fit = run({{t60, infinity}}, snr_db, static_cast<unsigned>(100 + i));
        REQUIRE(fit);
        if (fit->env.decay.size() == 1) ++one;
        else misses << "single " << i << ": T60 " << t60 << " s, SNR " << snr_db << " dB -> " << describe(fit->env) << "\n";
    }
    for (int i = 0; i < trials; ++i) {
        const double t60a = log_uniform(rng, 0.3, 2.0);
        const double t60b = t60a * (3.0 + 5.0 * unit(rng));
        const double knee_s = (12.0 + 18.0 * unit(rng)) * t60a / 60.0;
        const double snr_db = 60.0 + 10.0 * unit(rng);
        const auto fit = run({{t60a, knee_s}, {t60b, infinity}}, snr_db, static_cast<unsigned>(300 + i));
        REQUIRE(fit);
        if (fit->env.decay.size() == 2) ++two;
        else misses << "two-stage " << i << ": T60 " << t60a << " -> " << t60b << " at " << knee_s << " s -> "
                    << describe(fit->env) << "\n";
    }
    INFO(misses.str());
    CAPTURE(one, two);
    CHECK(one >= 95);  // project requirement: at least 95 of 100 tracks
    CHECK(two >= 90);
}

TEST_CASE("the fit stops at the noise floor and the last slope runs on", "[fitting]") {
    // T60 = 2 s from -6 dBFS, floor 50 dB down: the level reaches floor + 8 dB (the default
    // margin) at t = (50 - 8) / 30 = 1.4 s; beyond it the envelope continues the fitted slope.
    db_track_spec spec{.peak_db = -6.0, .snr_db = 50.0, .stages = {{2.0, infinity}}, .seed = 9};
    const auto fit = fit_partial(make_db_track(spec), {});
    REQUIRE(fit);
    CAPTURE(fit->fit_end_s, describe(fit->env));
    CHECK_THAT(fit->fit_end_s, WithinAbs(1.4, 0.05));
    REQUIRE(fit->env.decay.size() == 1);
    CHECK(!fit->env.decay.back().until_s);
    // At 3 s, far past the fit, the envelope is on the true line (-6 - 90 = -96 dBFS).
    CHECK_THAT(envelope_level(fit->env, 3.0).db, WithinAbs(-96.0, 1.0));
}

TEST_CASE("tracks with nothing to fit give no envelope", "[fitting]") {
    CHECK(!fit_partial(partial_track{}, {}));
    partial_track one;
    one.points.push_back({.time_s = 0.0, .freq_hz = 440.0, .level_db = -20.0, .phase_rad = 0.0, .floor_db = -80.0});
    CHECK(!fit_partial(one, {}));
    // Every frame within 3 dB of the floor: nothing is clear of it by the 8 dB margin.
    partial_track buried;
    for (int i = 0; i < 50; ++i)
        buried.points.push_back({.time_s = 0.01 * i, .freq_hz = 440.0, .level_db = -77.0, .phase_rad = 0.0,
                                 .floor_db = -80.0});
    CHECK(!fit_partial(buried, {}));
}
