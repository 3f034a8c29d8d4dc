// Envelope fits of partial tracks against the exact ground truth of synthetic partials.
// The dB tracks are made here the way an STFT peak sees a damped sinusoid in noise: the level is
// 20 log10 |A(t) e^{i phi} + n| with n complex Gaussian of the floor's mean power, the phase the
// sinusoid's own at each frame centre.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <random>
#include <sstream>
#include <vector>

#include "core/envelope.hpp"
#include "fitting/envelope_fit.hpp"

using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;
using namespace wane;

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
    std::mt19937 rng(s.seed);
    const double floor_db = s.peak_db - s.snr_db;
    // Complex Gaussian noise whose mean power is the floor's: each part has variance N / 2.
    std::normal_distribution<double> gauss(0.0, std::sqrt(std::pow(10.0, floor_db / 10.0) / 2.0));
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

double log_uniform(std::mt19937& rng, double lo, double hi) {
    std::uniform_real_distribution<double> u(std::log(lo), std::log(hi));
    return std::exp(u(rng));
}

/// "peak -6.0 dB, T60 1.00 s until 0.60 s, T60 6.00 s" for messages.
std::string describe(const envelope& env) {
    std::ostringstream os;
    os << "attack " << env.attack_s << " s, peak " << env.peak.db << " dB";
    for (const decay_segment& d : env.decay) {
        os << ", T60 " << d.t60_s << " s";
        if (d.until_s) os << " until " << *d.until_s << " s";
    }
    return os.str();
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
    CHECK_THAT(env.decay[0].t60_s, WithinRel(1.0, 0.03));   // issue 5 acceptance: 3 %
    CHECK_THAT(env.decay[1].t60_s, WithinRel(6.0, 0.03));
    CHECK_THAT(*env.decay[0].until_s, WithinAbs(0.6, 0.030));  // 30 ms
    CHECK_THAT(env.peak.db, WithinAbs(-6.0, 0.3));           // 0.3 dB
    CHECK(env.attack_s == 0.0);
}

TEST_CASE("frequency and phase at t = 0 from the track", "[fitting]") {
    // Exact ground truth: cos(2 pi 440 t + 0.3) sampled at the frame centres; noise 70 dB down.
    db_track_spec spec{.peak_db = -10.0, .snr_db = 70.0, .stages = {{2.0, infinity}}, .phase0_rad = 0.3};
    const auto fit = fit_partial(make_db_track(spec), {});
    REQUIRE(fit);
    CAPTURE(fit->freq_hz, fit->phase_rad);
    CHECK_THAT(fit->freq_hz, WithinAbs(440.0, 1e-9));
    // Noise 70 dB down moves the phase by about 10^(-70/20) rad.
    CHECK_THAT(fit->phase_rad, WithinAbs(0.3, 1e-3));
}

TEST_CASE("single-slope partials choose one segment", "[fitting]") {
    // 100 seeded random partials: T60 0.2-20 s (log-uniform), SNR 30-70 dB, peak -40..0 dBFS.
    std::mt19937 rng(20261201);
    std::uniform_real_distribution<double> snr(30.0, 70.0), peak(-40.0, 0.0);
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
    CHECK(one >= 95);     // issue 5 acceptance
    CHECK(t60_ok >= 95);  // first-segment T60 within 10 % (our own check)
}

TEST_CASE("two-stage partials choose two segments", "[fitting]") {
    // 100 seeded random two-stage partials: first T60 0.3-2 s, second 3-8 times longer, the knee
    // 12-30 dB below the peak, SNR 60-70 dB (both stages clearly above the floor).
    std::mt19937 rng(777);
    std::uniform_real_distribution<double> snr(60.0, 70.0), ratio(3.0, 8.0), drop(12.0, 30.0);
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
    CHECK(two >= 90);  // issue 5 acceptance
}
