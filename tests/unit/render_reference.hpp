// References for the renderer's tests, written from the format's definition (patches/README.md)
// and render.hpp's stated formulas, independently of src/synthesis: the envelope, the band-limit
// and end fades, a direct double-precision evaluation of a render; and patches built in code.
#pragma once

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <vector>

#include "core/patch.hpp"
#include "synthesis/render.hpp"

namespace wane::test {

/// The envelope amplitude from the format's definition (patch format v1), written independently of
/// core/envelope.cpp: linear ramp 0 -> peak over [0, attack_s); then each decay segment changes the
/// level at -60 / t60_s dB per second from where the previous ended, until its until_s (the last
/// runs on). Requires until_s increasing and after attack_s (true for every patch built here).
struct reference_envelope {
    double attack_s = 0.0;
    double peak_amp = 0.0;
    std::vector<double> start_s;      // segment starts
    std::vector<double> start_db;     // level at each start
    std::vector<double> slope_db_s;   // dB per second

    explicit reference_envelope(const envelope& env)
        : attack_s(env.attack_s), peak_amp(std::pow(10.0, env.peak.db / 20.0)) {
        double t = env.attack_s;
        double level = env.peak.db;
        for (const decay_segment& seg : env.decay) {
            const double slope = std::isinf(seg.t60_s) ? 0.0 : -60.0 / seg.t60_s;
            start_s.push_back(t);
            start_db.push_back(level);
            slope_db_s.push_back(slope);
            if (!seg.until_s) break;
            level += slope * (*seg.until_s - t);
            t = *seg.until_s;
        }
    }
    double amp(double t_s) const {
        if (t_s < attack_s) return peak_amp * t_s / attack_s;
        std::size_t i = 0;
        while (i + 1 < start_s.size() && t_s >= start_s[i + 1]) ++i;
        return std::pow(10.0, (start_db[i] + slope_db_s[i] * (t_s - start_s[i])) / 20.0);
    }
};

/// The band-limit fade from its definition in render.hpp (written here, not the renderer's
/// band_limit_gain): 1 up to band_fade_start_fraction of Nyquist, 0 from Nyquist on, a raised
/// cosine 1 -> 0 between them.
inline double reference_band_gain(double freq_hz, double rate_hz) {
    const double nyquist_hz = rate_hz / 2.0;
    const double start_hz = nyquist_hz * band_fade_start_fraction;
    if (freq_hz < start_hz) return 1.0;
    if (freq_hz >= nyquist_hz) return 0.0;
    const double x = (freq_hz - start_hz) / (nyquist_hz - start_hz);  // 0 .. 1 across the fade
    return (1.0 + std::cos(pi * x)) / 2.0;
}

/// The end fade from its definition in render.hpp (written here, not the renderer's
/// end_fade_gain): the last L = min(total, round(end_fade_s * rate)) frames are multiplied by
/// (1 + cos(pi (k + 1) / L)) / 2, k = 0 .. L - 1 counted from the first of them.
inline double reference_end_fade(std::size_t n, std::size_t total, double rate_hz) {
    const double fade_len = std::min(static_cast<double>(total), std::round(end_fade_s * rate_hz));
    const double from_end = static_cast<double>(total) - static_cast<double>(n);  // 1 for the last frame
    if (from_end > fade_len) return 1.0;
    const double k = fade_len - from_end;
    return (1.0 + std::cos(pi * (k + 1.0) / fade_len)) / 2.0;
}

/// Direct evaluation of a render at frame n: G * sum_k band_gain(f_k) A_k(t) cos(2 pi f_k t + phi_k)
/// times the end fade, t = n / rate, all in double, term by term, every part written here.
struct direct_render {
    double rate_hz;
    std::size_t frames;
    double gain_lin;
    std::vector<const partial*> parts;
    std::vector<reference_envelope> envs;
    std::vector<double> band_gain;

    direct_render(const patch& p, const render_params& params)
        : rate_hz(params.sample_rate_hz), frames(render_frames(p, params)),
          gain_lin(std::pow(10.0, (p.note.gain_db + params.gain_db) / 20.0)) {
        for (const partial& part : p.partials) {
            parts.push_back(&part);
            envs.emplace_back(part.env);
            band_gain.push_back(reference_band_gain(part.freq_hz, rate_hz));
        }
    }
    double at(std::size_t n) const {
        const double t_s = static_cast<double>(n) / rate_hz;
        double sum = 0.0;
        for (std::size_t k = 0; k < parts.size(); ++k) {
            if (band_gain[k] == 0.0) continue;
            sum += band_gain[k] * envs[k].amp(t_s) * std::cos(two_pi * parts[k]->freq_hz * t_s + parts[k]->phase_rad);
        }
        return gain_lin * sum * reference_end_fade(n, frames, rate_hz);
    }
};

inline partial make_partial(double freq_hz, double phase_rad, double attack_s, double peak_db,
                     std::vector<decay_segment> decay) {
    return partial{.freq_hz = freq_hz, .harmonic = 0, .phase_rad = phase_rad,
                   .env = {.attack_s = attack_s, .peak = level_db{peak_db}, .decay = std::move(decay)}};
}

inline patch make_patch(std::vector<partial> parts, double length_s) {
    patch p;
    p.note.length_s = length_s;
    p.partials = std::move(parts);
    canonicalize(p);
    return p;
}

}  // namespace wane::test
