// A self-contained HTML report of one analysis: spectrogram with the partial tracks, measured
// level tracks with the fitted envelopes, the patch table, comparison figures and audio players.
// Everything is embedded (PNG via libpng and WAV via libsndfile as data: URIs, SVG inline), so the
// file opens from disk with no network.
#pragma once

#include <span>
#include <string>
#include <vector>

#include "core/patch.hpp"
#include "measure/compare.hpp"
#include "tracking/track.hpp"

namespace wane {

/// A magnitude spectrogram in dB: level_db[frame * bins + bin], bin k at k * bin_hz,
/// frame j centred at start_s + j * hop_s (seconds in the source file).
struct spectrogram_db {
    int frames = 0;
    int bins = 0;
    double bin_hz = 0.0;
    double hop_s = 0.0;
    double start_s = 0.0;
    std::vector<float> level_db;
};

struct report_inputs {
    std::string title;
    const patch* value = nullptr;               ///< the fitted patch (required)
    /// Measured tracks (may be null); their times count from the patch's source.onset_s, which
    /// places them in the source file (tracking->onset_s is not used: it may count from --start-s).
    const tracking_result* tracking = nullptr;
    spectrogram_db spectrogram;                 ///< of the source
    std::span<const float> source_audio;
    double source_rate_hz = 0.0;
    std::span<const float> render_audio;
    double render_rate_hz = 0.0;
    std::string source_name;  ///< file name shown beside the source player
    std::string info_table;   ///< the text of `wane info`
    /// Source (a) against render (b) with the default compare_params (the page states their
    /// ranges); null: none.
    const compare_result* comparison = nullptr;
    std::string comparison_note;                 ///< why there is no comparison, when null
    double comparison_from_s = 0.0;  ///< where in the source file the compared audio (a) starts
    int envelope_plots = 12;  ///< strongest partials drawn with their fitted envelopes
    /// Top of the spectrogram: a little above the highest partial within spectrogram_range_db of
    /// the loudest, never above this.
    double max_plot_freq_hz = 8000.0;
};

/// The whole HTML page. Sections in order, by id: summary, spectrogram, envelopes, patch,
/// compare, listen. Each envelope plot is an <svg class='envelope'> with data-freq-hz (the
/// partial) and data-track-freq-hz (mean frequency of the measured track drawn, absent when no
/// track matched).
std::string make_report_html(const report_inputs& in);

/// Spectrogram of a whole recording for the report: Blackman-Harris window of window_s, at most
/// max_frames frames spread evenly over the file (levels in dBFS re a full-scale sinusoid).
spectrogram_db make_spectrogram(std::span<const float> samples, double sample_rate_hz, double window_s = 0.046,
                                int max_frames = 960);

/// PNG bytes of a spectrogram (libpng), width = frames, height = bins up to max_freq_hz,
/// levels mapped from (peak - range_db) .. peak through the cubehelix colour scheme.
std::string spectrogram_png(const spectrogram_db& s, double max_freq_hz, double range_db);

/// The measured track of a partial: the track with mean frequency nearest the partial's, within
/// max(2 bins, 1% of the partial's frequency) (the tracker's continuation tolerance), taken first
/// among tracks with the partial's harmonic number, else among tracks where one of the two has no
/// number. Index into tracking.tracks, or -1.
int matching_track(const partial& part, const tracking_result& tracking, double sample_rate_hz);

/// 16-bit PCM WAV bytes in memory (libsndfile virtual I/O), for embedding; peak-normalized
/// copies are not made: samples beyond full scale are scaled down to avoid clipping.
std::string wav_bytes(std::span<const float> samples, double sample_rate_hz);

/// RFC 4648 base64.
std::string base64_encode(std::string_view bytes);

}  // namespace wane
