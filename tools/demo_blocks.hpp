// Small deterministic building blocks of the demo notes' physical models (demo_models.hpp):
// allpass and loss filters, resonator banks, noise bursts, fades.
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

}  // namespace wane::demo
