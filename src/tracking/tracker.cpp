// track_note: onset -> survey spectrum -> f0 and window -> STFT frames -> peaks -> tracks -> B.
#include "core/text_format.hpp"
#include "tracking/tracker.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdint>
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
#include "tracking/tracker_steps.hpp"
#include "tracking/tracker_tuning.hpp"

namespace wane {

namespace {

using namespace tracker_tuning;
using tracker_steps::frame_grid;
using tracker_steps::refuse;

int odd_length(double samples) { return std::max(3, 2 * static_cast<int>(std::lround(samples / 2.0)) + 1); }

struct survey_result {
    std::vector<pitch_peak> peaks;
};

/// Long-window spectrum (average power of a few frames after the onset) for f0 and the window.
survey_result survey(std::span<const float> x, double fs, std::int64_t onset, float dc) {
    const auto size = static_cast<std::int64_t>(x.size());
    const std::int64_t remaining = size - onset;
    const int n = odd_length(std::min(survey_window_s * fs, double(remaining)));
    const int m = fast_fft_size(zero_padding * n);
    // On FFTW (not stft_config::few_frames' KissFFT): with the size's stored planner choices the
    // plan and its 3 frames cost less than KissFFT's twiddle table and transforms (callgrind, the
    // synthetic note's track_note: 110.07 -> 106.57 M instructions; the same patches).
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

/// Refuses input the tracker cannot work on; returns the DC offset (the file mean).
float check_input(std::span<const float> x, double fs, const tracking_params& params) {
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
        refuse("clipped: the waveform is flattened at its peak (" + printf_text("%.2f", 20.0 * std::log10(clip.peak_lin)) + " dBFS) in " +
               std::to_string(clip.runs) + " places; the partial levels would be wrong");
    }
    return dc;
}

struct series_guess {
    double f0_hz = 0.0;
    double b = 0.0;
};

/// f0 (the pitch sieve on the survey peaks, or the override) and B, refined by a Fletcher fit.
series_guess guess_series(const survey_result& sv, const tracking_params& params) {
    // The f0 hint (--f0) does not steer the tracking (window, guidance): the same tracks come out
    // with or without it; it only numbers them and starts the series fit (label_tracks).
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
                weights[i] = db_to_power(sv.peaks[i].level_db);
            }
            const series_fit fit = tracker_steps::fit_labelled_series(hn, freqs, weights);
            if (fit.used < 2) break;
            f0_hz = fit.f0_hz;
            b = fit.inharmonicity_b;
        }
    }
    return {.f0_hz = f0_hz, .b = b};
}

/// The window (periods_per_window periods of the spacing to resolve), FFT size and hop, unless
/// given in params; records them in result.
frame_grid choose_window(const survey_result& sv, double f0_hz, double fs, const tracking_params& params,
                         tracking_result& result) {
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
    return {.window_length = n, .fft_size = m, .hop = hop};
}

}  // namespace

tracking_result track_note(std::span<const float> samples, double sample_rate_hz, const tracking_params& params) {
    const std::span<const float> x = samples;  // short names for the formulas below
    const double fs = sample_rate_hz;
    const float dc = check_input(x, fs, params);

    tracking_result result;
    const std::int64_t onset = detect_onset(x, fs);
    result.onset_s = double(onset) / fs;

    // ---- f0 and the window ----
    const survey_result sv = survey(x, fs, onset, dc);
    if (sv.peaks.empty()) refuse("no partials above the noise floor");
    const series_guess guess = guess_series(sv, params);
    const frame_grid grid = choose_window(sv, guess.f0_hz, fs, params, result);

    // ---- frames ----
    tracker_steps::frame_tracks found =
        tracker_steps::run_frames(x, fs, onset, dc, grid, guess.f0_hz, guess.b, params.max_partials, result);
    if (found.tracks.empty()) refuse("no partials above the noise floor");
    tracker_steps::join_fragments(found.tracks, found.peak_db, result.hop_s, max_join_gap_s, join_rel_tol);

    // ---- keep the strongest, label harmonics, fit B ----
    const tracker_steps::track_keep keep{.max_partials = params.max_partials,
                                         .faint_rank = params.faint_rank,
                                         .faint_range_db = params.faint_range_db};
    tracker_steps::label_tracks(found.tracks, guess.f0_hz, guess.b, params.f0_hz, keep, result);
    return result;
}

}  // namespace wane
