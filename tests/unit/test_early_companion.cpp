// The early companion of a partial (analysis/early_companion.hpp): a secondary partial that sounds
// at once and dies away while a second stage of it swells, under a strong partial. Its STFT fit
// sees the swell and gives a long attack ramp from silence; the copy must sound it at once as the
// note does. The note is written here from its formula in double precision (exact truth), noise
// from the project's seeded generator.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <optional>
#include <vector>
#include <sstream>

#include "analysis/analyze.hpp"
#include "analysis/decaying_fit.hpp"
#include "analysis/early_companion.hpp"
#include "core/envelope.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"

using namespace wane;

namespace {

constexpr double fs = 48000.0;
constexpr double strong_hz = 200.0;
constexpr double weak_hz = 700.0;
constexpr double lead_s = 0.05;

/// The weak partial's two stages at t (seconds from its start), amplitudes: an instant stage at
/// -22 dB dying with T60 80 ms, and a stage rising linearly from silence over 150 ms to -20 dB,
/// then T60 2 s.
double early_stage(double t) { return std::pow(10.0, -22.0 / 20.0) * std::exp(-ln1000 * t / 0.08); }
double swell_stage(double t) {
    const double peak = std::pow(10.0, -20.0 / 20.0);
    return t < 0.15 ? peak * t / 0.15 : peak * std::exp(-ln1000 * (t - 0.15) / 2.0);
}

/// The weak partial's complex amplitude at t: the early stage at phase 0.5 rad, the swell
/// swell_phase_rad from it.
std::complex<double> weak_amp(double t, double swell_phase_rad) {
    return std::polar(early_stage(t), 0.5) + std::polar(swell_stage(t), 0.5 + swell_phase_rad);
}

/// The strong partial (-6 dB at once, T60 2 s) and the weak one after lead_s of silence, with
/// uniform noise 90 dB down.
std::vector<float> make_note(double swell_phase_rad) {
    std::vector<float> x(static_cast<std::size_t>((lead_s + 1.5) * fs));
    const auto lead = static_cast<std::size_t>(lead_s * fs);
    const double noise_amp = std::sqrt(3.0) * std::pow(10.0, -90.0 / 20.0);
    for (std::size_t i = 0; i < x.size(); ++i) {
        double v = noise_amp * hashed_signed(7, 0, i);
        if (i >= lead) {
            const double t = static_cast<double>(i - lead) / fs;
            v += std::pow(10.0, -6.0 / 20.0) * std::exp(-ln1000 * t / 2.0) * std::cos(two_pi * strong_hz * t + 0.2);
            v += std::real(weak_amp(t, swell_phase_rad) * std::polar(1.0, two_pi * weak_hz * t));
        }
        x[i] = static_cast<float>(v);
    }
    return x;
}

/// The copy's complex amplitude at weak_hz at copy time t: the partials within 12 Hz of it (two
/// partials at one frequency add; close modes, analysis/mode_split.hpp, beat) heterodyned to
/// weak_hz and summed, the patch's gain included.
std::complex<double> copy_amp(const patch& p, double t) {
    std::complex<double> sum{};
    for (const partial& q : p.partials)
        if (std::abs(q.freq_hz - weak_hz) < 12.0)
            sum += std::polar(to_amp(envelope_level(q.env, t)).lin, q.phase_rad + two_pi * (q.freq_hz - weak_hz) * t);
    return sum * std::pow(10.0, p.note.gain_db / 20.0);
}

}  // namespace

TEST_CASE("a secondary partial that sounds at once under a swell of its own is copied at once (complex error 10 dB under it over 5-120 ms)",
          "[analysis][onset][companion]") {
    // The swell in phase, a quarter turn off, and against the early stage (a dip at 20-30 ms).
    const double swell_phase_rad = GENERATE(0.0, 1.5, 3.0);
    const std::vector<float> x = make_note(swell_phase_rad);
    analysis_params params;
    params.noise_model = false;
    // The note has no glide; the glide fit, run before the companions, would take the early
    // stage's phase against the swell for one (analysis/onset_glide.hpp).
    params.fit_glides = false;
    // Both steps on (off by default: analysis_params::early_companions says why).
    params.early_companions = true;
    params.onset.stft_starts = true;
    const analysis_result r = analyze_note(x, fs, params);
    std::string partials;
    for (const partial& q : r.value.partials) {
        std::ostringstream os;
        os << q.glide_cents << "c " << q.freq_hz << " Hz attack " << q.env.attack_s << " s peak " << q.env.peak.db << " dB phase " << q.phase_rad << "; ";
        partials += os.str();
    }
    // The copy's phases count from its onset: the truth's phasor at the same instant (t after the
    // true start is t_copy = lead_s + t - onset_s after the copy's).
    const double onset_s = r.value.source.onset_s;
    for (const double t : {0.005, 0.01, 0.02, 0.035, 0.05, 0.08, 0.12}) {
        const double t_copy = lead_s + t - onset_s;
        const std::complex<double> want = weak_amp(t, swell_phase_rad) * std::polar(1.0, two_pi * weak_hz * (t - t_copy));
        const std::complex<double> got = copy_amp(r.value, t_copy);
        // Against the stages' summed magnitudes, so a null of the truth (the stages cancelling)
        // asks no exact depth of the copy.
        const double error_db = to_level(amp_lin{std::abs(got - want) / (early_stage(t) + swell_stage(t))}).db;
        CAPTURE(swell_phase_rad, t, t_copy, std::abs(want), std::abs(got), error_db, partials);
        CHECK(error_db < -10.0);
    }
}

namespace {

/// A partial at freq_hz, peak_db at once, one decay of t60_s, phase_rad.
partial damped_partial(double freq_hz, double peak_db, double t60_s, double phase_rad) {
    return {.freq_hz = freq_hz, .harmonic = 0, .phase_rad = phase_rad,
            .env = {.attack_s = 0.0, .peak = level_db{peak_db}, .decay = {{.t60_s = t60_s, .until_s = std::nullopt}}},
            .place = {}};
}

/// The partials of p summed from their formula (cos(2 pi f t + phase) times the envelope's
/// amplitude, double), n_frames at fs, plus uniform noise noise_db down (seeded).
std::vector<float> render_truth(const std::vector<partial>& parts, std::size_t n_frames, double noise_db) {
    std::vector<float> x(n_frames);
    const double noise_amp = std::sqrt(3.0) * std::pow(10.0, noise_db / 20.0);
    for (std::size_t i = 0; i < n_frames; ++i) {
        const double t = static_cast<double>(i) / fs;
        double v = noise_amp * hashed_signed(11, 0, i);
        for (const partial& q : parts) v += to_amp(envelope_level(q.env, t)).lin * std::cos(two_pi * q.freq_hz * t + q.phase_rad);
        x[i] = static_cast<float>(v);
    }
    return x;
}

}  // namespace

TEST_CASE("a damped companion at a grid T60 under a copied partial is found with its level within 0.3 dB and phase within 0.03 rad",
          "[analysis][companion]") {
    const double t60_s = GENERATE(0.03, 0.06, 0.12);
    const double phase_rad = GENERATE(-2.0, 0.4, 2.5);
    const partial strong = damped_partial(200.0, -6.0, 2.0, 0.2);
    // Louder than its partial at first (as piano_d2's second harmonic), so it passes min_partial_share.
    const partial weak = damped_partial(1400.0, -20.0, 1.5, 1.0);
    const partial early = damped_partial(1400.0, -12.0, t60_s, phase_rad);
    const std::vector<float> x = render_truth({strong, weak, early}, static_cast<std::size_t>(0.3 * fs), -90.0);
    patch p{};
    p.note.length_s = 0.3;
    p.partials = {strong, weak};
    const int added = add_early_companions(p, x, fs, {});
    REQUIRE(added == 1);
    const partial& got = p.partials.back();
    CAPTURE(t60_s, phase_rad, got.freq_hz, got.env.decay.front().t60_s, got.env.peak.db, got.phase_rad);
    CHECK(got.freq_hz == 1400.0);
    CHECK(got.env.decay.front().t60_s == t60_s);
    CHECK(std::abs(got.env.peak.db - early.env.peak.db) < 0.3);
    CHECK(std::abs(std::remainder(got.phase_rad - phase_rad, two_pi)) < 0.03);
}

TEST_CASE("a note its patch copies exactly takes no early companion", "[analysis][companion]") {
    const double noise_db = GENERATE(-90.0, -60.0);
    const partial strong = damped_partial(200.0, -6.0, 2.0, 0.2);
    const partial weak = damped_partial(700.0, -20.0, 1.5, 1.0);
    const std::vector<float> x = render_truth({strong, weak}, static_cast<std::size_t>(0.3 * fs), noise_db);
    patch p{};
    p.note.length_s = 0.3;
    p.partials = {strong, weak};
    const int added = add_early_companions(p, x, fs, {});
    CAPTURE(noise_db, p.partials.size());
    CHECK(added == 0);
    CHECK(p.partials.size() == 2);
}

TEST_CASE("phasor_table is within 1e-13 of long double's cos and sin over a fit span and past it", "[analysis][companion]") {
    // Reference: std::cos / std::sin in long double of omega n (omega rounded to double first,
    // as the table takes it), within 1e-13 plus what rounding omega n to double moves the angle
    // (4 eps |angle|: the exact anchors take the angle in double). Counts around the walk's
    // 16-step stretches, its groups of four and its exact anchors every 256.
    const std::size_t count = GENERATE(0U, 1U, 15U, 63U, 64U, 65U, 255U, 256U, 257U, 300U, 7200U, 48001U);
    const double omega = GENERATE(0.0, 1e-4, 0.0123, 0.5, 2.9, 3.14159);
    std::vector<double> cos_n, sin_n;
    wane::phasor_table(omega, count, cos_n, sin_n);
    REQUIRE(cos_n.size() == count);
    REQUIRE(sin_n.size() == count);
    for (std::size_t n = 0; n < count; ++n) {
        const long double angle = static_cast<long double>(omega) * static_cast<long double>(n);
        const long double tol = 1e-13L + 4.0L * std::numeric_limits<double>::epsilon() * angle;
        CAPTURE(count, omega, n, cos_n[n], sin_n[n]);
        REQUIRE(std::abs(static_cast<long double>(cos_n[n]) - std::cos(angle)) <= tol);
        REQUIRE(std::abs(static_cast<long double>(sin_n[n]) - std::sin(angle)) <= tol);
    }
}

TEST_CASE("copy_start_render made in stretches as frames are asked for equals render_copy_start bit for bit", "[analysis][companion]") {
    // Reference: render_copy_start's render made whole (the render's stretches from multiples of
    // 1024 frames are the same bits: synthesis/render.hpp). Tolerance 0: the same floats.
    const std::size_t count = GENERATE(700U, 7200U, 48000U);
    const std::size_t first_ask = GENERATE(0U, 1U, 1024U, 7200U);
    patch p{};
    p.note.length_s = 1.0;
    p.partials = {damped_partial(200.0, -6.0, 2.0, 0.2), damped_partial(1400.0, -20.0, 0.1, 1.0), damped_partial(3100.0, -30.0, 1.5, -2.0)};
    const std::vector<float> whole = render_copy_start(p, fs, count);
    copy_start_render parts(p, fs, count);
    const std::size_t asked = std::min(first_ask, count);
    const std::vector<float> head = parts.at_least(asked);
    REQUIRE(head.size() == count);
    for (std::size_t n = 0; n < asked; ++n) REQUIRE(head[n] == whole[n]);
    const std::vector<float>& all = parts.at_least(count);
    CAPTURE(count, first_ask);
    CHECK(all == whole);
}
