// The demo notes' struck bar and bell (demo_models.hpp): banks of two-pole resonators.
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
