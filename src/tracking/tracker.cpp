// track_note: onset -> survey spectrum -> f0 and window -> STFT frames -> peaks -> tracks -> B.
#include "tracking/tracker.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <numeric>
#include <stdexcept>
#include <string>
#include <vector>

#include "core/units.hpp"
#include "spectrum/peaks.hpp"
#include "spectrum/stft.hpp"
#include "tracking/onset.hpp"
#include "tracking/pitch.hpp"

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
constexpr double max_hop_s = 0.010;
constexpr double hop_per_window = 0.25;
constexpr double continue_above_floor_db = 6.0;  ///< a track continues on peaks this far up
constexpr double birth_above_floor_db = 12.0;    ///< a track is born only this far up
constexpr double birth_below_max_db = 80.0;      ///< ... and within this of the frame's strongest
constexpr double cut_above_floor_db = 10.0;      ///< still sounding at the end: cut, not decayed
constexpr double dev_rel = 0.01;                 ///< frequency deviation per hop, relative
constexpr double dev_min_bins = 2.0;             ///< ... but at least this many FFT bins
constexpr double dev_max_f0 = 0.3;               ///< ... and at most this fraction of f0
constexpr int max_gap_frames = 3;                ///< gaps up to this many frames are bridged
constexpr int min_track_frames = 5;
constexpr double min_track_windows = 1.5;        ///< ... and at least this many window lengths
constexpr double harmonic_tolerance_rel = 0.02;  ///< labelling tracks with harmonic numbers
constexpr int b_fit_rounds = 3;
constexpr double max_snr_weight_db = 40.0;       ///< B fit: weight by SNR, capped here
constexpr double representative_range_db = 20.0; ///< a track's frequency: median within this of its peak

int odd_length(double samples) { return std::max(3, 2 * static_cast<int>(std::lround(samples / 2.0)) + 1); }

double median(std::vector<double> v) {
    const auto mid = v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2);
    std::nth_element(v.begin(), mid, v.end());
    return *mid;
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

struct live_track {
    partial_track track;
    int harmonic = 0;
    int missed = 0;
    double peak_db = -infinity;
};

struct match {
    double cost;
    std::uint32_t track;
    std::uint32_t peak;
};

}  // namespace

tracking_result track_note(std::span<const float> x, double fs, const tracking_params& params) {
    if (!(fs > 0.0) || !std::isfinite(fs)) refuse("sample rate must be positive");
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

    tracking_result result;
    const std::int64_t onset = detect_onset(x, fs);
    result.onset_s = double(onset) / fs;

    // ---- f0 and the window ----
    const survey_result sv = survey(x, fs, onset, dc);
    if (sv.peaks.empty()) refuse("no partials above the noise floor");
    double f0_hz = 0.0;
    double b = 0.0;
    if (params.f0_hz) {
        if (!(*params.f0_hz > 0.0)) refuse("f0 must be positive");
        f0_hz = *params.f0_hz;
    } else {
        const pitch_estimate pe = estimate_pitch(sv.peaks);
        f0_hz = pe.f0_hz;
        b = pe.inharmonicity_b;
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
    const auto dev_hz = [&](double f) {
        double d = std::max(dev_min_bins * bin_hz, dev_rel * f);
        if (f0_hz > 0.0) d = std::min(d, dev_max_f0 * f0_hz);
        return d;
    };
    const auto finish = [&](live_track& t) {
        if (static_cast<int>(t.track.points.size()) >= min_frames) done.push_back(std::move(t.track));
    };
    const double hop_time_s = result.hop_s;
    int frames = 0;
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
                if (live[ti].harmonic > 0 &&
                    harmonic_number(it->freq_hz, f0_hz, b, harmonic_tolerance_rel * 2.0) != live[ti].harmonic)
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
            // Bridge a gap: interpolate frequency and level, advance the phase at that frequency.
            const track_point before = t.track.points.back();
            for (int g = 1; g <= t.missed; ++g) {
                const double a = double(g) / (t.missed + 1);
                const track_point& prev = t.track.points.back();
                const double f = before.freq_hz + a * (p.freq_hz - before.freq_hz);
                t.track.points.push_back(
                    {.time_s = before.time_s + g * hop_time_s,
                     .freq_hz = f,
                     .level_db = before.level_db + a * (p.level_db - before.level_db),
                     .phase_rad = std::remainder(prev.phase_rad + two_pi * 0.5 * (prev.freq_hz + f) * hop_time_s, two_pi),
                     .floor_db = before.floor_db + a * (p.floor_db - before.floor_db)});
            }
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
            t.peak_db = p.level_db;
            t.track.points.push_back({.time_s = time_s, .freq_hz = p.freq_hz, .level_db = p.level_db,
                                      .phase_rad = p.phase_rad, .floor_db = p.floor_db});
            live.push_back(std::move(t));
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

    // ---- keep the strongest, label harmonics, fit B ----
    std::vector<double> strength(done.size()), rep_freq(done.size()), weight(done.size());
    for (std::size_t i = 0; i < done.size(); ++i) {
        std::vector<double> f;
        double best = -infinity, best_snr = -infinity;
        for (const auto& pt : done[i].points) {
            best = std::max(best, pt.level_db);
            best_snr = std::max(best_snr, pt.level_db - pt.floor_db);
        }
        // The track's frequency: median over its strong part (beating and the noisy tail aside).
        for (const auto& pt : done[i].points)
            if (pt.level_db >= best - representative_range_db) f.push_back(pt.freq_hz);
        rep_freq[i] = median(std::move(f));
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
    if (f0_hz > 0.0) {
        for (int round = 0; round < b_fit_rounds; ++round) {
            for (std::size_t i = 0; i < order.size(); ++i) {
                harmonic[i] = harmonic_number(freqs[i], f0_hz, b, harmonic_tolerance_rel);
                weights[i] = weight[order[i]];
            }
            const inharmonicity_fit fit = fit_inharmonicity(harmonic, freqs, weights);
            if (fit.used == 0) break;
            f0_hz = fit.f0_hz;
            b = fit.inharmonicity_b;
        }
        for (std::size_t i = 0; i < order.size(); ++i)
            harmonic[i] = harmonic_number(freqs[i], f0_hz, b, harmonic_tolerance_rel);
    }
    result.f0_hz = f0_hz;
    result.inharmonicity_b = f0_hz > 0.0 ? b : 0.0;
    for (std::size_t i = 0; i < order.size(); ++i) {
        partial_track t = std::move(done[order[i]]);
        t.harmonic = harmonic[i];
        result.tracks.push_back(std::move(t));
    }
    return result;
}

}  // namespace wane
