// track_note: onset -> survey spectrum -> f0 and window -> STFT frames -> peaks -> tracks -> B.
#include "tracking/tracker.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <cstdint>
#include <numeric>
#include <stdexcept>
#include <string>
#include <vector>

#include "core/harmonics.hpp"
#include "core/units.hpp"
#include "pitch/series_fit.hpp"
#include "spectrum/peaks.hpp"
#include "spectrum/stft.hpp"
#include "tracking/onset.hpp"
#include "tracking/pitch.hpp"
#include "tracking/signal_checks.hpp"

namespace wane {

namespace {

// ---- tuning (named once; common-practice choices, not from a source) ----
constexpr double min_duration_s = 0.05;        ///< shortest input accepted
constexpr double survey_window_s = 0.2;        ///< long window of the survey (resolves 25 Hz)
constexpr int survey_frames = 3;               ///< survey frames, half a window apart
constexpr double survey_above_floor_db = 12.0;
constexpr double periods_per_window = 8.0;     ///< window = this many periods of the spacing
constexpr double min_window_s = 0.008;
constexpr double max_window_s = 0.25;
constexpr int zero_padding = 2;                ///< FFT size >= this x window length
constexpr double min_hop_s = 0.004;
constexpr double max_hop_s = 0.0125;          ///< the FFTs are most of the cost: 12.5 ms keeps 83% overlap at 8 periods of 110 Hz
constexpr double hop_per_window = 0.25;
constexpr double continue_above_floor_db = 6.0;  ///< a track continues on peaks this far up
constexpr double birth_above_floor_db = 12.0;    ///< a track is born only this far up
constexpr double birth_below_max_db = 80.0;      ///< ... and within this of the frame's strongest
constexpr double cut_above_floor_db = 10.0;      ///< still sounding at the end: cut, not decayed
constexpr double quiet_stop_s = 0.5;             ///< stop after this long with no track alive
constexpr double dev_rel = 0.01;                 ///< frequency deviation per hop, relative
constexpr double dev_min_bins = 2.0;             ///< ... but at least this many FFT bins
constexpr double dev_max_f0 = 0.3;               ///< ... and at most this fraction of f0
constexpr int max_gap_frames = 3;                ///< gaps up to this many frames are bridged
constexpr int min_track_frames = 5;              ///< a track lasts at least this many frames
constexpr double min_track_windows = 1.5;        ///< ... and at least this many window lengths
constexpr double max_join_gap_s = 0.3;           ///< fragments of one partial this close are joined
constexpr double join_rel_tol = 0.005;           ///< ... when their frequencies meet within this
constexpr double harmonic_tolerance_rel = 0.02;  ///< labelling tracks with harmonic numbers
constexpr double guide_tolerance_rel = 0.04;     ///< harmonic tracks stay this close to n f0 s_n
constexpr int b_fit_rounds = 3;
constexpr double first_label_harmonics = 10.0;   ///< the series is first fitted up to 10 f0
constexpr double max_snr_weight_db = 40.0;       ///< B fit: weight by SNR, capped here
constexpr double attack_skip_s = 0.1;             ///< a track's frequency: median after this,
constexpr double attack_skip_windows = 2.0;       ///< ... and after this many windows,
constexpr double settled_snr_db = 20.0;           ///< ... over points this far above the floor

int odd_length(double samples) { return std::max(3, 2 * static_cast<int>(std::lround(samples / 2.0)) + 1); }

/// Value where the cumulative weight (values sorted) first reaches half the total.
double weighted_median(std::vector<double> v, std::vector<double> w) {
    std::vector<std::size_t> idx(v.size());
    std::iota(idx.begin(), idx.end(), std::size_t{0});
    std::sort(idx.begin(), idx.end(), [&](auto a, auto c) { return v[a] < v[c]; });
    const double half = 0.5 * std::accumulate(w.begin(), w.end(), 0.0);
    double acc = 0.0;
    for (std::size_t i : idx)
        if ((acc += w[i]) >= half) return v[i];
    return v[idx.back()];
}

[[noreturn]] void refuse(const std::string& why) { throw std::invalid_argument(why); }

struct survey_result {
    std::vector<pitch_peak> peaks;
};

/// Long-window spectrum (average power of a few frames after the onset) for f0 and the window.
survey_result survey(std::span<const float> x, double fs, std::int64_t onset, float dc) {
    const auto size = static_cast<std::int64_t>(x.size());
    const std::int64_t remaining = size - onset;
    const int n = odd_length(std::min(survey_window_s * fs, double(remaining)));
    const int m = fast_fft_size(zero_padding * n);
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = n, .fft_size = m});
    const std::int64_t h = plan.half_length();
    std::vector<float> sum(static_cast<std::size_t>(m / 2 + 1), 0.0f);
    int frames = 0;
    for (int j = 0; j < survey_frames; ++j) {
        const std::int64_t centre = onset + h + j * h;
        if (j > 0 && centre + h > size) break;
        plan.analyze(x, centre, dc);
        for (std::size_t k = 0; k < sum.size(); ++k) sum[k] += plan.power()[k];
        ++frames;
    }
    for (float& v : sum) v /= float(frames);
    noise_floor floor(static_cast<int>(sum.size()), fs / m, survey_window_s);
    floor.reset(sum);
    std::vector<spectral_peak> peaks;
    find_peaks(sum, {}, plan.correction(), m, fs, &floor,
               {.above_floor_db = survey_above_floor_db}, peaks);
    survey_result out;
    for (const auto& p : peaks) out.peaks.push_back({p.freq_hz, p.level_db});
    return out;
}

/// Frequency spacing the window must resolve: f0, or for an inharmonic sound the lowest strong
/// partial or the closest strong pair.
double resolve_spacing_hz(const std::vector<pitch_peak>& peaks, double f0_hz) {
    if (f0_hz > 0.0) return f0_hz;
    constexpr double strong_db = 30.0;
    constexpr double min_spacing_hz = 20.0;
    double max_db = -infinity;
    for (const auto& p : peaks) max_db = std::max(max_db, p.level_db);
    std::vector<double> f;
    for (const auto& p : peaks)
        if (p.level_db >= max_db - strong_db) f.push_back(p.freq_hz);
    std::sort(f.begin(), f.end());
    double spacing = f.empty() ? min_spacing_hz : f.front();
    for (std::size_t i = 1; i < f.size(); ++i) spacing = std::min(spacing, f[i] - f[i - 1]);
    return std::max(spacing, min_spacing_hz);
}

/// Appends `frames` interpolated points after the track's last one, toward `next` (the next real
/// point, one hop after the last inserted): frequency, level and floor linear, the phase advanced
/// by 2 pi f hop at the mean frequency of each step.
void bridge_gap(partial_track& track, int frames, const track_point& next, double hop_s) {
    const track_point before = track.points.back();
    for (int g = 1; g <= frames; ++g) {
        const double a = double(g) / (frames + 1);
        const track_point& prev = track.points.back();
        const double f = before.freq_hz + a * (next.freq_hz - before.freq_hz);
        track.points.push_back(
            {.time_s = before.time_s + g * hop_s,
             .freq_hz = f,
             .level_db = before.level_db + a * (next.level_db - before.level_db),
             .phase_rad = std::remainder(prev.phase_rad + two_pi * 0.5 * (prev.freq_hz + f) * hop_s, two_pi),
             .floor_db = before.floor_db + a * (next.floor_db - before.floor_db)});
    }
}

/// Median frequency of the first (or last) few points of a track: its ends can sit on a fading or
/// rising edge where a single frame reads off.
double edge_freq_hz(const partial_track& t, bool at_start) {
    constexpr std::size_t edge_points = 5;
    const std::size_t k = std::min(edge_points, t.points.size());
    std::array<double, edge_points> f{};
    for (std::size_t i = 0; i < k; ++i) f[i] = t.points[at_start ? i : t.points.size() - 1 - i].freq_hz;
    for (std::size_t i = 1; i < k; ++i)  // insertion sort of <= 5 values
        for (std::size_t j = i; j > 0 && f[j - 1] > f[j]; --j) std::swap(f[j - 1], f[j]);
    return f[k / 2];
}

/// Joins fragments of one partial: a track starting within max_gap_s after another ended, at a
/// frequency within rel_tol of where that one stopped, continues it (the gap bridged). Fragments
/// come from a partial dipping into the noise (beating) for longer than the frame bridging allows.
void join_fragments(std::vector<partial_track>& tracks, std::vector<double>& peak_db, double hop_s,
                    double max_gap_s, double rel_tol) {
    std::vector<std::size_t> order(tracks.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::sort(order.begin(), order.end(),
              [&](auto a, auto c) { return tracks[a].points.front().time_s < tracks[c].points.front().time_s; });
    std::vector<bool> absorbed(tracks.size(), false);
    for (std::size_t oi = 0; oi < order.size(); ++oi) {
        const std::size_t later = order[oi];
        const track_point& first = tracks[later].points.front();
        std::size_t best = tracks.size();
        double best_dist = rel_tol;
        for (std::size_t oj = 0; oj < oi; ++oj) {
            const std::size_t earlier = order[oj];
            if (absorbed[earlier] || tracks[earlier].cut_by_end) continue;
            const track_point& last = tracks[earlier].points.back();
            const double gap_s = first.time_s - last.time_s;
            if (gap_s <= 0.5 * hop_s || gap_s > max_gap_s) continue;
            const double dist = std::abs(edge_freq_hz(tracks[later], true) / edge_freq_hz(tracks[earlier], false) - 1.0);
            if (dist < best_dist) best_dist = dist, best = earlier;
        }
        if (best == tracks.size()) continue;
        partial_track& into = tracks[best];
        const int gap_frames =
            static_cast<int>(std::lround((first.time_s - into.points.back().time_s) / hop_s)) - 1;
        bridge_gap(into, gap_frames, first, hop_s);
        into.points.insert(into.points.end(), tracks[later].points.begin(), tracks[later].points.end());
        into.cut_by_end = tracks[later].cut_by_end;
        peak_db[best] = std::max(peak_db[best], peak_db[later]);
        absorbed[later] = true;
        // The joined track now ends where `later` ended: let it be found again by later fragments.
        order[oi] = best;
        absorbed[best] = false;
    }
    std::size_t keep = 0;
    for (std::size_t i = 0; i < tracks.size(); ++i) {
        if (absorbed[i]) continue;
        if (keep != i) {
            tracks[keep] = std::move(tracks[i]);
            peak_db[keep] = peak_db[i];
        }
        ++keep;
    }
    tracks.resize(keep);
    peak_db.resize(keep);
}

/// Harmonic numbers of tracks at ascending frequencies freqs (0 = none), up to limit_hz. The
/// lowest is numbered on the series n f0 sqrt(1 + B n^2); walking up, each next one from the
/// nearest numbered track below (the series through it, same B), since real strings drift from
/// the law at high n and the global series can be a whole number off there. Equal numbers are
/// kept (two tracks of one partial); a track that fits no number above its anchor gets 0.
void label_harmonics(const std::vector<double>& freqs, double f0_hz, double b, double limit_hz,
                     std::vector<int>& harmonic) {
    std::size_t anchor = freqs.size();
    for (std::size_t i = 0; i < freqs.size(); ++i) {
        harmonic[i] = 0;
        if (freqs[i] > limit_hz) continue;
        if (anchor == freqs.size()) {
            harmonic[i] = harmonic_number(freqs[i], f0_hz, b, harmonic_tolerance_rel);
            if (harmonic[i] > 0) anchor = i;
            continue;
        }
        const int n_anchor = harmonic[anchor];
        const double na = n_anchor;
        const double local_f0 = freqs[anchor] / (na * std::sqrt(1.0 + b * na * na));
        const int chained = harmonic_number(freqs[i], local_f0, b, harmonic_tolerance_rel);
        if (chained < n_anchor) continue;
        harmonic[i] = chained;
        if (chained > n_anchor) anchor = i;
    }
}

/// The robust series fit (pitch/series_fit.hpp) over labelled partials; where several partials
/// carry one number only the one of largest weight counts (the others are a fragment or a
/// neighbour of it).
series_fit fit_labelled_series(const std::vector<int>& harmonic, const std::vector<double>& freq_hz,
                               const std::vector<double>& weight) {
    std::vector<series_point> pts;
    for (std::size_t i = 0; i < harmonic.size(); ++i) {
        if (harmonic[i] < 1 || weight[i] <= 0.0) continue;
        auto it = std::find_if(pts.begin(), pts.end(), [&](const series_point& p) { return p.harmonic == harmonic[i]; });
        if (it == pts.end()) pts.push_back({harmonic[i], freq_hz[i], weight[i]});
        else if (weight[i] > it->weight) *it = {harmonic[i], freq_hz[i], weight[i]};
    }
    return fit_series(pts);
}

struct live_track {
    partial_track track;
    int harmonic = 0;
    double guide_lo_hz = 0.0;  ///< a harmonic track takes peaks only in [lo, hi]
    double guide_hi_hz = 0.0;
    int missed = 0;
    double peak_db = -infinity;
};

struct match {
    double cost;
    std::uint32_t track;
    std::uint32_t peak;
};

}  // namespace

tracking_result track_note(std::span<const float> samples, double sample_rate_hz, const tracking_params& params) {
    const std::span<const float> x = samples;  // short names for the formulas below
    const double fs = sample_rate_hz;
    if (!(fs > 0.0) || !std::isfinite(fs)) refuse("sample rate must be positive");
    if (params.max_partials < 1) refuse("at most " + std::to_string(params.max_partials) + " partials: must be at least 1");
    if (params.window_s && !(*params.window_s > 0.0)) refuse("window length must be positive");
    if (params.hop_s && !(*params.hop_s > 0.0)) refuse("hop must be positive");
    const double duration_s = double(x.size()) / fs;
    if (duration_s < min_duration_s)
        refuse("too short: " + std::to_string(std::lround(duration_s * 1000.0)) +
               " ms of audio; at least " + std::to_string(std::lround(min_duration_s * 1000.0)) +
               " ms needed");
    double sum = 0.0;
    for (float v : x) {
        if (!std::isfinite(v)) refuse("the samples contain NaN or infinity");
        sum += double(v);
    }
    const auto dc = static_cast<float>(sum / double(x.size()));
    constexpr float min_signal = 1e-7f;  // -140 dBFS: nothing but rounding
    float max_dev = 0.0f;
    for (float v : x) max_dev = std::max(max_dev, std::abs(v - dc));
    if (max_dev < min_signal) refuse("no signal: the samples are constant (silence or DC only)");
    if (const clipping_report clip = find_clipping(x); clip.clipped) {
        char peak_text[32];
        std::snprintf(peak_text, sizeof peak_text, "%.2f", 20.0 * std::log10(clip.peak_lin));
        refuse("clipped: the waveform is flattened at its peak (" + std::string(peak_text) + " dBFS) in " +
               std::to_string(clip.runs) + " places; the partial levels would be wrong");
    }

    tracking_result result;
    const std::int64_t onset = detect_onset(x, fs);
    result.onset_s = double(onset) / fs;

    // ---- f0 and the window ----
    const survey_result sv = survey(x, fs, onset, dc);
    if (sv.peaks.empty()) refuse("no partials above the noise floor");
    // The f0 hint (--f0) does not steer the tracking (window, guidance): the same tracks come out
    // with or without it; it only numbers them and starts the series fit below.
    if (params.f0_hz && !(*params.f0_hz > 0.0)) refuse("f0 must be positive");
    const pitch_estimate pe = estimate_pitch(sv.peaks);
    double f0_hz = pe.f0_hz;
    double b = pe.inharmonicity_b;
    if (f0_hz > 0.0) {
        // Refine f0 and B on the survey peaks (Fletcher fit), for the harmonic guidance.
        std::vector<int> hn(sv.peaks.size());
        std::vector<double> freqs(sv.peaks.size()), weights(sv.peaks.size());
        for (int round = 0; round < b_fit_rounds; ++round) {
            for (std::size_t i = 0; i < sv.peaks.size(); ++i) {
                hn[i] = harmonic_number(sv.peaks[i].freq_hz, f0_hz, b, harmonic_tolerance_rel);
                freqs[i] = sv.peaks[i].freq_hz;
                weights[i] = std::pow(10.0, sv.peaks[i].level_db / 10.0);
            }
            const series_fit fit = fit_labelled_series(hn, freqs, weights);
            if (fit.used < 2) break;
            f0_hz = fit.f0_hz;
            b = fit.inharmonicity_b;
        }
    }
    const double spacing_hz = resolve_spacing_hz(sv.peaks, f0_hz);
    const double window_s = params.window_s.value_or(
        std::clamp(periods_per_window / spacing_hz, min_window_s, max_window_s));
    const int n = odd_length(window_s * fs);
    int m = fast_fft_size(zero_padding * n);
    if (params.fft_size) {
        if (*params.fft_size < n || *params.fft_size % 2 != 0)
            refuse("FFT size " + std::to_string(*params.fft_size) +
                   " must be even and at least the window length (" + std::to_string(n) + " samples)");
        m = *params.fft_size;
    }
    const double hop_s_wanted =
        params.hop_s.value_or(std::clamp(hop_per_window * window_s, min_hop_s, max_hop_s));
    const auto hop = std::max<std::int64_t>(1, std::llround(hop_s_wanted * fs));
    result.window_s = double(n) / fs;
    result.fft_size = m;
    result.hop_s = double(hop) / fs;

    // ---- frames ----
    stft_plan plan({.window = window_kind::blackman_harris_4, .window_length = n, .fft_size = m});
    const int bin_count = m / 2 + 1;
    const double bin_hz = fs / m;
    noise_floor floor(bin_count, bin_hz, result.hop_s);
    std::vector<double> floor_sum(floor.bands_db().size(), 0.0);
    std::vector<spectral_peak> peaks;
    std::vector<live_track> live;
    std::vector<partial_track> done;
    std::vector<match> matches;
    std::vector<bool> peak_used;
    std::vector<bool> track_used;
    const std::int64_t h = plan.half_length();
    const auto size = static_cast<std::int64_t>(x.size());
    const int min_frames = std::max(min_track_frames,
                                    static_cast<int>(std::ceil(min_track_windows * result.window_s / result.hop_s)));
    if (const std::int64_t fitting = size - h - onset; fitting < 0 || fitting / hop + 1 < min_frames) {
        const double need_s = double(2 * h + (min_frames - 1) * hop) / fs;
        refuse("too short after the onset: " + std::to_string(std::lround(double(size - onset) / fs * 1000.0)) +
               " ms of sound, the " + std::to_string(std::lround(result.window_s * 1000.0)) +
               " ms analysis window needs at least " + std::to_string(std::lround(need_s * 1000.0)) + " ms");
    }
    const auto dev_hz = [&](double f) {
        double d = std::max(dev_min_bins * bin_hz, dev_rel * f);
        if (f0_hz > 0.0) d = std::min(d, dev_max_f0 * f0_hz);
        return d;
    };
    // Finished tracks; when they pile up (long or noisy files) only the 2 x max_partials strongest
    // are kept, so memory follows max_partials. (A weak fragment dropped here is not joined later.)
    std::vector<double> done_peak_db;
    const std::size_t keep_at_most = 2 * static_cast<std::size_t>(std::max(params.max_partials, 1));
    const auto finish = [&](live_track& t) {
        if (static_cast<int>(t.track.points.size()) < min_frames) return;
        t.track.points.shrink_to_fit();  // a long track grew by doubling: give the slack back
        done.push_back(std::move(t.track));
        done_peak_db.push_back(t.peak_db);
        if (done.size() < 2 * keep_at_most) return;
        std::vector<std::size_t> idx(done.size());
        std::iota(idx.begin(), idx.end(), std::size_t{0});
        std::nth_element(idx.begin(), idx.begin() + static_cast<std::ptrdiff_t>(keep_at_most), idx.end(),
                         [&](auto a, auto c) { return done_peak_db[a] > done_peak_db[c]; });
        idx.resize(keep_at_most);
        std::sort(idx.begin(), idx.end());
        for (std::size_t i = 0; i < idx.size(); ++i) {
            if (idx[i] == i) continue;  // idx is sorted, so idx[i] >= i: no self-move
            done[i] = std::move(done[idx[i]]);
            done_peak_db[i] = done_peak_db[idx[i]];
        }
        done.resize(keep_at_most);
        done_peak_db.resize(keep_at_most);
    };
    const double hop_time_s = result.hop_s;
    int frames = 0;
    int quiet_frames = 0;
    for (std::int64_t centre = onset; centre + h <= size || frames == 0; centre += hop, ++frames) {
        const double time_s = double(centre - onset) / fs;
        plan.analyze(x, centre, dc);
        floor.update(plan.power());
        for (std::size_t bnd = 0; bnd < floor_sum.size(); ++bnd) floor_sum[bnd] += floor.bands_db()[bnd];
        find_peaks(plan.power(), plan.bins(), plan.correction(), m, fs, &floor,
                   {.above_floor_db = continue_above_floor_db}, peaks);
        double frame_max_db = -infinity;
        for (const auto& p : peaks) frame_max_db = std::max(frame_max_db, p.level_db);

        // Candidate (track, peak) pairs within the deviation limit; peaks are sorted by frequency.
        matches.clear();
        for (std::uint32_t ti = 0; ti < live.size(); ++ti) {
            const track_point& last = live[ti].track.points.back();
            const double d = dev_hz(last.freq_hz);
            auto it = std::lower_bound(peaks.begin(), peaks.end(), last.freq_hz - d,
                                       [](const spectral_peak& p, double f) { return p.freq_hz < f; });
            for (; it != peaks.end() && it->freq_hz <= last.freq_hz + d; ++it) {
                if (live[ti].harmonic > 0 && (it->freq_hz < live[ti].guide_lo_hz || it->freq_hz > live[ti].guide_hi_hz))
                    continue;  // harmonic guidance: stay on the series member n f0 sqrt(1 + B n^2)
                matches.push_back({std::abs(it->freq_hz - last.freq_hz) / d, ti,
                                   static_cast<std::uint32_t>(it - peaks.begin())});
            }
        }
        std::sort(matches.begin(), matches.end(), [](const match& a, const match& c) { return a.cost < c.cost; });
        peak_used.assign(peaks.size(), false);
        track_used.assign(live.size(), false);
        for (const match& mt : matches) {
            if (peak_used[mt.peak] || track_used[mt.track]) continue;
            peak_used[mt.peak] = track_used[mt.track] = true;
            live_track& t = live[mt.track];
            const spectral_peak& p = peaks[mt.peak];
            bridge_gap(t.track, t.missed, {.freq_hz = p.freq_hz, .level_db = p.level_db, .floor_db = p.floor_db},
                       hop_time_s);
            t.missed = 0;
            t.track.points.push_back({.time_s = time_s, .freq_hz = p.freq_hz, .level_db = p.level_db,
                                      .phase_rad = p.phase_rad, .floor_db = p.floor_db});
            t.peak_db = std::max(t.peak_db, p.level_db);
        }
        // Unmatched tracks wait up to max_gap_frames, then end.
        std::size_t keep = 0;
        for (std::size_t ti = 0; ti < live.size(); ++ti) {
            if (!track_used[ti] && ++live[ti].missed > max_gap_frames) {
                finish(live[ti]);
                continue;
            }
            if (keep != ti) live[keep] = std::move(live[ti]);
            ++keep;
        }
        live.resize(keep);
        // Births: strong unmatched peaks.
        for (std::size_t pk = 0; pk < peaks.size(); ++pk) {
            const spectral_peak& p = peaks[pk];
            if (peak_used[pk] || p.level_db < p.floor_db + birth_above_floor_db ||
                p.level_db < frame_max_db - birth_below_max_db)
                continue;
            live_track t;
            t.harmonic = harmonic_number(p.freq_hz, f0_hz, b, harmonic_tolerance_rel);
            if (t.harmonic > 0) {
                // The band harmonic_number(f, f0, B, 2 x tolerance) maps to this n.
                const double nd = t.harmonic;
                const double guide_hz = stiff_partial_hz(f0_hz, b, t.harmonic);
                const double tol = std::min(guide_tolerance_rel, 0.25 / nd);
                t.guide_lo_hz = guide_hz * (1.0 - tol);
                t.guide_hi_hz = guide_hz * (1.0 + tol);
            }
            t.peak_db = p.level_db;
            t.track.points.push_back({.time_s = time_s, .freq_hz = p.freq_hz, .level_db = p.level_db,
                                      .phase_rad = p.phase_rad, .floor_db = p.floor_db});
            live.push_back(std::move(t));
        }
        // The note is over once every track has ended and nothing new stood up for a while: the
        // rest of the file is noise (or silence) and would only cost frames.
        quiet_frames = live.empty() ? quiet_frames + 1 : 0;
        if (!done.empty() && double(quiet_frames) * result.hop_s >= quiet_stop_s) {
            ++frames;  // this frame is counted in floor_sum
            break;
        }
    }
    for (auto& t : live) {
        const track_point& last = t.track.points.back();
        t.track.cut_by_end = t.missed == 0 && last.level_db >= last.floor_db + cut_above_floor_db;
        finish(t);
    }
    result.floor_band_hz = floor.band_hz();
    result.floor_db.resize(floor_sum.size());
    for (std::size_t bnd = 0; bnd < floor_sum.size(); ++bnd) result.floor_db[bnd] = floor_sum[bnd] / frames;
    if (done.empty()) refuse("no partials above the noise floor");
    join_fragments(done, done_peak_db, result.hop_s, max_join_gap_s, join_rel_tol);

    // ---- keep the strongest, label harmonics, fit B ----
    std::vector<double> strength(done.size()), rep_freq(done.size()), weight(done.size());
    for (std::size_t i = 0; i < done.size(); ++i) {
        std::vector<double> f;
        double best = -infinity, best_snr = -infinity;
        for (const auto& pt : done[i].points) {
            best = std::max(best, pt.level_db);
            best_snr = std::max(best_snr, pt.level_db - pt.floor_db);
        }
        // The track's frequency: amplitude-weighted median over its settled part (after the
        // attack's glide, clear of the noise), so the loud early part, where the pitch is heard,
        // counts most; all points when that part is empty.
        const double settle_s = std::max(attack_skip_s, attack_skip_windows * result.window_s);
        std::vector<double> w;
        for (const auto& pt : done[i].points)
            if (pt.time_s >= settle_s && pt.level_db >= pt.floor_db + settled_snr_db) {
                f.push_back(pt.freq_hz);
                w.push_back(std::pow(10.0, pt.level_db / 20.0));
            }
        if (f.empty())
            for (const auto& pt : done[i].points) f.push_back(pt.freq_hz), w.push_back(1.0);
        rep_freq[i] = weighted_median(std::move(f), std::move(w));
        strength[i] = best;
        weight[i] = std::pow(10.0, std::min(best_snr, max_snr_weight_db) / 10.0) * double(done[i].points.size());
    }
    std::vector<std::size_t> order(done.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::sort(order.begin(), order.end(), [&](auto a, auto c) { return strength[a] > strength[c]; });
    if (order.size() > static_cast<std::size_t>(params.max_partials)) order.resize(params.max_partials);
    std::sort(order.begin(), order.end(), [&](auto a, auto c) { return rep_freq[a] < rep_freq[c]; });

    std::vector<int> harmonic(order.size(), 0);
    std::vector<double> freqs(order.size()), weights(order.size());
    for (std::size_t i = 0; i < order.size(); ++i) freqs[i] = rep_freq[order[i]];
    if (params.f0_hz) {
        // The hint numbers the partials: B of the survey only when the hint agrees with its f0.
        constexpr double same_f0_rel = 0.03;
        if (!(f0_hz > 0.0 && std::abs(*params.f0_hz / f0_hz - 1.0) < same_f0_rel)) b = 0.0;
        f0_hz = *params.f0_hz;
    }
    if (f0_hz > 0.0) {
        for (std::size_t i = 0; i < order.size(); ++i) weights[i] = weight[order[i]];
        // Grow the numbered range: fit the series on the partials up to a limit, then double it.
        // A stiff string's upper partials drift by whole harmonics from a B = 0 guess, so they
        // are numbered only once the lower ones have fixed f0 and B.
        const double top_hz = freqs.empty() ? 0.0 : freqs.back();
        double limit_hz = first_label_harmonics * f0_hz;
        for (int round = 0;; ++round) {
            label_harmonics(freqs, f0_hz, b, limit_hz, harmonic);
            const series_fit fit = fit_labelled_series(harmonic, freqs, weights);
            if (fit.used > 0) {
                f0_hz = fit.f0_hz;
                b = fit.inharmonicity_b;
            }
            if (limit_hz >= top_hz && round >= b_fit_rounds) break;
            limit_hz *= 2.0;
        }
        label_harmonics(freqs, f0_hz, b, infinity, harmonic);
    }
    result.series_f0_hz = f0_hz;
    result.inharmonicity_b = f0_hz > 0.0 ? b : 0.0;
    result.f0_hz = f0_hz;  // the fundamental of the fitted series (pitch/series_fit.hpp)
    for (std::size_t i = 0; i < order.size(); ++i) {
        partial_track t = std::move(done[order[i]]);
        t.harmonic = harmonic[i];
        result.tracks.push_back(std::move(t));
    }
    return result;
}

}  // namespace wane
