// Attack times chosen on the waveform at the onset (analysis/onset_attack.hpp), on synthetic notes
// with exact truth: a partial that rises linearly over a known time, then decays, is written here
// from its formula in double precision (not with the renderer), noise from the project's seeded
// generator.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <vector>

#include "analysis/analyze.hpp"
#include "analysis/onset_attack.hpp"
#include "core/envelope.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "modes/damped_mode.hpp"

using namespace wane;
using Catch::Matchers::WithinAbs;

namespace {

struct rising_mode {
    double freq_hz;
    double peak_db;    ///< level at the end of the rise
    double attack_s;   ///< linear rise of the amplitude from 0 (0: instant)
    double t60_s;      ///< decay after the rise
    double phase_rad;
    /// 0: the rise is linear from silence. c > 0: the mode sounds at once at c of its peak and rises
    /// along the line c + (1 - c) t / attack_s (affine), or straight in dB between that line's
    /// values at quarters of attack_s (geometric, as the patch renders it).
    double start_ratio = 0.0;
    bool affine = false;
};

/// Amplitude of m at t (its rise, then exponential decay from attack_s).
double amp_at(const rising_mode& m, double t) {
    const double peak = std::pow(10.0, m.peak_db / 20.0);
    const double c = m.start_ratio;
    if (t < m.attack_s && c > 0.0 && m.affine) return peak * (c + (1.0 - c) * t / m.attack_s);
    if (t < m.attack_s && c > 0.0) {
        // Geometric between the ramp's knots at quarters of the rise.
        const double q = 4.0 * t / m.attack_s, k = std::floor(q);
        const double a = c + (1.0 - c) * k / 4.0, b = c + (1.0 - c) * (k + 1.0) / 4.0;
        return peak * a * std::pow(b / a, q - k);
    }
    if (t < m.attack_s) return peak * t / m.attack_s;
    return peak * std::exp(-ln1000 * (t - m.attack_s) / m.t60_s);
}

/// The modes from t = 0 after lead_s of silence, plus uniform noise of noise_db RMS.
std::vector<float> make_note(const std::vector<rising_mode>& modes, double fs, double length_s, double noise_db,
                             double lead_s) {
    const auto lead = static_cast<std::size_t>(lead_s * fs);
    std::vector<float> x(lead + static_cast<std::size_t>(length_s * fs));
    const double noise_amp = std::sqrt(3.0) * std::pow(10.0, noise_db / 20.0);
    for (std::size_t i = 0; i < x.size(); ++i) {
        double v = noise_amp * hashed_signed(5, 0, i);
        if (i >= lead) {
            const double t = static_cast<double>(i - lead) / fs;
            for (const auto& m : modes) v += amp_at(m, t) * std::cos(two_pi * m.freq_hz * t + m.phase_rad);
        }
        x[i] = static_cast<float>(v);
    }
    return x;
}

/// The first mode's chosen rise fitted jointly with the second (instant) mode: the first mode's
/// level at its peak within 0.1 dB of the truth (-6 dB), and nothing of the noiseless note left.
void check_joint_refit(const std::vector<float>& x, double fs, std::vector<damped_mode>& modes,
                       const attack_choice& first) {
    const std::vector<mode_shape> rise{attack_shape(first, -modes[0].decay_per_s / fs, x.size()), {}};
    const double left = fit_shaped_amplitudes(x, fs, modes, rise);
    CAPTURE(left, to_level(amp_lin{std::abs(modes[0].amp)}).db);
    CHECK_THAT(to_level(amp_lin{std::abs(modes[0].amp)}).db, WithinAbs(-6.0, 0.1));
    CHECK(left < 1e-6);
}

}  // namespace

TEST_CASE("the attack search picks the grid time a mode rises over, and keeps an instant start instant",
          "[analysis][onset][attack]") {
    const double fs = 48000.0;
    const onset_attack_params params{};
    // A grid time, or 0 (instant); the other mode starts at once.
    const double attack_s = GENERATE(0.0, 0.004, 0.012, 0.032);
    const std::vector<rising_mode> truth{{.freq_hz = 220.0, .peak_db = -6.0, .attack_s = attack_s, .t60_s = 1.5, .phase_rad = 0.4},
                                         {.freq_hz = 663.0, .peak_db = -14.0, .attack_s = 0.0, .t60_s = 0.6, .phase_rad = -1.1}};
    const auto x = make_note(truth, fs, 0.15, -90.0, 0.0);
    // Both fitted as instant exponentials first, with their true decays.
    std::vector<damped_mode> modes{{.freq_hz = 220.0, .decay_per_s = ln1000 / 1.5}, {.freq_hz = 663.0, .decay_per_s = ln1000 / 0.6}};
    const std::vector<mode_shape> shapes(2);
    fit_shaped_amplitudes(x, fs, modes, shapes);
    const std::vector<std::size_t> may_rise{0, 1};
    const std::vector<attack_choice> current(2);
    const std::vector<double> energy{1.0, 0.1};  // orders the search only
    const auto chosen = choose_attacks(x, fs, modes, shapes, energy, may_rise, may_rise, current, params);
    CAPTURE(attack_s, chosen[0].rise_n, chosen[0].start_ratio, chosen[1].rise_n, chosen[1].start_ratio);
    CHECK(chosen[0] == attack_choice{.rise_n = static_cast<std::size_t>(std::llround(attack_s * fs))});
    CHECK(chosen[1] == attack_choice{});
    // The rise then fitted jointly: the level at the peak within 0.1 dB of the truth.
    check_joint_refit(x, fs, modes, chosen[0]);
}

TEST_CASE("joint_residual is the target minus every mode sample by sample, and choose_attacks given it chooses as without",
          "[analysis][onset][attack]") {
    const double fs = 48000.0;
    const std::vector<rising_mode> truth{{.freq_hz = 220.0, .peak_db = -6.0, .attack_s = 0.012, .t60_s = 1.5, .phase_rad = 0.4},
                                         {.freq_hz = 663.0, .peak_db = -14.0, .attack_s = 0.0, .t60_s = 0.6, .phase_rad = -1.1}};
    const auto x = make_note(truth, fs, 0.15, -60.0, 0.0);
    // One plain mode and one rising over 2 ms (a shaped mode), amplitudes as fitted.
    std::vector<damped_mode> modes{{.freq_hz = 220.0, .decay_per_s = ln1000 / 1.5}, {.freq_hz = 663.0, .decay_per_s = ln1000 / 0.6}};
    const std::vector<mode_shape> shapes{{}, attack_shape({.rise_n = 96}, -modes[1].decay_per_s / fs, x.size())};
    fit_shaped_amplitudes(x, fs, modes, shapes);
    const std::vector<double> joint = joint_residual(x, fs, modes, shapes);
    REQUIRE(joint.size() == x.size());
    // Reference: each mode's samples from std::exp / std::polar in double.
    std::vector<double> rise;
    shape_samples(shapes[1], x.size(), rise);
    double worst = 0.0;
    for (std::size_t n = 0; n < x.size(); ++n) {
        const auto t = static_cast<double>(n);
        double want = x[n];
        want -= std::exp(-modes[0].decay_per_s * t / fs) * (modes[0].amp * std::polar(1.0, two_pi * modes[0].freq_hz * t / fs)).real();
        want -= rise[n] * (modes[1].amp * std::polar(1.0, two_pi * modes[1].freq_hz * t / fs)).real();
        worst = std::max(worst, std::abs(joint[n] - want));
    }
    CAPTURE(worst);
    CHECK(worst < 1e-9);  // phasors re-anchored every 512 samples: rounding well under this
    const std::vector<std::size_t> may_rise{0};
    const std::vector<attack_choice> current(2);
    const std::vector<double> energy{1.0, 0.1};
    const onset_attack_params params{};
    const auto without = choose_attacks(x, fs, modes, shapes, energy, may_rise, may_rise, current, params);
    const auto with = choose_attacks(x, fs, modes, shapes, energy, may_rise, may_rise, current, params, joint);
    CAPTURE(without[0].rise_n, with[0].rise_n);
    CHECK(without == with);
    CHECK(with[0].rise_n == 576);  // the true 12 ms rise, a grid time
}

TEST_CASE("a partial that rises over 20 ms keeps its rise through the analysis (attack, level within 1 dB)",
          "[analysis][onset][attack]") {
    const double fs = 48000.0;
    // A bar whose fundamental builds up through its resonator (common practice: tens of ms).
    const std::vector<rising_mode> truth{{.freq_hz = 262.0, .peak_db = -8.0, .attack_s = 0.02, .t60_s = 1.2, .phase_rad = 0.3},
                                         {.freq_hz = 1047.0, .peak_db = -16.0, .attack_s = 0.0, .t60_s = 0.4, .phase_rad = 1.3}};
    const auto x = make_note(truth, fs, 1.5, -90.0, 0.05);
    analysis_params params;
    params.noise_model = false;
    const analysis_result r = analyze_note(x, fs, params);
    const partial* q = nullptr;
    for (const auto& p : r.value.partials)
        if (!q || std::abs(p.freq_hz - 262.0) < std::abs(q->freq_hz - 262.0)) q = &p;
    REQUIRE(q != nullptr);
    CAPTURE(q->freq_hz, q->env.attack_s, q->env.peak.db, r.value.source.onset_s);
    // 20 ms is a grid time; a neighbour (12 or 32 ms) is allowed.
    CHECK(q->env.attack_s >= 0.012);
    CHECK(q->env.attack_s <= 0.032);
    // 100 ms after the true start (50 ms of lead): -8 dB less 60 dB x 0.08 s / 1.2 s = -12 dB.
    const double t_copy = 0.05 + 0.1 - r.value.source.onset_s;
    const double level = envelope_level(q->env, t_copy).db;
    CAPTURE(t_copy, level);
    CHECK_THAT(level, WithinAbs(-12.0, 1.0));
}

TEST_CASE("an instant start that rises is chosen with its start level and rise time from the grid",
          "[analysis][onset][attack]") {
    const double fs = 48000.0;
    const onset_attack_params params{};
    // Grid values: rise times 50 and 80 ms, start ratios 0.2 and 0.35 (a start at 0.1 of the peak,
    // or a rise of 12 ms, is within min_gain_share of the ramp from silence, which then wins as the
    // simpler envelope).
    const double ratio = GENERATE(0.2, 0.35);
    const double rise_s = GENERATE(0.05, 0.08);
    const std::vector<rising_mode> truth{
        {.freq_hz = 131.0, .peak_db = -6.0, .attack_s = rise_s, .t60_s = 2.0, .phase_rad = 0.4, .start_ratio = ratio},
        {.freq_hz = 523.0, .peak_db = -12.0, .attack_s = 0.0, .t60_s = 0.5, .phase_rad = -1.1}};
    const auto x = make_note(truth, fs, 0.15, -90.0, 0.0);
    std::vector<damped_mode> modes{{.freq_hz = 131.0, .decay_per_s = ln1000 / 2.0}, {.freq_hz = 523.0, .decay_per_s = ln1000 / 0.5}};
    const std::vector<mode_shape> shapes(2);
    fit_shaped_amplitudes(x, fs, modes, shapes);
    const std::vector<std::size_t> may_rise{0, 1};
    const std::vector<attack_choice> current(2);
    const std::vector<double> energy{1.0, 0.1};
    const auto chosen = choose_attacks(x, fs, modes, shapes, energy, may_rise, may_rise, current, params);
    CAPTURE(ratio, rise_s, chosen[0].rise_n, chosen[0].start_ratio, chosen[1].rise_n);
    CHECK(chosen[0] == attack_choice{.rise_n = static_cast<std::size_t>(std::llround(rise_s * fs)), .start_ratio = ratio});
    CHECK(chosen[1] == attack_choice{});
    check_joint_refit(x, fs, modes, chosen[0]);
}

TEST_CASE("a partial that sounds at once and builds up (affine rise over 50 ms) keeps both through the analysis",
          "[analysis][onset][attack]") {
    const double fs = 48000.0;
    // A marimba-like fundamental: the strike sounds it at -20 dB, the resonator builds it to -6 dB.
    const std::vector<rising_mode> truth{
        {.freq_hz = 262.0, .peak_db = -6.0, .attack_s = 0.05, .t60_s = 1.5, .phase_rad = 0.3, .start_ratio = 0.2, .affine = true},
        {.freq_hz = 1047.0, .peak_db = -16.0, .attack_s = 0.0, .t60_s = 0.4, .phase_rad = 1.3}};
    const double lead_s = 0.05;
    const auto x = make_note(truth, fs, 1.5, -90.0, lead_s);
    analysis_params params;
    params.noise_model = false;
    const analysis_result r = analyze_note(x, fs, params);
    const partial* q = nullptr;
    for (const auto& p : r.value.partials)
        if (!q || std::abs(p.freq_hz - 262.0) < std::abs(q->freq_hz - 262.0)) q = &p;
    REQUIRE(q != nullptr);
    // The copy's level (patch gain included) against the truth at times after the true start.
    const double gain_db = r.value.note.gain_db;
    for (const double t : {0.002, 0.025, 0.05, 0.1}) {
        const double t_copy = lead_s + t - r.value.source.onset_s;
        const double level = envelope_level(q->env, t_copy).db + gain_db;
        const double want = to_level(amp_lin{amp_at(truth[0], t)}).db;
        CAPTURE(t, t_copy, level, want, q->env.attack_s, q->env.peak.db, gain_db);
        CHECK_THAT(level, WithinAbs(want, 1.0));
    }
}
