#include "core/text_format.hpp"
#include "analysis/analyze.hpp"

#include <cassert>
#include <algorithm>
#include <cmath>
#include <vector>
#include <cstdio>
#include <stdexcept>
#include <string>

#include "analysis/beating_pairs.hpp"
#include "analysis/noise_model.hpp"
#include "analysis/onset_refine.hpp"
#include "core/analysis_error.hpp"
#include "core/patch_numbers.hpp"
#include "fitting/envelope_fit.hpp"
#include "pitch/root.hpp"
#include "spectrum/window.hpp"

namespace wane {

namespace {

/// note.length_s is the analysed length after the onset, rounded up to this step (seconds).
constexpr double length_step_s = 0.01;

std::string seconds_text(double s) { return printf_text("%.3f s", s); }

/// The stochastic part (Serra and Smith 1990): the source minus the partials' resynthesis, from
/// the onset on, measured and fitted in noise bands (analysis/noise_model.hpp).
void add_noise_model(patch& p, std::span<const float> part, double sample_rate_hz, double onset_s,
                     const noise_model_params& noise_params) {
    const auto onset = static_cast<std::size_t>(std::llround(onset_s * sample_rate_hz));
    if (onset >= part.size()) return;
    // Streamed: the residual is formed a block at a time, never held whole (long files).
    p.noise = fit_note_noise(part.subspan(onset), sample_rate_hz, p, noise_params);
}

/// The instant partials' rise (analysis/start_ramp.hpp) at the onset the analysis has reached.
double soften_partials_start(analysis_result& out, std::span<const float> part, double sample_rate_hz,
                             const analysis_params& params) {
    const auto onset = static_cast<std::size_t>(std::llround(out.tracking.onset_s * sample_rate_hz));
    return soften_start(out.value, part, onset, sample_rate_hz, params.start_ramp).rise_s;
}

/// A recording cut while the note sounds: every partial's and band's decay runs on past the cut,
/// and the patch says where the cut was (analysis/recording_end.hpp, analysis/cut_tail.hpp).
/// fitted[i] is partial i's track and fitted stretch.
void apply_recording_end(analysis_result& out, std::span<const float> part, double sample_rate_hz,
                         std::vector<cut_part> fitted, const analysis_params& params) {
    const auto onset = static_cast<std::size_t>(std::llround(out.tracking.onset_s * sample_rate_hz));
    if (onset >= part.size()) return;
    out.summary.end = classify_recording_end(part.subspan(onset), sample_rate_hz, params.recording_end);
    if (out.summary.end.kind != end_kind::cut) return;
    patch& p = out.value;
    p.source.cut_s = out.summary.end.length_s;
    // The partials fitted from tracks keep their places; the onset refinement and the pair split
    // only append partials (short-lived modes, second members of pairs), which decay on their own.
    assert(fitted.size() <= p.partials.size());
    for (std::size_t i = 0; i < fitted.size(); ++i) fitted[i].env = &p.partials[i].env;
    for (noise_band& b : p.noise)
        fitted.push_back({.env = &b.env, .track = nullptr, .fit_start_s = 0.0, .fit_end_s = out.summary.end.length_s});
    out.summary.continued_past_cut = continue_decays_past_cut(fitted, out.summary.end.length_s, params.cut_tail);
    std::vector<envelope*> all;
    for (partial& q : p.partials) all.push_back(&q.env);
    for (noise_band& b : p.noise) all.push_back(&b.env);
    out.summary.faded_past_cut = fade_past_cut(all, out.summary.end.length_s, params.cut_tail);
    out.summary.segments = 0;
    for (const partial& q : p.partials) out.summary.segments += static_cast<int>(q.env.decay.size());
}

/// The samples between params.start_s and params.end_s (0: the end), at most max_length_s of them
/// (what a patch can hold: core/patch.hpp); bad times are analysis errors.
/// unanalysed_frames: the samples left out by that limit.
std::span<const float> analysed_part(std::span<const float> samples, double sample_rate_hz,
                                     const analysis_params& params, std::size_t& unanalysed_frames) {
    const double file_s = static_cast<double>(samples.size()) / sample_rate_hz;
    if (params.start_s < 0.0 || params.end_s < 0.0)
        throw analysis_error("start and end times must not be negative");
    if (params.start_s >= file_s)
        throw analysis_error("start " + seconds_text(params.start_s) + " is not before the end of the audio (" +
                               seconds_text(file_s) + ")");
    if (params.end_s > 0.0 && params.end_s <= params.start_s)
        throw analysis_error("end " + seconds_text(params.end_s) + " is not after the start " +
                               seconds_text(params.start_s));
    const auto first = static_cast<std::size_t>(std::llround(params.start_s * sample_rate_hz));
    std::size_t last = samples.size();
    if (params.end_s > 0.0)
        last = std::min(last, static_cast<std::size_t>(std::llround(params.end_s * sample_rate_hz)));
    const std::size_t limit = first + static_cast<std::size_t>(std::floor(max_length_s * sample_rate_hz));
    unanalysed_frames = last > limit ? last - limit : 0;
    return samples.subspan(first, std::min(last, limit) - first);
}

/// Fits every track's envelope into out.value's partials (in track order; tracks whose fit fails
/// are counted as unfitted) and returns, per partial, its track and fitted stretch.
std::vector<cut_part> fit_tracks(analysis_result& out, const envelope_fit_params& fit_params) {
    patch& p = out.value;
    double sq_error = 0.0, frames = 0.0;
    std::vector<cut_part> fitted;  // per partial: its track and fitted stretch (env set later)
    for (const partial_track& track : out.tracking.tracks) {
        const auto first_fit = fit_partial(track, fit_params);
        // A fit whose peak lies beyond what the format holds is no partial of this note.
        if (!first_fit || first_fit->env.peak.db > max_peak_db) {
            ++out.summary.unfitted;
            continue;
        }
        // With the late part of a track that comes back clearly over its floor and rises there.
        const partial_fit with_late = fit_track(*first_fit, track, fit_params);
        const partial_fit* fit = with_late.env.peak.db > max_peak_db ? &*first_fit : &with_late;
        p.partials.push_back({.freq_hz = fit->freq_hz, .harmonic = track.harmonic, .phase_rad = fit->phase_rad,
                              .env = fit->env, .place = {}});
        fitted.push_back({.env = nullptr, .track = &track, .fit_start_s = fit->fit_start_s, .fit_end_s = fit->fit_end_s});
        out.summary.segments += static_cast<int>(fit->env.decay.size());
        sq_error += fit->weighted_sq_error_db2;
        frames += fit->weight_sum;
    }
    out.summary.tracks = static_cast<int>(out.tracking.tracks.size());
    out.summary.partials = static_cast<int>(p.partials.size());
    if (p.partials.empty()) throw analysis_error("no partial stays clear of the noise floor long enough to fit");
    out.summary.fit_error_db = frames > 0.0 ? std::sqrt(sq_error / frames) : 0.0;
    return fitted;
}

/// The recording's spectrum over the heard span (note[0] at the onset): the partials move to its
/// peaks, and late companions closer than the span resolves become one partial with their
/// stronger neighbour; fitted follows the patch's indices. Returns the spectrum (add_heard_peaks
/// reads it again).
heard_span_spectrum move_to_long_spectrum(analysis_result& out, std::vector<cut_part>& fitted, std::span<const float> note,
                                          double sample_rate_hz, const heard_peak_params& params) {
    patch& p = out.value;
    heard_span_spectrum heard = heard_spectrum(note, sample_rate_hz, params);
    std::vector<const partial_track*> tracks(fitted.size());
    std::vector<double> fit_end_s(fitted.size());
    for (std::size_t i = 0; i < fitted.size(); ++i) {
        tracks[i] = fitted[i].track;
        fit_end_s[i] = fitted[i].fit_end_s;
    }
    out.summary.moved_to_heard_peaks = move_to_heard_peaks(p, tracks, heard, params);
    const merge_result merged = merge_late_companions(p, tracks, fit_end_s, note, sample_rate_hz, params);
    for (const merged_partial& m : merged.kept)
        fitted[m.index] = {.env = nullptr, .track = nullptr, .fit_start_s = m.fit_start_s, .fit_end_s = m.fit_end_s};
    for (std::size_t k = merged.removed.size(); k-- > 0;)  // descending: indices stay valid
        fitted.erase(fitted.begin() + static_cast<std::ptrdiff_t>(merged.removed[k]));
    out.summary.merged_companions = static_cast<int>(merged.removed.size());
    out.summary.partials = static_cast<int>(p.partials.size());
    return heard;
}

/// Decay segments over all partials.
int segment_count(const patch& p) {
    int count = 0;
    for (const partial& q : p.partials) count += static_cast<int>(q.env.decay.size());
    return count;
}

/// The segments the file cannot hold apart (core/patch_numbers.hpp): joined envelopes can end two
/// segments within its time precision of each other.
void drop_unwritable_segments(analysis_result& out) {
    int dropped = 0;
    for (partial& q : out.value.partials) dropped += patch_numbers::drop_unwritable_segments(q.env);
    for (noise_band& b : out.value.noise) dropped += patch_numbers::drop_unwritable_segments(b.env);
    if (dropped > 0) out.summary.segments = segment_count(out.value);
}

/// The early pitch glides (analysis/onset_glide.hpp) on the recording from the patch's onset
/// (the modes' start, where its phases count from); how many partials glide.
int glides_from_onset(analysis_result& out, std::span<const float> part, double sample_rate_hz,
                      const onset_glide_params& params) {
    const auto start = static_cast<std::size_t>(std::llround(out.tracking.onset_s * sample_rate_hz));
    if (start >= part.size()) return 0;
    return fit_onset_glides(out.value, part.subspan(start), sample_rate_hz, params).glides;
}

/// The close modes of the strongest partials (analysis/mode_split.hpp) on the recording from the
/// patch's onset; counts them in the summary.
void split_strong_partials(analysis_result& out, std::span<const float> part, double sample_rate_hz,
                           const mode_split_params& params) {
    const auto start = static_cast<std::size_t>(std::llround(out.tracking.onset_s * sample_rate_hz));
    if (start >= part.size()) return;
    const mode_split_summary split = split_into_modes(out.value, part.subspan(start), sample_rate_hz, params);
    out.summary.modes_split = split.split;
    out.summary.modes_added = split.modes_added;
    out.summary.partials = static_cast<int>(out.value.partials.size());
}

/// The onset refinement (analysis/onset_refine.hpp) on the recording from the tracker's onset;
/// the onset moves to where its modes start (the noise and the end count from there).
void refine_start(analysis_result& out, std::span<const float> note, double sample_rate_hz,
                  const onset_refine_params& params) {
    patch& p = out.value;
    const auto refined = refine_onset(p, note, sample_rate_hz, params);
    out.summary.new_modes = refined.new_modes;
    out.summary.partials = static_cast<int>(p.partials.size());
    out.summary.onset_explained_db = refined.explained_db;
    const double shift_s = static_cast<double>(refined.start_shift_n) / sample_rate_hz;
    out.tracking.onset_s += shift_s;
    p.source.onset_s += shift_s;
    out.summary.segments = segment_count(p);
}

/// The early pitch glides, then the close modes of the strongest partials without one and the
/// partials' early companions (analysis/early_companion.hpp); done(stage) after each.
void glides_and_modes(analysis_result& out, std::span<const float> part, double sample_rate_hz,
                      const analysis_params& params, const heard_span_spectrum& heard, const auto& done) {
    if (params.fit_glides) out.summary.glides = glides_from_onset(out, part, sample_rate_hz, params.glides);
    if (params.fit_glides && params.fit_slow_glides) out.summary.glides += glides_from_onset(out, part, sample_rate_hz, params.slow_glides);
    done("onset glides");
    if (params.split_modes) split_strong_partials(out, part, sample_rate_hz, params.modes);
    const auto start = static_cast<std::size_t>(std::llround(out.tracking.onset_s * sample_rate_hz));
    if (params.early_companions && start < part.size()) {
        out.summary.partials += add_early_companions(out.value, part.subspan(start), sample_rate_hz, params.companions);
        out.summary.segments = segment_count(out.value);
    }
    if (params.early_companions && params.early_twins && start < part.size()) {
        out.summary.partials += add_early_twins(out.value, part.subspan(start), sample_rate_hz, params.twins, &heard).added;
        out.summary.segments = segment_count(out.value);
    }
    if (params.refit_early && start < part.size()) refit_early_phases(out.value, part.subspan(start), sample_rate_hz, params.early_refit);
    done("mode split");
}

}  // namespace

namespace {

double mean_of(std::span<const float> samples) {
    double sum = 0.0;
    for (const float v : samples) sum += double(v);
    return samples.empty() ? 0.0 : sum / static_cast<double>(samples.size());
}

}  // namespace

bool has_dc_offset(std::span<const float> samples, double range_db) {
    double peak = 0.0;
    for (const float v : samples) peak = std::max(peak, std::abs(double(v)));
    const double mean = std::abs(mean_of(samples));
    return mean > 0.0 && 20.0 * std::log10(mean / peak) >= -range_db;
}

double remove_mean(std::span<float> samples) {
    const double mean = mean_of(samples);
    for (float& v : samples) v = static_cast<float>(double(v) - mean);
    return mean;
}

analysis_result analyze_note(std::span<const float> samples, double sample_rate_hz,
                             const analysis_params& params, const stage_observer& stage_done) {
    assert(sample_rate_hz > 0.0);
    assert(params.max_segments >= 1 && params.max_segments <= max_fit_decay_segments);
    std::size_t unanalysed_frames = 0;
    const std::span<const float> part = analysed_part(samples, sample_rate_hz, params, unanalysed_frames);
    const auto done = [&](std::string_view stage) { if (stage_done) stage_done(stage); };

    analysis_result out;
    out.summary.unanalysed_s = static_cast<double>(unanalysed_frames) / sample_rate_hz;
    out.tracking = track_note(part, sample_rate_hz, params.tracking);
    const tracking_result& tr = out.tracking;
    done("tracking");

    const envelope_fit_params fit_params{.max_segments = params.max_segments, .window_s = tr.window_s};
    std::vector<cut_part> fitted = fit_tracks(out, fit_params);
    patch& p = out.value;
    done("envelope fits");

    const auto onset_frame = static_cast<std::size_t>(std::llround(tr.onset_s * sample_rate_hz));
    // What the waveform fits over the whole note read (analysis_params::max_waveform_fit_s).
    const std::span<const float> fit_part = part.first(std::min(
        part.size(), onset_frame + static_cast<std::size_t>(std::llround(params.max_waveform_fit_s * sample_rate_hz))));
    heard_span_spectrum heard;  // the recording's spectrum over the heard span, for both steps
    band_spectrum_cache whole_note;  // the note's spectrum for narrow bands, for both steps
    if (params.long_spectrum && onset_frame < part.size())
        heard = move_to_long_spectrum(out, fitted, part.subspan(onset_frame), sample_rate_hz, params.heard_peaks);
    // Fits whose level after their end stands over the recording's narrow band (or short fits that
    // hold their level) follow that band from their end on.
    if (params.long_spectrum && onset_frame < part.size())
        follow_band_past_fits(p, fitted, part.subspan(onset_frame), sample_rate_hz, heard, params.heard_peaks, fit_params,
                              &whole_note);
    done("long spectrum");

    const double analysed_s = static_cast<double>(part.size()) / sample_rate_hz - tr.onset_s;
    p.note.name = params.note_name;
    p.note.f0_hz = tr.f0_hz;
    p.note.inharmonicity_b = tr.inharmonicity_b;
    p.note.root = note_root_of(p.partials, tr.series_f0_hz, params.tracking.f0_hz.has_value());
    // Without a harmonic series (a bar, a bell) f0 is the root: the note's pitch centre.
    if (!(p.note.f0_hz > 0.0)) p.note.f0_hz = root_hz(p.note);
    // Strong peaks of the recording's long spectrum no track accounts for, after the root (which
    // the tracks decide) and before the onset refinement (which refits their starts too).
    if (params.long_spectrum && onset_frame < part.size()) {
        out.summary.added_heard_peaks = add_heard_peaks(p, fit_part.subspan(onset_frame), sample_rate_hz, heard,
                                                        params.heard_peaks, fit_params, &whole_note);
        out.summary.partials = static_cast<int>(p.partials.size());
    }
    done("root and added peaks");
    p.note.length_s = std::clamp(std::ceil(analysed_s / length_step_s - 1e-9) * length_step_s, length_step_s, max_length_s);
    p.source.file = params.source_file;
    p.source.sample_rate_hz = sample_rate_hz;
    p.source.onset_s = params.start_s + tr.onset_s;
    p.source.analysis = analysis_settings{.window = std::string(window_name(tr.window)),
                                          .fft_size = tr.fft_size, .window_s = tr.window_s, .hop_s = tr.hop_s};
    if (params.split_pairs && onset_frame < part.size()) {
        out.summary.pairs_split = split_beating_pairs(p, fit_part.subspan(onset_frame), sample_rate_hz, params.pairs);
        out.summary.partials = static_cast<int>(p.partials.size());
    }
    done("pair split");
    const double tracker_onset_s = tr.onset_s;  // the peak counts from here (a pluck's first swing)
    if (params.refine_onset && onset_frame < part.size())
        refine_start(out, part.subspan(onset_frame), sample_rate_hz, params.onset);
    done("onset refinement");
    glides_and_modes(out, fit_part, sample_rate_hz, params, heard, done);  // reports "onset glides", "mode split"
    if (params.soften_start) out.summary.start_ramp_s = soften_partials_start(out, part, sample_rate_hz, params);
    done("start rise");
    if (params.noise_model) add_noise_model(p, part, sample_rate_hz, tr.onset_s, params.noise);
    done("noise model");
    apply_recording_end(out, part, sample_rate_hz, fitted, params);
    canonicalize(p);
    drop_unwritable_segments(out);
    done("recording end");
    if (params.match_peak) {
        const auto onset = static_cast<std::size_t>(std::llround(tracker_onset_s * sample_rate_hz));
        match_peak(p, part.subspan(std::min(onset, part.size())), sample_rate_hz);
    }
    done("peak match");
    return out;
}

}  // namespace wane
