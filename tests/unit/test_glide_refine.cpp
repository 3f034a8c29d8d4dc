// The onset glide fit's refine_share (analysis/onset_glide.hpp): refining only a coarse best that
// lies at least that share of the way from no glide to the least a kept glide explains must keep
// the glides refining every coarse best keeps. Notes made here from the glide's definition (the
// phase by numerical integration of f 2^(c(t)/1200), not by core/glide's closed form), with seeded
// white noise (core/rng.hpp via test_signals.hpp).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
#include <vector>

#include "analysis/onset_glide.hpp"
#include "core/patch.hpp"
#include "core/units.hpp"
#include "test_signals.hpp"

using namespace wane;

namespace {

struct glide_case {
    double freq_hz;
    double amp_lin;
    double cents;    ///< at t = 0 (0: none)
    double glide_s;
};

/// sum_k a_k 10^(-3 t / 2 s) cos(2 pi f_k t + 2 pi f_k I_k(t)) + noise, I_k(t) = int_0^t
/// (2^(c_k e^(-s / tau_k) / 1200) - 1) ds by the trapezoid rule per sample interval.
std::vector<float> note_of(const std::vector<glide_case>& parts, double rate_hz, double length_s, double noise_rms,
                           std::uint64_t seed) {
    const auto frames = static_cast<std::size_t>(length_s * rate_hz);
    std::vector<double> y(frames, 0.0);
    const double h = 1.0 / rate_hz;
    for (const glide_case& q : parts) {
        const auto excess = [&](double s) { return q.cents == 0.0 ? 0.0 : std::exp2(q.cents * std::exp(-s / q.glide_s) / 1200.0) - 1.0; };
        double integral_s = 0.0;
        for (std::size_t n = 0; n < frames; ++n) {
            const double t = static_cast<double>(n) * h;
            if (n > 0) integral_s += 0.5 * h * (excess(t - h) + excess(t));
            y[n] += q.amp_lin * std::pow(10.0, -1.5 * t) * std::cos(2.0 * M_PI * (std::fmod(q.freq_hz * t, 1.0) + q.freq_hz * integral_s));
        }
    }
    splitmix64 rng{seed};
    std::vector<float> out(frames);
    for (std::size_t n = 0; n < frames; ++n) out[n] = static_cast<float>(y[n] + noise_rms * rng.gaussian());
    return out;
}

/// The patch the stage is handed: each partial at its settled frequency, T60 2 s, the phase its
/// late part shows (2 pi f I(inf), I(inf) = tau c ln2 / 1200 to first order).
patch patch_of(const std::vector<glide_case>& parts) {
    patch p;
    p.note.length_s = 0.5;
    p.note.f0_hz = parts.front().freq_hz;
    for (const glide_case& q : parts)
        p.partials.push_back({.freq_hz = q.freq_hz, .harmonic = 0,
                              .phase_rad = std::remainder(2.0 * M_PI * q.freq_hz * q.glide_s * std::log(2.0) * q.cents / 1200.0, 2.0 * M_PI),
                              .env = {.attack_s = 0.0, .peak = to_level(amp_lin{q.amp_lin}), .decay = {{.t60_s = 2.0}}}, .place = {}});
    return p;
}

}  // namespace

TEST_CASE("refining only coarse bests half of the way to a kept glide keeps the glides refining every one keeps",
          "[analysis][glide]") {
    const double rate_hz = 48000.0;
    const double cents = GENERATE(40.0, -30.0, 15.0, 6.0, 0.0);
    const double glide_s = GENERATE(0.03, 0.06);
    const std::uint64_t seed = GENERATE(3, 4);
    const std::vector<glide_case> parts = {{.freq_hz = 392.0, .amp_lin = 0.3, .cents = cents, .glide_s = glide_s},
                                           {.freq_hz = 785.5, .amp_lin = 0.15, .cents = 0.5 * cents, .glide_s = glide_s},
                                           {.freq_hz = 1183.0, .amp_lin = 0.08, .cents = 0.0, .glide_s = 0.0}};
    const std::vector<float> x = note_of(parts, rate_hz, 0.5, 1e-3, seed);
    patch every = patch_of(parts);
    patch halfway = every;
    const onset_glide_summary all = fit_onset_glides(every, x, rate_hz, {.refine_share = 0.0});
    const onset_glide_summary some = fit_onset_glides(halfway, x, rate_hz, {.refine_share = 0.5});
    CAPTURE(cents, glide_s, seed, all.glides, some.glides, every.partials[0].glide_cents, halfway.partials[0].glide_cents);
    CHECK(some.glides == all.glides);
    CHECK(halfway == every);
    if (std::abs(cents) >= 15.0) CHECK(all.glides >= 1);  // the glides are there to be found
    if (cents == 0.0) CHECK(all.glides == 0);
}
