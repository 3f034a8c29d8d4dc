// The demo notes' stiff plucked string (demo_models.hpp): a digital waveguide loop.
#pragma once

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <span>
#include <vector>

#include "core/rng.hpp"
#include "core/units.hpp"
#include "demo_blocks.hpp"

namespace wane::demo {

// ---------------------------------------------------------------------------------------------
// (a) Stiff plucked string: single-delay-loop digital waveguide (Karplus-Strong family)
// ---------------------------------------------------------------------------------------------
//
// Loop: y[n] = x[n] + (Thiran o dispersion o loss)(y[n - N]).
//   - N integer frames of delay plus a first-order Thiran allpass for the fractional part, so the
//     first partial lands exactly on the design f1;
//   - a cascade of identical first-order allpasses with negative coefficient (phase delay falling
//     with frequency: higher partials travel the loop faster), its coefficient fitted so the loop
//     resonances follow the stiff-string law f_n = n f0 sqrt(1 + B n^2) (Fletcher 1964, from memory; also
//     Fletcher and Rossing, The Physics of Musical Instruments, stiff strings);
//   - a one-pole lowpass loss filter: T60 falls with frequency.
// The pluck is a short smoothed force pulse through a pluck-position comb 1 - z^-(beta P), which
// notches the partials near multiples of 1/beta. Two polarizations with the same tuning but
// different losses give a two-stage decay (fast then slow); a pick-noise burst is added on top.

struct string_polarization {
    double share;          ///< fraction of the pluck fed into this polarization
    double t60_low_s;      ///< T60 of partial 1
    double t60_high_s;     ///< T60 at string_params::loss_reference_hz
};

struct string_params {
    double f1_hz = 146.83238395870379;  // D3 with A4 = 440 Hz: 440 * 2^(-19/12)
    double inharmonicity_b = 1.5e-4;    // B of f_n = n f0 sqrt(1 + B n^2)
    int dispersion_sections = 96;
    int fitted_partials = 30;           // dispersion fitted on partials 1..this
    double loss_reference_hz = 3000.0;
    std::array<string_polarization, 2> polarizations{{
        {.share = 0.65, .t60_low_s = 1.5, .t60_high_s = 0.3},  // couples to the bridge: fast
        {.share = 0.35, .t60_low_s = 8.0, .t60_high_s = 1.2},   // parallel to the top: slow
    }};
    double pluck_position = 0.13;       // fraction of the string length from the bridge
    double pluck_width_s = 0.0003;      // Hann force pulse (pick contact)
    double pluck_lowpass_hz = 400.0;    // one-pole lowpass on the pulse (finger/pick softness)
    noise_burst_params pick_noise{.seed = 0x5eed0001, .centre_hz = 3500.0, .q = 0.8,
                                  .attack_s = 0.0005, .decay_s = 0.008, .amp_lin = 0.40};
    double lead_s = 0.08;
    double length_s = 3.5;
    double fade_s = 0.05;
    double sample_rate_hz = demo_sample_rate_hz;
};

/// Nominal f0 of the stiff-string law such that partial 1 is f1: f0 = f1 / sqrt(1 + B).
inline double string_nominal_f0_hz(const string_params& p) { return p.f1_hz / std::sqrt(1.0 + p.inharmonicity_b); }

/// Target frequency of partial n: n f0 sqrt(1 + B n^2) (Fletcher 1964, from memory).
inline double stiff_string_partial_hz(const string_params& p, int n) {
    const double nd = static_cast<double>(n);
    return nd * string_nominal_f0_hz(p) * std::sqrt(1.0 + p.inharmonicity_b * nd * nd);
}

struct string_loop {
    int delay_frames = 0;
    double thiran_a = 0.0;
    double dispersion_a = 0.0;
    int dispersion_sections = 0;
    double loss_gain = 1.0;
    double loss_pole = 0.0;
};

/// Phase lag of the whole loop at w (rad/sample), delay included.
inline double loop_phase_lag(const string_loop& L, double w) {
    return w * static_cast<double>(L.delay_frames) + allpass1_phase_lag(L.thiran_a, w) +
           static_cast<double>(L.dispersion_sections) * allpass1_phase_lag(L.dispersion_a, w) +
           onepole_phase_lag(L.loss_pole, w);
}

/// Frequency of the loop's n-th resonance: the w where the loop phase lag is 2 pi n (bisection
/// on a bracket around the harmonic guess; the lag rises monotonically with w there).
inline double loop_resonance_hz(const string_loop& L, int n, double sample_rate_hz, double guess_hz) {
    const double target = two_pi * static_cast<double>(n);
    double lo = rad_per_frame(guess_hz, sample_rate_hz) * 0.8, hi = rad_per_frame(guess_hz, sample_rate_hz) * 1.2;
    assert(loop_phase_lag(L, lo) < target && loop_phase_lag(L, hi) > target);
    constexpr int bisection_steps = 80;
    for (int i = 0; i < bisection_steps; ++i) {
        const double mid = 0.5 * (lo + hi);
        (loop_phase_lag(L, mid) < target ? lo : hi) = mid;
    }
    return 0.5 * (lo + hi) * sample_rate_hz / two_pi;
}

/// Loss filter (g, p) so partial 1 decays with T60 t60_low and loss_reference_hz with t60_high.
/// Per loop trip (one period, 1/f1) the amplitude must fall by 10^(-3 / (T60 f1)).
inline void design_loss(const string_params& p, const string_polarization& pol, string_loop& L) {
    const double w_low = rad_per_frame(p.f1_hz, p.sample_rate_hz);
    const double w_high = rad_per_frame(p.loss_reference_hz, p.sample_rate_hz);
    const double g_low = std::pow(10.0, -3.0 / (pol.t60_low_s * p.f1_hz));
    const double g_high = std::pow(10.0, -3.0 / (pol.t60_high_s * p.f1_hz));
    // Gain ratio |H(w_high)| / |H(w_low)| falls monotonically as the pole p goes from 0 to 1.
    const double want = g_high / g_low;
    double lo = 0.0, hi = 0.999;
    constexpr int bisection_steps = 80;
    for (int i = 0; i < bisection_steps; ++i) {
        const double mid = 0.5 * (lo + hi);
        const double ratio = onepole_gain(1.0, mid, w_high) / onepole_gain(1.0, mid, w_low);
        (ratio > want ? lo : hi) = mid;
    }
    L.loss_pole = 0.5 * (lo + hi);
    L.loss_gain = g_low / onepole_gain(1.0, L.loss_pole, w_low);
}

/// Integer delay and Thiran coefficient putting resonance 1 exactly on f1, for the current
/// dispersion and loss filters.
inline void tune_loop(const string_params& p, string_loop& L) {
    const double w1 = rad_per_frame(p.f1_hz, p.sample_rate_hz);
    const double others = static_cast<double>(L.dispersion_sections) * allpass1_phase_lag(L.dispersion_a, w1) +
                          onepole_phase_lag(L.loss_pole, w1);
    const double needed_frames = (two_pi - others) / w1;  // integer delay + Thiran phase delay at w1
    L.delay_frames = static_cast<int>(std::floor(needed_frames - 0.5));
    double lo = 0.3, hi = 1.7;
    constexpr int bisection_steps = 80;
    for (int i = 0; i < bisection_steps; ++i) {
        const double mid = 0.5 * (lo + hi);
        const double lag = allpass1_phase_lag(thiran1_coefficient(mid), w1) / w1;
        (static_cast<double>(L.delay_frames) + lag < needed_frames ? lo : hi) = mid;
    }
    L.thiran_a = thiran1_coefficient(0.5 * (lo + hi));
}

/// Largest deviation in cents of the loop resonances 1..fitted_partials from the stiff-string law.
inline double dispersion_fit_error_cents(const string_params& p, const string_loop& L) {
    double worst = 0.0;
    for (int n = 1; n <= p.fitted_partials; ++n) {
        const double want = stiff_string_partial_hz(p, n);
        worst = std::max(worst, std::abs(cents_between(loop_resonance_hz(L, n, p.sample_rate_hz, want), want)));
    }
    return worst;
}

/// Designs one polarization's loop: loss filter, then the dispersion coefficient by golden-section
/// search minimizing dispersion_fit_error_cents (the loop re-tuned to f1 at every trial).
inline string_loop design_string_loop(const string_params& p, const string_polarization& pol) {
    string_loop L{.dispersion_sections = p.dispersion_sections};
    design_loss(p, pol, L);
    auto error_for = [&](double a) {
        L.dispersion_a = a;
        tune_loop(p, L);
        return dispersion_fit_error_cents(p, L);
    };
    // The sections' DC delay M (1 - a) / (1 + a) must leave room for the integer delay: at most
    // the period minus a few frames, which bounds a from below.
    constexpr double spare_frames = 4.0;
    const double max_section_delay = (p.sample_rate_hz / p.f1_hz - spare_frames) / static_cast<double>(p.dispersion_sections);
    const double golden = (std::sqrt(5.0) - 1.0) / 2.0;
    // Stiffness needs a < 0; a small positive a is allowed so that for B near 0 the loss filter's
    // own dispersion (it too sharpens the upper partials a little) can be undone.
    constexpr double most_negative_a = -0.95, most_positive_a = 0.5;
    double lo = std::max(most_negative_a, (1.0 - max_section_delay) / (1.0 + max_section_delay));
    double hi = most_positive_a;
    double x1 = hi - golden * (hi - lo), x2 = lo + golden * (hi - lo);
    double e1 = error_for(x1), e2 = error_for(x2);
    constexpr int golden_steps = 60;
    for (int i = 0; i < golden_steps; ++i) {
        if (e1 < e2) {
            hi = x2; x2 = x1; e2 = e1;
            x1 = hi - golden * (hi - lo); e1 = error_for(x1);
        } else {
            lo = x1; x1 = x2; e1 = e2;
            x2 = lo + golden * (hi - lo); e2 = error_for(x2);
        }
    }
    error_for(0.5 * (lo + hi));
    return L;
}

/// The pluck force signal fed into the loops (before the share of each polarization): a Hann
/// pulse of pluck_width_s, one-pole lowpassed, then the pluck-position comb x[n] - x[n - beta P]
/// with P = fs / f1 the period in frames.
inline std::vector<double> pluck_excitation(const string_params& p, std::size_t frames) {
    std::vector<double> e(frames, 0.0);
    const std::size_t start = frames_of(p.lead_s, p.sample_rate_hz);
    const std::size_t width = std::max<std::size_t>(2, frames_of(p.pluck_width_s, p.sample_rate_hz));
    for (std::size_t k = 0; k < width && start + k < frames; ++k) {
        e[start + k] = 0.5 * (1.0 - std::cos(two_pi * static_cast<double>(k + 1) / static_cast<double>(width + 1)));
    }
    const double c = std::exp(-two_pi * p.pluck_lowpass_hz / p.sample_rate_hz);  // one-pole pole
    double state = 0.0;
    for (double& v : e) v = state = (1.0 - c) * v + c * state;
    const auto comb = static_cast<std::size_t>(std::round(p.pluck_position * p.sample_rate_hz / p.f1_hz));
    std::vector<double> x(frames, 0.0);
    for (std::size_t n = 0; n < frames; ++n) x[n] = e[n] - (n >= comb ? e[n - comb] : 0.0);
    return x;
}

/// Runs one polarization's loop on the excitation, adding share * y into out.
inline void run_string_loop(const string_loop& L, std::span<const double> x, double share, std::span<double> out) {
    const auto sections = static_cast<std::size_t>(L.dispersion_sections);
    const auto delay = static_cast<std::size_t>(L.delay_frames);
    std::vector<double> line(delay, 0.0);  // circular buffer of y, read N frames back
    std::vector<double> ap_state(sections, 0.0);
    double thiran_state = 0.0, loss_state = 0.0;
    const double loss_b = L.loss_gain * (1.0 - L.loss_pole);
    std::size_t pos = 0;
    for (std::size_t n = 0; n < x.size(); ++n) {
        double v = line[pos];  // y[n - N]
        loss_state = loss_b * v + L.loss_pole * loss_state;
        v = loss_state;
        for (std::size_t s = 0; s < sections; ++s) {  // (a + z^-1)/(1 + a z^-1), transposed form
            const double yv = L.dispersion_a * v + ap_state[s];
            ap_state[s] = v - L.dispersion_a * yv;
            v = yv;
        }
        const double yt = L.thiran_a * v + thiran_state;
        thiran_state = v - L.thiran_a * yt;
        const double y = share * x[n] + yt;
        line[pos] = y;
        pos = (pos + 1 == delay) ? 0 : pos + 1;
        out[n] += y;
    }
}

inline std::vector<float> render_string(const string_params& p) {
    const std::size_t frames = frames_of(p.length_s, p.sample_rate_hz);
    const std::vector<double> x = pluck_excitation(p, frames);
    std::vector<double> out(frames, 0.0);
    double string_peak = 0.0;
    for (const string_polarization& pol : p.polarizations) {
        run_string_loop(design_string_loop(p, pol), x, pol.share, out);
    }
    for (double v : out) string_peak = std::max(string_peak, std::abs(v));
    noise_burst_params noise = p.pick_noise;
    noise.amp_lin *= string_peak;  // pick noise level relative to the string's peak
    add_noise_burst(out, frames_of(p.lead_s, p.sample_rate_hz), noise, p.sample_rate_hz);
    fade_out_in_place(out, p.fade_s, p.sample_rate_hz);
    return to_float(out);
}

}  // namespace wane::demo
