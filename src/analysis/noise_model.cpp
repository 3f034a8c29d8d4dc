#include "analysis/noise_model.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <functional>
#include <limits>
#include <optional>
#include <utility>

#include "analysis/burst_fit.hpp"
#include "analysis/floor_onset.hpp"
#include "analysis/noise_measure.hpp"
#include "core/envelope.hpp"
#include "core/line_fit.hpp"
#include "core/units.hpp"
#include "core/noise_bands.hpp"
#include "spectrum/stft.hpp"
#include "synthesis/render.hpp"
#include "tracking/track.hpp"

namespace wane {

namespace {

/// The leakage under a band (analysis/band_leakage.hpp) is the median's expectation over a skirt
/// that falls steeply across the band's bins; a band level this close above it is not trusted as
/// the band's own (reasoned choice: measured 3-5 dB above the estimate on a band that holds only
/// its neighbour's skirt).
constexpr double leak_margin_db = 6.0;
/// The spill of spread noise taken off a band's attack level (expected value) still scatters frame
/// to frame; it stands as the band's floor this far from it, so with the fit's 8 dB margin what is
/// left must stand 5 dB over it (reasoned choice, measured on test_noise: at the spill itself one
/// band of a broadband burst lost its fit; 3 or 6 dB under it both synthetic band tests hold).
constexpr double spread_spill_floor_db = -3.0;
/// A source measured on the frames centred before until_s (seconds from the onset) only.
struct timed_source {
    const residual_source* read = nullptr;
    double until_s = infinity;
};

/// How many frames past where a floor band's line leaves the measured levels give the rate it
/// falls at from there (held_past_fit): 0.1 s, at least 4 (project choice: short enough to stay on
/// a fall of 300 dB/s that reaches its floor within 0.15 s, test_noise_past_fit; the slope of 17
/// frames of 3-4 dB scatter at the 5.7 ms hop of f0 262 Hz is known to about 30 dB/s).
std::size_t fall_span_frames(double hop_s) { return std::max<std::size_t>(4, static_cast<std::size_t>(std::lround(0.1 / hop_s))); }

/// Frames [first, end) of a band level track as a partial track for the envelope fit; the floor
/// under each frame is floor_db or the neighbours' leakage, whichever is higher.
partial_track as_track(const noise_band_track& t, std::size_t first, std::size_t end, double floor_db) {
    partial_track track;
    const double centre_hz = std::sqrt(t.low_hz * t.high_hz);
    for (std::size_t i = first; i < std::min(end, t.level_db.size()); ++i) {
        const double leak_db = i < t.leak_db.size() ? static_cast<double>(t.leak_db[i]) + leak_margin_db : noise_silence_db;
        track.points.push_back({.time_s = static_cast<double>(i) * t.hop_s, .freq_hz = centre_hz,
                                .level_db = static_cast<double>(t.level_db[i]), .phase_rad = 0.0,
                                .floor_db = std::max(floor_db, leak_db)});
    }
    return track;
}

/// Median of the track's levels over [from_s, to_s) (the whole track when that is empty), dB.
double median_level_db(const noise_band_track& t, double from_s, double to_s) {
    std::vector<float> v;
    for (std::size_t i = 0; i < t.level_db.size(); ++i) {
        const double time_s = static_cast<double>(i) * t.hop_s;
        if (time_s >= from_s && time_s < to_s) v.push_back(t.level_db[i]);
    }
    if (v.empty()) v = t.level_db;
    if (v.empty()) return noise_silence_db;
    std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2), v.end());
    return static_cast<double>(v[v.size() / 2]);
}

/// The attack band of one band: the burst in the short-window track's first attack span, fitted
/// where it stands clear of the track's median over the second. Empty when there is no burst.
/// An attack band and how far its fit reached (analysis/burst_fit.hpp).
struct attack_band {
    noise_band band;
    double fit_end_s = 0.0;
};

std::optional<attack_band> fit_attack_band(const noise_band_track& attack, const noise_model_params& params) {
    const double after_db = median_level_db(attack, params.attack_span_s, 2.0 * params.attack_span_s);
    noise_band_track burst = attack;
    burst.level_db.resize(std::min(burst.level_db.size(),
                                   static_cast<std::size_t>(std::ceil(params.attack_span_s / attack.hop_s))));
    // Frames whose window reaches before the onset read zeros there: the recording's first sample
    // is then a step, a broadband click in every band (the floor bands leave such frames out). Such
    // a frame shows no more of the band than the first frame wholly after the onset does.
    const auto whole = static_cast<std::size_t>(std::ceil(0.5 * params.attack_window_s / attack.hop_s - 1e-9));
    if (burst.level_db.size() < whole + 2) return std::nullopt;
    for (std::size_t i = 0; i < whole; ++i) burst.level_db[i] = std::min(burst.level_db[i], burst.level_db[whole]);
    // A burst stands clear of the band's later level and of what its neighbours leak into it.
    bool clear = false;
    for (std::size_t i = 0; i < burst.level_db.size(); ++i) {
        const double leak_db = i < burst.leak_db.size() ? static_cast<double>(burst.leak_db[i]) + leak_margin_db : noise_silence_db;
        clear = clear || static_cast<double>(burst.level_db[i]) >= std::max(after_db, leak_db) + params.attack_above_floor_db;
    }
    if (!clear) return std::nullopt;
    // The burst as the short frames see it (analysis/burst_fit.hpp), fitted from the first frame
    // wholly after the onset, over the floor the band holds without it.
    std::vector<float> floor_db(burst.level_db.size());
    for (std::size_t i = 0; i < floor_db.size(); ++i) {
        const double leak_db = i < burst.leak_db.size() ? static_cast<double>(burst.leak_db[i]) + leak_margin_db : noise_silence_db;
        floor_db[i] = static_cast<float>(std::max(after_db, leak_db));
    }
    const auto fit = fit_burst({.window = window_kind::hann, .window_s = params.attack_window_s, .hop_s = attack.hop_s,
                                .level_db = burst.level_db, .floor_db = floor_db, .first = whole},
                               params.burst);
    if (!fit) return std::nullopt;
    return attack_band{.band = {.low_hz = attack.low_hz, .high_hz = attack.high_hz, .env = fit->env, .place = {}, .coherence = 1.0},
                       .fit_end_s = fit->fit_end_s};
}

std::vector<noise_band> fit_bands(const std::vector<noise_band_track>& floors,
                                  const std::vector<noise_band_track>& attacks, window_kind window, double window_s,
                                  double loudest_partial_db, const noise_model_params& params) {
    std::vector<noise_band> bands;
    const double keep_db = loudest_partial_db - params.keep_within_db;
    for (const noise_band_track& t : floors) {
        if (t.level_db.size() < 2) continue;
        std::optional<attack_band> attack;
        for (const noise_band_track& a : attacks) {
            if (a.low_hz == t.low_hz && !a.level_db.empty()) attack = fit_attack_band(a, params);
        }
        // The floor band is fitted on the frames whose window lies wholly inside the recording (a
        // frame across the onset, or across the end of a recording cut while it sounds, sees it
        // through a window cut in half, whose skirts spread the partials over every band), its
        // first line run back to the onset as far as those frames agree (analysis/floor_onset.hpp);
        // with an attack band it also starts past where the
        // burst still carries half the band's power (the two do not overlap), though not past the
        // frames the burst was fitted on (beyond them the burst is its line run on: a band that
        // decays as slowly as test_noise's 3981 Hz band, T60 0.1 s, stays the floor band's). The floor band's
        // own steady end is part of it (the recording's hiss holds), so the fit runs to the end:
        // no floor under it but the neighbours' leakage.
        const auto half_window = static_cast<std::size_t>(std::ceil(0.5 * window_s / t.hop_s));
        if (t.level_db.size() < 2 * half_window + 2) continue;
        const std::size_t end = t.level_db.size() - half_window;
        std::size_t first = half_window;
        if (attack) {
            const std::vector<envelope_piece> pieces = envelope_pieces(attack->band.env);
            while (first + 2 < end &&
                   static_cast<double>(first) * t.hop_s <= attack->fit_end_s &&
                   envelope_level(attack->band.env, pieces, static_cast<double>(first) * t.hop_s).db >
                       static_cast<double>(t.level_db[first]) - 3.0)
                ++first;
        }
        envelope_fit_params fit = params.fit;
        fit.window_s = window_s;
        auto result = fit_partial(as_track(t, first, end, noise_silence_db), fit);
        if (result)
            result->env = limit_run_back(result->env, {.window = window, .window_s = window_s,
                                                       .hop_s = t.hop_s, .level_db = t.level_db, .first = first});
        if (result) result->env = held_to_measured(result->env, t, first, end);
        if (result) {
            // The fit's last frame (its times are frame times, as_track).
            const auto fit_end = std::min(end, static_cast<std::size_t>(std::lround(result->fit_end_s / t.hop_s)) + 1);
            result->env = held_past_fit(result->env, t, std::max(first, fit_end), end);
        }
        // Bounded like the partials' fits (analyze.cpp): a peak beyond what the format holds (an
        // attack extrapolated far above the measured levels) is no band of this note.
        // A floor band is kept down to digital silence (the recording's own hiss is part of its
        // sound between the partials); an attack band only within keep_within_db of the partials.
        auto keep = [&](const envelope& env, double least_db) { return env.peak.db >= least_db && env.peak.db <= max_peak_db; };
        if (result && keep(result->env, params.least_floor_band_db)) bands.push_back({.low_hz = t.low_hz, .high_hz = t.high_hz, .env = result->env, .place = {}, .coherence = 1.0});
        if (attack && keep(attack->band.env, keep_db)) bands.push_back(attack->band);
    }
    return bands;
}

/// Which bands of the plan hold noise spread over their width (no partial inside). In the attack
/// measurement what they spill into a band is taken off its level (the spill over the band's own
/// density, analysis/band_leakage.hpp) and stands under it as a floor (spread_spill_floor_db),
/// while the bands holding a partial set the leakage floor as before: a partial's remainder is
/// narrow and can stand far over the noise beside it, and its skirt is known only roughly. A
/// broadband burst (a mallet's, a hammer's) fills its neighbours about as densely as they fill it
/// (timpani_d2's burst above 4 kHz stood 6-9 dB over the whole spill it was charged with as a
/// floor in every band, so none was fitted).
/// A level with a spill taken off in power, at most 20 dB down (a band wholly made of its
/// neighbours' spill keeps a level that far under what was measured).
double without_spill_db(double level_db, double spill_db) {
    return std::max(level_db - 20.0, power_to_db(std::max(0.0, db_to_power(level_db) - db_to_power(spill_db))));
}

std::vector<bool> spread_bands(const band_plan& plan, std::span<const double> partial_freqs_hz) {
    std::vector<bool> out;
    for (const band_edges& e : plan.bands)
        out.push_back(std::none_of(partial_freqs_hz.begin(), partial_freqs_hz.end(),
                                   [&](double f) { return f >= e.low_hz && f < e.high_hz; }));
    return out;
}

/// sources: the residual of the partials as fitted, of the partials started at their peak
/// (attack_s = 0), and the recording itself. The partials' true rise is known only to a frame, and
/// what a wrong rise leaves of a partial is a broadband click; and a residual louder than the
/// recording is the subtraction's error, not noise. The bands take, frame by frame, the lowest of
/// the levels: what neither rise explains, and never more than was recorded (over the first
/// recording_cap_span_s: later the subtraction's error stands under the floor on the notes measured).
std::vector<noise_band> model_from(std::size_t total, std::span<const timed_source> given,
                                   double sample_rate_hz, std::span<const double> partial_freqs_hz, double f0_hz,
                                   double loudest_partial_db, const noise_model_params& params) {
    const band_plan attack = attack_plan(sample_rate_hz, params);
    // The attack plan reads only each source's first samples, which the floor plan's first block
    // (read from sample 0 on) already holds: they are kept from it (a render from sample 0 gives
    // the same samples at any length, synthesis/render.hpp), not formed again.
    const int attack_half = plan_config(attack, sample_rate_hz).window_length / 2;
    std::vector<std::vector<float>> heads(given.size());
    std::vector<residual_source> kept;
    std::vector<timed_source> sources;
    kept.reserve(given.size());
    for (std::size_t k = 0; k < given.size(); ++k) {
        const std::size_t head_size = measure_read_end(total, sample_rate_hz, attack, attack_half, given[k].until_s);
        kept.emplace_back([&, k, head_size](std::size_t first, std::span<float> dest) {
            std::vector<float>& head = heads[k];
            if (first + dest.size() <= head.size()) {
                std::copy_n(head.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
                return;
            }
            (*given[k].read)(first, dest);
            if (first == 0 && head.empty() && dest.size() >= head_size) head.assign(dest.begin(), dest.begin() + static_cast<std::ptrdiff_t>(head_size));
        });
        sources.push_back({.read = &kept.back(), .until_s = given[k].until_s});
    }
    auto lower_of_both = [&](const band_plan& plan, const std::vector<bool>& spread) {
        const leak_sources floor_from = spread.empty() ? leak_sources::all : leak_sources::skirts;
        stft_plan stft(plan_config(plan, sample_rate_hz));
        auto tracks = measure_bands(total, *sources[0].read, sample_rate_hz, plan, stft);
        for (std::size_t k = 1; k < sources.size(); ++k) {
            const auto other = measure_bands(total, *sources[k].read, sample_rate_hz, plan, stft, sources[k].until_s);
            for (std::size_t b = 0; b < tracks.size(); ++b)
                for (std::size_t i = 0; i < std::min(tracks[b].level_db.size(), other[b].level_db.size()); ++i)
                    tracks[b].level_db[i] = std::min(tracks[b].level_db[i], other[b].level_db[i]);
        }
        std::vector<std::span<const float>> levels;
        levels.reserve(tracks.size());
        for (const noise_band_track& t : tracks) levels.emplace_back(t.level_db);
        auto leak = leakage_levels_db(plan.leak, levels, plan.band_total_bins, floor_from, spread);
        if (!spread.empty()) {
            const auto spill = leakage_levels_db(plan.leak, levels, plan.band_total_bins, leak_sources::spread, spread);
            for (std::size_t b = 0; b < tracks.size(); ++b)
                for (std::size_t i = 0; i < tracks[b].level_db.size(); ++i) {
                    tracks[b].level_db[i] = static_cast<float>(without_spill_db(tracks[b].level_db[i], spill[b][i]));
                    // leak_db is read with leak_margin_db added (as_track).
                    const double floor_db = static_cast<double>(spill[b][i]) + spread_spill_floor_db - leak_margin_db;
                    leak[b][i] = static_cast<float>(power_to_db(db_to_power(leak[b][i]) + db_to_power(floor_db)));
                }
        }
        for (std::size_t b = 0; b < tracks.size(); ++b) tracks[b].leak_db = std::move(leak[b]);
        return tracks;
    };
    band_plan floor = floor_plan(sample_rate_hz, partial_freqs_hz, f0_hz, params);
    floor.dense_span_s = params.floor_dense_span_s;
    floor.sparse_hops = std::max(1, static_cast<int>(std::floor(params.floor_sparse_hop_windows * floor.window_s / floor.hop_s + 1e-9)));
    const auto floors = lower_of_both(floor, {});
    const auto attacks = lower_of_both(attack, spread_bands(attack, partial_freqs_hz));
    return fit_bands(floors, attacks, floor.window, floor.window_s, loudest_partial_db, params);
}

}  // namespace

envelope held_to_measured(envelope env, const noise_band_track& t, std::size_t first, std::size_t end) {
    assert(first <= end && end <= t.level_db.size());
    double measured_db = -std::numeric_limits<double>::infinity();
    double fitted_db = -std::numeric_limits<double>::infinity();
    const std::vector<envelope_piece> pieces = envelope_pieces(env);
    for (std::size_t i = first; i < end; ++i) {
        measured_db = std::max(measured_db, static_cast<double>(t.level_db[i]));
        fitted_db = std::max(fitted_db, envelope_level(env, pieces, static_cast<double>(i) * t.hop_s).db);
    }
    if (fitted_db > measured_db + floor_runaway_db) env.peak = level_db{env.peak.db - (fitted_db - measured_db)};
    return env;
}

envelope held_past_fit(envelope env, const noise_band_track& t, std::size_t fit_end, std::size_t end) {
    assert(fit_end <= end && end <= t.level_db.size());
    if (fit_end >= end) return env;
    // loudest[i - fit_end]: the loudest level measured on frames [i, end).
    std::vector<double> loudest(end - fit_end);
    double running_db = -std::numeric_limits<double>::infinity();
    for (std::size_t i = end; i-- > fit_end;) {
        running_db = std::max(running_db, static_cast<double>(t.level_db[i]));
        loudest[i - fit_end] = running_db;
    }
    const std::vector<envelope_piece> pieces = envelope_pieces(env);
    // Only where a whole fall span of frames follows (near the end the loudest of a few frames is
    // their scatter, not the band's level).
    const std::size_t span = fall_span_frames(t.hop_s);
    for (std::size_t i = fit_end; i + span <= end; ++i) {
        const double time_s = static_cast<double>(i) * t.hop_s;
        const double line_db = envelope_level(env, pieces, time_s).db;
        if (time_s <= env.attack_s || line_db <= loudest[i - fit_end] + floor_runaway_db) continue;
        // From here the line stands clear over every later frame: it falls at the rate the
        // measured levels fall over the next span frames (least-squares slope of their dB levels
        // against time, dB/s), when that is steeper than its own.
        line_sums sums;
        for (std::size_t j = i; j < i + span; ++j)
            sums.add(static_cast<double>(j - i) * t.hop_s, static_cast<double>(t.level_db[j]));
        const std::optional<double> slope_db_per_s = sums.slope();
        if (!slope_db_per_s || !(*slope_db_per_s < pieces.back().slope_db_per_s)) return env;
        env.decay.back().until_s = time_s;
        env.decay.push_back({.t60_s = slope_db_per_s_to_t60(*slope_db_per_s), .until_s = std::nullopt});
        return env;
    }
    return env;
}

std::vector<std::vector<noise_band_track>> measure_noise_bands(std::span<const std::span<const float>> residuals,
                                                               double sample_rate_hz,
                                                               std::span<const double> partial_freqs_hz, double f0_hz,
                                                               const noise_model_params& params) {
    const band_plan plan = floor_plan(sample_rate_hz, partial_freqs_hz, f0_hz, params);
    std::vector<std::vector<noise_band_track>> out;
    stft_plan stft(plan_config(plan, sample_rate_hz));
    for (const std::span<const float> residual : residuals) {
        const residual_source source = [&](std::size_t first, std::span<float> dest) {
            std::copy_n(residual.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
        };
        out.push_back(measure_bands(residual.size(), source, sample_rate_hz, plan, stft));
    }
    return out;
}

std::vector<noise_band_track> measure_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                                  std::span<const double> partial_freqs_hz, double f0_hz,
                                                  const noise_model_params& params) {
    const std::span<const float> one[] = {residual};
    return std::move(measure_noise_bands(one, sample_rate_hz, partial_freqs_hz, f0_hz, params).front());
}

std::vector<noise_band> fit_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                        std::span<const double> partial_freqs_hz, double loudest_partial_db,
                                        const noise_model_params& params, std::span<const float> recording) {
    const residual_source source = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(residual.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    const residual_source original = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(recording.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    const timed_source both[] = {{.read = &source}, {.read = &original, .until_s = params.recording_cap_span_s}};
    const auto sources = std::span<const timed_source>(both).first(recording.empty() ? 1 : 2);
    return model_from(residual.size(), sources, sample_rate_hz, partial_freqs_hz, 0.0, loudest_partial_db, params);
}

std::vector<noise_band> fit_note_noise(std::span<const float> note, double sample_rate_hz, const patch& p,
                                       const noise_model_params& note_params) {
    if (note.empty()) return {};
    noise_model_params params = note_params;
    const double length_s = static_cast<double>(note.size()) / sample_rate_hz;
    params.max_floor_window_s = std::min(params.max_floor_window_s,
                                         std::max(params.min_floor_window_s, params.max_floor_window_share * length_s));
    std::vector<double> freqs_hz;
    double loudest_db = -infinity;
    const double short_by_s = std::min(params.short_partial_s, params.short_partial_share * length_s);
    for (const partial& q : p.partials) {
        if (envelope_level(q.env, short_by_s).db >= q.env.peak.db - 60.0) freqs_hz.push_back(q.freq_hz);
        loudest_db = std::max(loudest_db, q.env.peak.db);
    }
    const render_params render{.sample_rate_hz = sample_rate_hz,
                               .length_s = static_cast<double>(note.size()) / sample_rate_hz, .include_noise = false};
    // An attack shorter than the tracker's window cannot be told from an abrupt start.
    patch abrupt_patch = p;
    const double unresolved_s = p.source.analysis ? p.source.analysis->window_s : infinity;
    double longest_removed_s = 0.0;  // the longest attack the abrupt copy drops
    for (partial& q : abrupt_patch.partials) {
        if (q.env.attack_s > unresolved_s) continue;
        longest_removed_s = std::max(longest_removed_s, q.env.attack_s);
        q.env.attack_s = 0.0;
    }
    const partial_renderer partials(p, render);
    // Without a rise dropped the abrupt residual is measured on no frame (abrupt_until_s below):
    // its renderer is not made (the same samples as partials' otherwise).
    std::optional<partial_renderer> abrupt_partials;
    if (longest_removed_s > 0.0) abrupt_partials.emplace(abrupt_patch, render);
    const std::size_t common = std::min(note.size(), partials.frames());
    // The partials rendered into dest, then taken from the note in place (no buffer of their own).
    auto residual_of = [&](const partial_renderer& r) {
        return [&, rp = &r](std::size_t first, std::span<float> dest) {
            const std::size_t n = first < common ? std::min(dest.size(), common - first) : 0;
            if (n > 0) rp->render(first, dest.first(n));
            for (std::size_t i = 0; i < n; ++i) dest[i] = note[first + i] - dest[i];
            std::copy_n(note.begin() + static_cast<std::ptrdiff_t>(first + n), dest.size() - n, dest.begin() + static_cast<std::ptrdiff_t>(n));
        };
    };
    const residual_source source = residual_of(partials);
    const residual_source abrupt = residual_of(abrupt_partials ? *abrupt_partials : partials);
    const residual_source recording = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(note.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    // The two rises differ by a click at the onset; later the abrupt copy's partials are only
    // shifted in level, which the floor's bins between the partials do not see. So the abrupt
    // residual is measured on the frames centred within one floor window after the longest rise
    // it drops (on none without one: the two residuals are then the same).
    const double abrupt_until_s =
        longest_removed_s > 0.0 ? longest_removed_s + floor_window_s(freqs_hz, p.note.f0_hz, params) : 0.0;
    const timed_source sources[] = {{.read = &source}, {.read = &abrupt, .until_s = abrupt_until_s}, {.read = &recording, .until_s = params.recording_cap_span_s}};
    return model_from(note.size(), sources, sample_rate_hz, freqs_hz, p.note.f0_hz, loudest_db, params);
}

}  // namespace wane

