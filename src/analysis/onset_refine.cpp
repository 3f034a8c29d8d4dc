#include "analysis/onset_refine.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <vector>

#include "core/units.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

/// Energy of a mode over its first count samples: |amp|^2 / 2 * sum exp(-2 d n / fs).
double mode_energy(const damped_mode& m, double sample_rate_hz, double count) {
    return 0.5 * std::norm(m.amp) * geometric_sum({-2.0 * m.decay_per_s / sample_rate_hz, 0.0}, count).real();
}

/// The decay segments of env from time_s on (absolute until_s kept), as straight pieces.
std::vector<decay_segment> segments_from(const envelope& env, double time_s) {
    std::vector<decay_segment> out;
    for (const envelope_piece& piece : envelope_pieces(env)) {
        if (piece.end_s <= time_s) continue;
        decay_segment seg{.t60_s = slope_db_per_s_to_t60(piece.slope_db_per_s), .until_s = std::nullopt};
        if (std::isfinite(piece.end_s)) seg.until_s = piece.end_s;
        out.push_back(seg);
    }
    if (!out.empty()) out.back().until_s.reset();
    return out;
}

/// First time in [from_s, to_s] (1 ms steps) where the line level0 + slope t crosses env's level.
std::optional<double> crossing_time(const envelope& env, double level0_db, double slope_db_per_s, double from_s,
                                    double to_s) {
    constexpr double step_s = 0.001;
    const auto diff = [&](double t) { return level0_db + slope_db_per_s * t - envelope_level(env, t).db; };
    double prev = diff(from_s);
    for (double t = from_s + step_s; t <= to_s; t += step_s) {
        const double d = diff(t);
        if ((prev > 0.0) != (d > 0.0)) {
            // Linear interpolation between the two samples of the difference.
            return t - step_s * d / (d - prev);
        }
        prev = d;
    }
    return std::nullopt;
}

/// New envelope: instant onset at level0_db with the early slope, joined to the old envelope where
/// the two cross before params.join_search_s; else the early line runs to the end of the fit span
/// and a bridge reaches the old envelope bridge_s later.
envelope joined_envelope(const envelope& old, double level0_db, double slope_db_per_s, const onset_refine_params& params) {
    envelope env{.attack_s = 0.0, .peak = level_db{level0_db}, .decay = {}};
    const double from_s = std::max(old.attack_s, 0.002);
    const double early_t60 = slope_db_per_s_to_t60(slope_db_per_s);
    if (const auto t = crossing_time(old, level0_db, slope_db_per_s, from_s, params.join_search_s)) {
        env.decay.push_back({.t60_s = early_t60, .until_s = *t});
        for (const auto& seg : segments_from(old, *t)) env.decay.push_back(seg);
    } else {
        const double early_end_s = params.fit_span_s;
        const double join_s = std::max(old.attack_s, early_end_s) + params.bridge_s;
        const double early_end_db = level0_db + slope_db_per_s * early_end_s;
        const double bridge_slope = (envelope_level(old, join_s).db - early_end_db) / (join_s - early_end_s);
        env.decay.push_back({.t60_s = early_t60, .until_s = early_end_s});
        env.decay.push_back({.t60_s = slope_db_per_s_to_t60(bridge_slope), .until_s = join_s});
        for (const auto& seg : segments_from(old, join_s)) env.decay.push_back(seg);
    }
    if (env.decay.size() == 1) env.decay.back().until_s.reset();
    return env;
}

/// Slope of the envelope's first decay segment (dB/s).
double first_slope_db_per_s(const envelope& env) {
    return env.decay.empty() ? 0.0 : t60_to_slope_db_per_s(env.decay.front().t60_s);
}

bool same_mode(double a_hz, double b_hz, const onset_refine_params& params) {
    const double tol = std::max(params.same_mode_hz, std::min(a_hz, b_hz) * (std::exp2(params.same_mode_cents / 1200.0) - 1.0));
    return std::abs(a_hz - b_hz) <= tol;
}

}  // namespace

static double envd(const char* name, double def) { const char* v = std::getenv(name); return v ? std::atof(v) : def; }

namespace {

double signal_energy(std::span<const float> x) {
    double e = 0.0;
    for (float v : x) e += double(v) * double(v);
    return e;
}

/// The partials of p (by index) rendered over the first count samples at sample_rate_hz, with
/// their envelopes as they are (the ones the waveform fit leaves alone).
std::vector<float> render_fixed(const patch& p, std::span<const std::size_t> which, double sample_rate_hz,
                                std::size_t count) {
    patch fixed{.note = p.note, .source = p.source, .partials = {}, .noise = {}};
    fixed.note.gain_db = 0.0;
    for (std::size_t k : which) fixed.partials.push_back(p.partials[k]);
    // Longer than the span so the render's end fade falls outside it.
    fixed.note.length_s = static_cast<double>(count) / sample_rate_hz + 2.0 * end_fade_s + 0.01;
    std::vector<float> out = render_patch(fixed, {.sample_rate_hz = sample_rate_hz, .include_noise = false});
    out.resize(count);
    return out;
}

}  // namespace

onset_refine_summary refine_onset(patch& p, std::span<const float> note, double sample_rate_hz, double f0_hz,
                                  const onset_refine_params& params_in) {
    onset_refine_params params = params_in;
    params.fit_span_s = envd("W_SPAN", params.fit_span_s);
    params.subbands.esprit.max_order = int(envd("W_ORDER", params.subbands.esprit.max_order));
    params.subbands.esprit.dimension = int(envd("W_DIM", params.subbands.esprit.dimension));
    params.subbands.esprit.signal_over_noise = envd("W_SNR", params.subbands.esprit.signal_over_noise);
    params.bands_per_f0 = envd("W_BPF", params.bands_per_f0);
    params.new_mode_range_db = envd("W_RANGE", params.new_mode_range_db);
    params.subbands.span_s = envd("W_SUBSPAN", params.subbands.span_s);
    params.max_new_t60_s = envd("W_MAXT60", params.max_new_t60_s);
    assert(sample_rate_hz > 0.0);
    onset_refine_summary summary;
    const auto fit_n = std::min(note.size(), static_cast<std::size_t>(params.fit_span_s * sample_rate_hz));
    if (fit_n < 64 || p.partials.empty()) return summary;
    const double span_s = static_cast<double>(fit_n) / sample_rate_hz;
    // Modes closer than this cannot be told apart on the span (one Fourier resolution cell).
    const double cluster_hz = envd("W_CLUSTER", 1.0) / span_s;
    const double near_factor = envd("W_NEAR", 2.0);

    subband_mode_params sub = params.subbands;
    sub.band_hz = f0_hz > 0.0 ? std::clamp(params.bands_per_f0 * f0_hz, params.min_band_hz, params.max_band_hz) : 1000.0;
    const std::vector<damped_mode> found = find_subband_modes(note, sample_rate_hz, sub);

    // Which partials the waveform fit may change: below Nyquist, and the strongest of any group
    // closer than cluster_hz (the others keep their envelopes and are subtracted as rendered).
    const std::size_t count_p = p.partials.size();
    std::vector<bool> fitted(count_p, true);
    for (std::size_t k = 0; k < count_p; ++k) {
        const partial& a = p.partials[k];
        if (a.freq_hz >= 0.5 * sample_rate_hz) fitted[k] = false;
        for (std::size_t j = 0; j < count_p && fitted[k]; ++j) {
            const partial& b = p.partials[j];
            if (j != k && std::abs(a.freq_hz - b.freq_hz) < cluster_hz &&
                (b.env.peak.db > a.env.peak.db || (b.env.peak.db == a.env.peak.db && j < k)))
                fitted[k] = false;
        }
    }
    // Early decay of each partial: a subband mode at the same frequency, else the envelope's first
    // segment.
    std::vector<double> decay(count_p);
    std::vector<bool> taken(found.size(), false);
    for (std::size_t k = 0; k < count_p; ++k) {
        const partial& part = p.partials[k];
        decay[k] = -first_slope_db_per_s(part.env) / db_per_neper;
        if (!fitted[k]) continue;
        std::size_t best = found.size();
        for (std::size_t j = 0; j < found.size(); ++j) {
            if (taken[j] || !same_mode(found[j].freq_hz, part.freq_hz, params)) continue;
            if (best == found.size() ||
                std::abs(found[j].freq_hz - part.freq_hz) < std::abs(found[best].freq_hz - part.freq_hz))
                best = j;
        }
        if (best < found.size()) {
            taken[best] = true;
            decay[k] = found[best].decay_per_s;
        }
    }
    // New modes: not near a partial (two resolution cells), decaying, not too fast to see.
    std::vector<damped_mode> new_modes;
    for (std::size_t j = 0; j < found.size(); ++j) {
        if (taken[j] || found[j].decay_per_s <= 0.0 || ln1000 / found[j].decay_per_s < params.min_new_t60_s ||
            ln1000 / found[j].decay_per_s > params.max_new_t60_s)
            continue;
        const bool near_partial = std::any_of(p.partials.begin(), p.partials.end(), [&](const partial& q) {
            return std::abs(q.freq_hz - found[j].freq_hz) < near_factor * cluster_hz;
        });
        if (!near_partial) new_modes.push_back(found[j]);
    }

    // How each partial enters the fit: as a damped exponential from t = 0 (an instant onset), with
    // the shape of its fitted envelope (a slow rise: only its level and phase are fitted), or as
    // rendered and subtracted (left alone).
    enum class role { exponential, shaped, fixed };
    std::vector<role> roles(count_p);
    for (std::size_t k = 0; k < count_p; ++k) roles[k] = fitted[k] ? role::exponential : role::fixed;
    const auto count = static_cast<double>(fit_n);
    std::vector<damped_mode> modes;
    std::vector<std::vector<double>> shapes;
    std::vector<std::size_t> partial_of;
    double residual = 1.0;
    // Up to three passes: the second fits the shape of the partials whose exponential start came
    // out as a slow rise (far under the STFT peak) or implausibly loud in the first; the third
    // leaves alone the shaped ones whose level would move by more than slow_rise_db.
    constexpr int passes = 3;
    for (int pass = 0; pass < passes; ++pass) {
        std::vector<std::size_t> fixed;
        modes.clear();
        shapes.clear();
        partial_of.clear();
        for (std::size_t k = 0; k < count_p; ++k) {
            const partial& part = p.partials[k];
            if (roles[k] == role::fixed) {
                fixed.push_back(k);
                continue;
            }
            modes.push_back({.freq_hz = part.freq_hz, .decay_per_s = decay[k]});
            shapes.emplace_back();
            if (roles[k] == role::shaped) {
                const double peak_amp = to_amp(part.env.peak).lin;
                shapes.back().resize(fit_n);
                for (std::size_t n = 0; n < fit_n; ++n)
                    shapes.back()[n] = envelope_amp(part.env, static_cast<double>(n) / sample_rate_hz).lin / peak_amp;
            }
            partial_of.push_back(k);
        }
        const std::size_t tracked = modes.size();
        modes.insert(modes.end(), new_modes.begin(), new_modes.end());
        shapes.resize(modes.size());
        std::vector<float> target(note.begin(), note.begin() + static_cast<std::ptrdiff_t>(fit_n));
        if (!fixed.empty()) {
            const std::vector<float> known = render_fixed(p, fixed, sample_rate_hz, fit_n);
            for (std::size_t n = 0; n < fit_n; ++n) target[n] -= known[n];
        }
        residual = fit_shaped_amplitudes(target, sample_rate_hz, modes, shapes) * signal_energy(target);
        if (pass == passes - 1) break;
        bool changed = false;
        for (std::size_t i = 0; i < tracked; ++i) {
            const partial& part = p.partials[partial_of[i]];
            const double level0 = to_level(amp_lin{std::abs(modes[i].amp)}).db;
            if (roles[partial_of[i]] == role::shaped) {
                if (std::abs(level0) > params.slow_rise_db) {
                    roles[partial_of[i]] = role::fixed;
                    changed = true;
                }
                continue;
            }
            const bool slow_rise = level0 < part.env.peak.db - params.slow_rise_db && part.env.attack_s > 0.0;
            if (slow_rise || !(level0 <= std::min(part.env.peak.db + 12.0, max_peak_db))) {
                roles[partial_of[i]] = role::shaped;
                changed = true;
            }
        }
        // Keep the new modes that carry energy within range of the strongest mode.
        double strongest = 0.0;
        for (const auto& m : modes) strongest = std::max(strongest, mode_energy(m, sample_rate_hz, count));
        const double keep = strongest * std::pow(10.0, -params.new_mode_range_db / 10.0);
        std::vector<damped_mode> kept;
        for (std::size_t i = tracked; i < modes.size(); ++i)
            if (mode_energy(modes[i], sample_rate_hz, count) >= keep && std::abs(modes[i].amp) <= 1.0) kept.push_back(modes[i]);
        changed = changed || kept.size() != new_modes.size();
        new_modes = kept;
        if (!changed) break;
    }
    const double energy = signal_energy(note.first(fit_n));
    summary.explained_db = energy > 0.0 ? power_to_db(energy / std::max(residual, 1e-30 * energy)) : 0.0;

    const std::size_t tracked = partial_of.size();
    for (std::size_t i = 0; i < tracked; ++i) {
        partial& part = p.partials[partial_of[i]];
        const damped_mode& m = modes[i];
        if (std::abs(m.amp) <= 0.0) continue;
        if (roles[partial_of[i]] == role::shaped) {
            const double scale_db = to_level(amp_lin{std::abs(m.amp)}).db;
            const double level = part.env.peak.db + scale_db;
            if (std::abs(scale_db) > params.slow_rise_db || !(level <= max_peak_db)) continue;
            part.env.peak = level_db{level};
        } else {
            part.env = joined_envelope(part.env, to_level(amp_lin{std::abs(m.amp)}).db, -db_per_neper * m.decay_per_s, params);
        }
        part.phase_rad = std::arg(m.amp);
        ++summary.refined;
    }
    for (std::size_t i = tracked; i < modes.size(); ++i) {
        const damped_mode& m = modes[i];
        const double level0 = to_level(amp_lin{std::abs(m.amp)}).db;
        if (!(level0 < max_peak_db)) continue;
        p.partials.push_back({.freq_hz = m.freq_hz, .harmonic = 0, .phase_rad = std::arg(m.amp),
                              .env = {.attack_s = 0.0, .peak = level_db{level0},
                                      .decay = {{.t60_s = ln1000 / m.decay_per_s, .until_s = std::nullopt}}}});
        ++summary.new_modes;
    }
    return summary;
}

}  // namespace wane
