// Physical models behind the demo notes in demo-data/. None of them is a sum of damped
// sinusoids: the string is a digital waveguide loop, the bar and the bell are banks of
// second-order IIR resonators driven by a force signal. The analysis is therefore tested on sound
// it did not make. Header-only so the tests can render the notes without files.
//
// Everything is deterministic: a small self-contained RNG (splitmix64), fixed seeds, no
// std::random distributions (their output is implementation-defined), double-precision state.
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

namespace wane::demo {

inline constexpr double demo_sample_rate_hz = 48000.0;

// ---------------------------------------------------------------------------------------------
// Small deterministic building blocks
// ---------------------------------------------------------------------------------------------

/// The project's splitmix64 (core/rng.hpp): uniform_pm1() is the top 53 bits mapped to [-1, 1).
using wane::splitmix64;

/// Phase lag in radians at w (rad/sample) of the first-order allpass
/// A(z) = (a + z^-1) / (1 + a z^-1): w - 2 atan(a sin w / (1 + a cos w)).
/// Its phase delay at DC is (1 - a) / (1 + a) samples.
inline double allpass1_phase_lag(double a, double w) {
    return w - 2.0 * std::atan2(a * std::sin(w), 1.0 + a * std::cos(w));
}

/// Coefficient of the first-order Thiran allpass with maximally flat delay d samples at DC
/// (Thiran 1971; d in [0.5, 1.5) keeps it well behaved): a = (1 - d) / (1 + d).
inline double thiran1_coefficient(double delay_frames) { return (1.0 - delay_frames) / (1.0 + delay_frames); }

/// Loss filter of the string loop, H(z) = g (1 - p) / (1 - p z^-1): unit-DC-gain one-pole lowpass
/// scaled by g. Magnitude g (1 - p) / sqrt(1 - 2 p cos w + p^2); phase lag atan2(p sin w, 1 - p cos w).
inline double onepole_gain(double g, double p, double w) {
    return g * (1.0 - p) / std::sqrt(1.0 - 2.0 * p * std::cos(w) + p * p);
}
inline double onepole_phase_lag(double p, double w) { return std::atan2(p * std::sin(w), 1.0 - p * std::cos(w)); }

/// Angular frequency in rad/sample.
inline double rad_per_frame(double freq_hz, double sample_rate_hz) { return two_pi * freq_hz / sample_rate_hz; }

/// Pole radius of a mode whose amplitude falls 60 dB in t60_s: exp(-ln(1000) / (T60 fs)).
inline double pole_radius_for_t60(double t60_s, double sample_rate_hz) {
    return std::exp(-ln1000 / (t60_s * sample_rate_hz));
}

/// Two-pole resonator y[n] = b x[n] + 2 r cos(theta) y[n-1] - r^2 y[n-2] with b = sin(theta):
/// its impulse response is r^n sin((n + 1) theta), a unit-amplitude decaying sine at exactly
/// theta rad/sample. Coefficients in one struct; the bank below holds them as arrays.
struct resonator_bank {
    std::vector<double> b, a1, a2;  // a1 = 2 r cos(theta), a2 = -r^2
    std::vector<double> weight;     // output weight of each resonator
    std::vector<double> y1, y2;     // state: y[n-1], y[n-2]
    void add(double freq_hz, double t60_s, double weight_lin, double sample_rate_hz) {
        const double theta = rad_per_frame(freq_hz, sample_rate_hz);
        const double r = pole_radius_for_t60(t60_s, sample_rate_hz);
        b.push_back(std::sin(theta));
        a1.push_back(2.0 * r * std::cos(theta));
        a2.push_back(-r * r);
        weight.push_back(weight_lin);
        y1.push_back(0.0);
        y2.push_back(0.0);
    }
    /// Drives every resonator with the same force signal and sums the weighted outputs into out.
    void run(std::span<const double> force, std::span<double> out) {
        assert(force.size() == out.size());
        const std::size_t count = b.size();
        for (std::size_t n = 0; n < force.size(); ++n) {
            double sum = 0.0;
            for (std::size_t k = 0; k < count; ++k) {
                const double y = b[k] * force[n] + a1[k] * y1[k] + a2[k] * y2[k];
                y2[k] = y1[k];
                y1[k] = y;
                sum += weight[k] * y;
            }
            out[n] += sum;
        }
    }
};

/// Second-order bandpass (RBJ audio-EQ cookbook, constant 0 dB peak gain), applied in place.
inline void bandpass_in_place(std::span<double> x, double centre_hz, double q, double sample_rate_hz) {
    const double w0 = rad_per_frame(centre_hz, sample_rate_hz);
    const double alpha = std::sin(w0) / (2.0 * q);
    const double a0 = 1.0 + alpha;
    const double b0 = alpha / a0, b2 = -alpha / a0;
    const double a1 = -2.0 * std::cos(w0) / a0, a2 = (1.0 - alpha) / a0;
    double x1 = 0.0, x2 = 0.0, y1 = 0.0, y2 = 0.0;
    for (double& v : x) {
        const double y = b0 * v + b2 * x2 - a1 * y1 - a2 * y2;
        x2 = x1;
        x1 = v;
        y2 = y1;
        y1 = y;
        v = y;
    }
}

/// A decaying noise burst: uniform white noise (splitmix64), bandpassed, times the envelope
/// min(t / attack, 1) exp(-t / decay), added into out starting at start_frame. Length 8 decay
/// time constants (-69 dB), then it stops.
struct noise_burst_params {
    std::uint64_t seed;
    double centre_hz;
    double q;
    double attack_s;
    double decay_s;     ///< time constant of the exponential decay (amplitude e^-1 after it)
    double amp_lin;     ///< peak of the envelope applied to the (unit-peak-normalized) filtered noise
};
inline void add_noise_burst(std::span<double> out, std::size_t start_frame, const noise_burst_params& p,
                            double sample_rate_hz) {
    constexpr double burst_length_time_constants = 8.0;
    const auto length = static_cast<std::size_t>(
        std::ceil((p.attack_s + burst_length_time_constants * p.decay_s) * sample_rate_hz));
    std::vector<double> noise(length);
    splitmix64 rng{p.seed};
    for (double& v : noise) v = rng.uniform_pm1();
    bandpass_in_place(noise, p.centre_hz, p.q, sample_rate_hz);
    double peak = 0.0;
    for (double v : noise) peak = std::max(peak, std::abs(v));
    for (std::size_t n = 0; n < length && start_frame + n < out.size(); ++n) {
        const double t_s = static_cast<double>(n) / sample_rate_hz;
        const double env = std::min(t_s / p.attack_s, 1.0) * std::exp(-t_s / p.decay_s);
        out[start_frame + n] += p.amp_lin * env * noise[n] / peak;
    }
}

/// Raised-cosine fade over the last fade_s of the note, so a note cut at its length ends without
/// a click.
inline void fade_out_in_place(std::span<double> x, double fade_s, double sample_rate_hz) {
    const auto fade_frames = static_cast<std::size_t>(std::round(fade_s * sample_rate_hz));
    const std::size_t n0 = x.size() - std::min(fade_frames, x.size());
    for (std::size_t n = n0; n < x.size(); ++n) {
        const double u = static_cast<double>(n - n0) / static_cast<double>(fade_frames);
        x[n] *= 0.5 * (1.0 + std::cos(pi * u));
    }
}

inline std::vector<float> to_float(std::span<const double> x) {
    std::vector<float> out(x.size());
    for (std::size_t n = 0; n < x.size(); ++n) out[n] = static_cast<float>(x[n]);
    return out;
}

inline std::size_t frames_of(double time_s, double sample_rate_hz) {
    return static_cast<std::size_t>(std::round(time_s * sample_rate_hz));
}

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

// ---------------------------------------------------------------------------------------------
// (b) Struck free-free bar: modal synthesis of an Euler-Bernoulli beam
// ---------------------------------------------------------------------------------------------
//
// The flexural modes of a uniform free-free beam have k_n L = x_n, the positive roots of
// cos(x) cosh(x) = 1, and f_n proportional to x_n^2, so f_n / f_1 = (x_n / x_1)^2
// (Fletcher and Rossing, The Physics of Musical Instruments: 1 : 2.756 : 5.404 : 8.933 with
// x_1..x_4 = 4.7300, 7.8532, 10.9956, 14.1372). Each mode is a two-pole resonator driven by the
// mallet's contact force, a half-sine pulse; its output weight is the mode shape at the strike
// point times the mode shape at the listening point (an end of the bar, where every mode shape is
// 2). Modal damping rises with frequency as sigma(f) = sigma_0 + sigma_2 f^2 (a common form for
// bars, e.g. Chaigne and Doutaut 1997, from memory), fixed by the T60s of the first and last mode.
// A bandpassed noise burst of tens of ms stands for the mallet's contact noise.

/// The first `count` positive roots of cos(x) cosh(x) = 1, i.e. of cos(x) - 1/cosh(x) = 0 (the
/// same roots, better conditioned). Root n lies within 0.2 of (n + 1/2) pi; bisection there.
inline std::vector<double> free_free_beam_roots(int count) {
    std::vector<double> roots;
    for (int n = 1; n <= count; ++n) {
        const double guess = (static_cast<double>(n) + 0.5) * pi;
        auto g = [](double x) { return std::cos(x) - 1.0 / std::cosh(x); };
        double lo = guess - 0.2, hi = guess + 0.2;
        const bool rising = g(lo) < 0.0;
        assert((g(lo) < 0.0) != (g(hi) < 0.0));
        constexpr int bisection_steps = 100;
        for (int i = 0; i < bisection_steps; ++i) {
            const double mid = 0.5 * (lo + hi);
            ((g(mid) < 0.0) == rising ? lo : hi) = mid;
        }
        roots.push_back(0.5 * (lo + hi));
    }
    return roots;
}

/// Frequency ratios f_n / f_1 = (x_n / x_1)^2 of the first `count` modes.
inline std::vector<double> free_free_beam_ratios(int count) {
    const std::vector<double> x = free_free_beam_roots(count);
    std::vector<double> ratios;
    for (double xn : x) ratios.push_back((xn / x[0]) * (xn / x[0]));
    return ratios;
}

/// Mode shape of the free-free beam at position xi = x / L in [0, 1] for root x_n:
/// cosh(k) + cos(k) - s (sinh(k) + sin(k)), k = x_n xi, s = (cosh x_n - cos x_n) / (sinh x_n - sin x_n).
/// It is 2 at both ends.
inline double free_free_mode_shape(double root, double xi) {
    const double s = (std::cosh(root) - std::cos(root)) / (std::sinh(root) - std::sin(root));
    const double k = root * xi;
    return std::cosh(k) + std::cos(k) - s * (std::sinh(k) + std::sin(k));
}

struct bar_params {
    double f1_hz = 220.0;            // A3
    int mode_count = 6;
    double strike_position = 0.38;   // fraction of the length from one end
    double listen_position = 0.0;    // an end: all mode shapes are 2 there
    double t60_first_s = 2.8;        // T60 of mode 1
    double t60_last_s = 0.25;        // T60 of the highest mode
    double contact_s = 0.0003;       // half-sine mallet force pulse (hard mallet)
    noise_burst_params mallet_noise{.seed = 0x5eed0002, .centre_hz = 1200.0, .q = 0.6,
                                    .attack_s = 0.0005, .decay_s = 0.015, .amp_lin = 0.30};
    double lead_s = 0.07;
    double length_s = 3.5;
    double fade_s = 0.05;
    double sample_rate_hz = demo_sample_rate_hz;
};

struct bar_mode {
    int mode;
    double ratio;
    double freq_hz;
    double t60_s;
    double weight;   ///< shape(strike) * shape(listen)
};

inline std::vector<bar_mode> bar_modes(const bar_params& p) {
    const std::vector<double> x = free_free_beam_roots(p.mode_count);
    const std::vector<double> ratio = free_free_beam_ratios(p.mode_count);
    const double f_last = p.f1_hz * ratio.back();
    const double sigma_first = ln1000 / p.t60_first_s, sigma_last = ln1000 / p.t60_last_s;
    const double sigma_2 = (sigma_last - sigma_first) / (f_last * f_last - p.f1_hz * p.f1_hz);
    const double sigma_0 = sigma_first - sigma_2 * p.f1_hz * p.f1_hz;
    std::vector<bar_mode> modes;
    for (int n = 0; n < p.mode_count; ++n) {
        const auto i = static_cast<std::size_t>(n);
        const double f = p.f1_hz * ratio[i];
        modes.push_back({.mode = n + 1, .ratio = ratio[i], .freq_hz = f,
                         .t60_s = ln1000 / (sigma_0 + sigma_2 * f * f),
                         .weight = free_free_mode_shape(x[i], p.strike_position) *
                                   free_free_mode_shape(x[i], p.listen_position)});
    }
    return modes;
}

inline std::vector<float> render_bar(const bar_params& p) {
    const std::size_t frames = frames_of(p.length_s, p.sample_rate_hz);
    const std::size_t start = frames_of(p.lead_s, p.sample_rate_hz);
    std::vector<double> force(frames, 0.0);
    const std::size_t contact = frames_of(p.contact_s, p.sample_rate_hz);
    for (std::size_t k = 0; k <= contact && start + k < frames; ++k) {
        force[start + k] = std::sin(pi * static_cast<double>(k) / static_cast<double>(contact));
    }
    resonator_bank bank;
    for (const bar_mode& m : bar_modes(p)) bank.add(m.freq_hz, m.t60_s, m.weight, p.sample_rate_hz);
    std::vector<double> out(frames, 0.0);
    bank.run(force, out);
    double bar_peak = 0.0;
    for (double v : out) bar_peak = std::max(bar_peak, std::abs(v));
    noise_burst_params noise = p.mallet_noise;
    noise.amp_lin *= bar_peak;
    add_noise_burst(out, start, noise, p.sample_rate_hz);
    fade_out_in_place(out, p.fade_s, p.sample_rate_hz);
    return to_float(out);
}

// ---------------------------------------------------------------------------------------------
// (c) Bell-like tone: resonator bank with split (doublet) modes
// ---------------------------------------------------------------------------------------------
//
// A slightly asymmetric bell has each flexural mode split into two close modes; the pair beats at
// the split frequency. Our garden bell: partial ratios loosely after the named partials of a
// tuned bell (hum, prime, tierce, quint, nominal, ...; approximate values, from memory, not a
// measured bell), each but the prime split into a doublet 0.5-3 Hz apart, struck by a short
// raised-cosine force pulse (metal clapper).

struct bell_partial {
    double ratio;     ///< mean frequency / prime
    double split_hz;  ///< doublet split (0: a single mode)
    double amp_lin;   ///< weight of the pair (split 0.55 / 0.45 between its two modes)
    double t60_s;
};

struct bell_params {
    double prime_hz = 440.0;  // A4: the bell's prime, its intended f0
    std::array<bell_partial, 9> partials{{
        {.ratio = 0.5, .split_hz = 0.7, .amp_lin = 0.5, .t60_s = 5.0},     // hum
        {.ratio = 1.0, .split_hz = 0.0, .amp_lin = 0.8, .t60_s = 3.6},     // prime
        {.ratio = 1.19, .split_hz = 1.3, .amp_lin = 0.7, .t60_s = 3.0},    // tierce
        {.ratio = 1.51, .split_hz = 0.9, .amp_lin = 0.3, .t60_s = 2.2},    // quint
        {.ratio = 2.0, .split_hz = 1.7, .amp_lin = 1.0, .t60_s = 2.0},     // nominal
        {.ratio = 2.52, .split_hz = 2.3, .amp_lin = 0.45, .t60_s = 1.4},
        {.ratio = 2.67, .split_hz = 0.6, .amp_lin = 0.35, .t60_s = 1.2},
        {.ratio = 3.01, .split_hz = 2.8, .amp_lin = 0.3, .t60_s = 0.9},
        {.ratio = 4.07, .split_hz = 1.9, .amp_lin = 0.2, .t60_s = 0.6},
    }};
    double pair_share = 0.55;     // fraction of a pair's weight on its lower mode
    double strike_width_s = 0.00025;
    double lead_s = 0.09;
    double length_s = 4.0;
    double fade_s = 0.08;
    double sample_rate_hz = demo_sample_rate_hz;
};

inline std::vector<float> render_bell(const bell_params& p) {
    const std::size_t frames = frames_of(p.length_s, p.sample_rate_hz);
    const std::size_t start = frames_of(p.lead_s, p.sample_rate_hz);
    const std::size_t width = std::max<std::size_t>(2, frames_of(p.strike_width_s, p.sample_rate_hz));
    std::vector<double> force(frames, 0.0);
    for (std::size_t k = 0; k < width && start + k < frames; ++k) {
        force[start + k] = 0.5 * (1.0 - std::cos(two_pi * static_cast<double>(k + 1) / static_cast<double>(width + 1)));
    }
    resonator_bank bank;
    for (const bell_partial& b : p.partials) {
        const double f = p.prime_hz * b.ratio;
        if (b.split_hz == 0.0) {
            bank.add(f, b.t60_s, b.amp_lin, p.sample_rate_hz);
        } else {
            bank.add(f - 0.5 * b.split_hz, b.t60_s, b.amp_lin * p.pair_share, p.sample_rate_hz);
            bank.add(f + 0.5 * b.split_hz, b.t60_s, b.amp_lin * (1.0 - p.pair_share), p.sample_rate_hz);
        }
    }
    std::vector<double> out(frames, 0.0);
    bank.run(force, out);
    fade_out_in_place(out, p.fade_s, p.sample_rate_hz);
    return to_float(out);
}

}  // namespace wane::demo
