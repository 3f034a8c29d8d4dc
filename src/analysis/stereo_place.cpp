// Stereo analysis (see stereo_place.hpp).
#include "analysis/stereo_place.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <complex>
#include <numbers>
#include <optional>
#include <utility>
#include <vector>

#include "analysis/noise_model.hpp"
#include "analysis/peak_match.hpp"
#include "core/envelope.hpp"
#include "core/noise_bands.hpp"
#include "core/stereo.hpp"
#include "modes/damped_mode.hpp"
#include "modes/mode_shape.hpp"
#include "spectrum/stft.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

using cplx = std::complex<double>;
constexpr double two_pi = 2.0 * std::numbers::pi;
constexpr double ln10_over_20 = 0.11512925464970229;  // ln(10) / 20: dB/s -> 1/s of amplitude

/// Each partial's amplitude in one channel relative to the mix model over [t0_s, t0_s + span):
/// r = fitted complex amplitude / the model's (0 where the partial does not sound enough there).
struct channel_fit {
    std::vector<cplx> ratio;
    std::vector<bool> usable;
};

/// The partials' modes over the span: damped modes where the envelope is one straight dB piece
/// over the span, shaped modes (modes/mode_shape.hpp) elsewhere; model[k] is the mix model's
/// complex amplitude at t0 (for a shaped mode the shape carries the level: model is the phase).
struct span_model {
    std::vector<damped_mode> modes;
    std::vector<mode_shape> shapes;
    std::vector<cplx> model;
    std::vector<bool> usable;
};

/// env seen from t0_s on (t0_s becomes t = 0); empty when t0_s falls inside the attack.
std::optional<envelope> envelope_from(const envelope& env, double t0_s) {
    if (t0_s == 0.0) return env;
    if (t0_s < env.attack_s) return std::nullopt;
    envelope out;
    out.peak = envelope_level(env, t0_s);
    for (const decay_segment& seg : env.decay) {
        if (seg.until_s && *seg.until_s <= t0_s) continue;
        decay_segment moved = seg;
        if (moved.until_s) moved.until_s = *moved.until_s - t0_s;
        out.decay.push_back(moved);
    }
    return out;
}

span_model model_span(const patch& p, double t0_s, std::size_t n, double sample_rate_hz, double min_shape) {
    span_model m;
    const double span_s = static_cast<double>(n) / sample_rate_hz;
    constexpr int shape_probes = 16;  // points where the envelope is looked at for usable
    for (const partial& q : p.partials) {
        const double peak = to_amp(q.env.peak).lin;
        const double phase = q.phase_rad + two_pi * q.freq_hz * t0_s;
        const std::optional<envelope> env = envelope_from(q.env, t0_s);
        double shape_max = 0.0;
        for (int i = 0; i <= shape_probes; ++i)
            shape_max = std::max(shape_max, envelope_amp(q.env, t0_s + span_s * i / shape_probes).lin);
        const std::vector<envelope_piece> pieces = env ? envelope_pieces(*env) : std::vector<envelope_piece>{};
        const bool exponential = env && env->attack_s == 0.0 && !pieces.empty() && pieces.front().end_s >= span_s;
        const double a0 = env ? to_amp(env->peak).lin : 0.0;
        m.modes.push_back({.freq_hz = q.freq_hz,
                           .decay_per_s = exponential ? -pieces.front().slope_db_per_s * ln10_over_20 : 0.0,
                           .amp = {}});
        m.model.push_back(std::polar(exponential ? a0 : 1.0, phase));
        m.usable.push_back(env && peak > 0.0 && a0 >= 0.0 && shape_max >= min_shape * peak &&
                           q.freq_hz < sample_rate_hz / 2.0);
        m.shapes.push_back(env && !exponential ? envelope_shape(*env, sample_rate_hz, n) : mode_shape{});
    }
    return m;
}

channel_fit fit_channel(const span_model& m, std::span<const float> x, double sample_rate_hz) {
    std::vector<damped_mode> modes = m.modes;
    channel_fit out;
    // Modes at or above Nyquist are left out of the fit (their ratio stays 0, unusable).
    std::vector<damped_mode> fit_modes;
    std::vector<mode_shape> fit_shapes;
    std::vector<std::size_t> index;
    for (std::size_t k = 0; k < modes.size(); ++k) {
        if (!(modes[k].freq_hz < sample_rate_hz / 2.0)) continue;
        fit_modes.push_back(modes[k]);
        fit_shapes.push_back(m.shapes[k]);
        index.push_back(k);
    }
    out.ratio.assign(modes.size(), cplx{});
    out.usable = m.usable;
    if (!fit_modes.empty()) (void)fit_shaped_amplitudes(x, sample_rate_hz, fit_modes, fit_shapes);
    for (std::size_t i = 0; i < index.size(); ++i) {
        const std::size_t k = index[i];
        if (std::abs(m.model[k]) > 0.0) out.ratio[k] = fit_modes[i].amp / m.model[k];
    }
    return out;
}

/// The delay (s) congruent with the phase difference of the channel ratios (right minus left) that
/// lies nearest the reference delay.
double partial_delay_s(cplx left, cplx right, double freq_hz, double reference_s) {
    const double diff_rad = std::arg(right / left);  // (-pi, pi]
    const double d0 = -diff_rad / (two_pi * freq_hz);
    const double periods = std::round((reference_s - d0) * freq_hz);
    return d0 + periods / freq_hz;
}

double wrap_pi(double a) { return std::remainder(a, two_pi); }

/// Largest level change (dB) a channel fit may make to a partial's mix level before it is
/// distrusted (a hard pan moves it by +3.01 dB; this leaves room for fits that differ a little).
constexpr double max_level_change_db = 12.0;

/// Places partial q from its channel ratios; false when the ratios are not to be trusted.
bool place_partial(partial& q, cplx left, cplx right, double reference_s) {
    const double l = std::abs(left);
    const double r = std::abs(right);
    if (!(l + r > 0.0)) return false;
    const pan_and_level pl = pan_of_amplitudes(l, r);
    if (!(std::abs(pl.level_db) <= max_level_change_db)) return false;
    const double delay_s = l > 0.0 && r > 0.0 ? partial_delay_s(left, right, q.freq_hz, reference_s) : 0.0;
    q.env.peak.db += pl.level_db;
    q.place.pan = pl.pan;
    q.place.delay_us = std::clamp(delay_s * 1e6, -max_abs_delay_us, max_abs_delay_us);
    // Centre phase: the left's phase minus half the delay's phase (stereo.hpp).
    const double left_phase = q.phase_rad + (l > 0.0 ? std::arg(left) : std::arg(right));
    q.phase_rad = wrap_pi(left_phase - std::numbers::pi * q.freq_hz * delay_s);
    return true;
}

struct drift_span {  ///< one span's midpoint (s) and channel fits (none where the note ends before it)
    double mid_s = 0.0;
    std::optional<std::pair<channel_fit, channel_fit>> fit;
};

/// Partial k's place over the note from the spans where it sounds: its mix envelope within audible_db
/// of its first span's level, neither channel 60 dB under the other (mix: the partial as fitted on the mix).
void place_over_spans(partial& q, const partial& mix, const std::vector<drift_span>& spans, std::size_t k,
                      const stereo_place_params& params) {
    constexpr double min_ratio = 1e-3;  // a channel 60 dB under the other: no level difference to follow
    const double top_db = envelope_level(mix.env, spans.front().mid_s).db;
    std::vector<channel_amplitudes> points;  // the spans' channel amplitudes (analysis/stereo_drift.hpp)
    for (const drift_span& sp : spans) {
        if (!sp.fit || envelope_level(mix.env, sp.mid_s).db < top_db - params.audible_db) continue;
        const double l = std::abs(sp.fit->first.ratio[k]);
        const double r = std::abs(sp.fit->second.ratio[k]);
        if (!(l > min_ratio * r && r > min_ratio * l)) continue;
        const double a = envelope_amp(mix.env, sp.mid_s).lin;
        points.push_back({.time_s = sp.mid_s, .left_amp = l * a, .right_amp = r * a});
    }
    const double bound_db_per_s = std::max(0.0, 60.0 / q.env.decay.back().t60_s);  // neither channel may rise
    if (const auto d = drift_of_spans(points, params.fit_span_s, q.env.attack_s, bound_db_per_s, params.drift))
        q.place = {.pan = d->pan, .delay_us = q.place.delay_us, .spread_db_per_s = d->spread_db_per_s};
}

/// Channel residual (channel minus its own partials) over the first n frames. The channel's
/// partials are left out before arrival_s, when the channel's sound arrives (the broadband delay:
/// a spaced pair's far channel hears the onset later; the patch holds a partial's delay as a
/// phase, which cannot move its start), so the residual holds no copy of their first stretch.
std::vector<float> channel_residual(const patch& p, channel_side side, std::span<const float> x, std::size_t n,
                                    double sample_rate_hz, double arrival_s) {
    patch c = channel_patch(p, side);
    c.noise.clear();
    c.note.gain_db = 0.0;
    std::vector<float> out(n);
    if (!c.partials.empty()) {
        const partial_renderer renderer(c, {.sample_rate_hz = sample_rate_hz,
                                            .length_s = std::max(p.note.length_s, static_cast<double>(n) / sample_rate_hz)});
        renderer.render(0, out);
    }
    const auto arrival = std::min(n, static_cast<std::size_t>(std::llround(std::max(0.0, arrival_s) * sample_rate_hz)));
    std::fill_n(out.begin(), arrival, 0.0f);
    for (std::size_t i = 0; i < n; ++i) out[i] = x[i] - out[i];
    return out;
}

/// Band energies (power x seconds: 10^(level/10) x hop summed over the frames centred in
/// [from_s, to_s]) of each track; over every frame when none is centred there.
std::vector<double> band_energies(const std::vector<noise_band_track>& tracks, double from_s, double to_s) {
    std::vector<double> out;
    for (const noise_band_track& t : tracks) {
        double sum = 0.0;
        double all = 0.0;
        for (std::size_t i = 0; i < t.level_db.size(); ++i) {
            const double energy = std::pow(10.0, static_cast<double>(t.level_db[i]) / 10.0) * t.hop_s;
            const double centre_s = static_cast<double>(i) * t.hop_s;
            all += energy;
            if (centre_s >= from_s && centre_s <= to_s) sum += energy;
        }
        out.push_back(sum > 0.0 ? sum : all);
    }
    return out;
}

/// Adds to energy[i] the energy of track i's band in a channel's residual over the onset stretch
/// the floor frames cannot see, [0, to_s): frames of the noise model's short Hann window
/// (attack_window_s, hop attack_hop_s; power of all the band's bins, core/noise_bands.hpp), each
/// standing for the hop around its centre, in the bands at least attack_min_bins of its bins wide
/// (as the noise model's attack measurement; narrower bands keep the floor frames' energy alone).
/// Only frames whose window lies wholly inside the stretch count, as for the floor frames
/// (place_noise): a window across the onset sees what sounds there through a step (the partials'
/// instant start, which the copy's partials carry themselves, or a note already sounding where the
/// analysis put its onset), whose skirt covers every band above it and, differing between the
/// channels, placed a quiet high band where the loud low content leans (test_stereo's noise-pan
/// sweeps: up to 3.7 dB off over 5 noise seeds). So the first frame is centred half a window after
/// the onset and stands for the samples from the onset to half a hop past its centre. Each frame
/// takes the lower of the residual's and the recording's band power (as the noise model does): a
/// residual louder than the recording is the subtraction's error.
void add_onset_energies(std::vector<double>& energy, const std::vector<noise_band_track>& tracks,
                        std::span<const float> residual, std::span<const float> recording, double sample_rate_hz,
                        double to_s, const noise_model_params& params) {
    const int length = std::max(33, static_cast<int>(std::lround(params.attack_window_s * sample_rate_hz)) | 1);
    stft_plan plan({.window = window_kind::hann, .window_length = length, .fft_size = fast_fft_size(2 * length)});
    const int n_fft = plan.fft_size();
    const double bin_hz = sample_rate_hz / n_fft;
    double window_power_sum = 0.0;
    for (const float w : plan.window_samples()) window_power_sum += static_cast<double>(w) * static_cast<double>(w);
    const double amp_scale_sq = plan.amp_scale() * plan.amp_scale();
    // Each band's bins [first, last]; empty (first > last) where the short window is too coarse.
    std::vector<std::pair<int, int>> ranges;
    for (const noise_band_track& t : tracks) {
        const bool wide = t.high_hz - t.low_hz >= params.attack_min_bins * sample_rate_hz / length;
        const int first = std::max(1, static_cast<int>(std::ceil(t.low_hz / bin_hz)));
        const int last = std::min(n_fft / 2 - 1, static_cast<int>(std::ceil(t.high_hz / bin_hz)) - 1);
        ranges.emplace_back(first, wide ? last : first - 1);
    }
    std::vector<double> residual_power(tracks.size());
    const auto band_powers = [&](std::vector<double>& out) {
        const auto power = plan.power();
        for (std::size_t b = 0; b < ranges.size(); ++b) {
            const auto [first, last] = ranges[b];
            double sum = 0.0;
            for (int k = first; k <= last; ++k) sum += static_cast<double>(power[static_cast<std::size_t>(k)]);
            const int bins = std::max(1, last - first + 1);
            out[b] = band_power_from_bins(sum / bins / amp_scale_sq, bins, n_fft, window_power_sum);
        }
    };
    std::vector<double> recording_power(tracks.size());
    const auto hop = static_cast<std::int64_t>(std::max(1L, std::lround(params.attack_hop_s * sample_rate_hz)));
    const auto end = std::min(static_cast<std::int64_t>(residual.size()), static_cast<std::int64_t>(std::llround(to_s * sample_rate_hz)));
    const std::int64_t first = plan.half_length();
    for (std::int64_t centre = first; centre < end; centre += hop) {
        plan.analyze(residual, centre);
        band_powers(residual_power);
        plan.analyze(recording, centre);
        band_powers(recording_power);
        const std::int64_t stands_for = centre == first ? first + hop / 2 : hop;
        for (std::size_t b = 0; b < tracks.size(); ++b)
            energy[b] += std::min(residual_power[b], recording_power[b]) * static_cast<double>(stands_for) / sample_rate_hz;
    }
}

void place_noise(patch& p, std::span<const float> left, std::span<const float> right, double sample_rate_hz,
                 double reference_s, const stereo_place_params& params) {
    std::vector<double> freqs;
    for (const partial& q : p.partials) freqs.push_back(q.freq_hz);
    // Only frames whose window lies wholly inside the residual count (as in the mono noise model's
    // fit): a window across either cut end sees the residual's loudest (low) content through a
    // step, whose skirt covers every band above it and, differing between the channels, would
    // place every quiet band where that content leans. The residual runs half a window past
    // noise_span_s so the frames centred up to it stay inside.
    const double half_window_s = 0.5 * floor_window_s(freqs, p.note.f0_hz, params.noise);
    const std::size_t n = std::min({left.size(), right.size(),
                                    static_cast<std::size_t>(std::llround((params.noise_span_s + half_window_s) * sample_rate_hz))});
    if (p.noise.empty() || n == 0) return;
    const std::vector<float> res_l = channel_residual(p, channel_side::left, left, n, sample_rate_hz, -reference_s);
    const std::vector<float> res_r = channel_residual(p, channel_side::right, right, n, sample_rate_hz, reference_s);
    std::vector<float> res_m(n);
    for (std::size_t i = 0; i < n; ++i) res_m[i] = 0.5f * (res_l[i] + res_r[i]);
    const double from_s = half_window_s;
    const double to_s = std::min(params.noise_span_s, static_cast<double>(n) / sample_rate_hz - half_window_s);
    // One measurement plan for the three (the floor window the mono noise model used: the note's f0).
    const std::span<const float> residuals[] = {res_l, res_r, res_m};
    const auto measured = measure_noise_bands(residuals, sample_rate_hz, freqs, p.note.f0_hz, params.noise);
    const std::vector<noise_band_track>& tracks = measured[0];
    std::vector<double> pl = band_energies(measured[0], from_s, to_s);
    std::vector<double> pr = band_energies(measured[1], from_s, to_s);
    std::vector<double> pm = band_energies(measured[2], from_s, to_s);
    std::vector<float> mix(n);
    for (std::size_t i = 0; i < n; ++i) mix[i] = 0.5f * (left[i] + right[i]);
    add_onset_energies(pl, tracks, res_l, left.first(n), sample_rate_hz, from_s, params.noise);
    add_onset_energies(pr, tracks, res_r, right.first(n), sample_rate_hz, from_s, params.noise);
    add_onset_energies(pm, tracks, res_m, mix, sample_rate_hz, from_s, params.noise);
    constexpr double same_edge_hz = 0.5;
    for (noise_band& b : p.noise) {
        for (std::size_t i = 0; i < tracks.size(); ++i) {
            if (std::abs(tracks[i].low_hz - b.low_hz) > same_edge_hz || std::abs(tracks[i].high_hz - b.high_hz) > same_edge_hz)
                continue;
            if (!(pl[i] > 0.0 && pr[i] > 0.0 && pm[i] > 0.0)) break;
            b.place.pan = pan_of_amplitudes(std::sqrt(pl[i]), std::sqrt(pr[i])).pan;
            const double cross = 2.0 * pm[i] - 0.5 * (pl[i] + pr[i]);
            b.coherence = std::clamp(cross / std::sqrt(pl[i] * pr[i]), 0.0, 1.0);
            b.env.peak.db += std::clamp(10.0 * std::log10(0.5 * (pl[i] + pr[i]) / pm[i]), -max_level_change_db,
                                        max_level_change_db);
            break;
        }
    }
}

}  // namespace

double broadband_delay_s(std::span<const float> left, std::span<const float> right, double sample_rate_hz,
                         double span_s, double max_delay_s) {
    const auto max_lag = static_cast<long>(std::floor(max_delay_s * sample_rate_hz));
    const auto n = static_cast<long>(std::min({left.size(), right.size(),
                                               static_cast<std::size_t>(std::llround(span_s * sample_rate_hz))}));
    if (n <= 2 * max_lag + 2) return 0.0;
    // r(lag) = sum_i left[i] right[i + lag]: right = left delayed by d peaks at lag = d.
    std::vector<double> r(static_cast<std::size_t>(2 * max_lag + 1));
    for (long lag = -max_lag; lag <= max_lag; ++lag) {
        double sum = 0.0;
        for (long i = max_lag; i < n - max_lag; ++i)
            sum += static_cast<double>(left[static_cast<std::size_t>(i)]) * static_cast<double>(right[static_cast<std::size_t>(i + lag)]);
        r[static_cast<std::size_t>(lag + max_lag)] = sum;
    }
    const auto best = static_cast<std::size_t>(std::max_element(r.begin(), r.end()) - r.begin());
    if (!(r[best] > 0.0)) return 0.0;
    double offset = 0.0;
    if (best > 0 && best + 1 < r.size()) {
        const double a = r[best - 1], b = r[best], c = r[best + 1];
        const double den = a - 2.0 * b + c;
        if (den < 0.0) offset = 0.5 * (a - c) / den;
    }
    return (static_cast<double>(best) - static_cast<double>(max_lag) + offset) / sample_rate_hz;
}

/// A partial left unplaced within cluster_hz (one resolution cell of the fit span) of a louder
/// placed one is one of its close modes (analysis/mode_split.hpp): the set was fitted on the mix to
/// add up there (a rise made of modes that cancel at first), so it moves as one: the unplaced
/// partial takes the placed one's pan, delay and spread and the same change of level and phase.
/// Centred at the broadband delay instead, its mix would be scaled by cos(pi f delay) alone and
/// the set would no longer add up.
void follow_placed_neighbours(patch& p, const std::vector<partial>& mixes, const std::vector<bool>& placed,
                              double cluster_hz) {
    for (std::size_t k = 0; k < p.partials.size(); ++k) {
        if (placed[k]) continue;
        std::optional<std::size_t> lead;
        for (std::size_t j = 0; j < p.partials.size(); ++j)
            if (placed[j] && std::abs(mixes[j].freq_hz - mixes[k].freq_hz) < cluster_hz &&
                mixes[j].env.peak.db > mixes[k].env.peak.db && (!lead || mixes[j].env.peak.db > mixes[*lead].env.peak.db))
                lead = j;
        if (!lead) continue;
        partial& q = p.partials[k];
        const partial& l = p.partials[*lead];
        q.env.peak.db += l.env.peak.db - mixes[*lead].env.peak.db;
        q.phase_rad = wrap_pi(q.phase_rad + l.phase_rad - mixes[*lead].phase_rad);
        q.place = l.place;
    }
}

void place_stereo(patch& p, std::span<const float> left, std::span<const float> right, double sample_rate_hz,
                  const stereo_place_params& params) {
    assert(left.size() == right.size());
    p.note.channels = 2;
    const double reference_s =
        broadband_delay_s(left, right, sample_rate_hz, params.reference_span_s, params.max_reference_delay_s);
    const auto span_n = static_cast<std::size_t>(std::llround(params.fit_span_s * sample_rate_hz));
    const auto fit_at = [&](double t0_s, double min_shape) -> std::optional<std::pair<channel_fit, channel_fit>> {
        const auto first = static_cast<std::size_t>(std::llround(t0_s * sample_rate_hz));
        if (first + span_n > left.size()) return std::nullopt;
        const span_model m = model_span(p, t0_s, span_n, sample_rate_hz, min_shape);
        return std::pair{fit_channel(m, left.subspan(first, span_n), sample_rate_hz),
                         fit_channel(m, right.subspan(first, span_n), sample_rate_hz)};
    };
    const auto early = fit_at(0.0, params.min_shape_in_span);
    const auto late = fit_at(params.late_start_s, params.min_shape_in_span);
    std::vector<drift_span> spans;  // every drift_step_s from the onset (the ratios do not depend on min_shape)
    for (int j = 0; j < params.drift_spans; ++j) {
        const double t0_s = j * params.drift_step_s;
        spans.push_back({t0_s + params.fit_span_s / 2.0,
                         j == 0 ? early : t0_s == params.late_start_s ? late : fit_at(t0_s, 0.0)});
        if (!spans.back().fit) break;
    }
    std::vector<bool> was_placed(p.partials.size(), false);
    const std::vector<partial> mixes = p.partials;
    for (std::size_t k = 0; k < p.partials.size(); ++k) {
        partial& q = p.partials[k];
        const partial mix = q;
        bool placed = false;
        if (early && early->first.usable[k]) placed = place_partial(q, early->first.ratio[k], early->second.ratio[k], reference_s);
        if (!placed && late && late->first.usable[k])
            placed = place_partial(q, late->first.ratio[k], late->second.ratio[k], reference_s);
        if (!placed) {
            q = mix;
            q.place.delay_us = reference_s * 1e6;
            continue;
        }
        was_placed[k] = true;
        if (early && early->first.usable[k]) place_over_spans(q, mixes[k], spans, k, params);
    }
    follow_placed_neighbours(p, mixes, was_placed, 1.0 / params.fit_span_s);
    place_noise(p, left, right, sample_rate_hz, reference_s, params);
}

}  // namespace wane

namespace wane {

analysis_result analyze_stereo_note(std::span<const float> mix, std::span<const float> left,
                                    std::span<const float> right, double sample_rate_hz,
                                    const analysis_params& params, const stereo_place_params& stereo) {
    assert(mix.size() == left.size() && mix.size() == right.size());
    // The mix of spaced microphones holds each channel's onset at its own time (the marimba's
    // channels are 2.8 ms apart), and the channels are placed by phase from one start: the modes
    // start at the first arrival, the tracker's onset, not later (analysis/onset_refine.hpp).
    analysis_params mix_params = params;
    mix_params.onset.max_start_shift_s = 0.0;
    // Nor do the mix's partials start quietly and swell (analysis/onset_attack.hpp): the channels'
    // noise is measured on the residual of the mix's partials, and swelling partials fitted in a
    // loud rising low band move that residual and, through the low band's skirt, the pan of a quiet
    // high band (tests/unit/test_stereo.cpp).
    mix_params.onset.attacks.max_rising_partials = 0;
    // The channels are placed by one phase per partial (plain damped modes): no glides on the mix.
    mix_params.fit_glides = false;
    // Nor early companions (analysis/early_companion.hpp): two partials at one frequency are one
    // sinusoid on the mix, and the channels' fit cannot tell which of the two a channel holds.
    mix_params.early_companions = false;
    // Nor the early refit (analysis/early_refit.hpp): the channels' fit places each partial's phase.
    mix_params.refit_early = false;
    mix_params.onset.stft_starts = false;
    analysis_result out = analyze_note(mix, sample_rate_hz, mix_params);
    patch& p = out.value;
    const auto onset = std::min(static_cast<std::size_t>(std::llround(p.source.onset_s * sample_rate_hz)), mix.size());
    std::size_t last = mix.size();
    if (params.end_s > 0.0) last = std::min(last, static_cast<std::size_t>(std::llround(params.end_s * sample_rate_hz)));
    last = std::max(last, onset);
    const std::span<const float> l = left.subspan(onset, last - onset);
    const std::span<const float> r = right.subspan(onset, last - onset);
    place_stereo(p, l, r, sample_rate_hz, stereo);
    if (params.match_peak) {
        p.note.gain_db = std::min(peak_matching_gain_db(channel_patch(p, channel_side::left), l, sample_rate_hz),
                                  peak_matching_gain_db(channel_patch(p, channel_side::right), r, sample_rate_hz));
        p.note.gain_db = render_limited_gain_db(p, sample_rate_hz);  // the stereo render's own draw
    }
    return out;
}

}  // namespace wane
