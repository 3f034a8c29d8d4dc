#include "analysis/onset_refine.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <optional>
#include <utility>
#include <vector>

#include "analysis/early_companion.hpp"
#include "analysis/new_mode_rule.hpp"
#include "analysis/onset_attack.hpp"
#include "analysis/onset_start.hpp"
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
    const auto steps = static_cast<int>(std::floor((to_s - from_s) / step_s));
    for (int i = 1; i <= steps; ++i) {
        const double t = from_s + step_s * i;
        const double d = diff(t);
        if ((prev > 0.0) != (d > 0.0)) {
            // Linear interpolation between the two samples of the difference.
            return t - step_s * d / (d - prev);
        }
        prev = d;
    }
    return std::nullopt;
}

/// New envelope: a rise over attack_s (0: instant) to level0_db, then the early slope, joined to
/// the old envelope where the two cross before params.join_search_s; else the early line runs to
/// the end of the fit span and a bridge reaches the old envelope bridge_s later.
envelope joined_envelope(const envelope& old, double attack_s, double level0_db, double slope_db_per_s,
                         const onset_refine_params& params) {
    // The early line after the attack, as level(t) = line0_db + slope t.
    const double line0_db = level0_db - slope_db_per_s * attack_s;
    // An instant onset the STFT fit already has, within agree_db of the early line over the fit
    // span, stays as it is (no extra segments for a difference that small).
    if (old.attack_s == 0.0 && attack_s == 0.0) {
        double worst = 0.0;
        constexpr double step_s = 0.005;
        const auto steps = static_cast<int>(std::floor(params.fit_span_s / step_s));
        for (int i = 0; i <= steps; ++i) {
            const double t = step_s * i;
            worst = std::max(worst, std::abs(level0_db + slope_db_per_s * t - envelope_level(old, t).db));
        }
        if (worst <= params.agree_db) return old;
    }
    envelope env{.attack_s = attack_s, .peak = level_db{level0_db}, .decay = {}};
    const double from_s = std::max({old.attack_s, attack_s, 0.002});
    const double early_t60 = slope_db_per_s_to_t60(slope_db_per_s);
    if (const auto t = crossing_time(old, line0_db, slope_db_per_s, from_s, params.join_search_s)) {
        env.decay.push_back({.t60_s = early_t60, .until_s = *t});
        for (const auto& seg : segments_from(old, *t)) env.decay.push_back(seg);
    } else {
        const double early_end_s = std::max(params.fit_span_s, attack_s);
        const double join_s = std::max(old.attack_s, early_end_s) + params.bridge_s;
        const double early_end_db = line0_db + slope_db_per_s * early_end_s;
        const double bridge_slope = (envelope_level(old, join_s).db - early_end_db) / (join_s - early_end_s);
        env.decay.push_back({.t60_s = early_t60, .until_s = early_end_s});
        env.decay.push_back({.t60_s = slope_db_per_s_to_t60(bridge_slope), .until_s = join_s});
        for (const auto& seg : segments_from(old, join_s)) env.decay.push_back(seg);
    }
    if (env.decay.size() == 1) env.decay.back().until_s.reset();
    return env;
}

/// env (from joined_envelope: a linear attack over the rise, then its lines) with the attack
/// replaced by an instant start at start_ratio of the peak that rises through the linear ramp's
/// knots in straight dB segments, as attack_shape (analysis/onset_attack.hpp) fitted it.
envelope instant_rise(envelope env, const attack_choice& a, double sample_rate_hz) {
    const double peak_db = env.peak.db;
    const auto level_at = [&](int k) { return peak_db + to_level(amp_lin{rise_knot_ratio(a.start_ratio, k)}).db; };
    const auto time_at = [&](int k) { return static_cast<double>(rise_knot(a.rise_n, k)) / sample_rate_hz; };
    std::vector<decay_segment> decay;
    for (int k = 0; k < rise_segments; ++k) {
        const double span_s = time_at(k + 1) - time_at(k);
        if (!(span_s > 0.0)) continue;
        // A straight dB segment rising r dB over d seconds has t60_s = -60 d / r.
        decay.push_back({.t60_s = -60.0 * span_s / (level_at(k + 1) - level_at(k)), .until_s = time_at(k + 1)});
    }
    decay.insert(decay.end(), env.decay.begin(), env.decay.end());
    env.decay = std::move(decay);
    env.attack_s = 0.0;
    env.peak = level_db{level_at(0)};
    return env;
}

bool same_mode(double a_hz, double b_hz, const onset_refine_params& params) {
    const double tol = std::max(params.same_mode_hz, std::min(a_hz, b_hz) * (std::exp2(params.same_mode_cents / 1200.0) - 1.0));
    return std::abs(a_hz - b_hz) <= tol;
}

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

/// How a partial enters the waveform fit: as a damped exponential from t = 0 (an instant onset),
/// with the shape of its fitted envelope (a slow rise: only its level and phase are fitted), or as
/// rendered and subtracted (left alone).
enum class role { exponential, shaped, fixed };

/// The loudest level of env over [0, span_s], sampled every 5 ms and at the attack's end.
double span_peak_db(const envelope& env, double span_s) {
    double peak = envelope_level(env, std::min(env.attack_s, span_s)).db;
    for (int i = 0; i <= static_cast<int>(span_s / 0.005); ++i) peak = std::max(peak, envelope_level(env, 0.005 * i).db);
    return peak;
}

/// The partials the waveform fit may change: below Nyquist, no other within cluster_hz but ones
/// twin_ignore_db under it over the span, at another frequency. A close group (a beating pair, or
/// two stages of one sinusoid) stays as rendered: the span cannot tell its members apart.
std::vector<role> initial_roles(const patch& p, double sample_rate_hz, double cluster_hz,
                                const onset_refine_params& params) {
    const std::size_t count = p.partials.size();
    std::vector<role> roles(count, role::exponential);
    std::vector<double> peak_db(count);
    for (std::size_t k = 0; k < count; ++k) peak_db[k] = span_peak_db(p.partials[k].env, params.fit_span_s);
    for (std::size_t k = 0; k < count; ++k) {
        if (p.partials[k].freq_hz >= 0.5 * sample_rate_hz) roles[k] = role::fixed;
        for (std::size_t j = 0; j < count && roles[k] != role::fixed; ++j) {
            const double apart_hz = std::abs(p.partials[k].freq_hz - p.partials[j].freq_hz);
            if (j != k && apart_hz < cluster_hz && (apart_hz == 0.0 || peak_db[j] > peak_db[k] - params.twin_ignore_db))
                roles[k] = role::fixed;
        }
    }
    return roles;
}

/// Early decay of each partial: a subband mode at the same frequency (marked taken), else the
/// envelope's first segment.
std::vector<double> early_decays(const patch& p, std::span<const role> roles, std::span<const damped_mode> found,
                                 std::vector<bool>& taken, const onset_refine_params& params) {
    std::vector<double> decay(p.partials.size());
    for (std::size_t k = 0; k < p.partials.size(); ++k) {
        const partial& part = p.partials[k];
        // The slope of the envelope's first decay segment (dB/s), in nepers per second.
        decay[k] = -(part.env.decay.empty() ? 0.0 : t60_to_slope_db_per_s(part.env.decay.front().t60_s)) / db_per_neper;
        if (roles[k] == role::fixed) continue;
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
    return decay;
}

/// One least-squares fit of the first fit_n samples with the partials in their roles plus the new
/// modes (appended after the partials' modes); the fixed partials are rendered and subtracted.
struct waveform_fit {
    std::vector<damped_mode> modes;
    std::vector<double> energy;  ///< of each fitted mode over the span: sum of its samples squared
    std::vector<mode_shape> shapes;  ///< of each mode (empty: exponential from t = 0)
    std::vector<float> target;       ///< the span minus the fixed partials

    std::vector<std::size_t> partial_of;  ///< partial index of modes[i], i < partial_of.size()
    double residual_energy = 0.0;
};

waveform_fit fit_waveform(const patch& p, std::span<const float> note, double sample_rate_hz, std::size_t fit_n,
                          std::span<const role> roles, std::span<const double> decay, std::span<const attack_choice> attacks,
                          std::span<const damped_mode> new_modes, plain_gram_factor* first_system, shaped_fit_memo* memo) {
    waveform_fit f;
    std::vector<mode_shape>& shapes = f.shapes;
    std::vector<std::size_t> fixed;
    for (std::size_t k = 0; k < p.partials.size(); ++k) {
        const partial& part = p.partials[k];
        if (roles[k] == role::fixed) {
            fixed.push_back(k);
            continue;
        }
        f.modes.push_back({.freq_hz = part.freq_hz, .decay_per_s = decay[k]});
        // A shaped partial's amplitude is its envelope's, so its fitted amp is a scale (1: as fitted).
        // An exponential one may rise over its chosen attack (analysis/onset_attack.hpp).
        if (roles[k] == role::shaped)
            shapes.push_back(envelope_shape(part.env, sample_rate_hz, fit_n));
        else
            shapes.push_back(attacks[k].rise_n > 0 ? attack_shape(attacks[k], -decay[k] / sample_rate_hz, fit_n) : mode_shape{});
        f.partial_of.push_back(k);
    }
    f.modes.insert(f.modes.end(), new_modes.begin(), new_modes.end());
    shapes.resize(f.modes.size());
    std::vector<float>& target = f.target;
    target.assign(note.begin(), note.begin() + static_cast<std::ptrdiff_t>(fit_n));
    if (!fixed.empty()) {
        const std::vector<float> known = render_fixed(p, fixed, sample_rate_hz, fit_n);
        for (std::size_t n = 0; n < fit_n; ++n) target[n] -= known[n];
    }
    f.residual_energy = fit_shaped_amplitudes(target, sample_rate_hz, f.modes, shapes, 1e-9, first_system, memo) * signal_energy(target);
    const auto count = static_cast<double>(fit_n);
    for (std::size_t i = 0; i < f.modes.size(); ++i)
        f.energy.push_back(shapes[i].empty() ? mode_energy(f.modes[i], sample_rate_hz, count)
                                             : 0.5 * std::norm(f.modes[i].amp) * shape_pair_sum(shapes[i], shapes[i], {}).real());
    return f;
}

/// One way through the passes: the roles, new modes and attacks it has reached, and its last fit.
struct fit_path {
    std::vector<role> roles;
    std::vector<damped_mode> new_modes;
    std::vector<attack_choice> attacks;
    waveform_fit f;
    std::vector<double> joint;  ///< joint_residual of f where the pass that made f computed it, else empty
};

/// After a pass: exponential starts that came out as a slow rise (far under the STFT peak) or
/// implausibly loud (the recording not holding them: heard_at_fitted_level) become shaped; shaped ones
/// whose level would move by more than slow_rise_db become fixed; new modes too weak or too loud are dropped.
bool revise_roles(const patch& p, std::span<const float> note, const waveform_fit& f, std::span<const double> joint, std::vector<role>& roles,
                  std::vector<damped_mode>& new_modes, double sample_rate_hz, const onset_refine_params& params) {
    bool changed = false;
    for (std::size_t i = 0; i < f.partial_of.size(); ++i) {
        const std::size_t k = f.partial_of[i];
        const partial& part = p.partials[k];
        const double level0 = to_level(amp_lin{std::abs(f.modes[i].amp)}).db;
        if (roles[k] == role::shaped) {
            if (std::abs(level0) > params.slow_rise_db) roles[k] = role::fixed, changed = true;
            continue;
        }
        const bool slow_rise = level0 < part.env.peak.db - params.slow_rise_db && part.env.attack_s > 0.0 && part.env.attack_s <= params.max_shaped_attack_s;
        const bool loud = !(level0 <= std::min(part.env.peak.db + 12.0, max_peak_db)) && !heard_at_fitted_level(note, f.target, sample_rate_hz, f.modes[i], level0, params);
        if (slow_rise || loud) roles[k] = role::shaped, changed = true;
    }
    std::vector<damped_mode> kept = kept_new_modes(f.target, sample_rate_hz, f.modes, f.shapes, f.energy, f.partial_of.size(), params, joint);
    changed = changed || kept.size() != new_modes.size();
    new_modes = std::move(kept);
    return changed;
}

/// The attack of each exponential partial, searched on the residual of fit f (analysis/onset_attack.hpp;
/// joint: f's residual, joint_residual, or empty); attacks is per partial. Alone: as if the fit had
/// no new modes (they stay in the residual; joint is not used). memo: the attack shapes' Gram sums,
/// kept for every search of the refinement (attack_gram_memo). True when any changed.
bool update_attacks(const patch& p, const waveform_fit& f, std::span<const double> joint, std::span<const role> roles,
                    double sample_rate_hz, const onset_attack_params& params, std::vector<attack_choice>& attacks,
                    attack_gram_memo& memo, bool alone = false) {
    const std::size_t seen = alone ? f.partial_of.size() : f.modes.size();
    std::vector<std::size_t> may_rise, may_swell;
    std::vector<attack_choice> per_mode(seen);
    for (std::size_t i = 0; i < f.partial_of.size(); ++i) {
        if (roles[f.partial_of[i]] == role::exponential) may_rise.push_back(i);
        // A rise shown by the recording: the STFT fit has an attack or a rising first segment.
        const envelope& env = p.partials[f.partial_of[i]].env;
        if (roles[f.partial_of[i]] == role::exponential &&
            (env.attack_s > 0.0 || (!env.decay.empty() && env.decay.front().t60_s < 0.0)))
            may_swell.push_back(i);
        per_mode[i] = attacks[f.partial_of[i]];
    }
    const std::vector<attack_choice> chosen =
        choose_attacks(f.target, sample_rate_hz, std::span(f.modes).first(seen), std::span(f.shapes).first(seen),
                       std::span(f.energy).first(seen), may_rise, may_swell, per_mode, params,
                       alone ? std::span<const double>{} : joint, &memo);
    bool changed = false;
    for (const std::size_t i : may_rise) {
        changed = changed || chosen[i] != per_mode[i];
        attacks[f.partial_of[i]] = chosen[i];
    }
    return changed;
}

/// Partials that start better with their STFT shape beside an early companion take it (become shaped,
/// analysis/early_companion.hpp); the companions join one last fit only (apply_fit leaves them out).
std::size_t take_stft_starts(fit_path& s, const patch& p, std::span<const float> note, std::span<const double> decay, shaped_fit_memo& memo,
                             double span_energy, double sample_rate_hz, std::size_t fit_n, const early_companion_params& params) {
    const std::size_t own = s.f.partial_of.size();
    stft_starts stft;
    for (const std::size_t k : s.f.partial_of) add_stft_start(stft, p.partials[k].env, s.roles[k] == role::exponential, sample_rate_hz, fit_n);
    if (s.joint.empty()) s.joint = joint_residual(s.f.target, sample_rate_hz, s.f.modes, s.f.shapes);
    const stft_switch found = choose_stft_starts(s.joint, sample_rate_hz,
                                                 std::span(s.f.modes).first(own), std::span(s.f.shapes).first(own), stft,
                                                 std::span(s.f.energy).first(own), span_energy, params);
    for (const std::size_t i : found.partials) s.roles[s.f.partial_of[i]] = role::shaped;
    s.new_modes.insert(s.new_modes.end(), found.companions.begin(), found.companions.end());
    if (!found.companions.empty())
        s.f = fit_waveform(p, note, sample_rate_hz, fit_n, s.roles, decay, s.attacks, s.new_modes, nullptr, &memo), s.joint.clear();
    return found.companions.size();
}

/// Writes the fitted starts into the partials and appends the new modes as partials.
void apply_fit(patch& p, const waveform_fit& f, std::span<const role> roles, std::span<const attack_choice> attacks,
               double sample_rate_hz, const onset_refine_params& params, onset_refine_summary& summary, std::size_t companions) {
    for (std::size_t i = 0; i < f.partial_of.size(); ++i) {
        partial& part = p.partials[f.partial_of[i]];
        const damped_mode& m = f.modes[i];
        if (std::abs(m.amp) <= 0.0) continue;
        if (roles[f.partial_of[i]] == role::shaped) {
            const double scale_db = to_level(amp_lin{std::abs(m.amp)}).db;
            const double level = part.env.peak.db + scale_db;
            if (std::abs(scale_db) > params.slow_rise_db || !(level <= max_peak_db)) continue;
            part.env.peak = level_db{level};
        } else {
            const attack_choice& a = attacks[f.partial_of[i]];
            const double attack_s = static_cast<double>(a.rise_n) / sample_rate_hz;
            part.env = joined_envelope(part.env, attack_s, to_level(amp_lin{std::abs(m.amp)}).db,
                                       -db_per_neper * m.decay_per_s, params);
            if (a.start_ratio > 0.0 && a.rise_n > 0) part.env = instant_rise(part.env, a, sample_rate_hz);
        }
        part.phase_rad = std::arg(m.amp);
        ++summary.refined;
    }
    for (std::size_t i = f.partial_of.size(); i + companions < f.modes.size(); ++i) {  // the companions come later
        const damped_mode& m = f.modes[i];
        const double level0 = to_level(amp_lin{std::abs(m.amp)}).db;
        if (!(level0 < max_peak_db)) continue;
        p.partials.push_back({.freq_hz = m.freq_hz, .harmonic = 0, .phase_rad = std::arg(m.amp),
                              .env = {.attack_s = 0.0, .peak = level_db{level0},
                                      .decay = {{.t60_s = ln1000 / m.decay_per_s, .until_s = std::nullopt}}},
                              .place = {}});
        ++summary.new_modes;
    }
}

}  // namespace

onset_refine_summary refine_onset(patch& p, std::span<const float> note, double sample_rate_hz,
                                  const onset_refine_params& params) {
    assert(sample_rate_hz > 0.0);
    onset_refine_summary summary;
    const auto fit_n = std::min(note.size(), static_cast<std::size_t>(params.fit_span_s * sample_rate_hz));
    if (fit_n < 64 || p.partials.empty()) return summary;
    // Modes closer than this cannot be told apart on the span (one Fourier resolution cell).
    const double cluster_hz = sample_rate_hz / static_cast<double>(fit_n);
    const subband_mode_params& sub = params.subbands;
    const subband_signals signals = make_subband_signals(note, sample_rate_hz, sub);
    const std::vector<damped_mode> found = subband_modes(signals, sub, sub.span_s);
    std::vector<role> roles = initial_roles(p, sample_rate_hz, cluster_hz, params);
    std::vector<bool> taken(found.size(), false);
    const std::vector<double> decay = early_decays(p, roles, found, taken, params);
    const auto candidates = lasting_modes(new_mode_candidates(p, found, taken, cluster_hz, params), note, sample_rate_hz, fit_n, params);
    // The stability check of modal analysis: a resonance is found again, at the same frequency and
    // decay, on a shorter span; poles that fit noise move. Only the candidates' bands are searched.
    std::vector<double> near_hz;
    near_hz.reserve(candidates.size());
    for (const damped_mode& c : candidates) near_hz.push_back(c.freq_hz);
    const double tol_hz = params.stable_freq_cells * cluster_hz;
    const std::vector<damped_mode> again =
        near_hz.empty() ? std::vector<damped_mode>{}
                        : subband_modes(signals, sub, params.stable_span_fraction * sub.span_s, near_hz, tol_hz);
    std::vector<damped_mode> new_modes = stable_modes(candidates, again, cluster_hz, params);
    // The first pass fits the partials not fixed and the new modes, all plain: its system is
    // factored once, for that fit and (extended) for the start search.
    std::vector<std::size_t> fitted;
    for (std::size_t k = 0; k < p.partials.size(); ++k)
        if (roles[k] != role::fixed) fitted.push_back(k);
    plain_gram_factor first_fit = first_fit_factor(p, fitted, decay, new_modes, sample_rate_hz, fit_n);
    // The modes' start at sample resolution; the phases of the partials the fit leaves alone then
    // count from it (cos(2 pi f (t + shift) + phase)).
    summary.start_shift_n = modes_start(p, note, sample_rate_hz, fit_n, decay, new_modes,
                                        {.max_shift_s = params.max_start_shift_s,
                                         .rising_partials = params.attacks.max_rising_partials,
                                         .rise_decay_per_s = params.start_rise_decay_per_s,
                                         .first_fit = &first_fit, .fitted_partials = fitted});
    if (summary.start_shift_n > 0) {
        note = note.subspan(summary.start_shift_n);
        const double shift_s = static_cast<double>(summary.start_shift_n) / sample_rate_hz;
        for (partial& q : p.partials) q.phase_rad = std::remainder(q.phase_rad + two_pi * q.freq_hz * shift_s, two_pi);
    }
    // Up to four passes, each revising the roles, attacks and new modes from the last. The first
    // pass's attacks are also searched on the partials alone (new modes may stand in for a
    // partial's rise): that way runs its own passes and wins by a clear margin of residual
    // (onset_refine_params::alone_attack_partials).
    constexpr int passes = 4;
    shaped_fit_memo memo;  // the last fit's Gram entries and projections, for the modes a pass keeps
    attack_gram_memo gram_memo;  // the attack shapes' Gram sums, for every attack search
    onset_attack_params alone_params = params.attacks;  // ramps only, for the strongest partials
    alone_params.max_partials = params.alone_attack_partials;
    alone_params.max_rising_partials = 0;
    const auto run = [&](fit_path& s, int first_pass, std::optional<fit_path>* other) {
        for (int pass = first_pass;; ++pass) {
            s.f = fit_waveform(p, note, sample_rate_hz, fit_n, s.roles, decay, s.attacks, s.new_modes, pass == 0 ? &first_fit : nullptr, &memo), s.joint.clear();
            if (pass == 0) first_fit = {};  // its memory (two 2K x 2K matrices) back
            if (pass == passes - 1) return;
            // The attacks are searched on this pass's residual (joint) and the roles revised from
            // it; the next pass fits both.
            const bool two_ways = params.search_attacks && params.alone_attack_partials > 0 && other != nullptr && !s.new_modes.empty();
            std::vector<attack_choice> alone = two_ways ? s.attacks : std::vector<attack_choice>{};
            s.joint = joint_residual(s.f.target, sample_rate_hz, s.f.modes, s.f.shapes);  // for both, and kept with f
            const bool attacks_changed = params.search_attacks && update_attacks(p, s.f, s.joint, s.roles, sample_rate_hz, params.attacks, s.attacks, gram_memo);
            if (two_ways) update_attacks(p, s.f, {}, s.roles, sample_rate_hz, alone_params, alone, gram_memo, true);
            const bool roles_changed = revise_roles(p, note, s.f, s.joint, s.roles, s.new_modes, sample_rate_hz, params);
            if (two_ways && alone != s.attacks && !s.new_modes.empty()) *other = fit_path{s.roles, s.new_modes, alone, {}, {}};
            other = nullptr;
            if (!attacks_changed && !roles_changed) return;
        }
    };
    fit_path s{.roles = std::move(roles), .new_modes = std::move(new_modes), .attacks = std::vector<attack_choice>(p.partials.size()), .f = {}, .joint = {}};
    std::optional<fit_path> other;
    run(s, 0, &other);
    if (other) run(*other, 1, nullptr);
    const double energy = signal_energy(note.first(fit_n));
    if (other && other->f.residual_energy < s.f.residual_energy - params.attacks.min_gain_share * energy) s = std::move(*other);
    const std::size_t companions = params.stft_starts ? take_stft_starts(s, p, note, decay, memo, energy, sample_rate_hz, fit_n, params.companions) : 0;
    summary.explained_db = energy > 0.0 ? power_to_db(energy / std::max(s.f.residual_energy, 1e-30 * energy)) : 0.0;
    apply_fit(p, s.f, s.roles, s.attacks, sample_rate_hz, params, summary, companions);
    return summary;
}

}  // namespace wane
