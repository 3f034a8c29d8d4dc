#include "measure/align.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "core/units.hpp"

namespace wane {

namespace {

/// x^2 in double (samples are stored as float, sums accumulate in double).
inline double squared(float v) { return static_cast<double>(v) * static_cast<double>(v); }

std::size_t frames_of(double t_s, double sample_rate_hz) {
    return std::max<std::size_t>(1, static_cast<std::size_t>(std::llround(t_s * sample_rate_hz)));
}

double sample_at(std::span<const float> x, std::ptrdiff_t i) {
    return i >= 0 && i < static_cast<std::ptrdiff_t>(x.size()) ? static_cast<double>(x[static_cast<std::size_t>(i)]) : 0.0;
}

}  // namespace

std::vector<double> level_envelope_db(std::span<const float> x, double sample_rate_hz,
                                      const align_onset_params& params) {
    const std::size_t hop = frames_of(params.hop_s, sample_rate_hz);
    const std::size_t win = frames_of(params.frame_s, sample_rate_hz);
    const std::size_t count = (x.size() + hop - 1) / hop;
    std::vector<double> ms(count, 0.0);
    for (std::size_t f = 0; f < count; ++f) {
        const std::size_t begin = f * hop;
        const std::size_t end = std::min(x.size(), begin + win);
        double sum_sq = 0.0;
        for (std::size_t i = begin; i < end; ++i) sum_sq += squared(x[i]);
        ms[f] = sum_sq / static_cast<double>(win);
    }
    const double peak = ms.empty() ? 0.0 : *std::max_element(ms.begin(), ms.end());
    std::vector<double> level(count);
    if (!(peak > 0.0)) return level;  // silent: a flat envelope
    const double floor_ms = peak * db_to_power(-params.floor_below_peak_db);
    for (std::size_t f = 0; f < count; ++f) level[f] = power_to_db(std::max(ms[f], floor_ms));
    return level;
}

std::vector<double> onset_strength(std::span<const double> level_db, std::size_t lookback_frames) {
    assert(lookback_frames >= 1);
    std::vector<double> out(level_db.size(), 0.0);
    if (level_db.empty()) return out;
    // Before the first frame the level is the envelope's floor (its minimum: the floor itself
    // whenever the signal is quiet anywhere), so a signal that starts at full level has its onset
    // at frame 0.
    const double before_db = *std::min_element(level_db.begin(), level_db.end());
    for (std::size_t f = 0; f < level_db.size(); ++f) {
        double recent_max_db = f < lookback_frames ? before_db : -infinity;
        for (std::size_t g = f > lookback_frames ? f - lookback_frames : 0; g < f; ++g) {
            recent_max_db = std::max(recent_max_db, level_db[g]);
        }
        out[f] = std::max(0.0, level_db[f] - recent_max_db);
    }
    return out;
}

std::size_t find_onset_frames(std::span<const float> x, double sample_rate_hz, const align_onset_params& params) {
    const std::vector<double> level = level_envelope_db(x, sample_rate_hz, params);
    if (level.empty()) return 0;
    const double peak_db = *std::max_element(level.begin(), level.end());
    const std::size_t hop = frames_of(params.hop_s, sample_rate_hz);
    for (std::size_t f = 0; f < level.size(); ++f) {
        if (level[f] >= peak_db - params.threshold_below_peak_db) return f * hop;
    }
    return 0;
}

alignment align_onsets(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                       const align_onset_params& params) {
    alignment out;
    const std::size_t hop = frames_of(params.hop_s, sample_rate_hz);
    const std::size_t lookback = std::max<std::size_t>(1, frames_of(params.rise_lookback_s, sample_rate_hz) / hop);
    const std::vector<double> oa = onset_strength(level_envelope_db(a, sample_rate_hz, params), lookback);
    const std::vector<double> ob = onset_strength(level_envelope_db(b, sample_rate_hz, params), lookback);
    out.onset_a_frames = find_onset_frames(a, sample_rate_hz, params);

    // Coarse: c[l] = sum_k oa[k] ob[k + l], l in envelope hops; ties go to the smallest |l|.
    const std::ptrdiff_t max_lag = static_cast<std::ptrdiff_t>(frames_of(params.max_lag_s, sample_rate_hz) / hop);
    double best = -1.0;
    std::ptrdiff_t best_lag = 0;
    for (std::ptrdiff_t mag = 0; mag <= max_lag; ++mag) {
        for (const std::ptrdiff_t l : {mag, -mag}) {
            double c = 0.0;
            for (std::size_t k = 0; k < oa.size(); ++k) {
                const std::ptrdiff_t j = static_cast<std::ptrdiff_t>(k) + l;
                if (j >= 0 && j < static_cast<std::ptrdiff_t>(ob.size())) c += oa[k] * ob[static_cast<std::size_t>(j)];
            }
            if (c > best) { best = c; best_lag = l; }
            if (mag == 0) break;
        }
    }
    out.coarse_lag_frames = best_lag * static_cast<std::ptrdiff_t>(hop);

    // Fine: normalised waveform correlation over [onset_a - hop, onset_a + refine window), lags
    // within one RMS window plus two hops of the coarse lag (an attack spread over two envelope
    // frames can put the coarse lag off by about that); ties go to the one closest to the coarse lag.
    const std::ptrdiff_t w_begin = static_cast<std::ptrdiff_t>(out.onset_a_frames) - static_cast<std::ptrdiff_t>(hop);
    const std::ptrdiff_t w_end = static_cast<std::ptrdiff_t>(out.onset_a_frames + frames_of(params.refine_window_s, sample_rate_hz));
    double energy_a = 0.0;
    for (std::ptrdiff_t n = w_begin; n < w_end; ++n) energy_a += sample_at(a, n) * sample_at(a, n);
    const std::ptrdiff_t search = static_cast<std::ptrdiff_t>(frames_of(params.frame_s, sample_rate_hz) + 2 * hop);
    double best_corr = -infinity;
    std::ptrdiff_t best_fine = out.coarse_lag_frames;
    for (std::ptrdiff_t mag = 0; mag <= search; ++mag) {
        for (const std::ptrdiff_t d : {mag, -mag}) {
            const std::ptrdiff_t l = out.coarse_lag_frames + d;
            double cross = 0.0, energy_b = 0.0;
            for (std::ptrdiff_t n = w_begin; n < w_end; ++n) {
                const double vb = sample_at(b, n + l);
                cross += sample_at(a, n) * vb;
                energy_b += vb * vb;
            }
            const double corr = energy_a > 0.0 && energy_b > 0.0 ? cross / std::sqrt(energy_a * energy_b) : 0.0;
            if (corr > best_corr) { best_corr = corr; best_fine = l; }
            if (mag == 0) break;
        }
    }
    out.lag_frames = best_fine;
    out.waveform_correlation = best_corr;
    return out;
}

std::vector<float> shift_by_lag(std::span<const float> b, std::ptrdiff_t lag_frames, std::size_t out_frames) {
    std::vector<float> out(out_frames, 0.0f);
    for (std::size_t n = 0; n < out_frames; ++n) {
        const std::ptrdiff_t j = static_cast<std::ptrdiff_t>(n) + lag_frames;
        if (j >= 0 && j < static_cast<std::ptrdiff_t>(b.size())) out[n] = b[static_cast<std::size_t>(j)];
    }
    return out;
}

}  // namespace wane
