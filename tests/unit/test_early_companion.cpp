// The early companion of a partial (analysis/early_companion.hpp): a secondary partial that sounds
// at once and dies away while a second stage of it swells, under a strong partial. Its STFT fit
// sees the swell and gives a long attack ramp from silence; the copy must sound it at once as the
// note does. The note is written here from its formula in double precision (exact truth), noise
// from the project's seeded generator.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <vector>
#include <sstream>

#include "analysis/analyze.hpp"
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
