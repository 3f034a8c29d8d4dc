// A self-contained HTML report of one analysis: spectrogram with the partial tracks, measured
// level tracks with the fitted envelopes, the patch table, comparison figures and audio players.
// Everything is embedded (PNG via libpng and WAV via libsndfile as data: URIs, SVG inline), so the
// file opens from disk with no network.
#pragma once

#include <span>
#include <string>
#include <utility>
#include <vector>

#include "core/patch.hpp"
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
    const tracking_result* tracking = nullptr;  ///< measured tracks (may be null)
    spectrogram_db spectrogram;                 ///< of the source
    std::span<const float> source_audio;
    double source_rate_hz = 0.0;
    std::span<const float> render_audio;
    double render_rate_hz = 0.0;
    std::string info_table;  ///< the text of `wane info`
    std::vector<std::pair<std::string, std::string>> compare_rows;  ///< label, value
    int envelope_plots = 12;  ///< strongest partials drawn with their fitted envelopes
    double max_plot_freq_hz = 8000.0;
};

/// The whole HTML page.
std::string make_report_html(const report_inputs& in);

/// Spectrogram of a whole recording for the report: Blackman-Harris window of window_s, at most
/// max_frames frames spread evenly over the file (levels in dBFS re a full-scale sinusoid).
spectrogram_db make_spectrogram(std::span<const float> samples, double sample_rate_hz, double window_s = 0.046,
                                int max_frames = 960);

/// PNG bytes of a spectrogram (libpng), width = frames, height = bins up to max_freq_hz,
/// levels mapped from (peak - range_db) .. peak through the cubehelix colour scheme.
std::string spectrogram_png(const spectrogram_db& s, double max_freq_hz, double range_db);

/// 16-bit PCM WAV bytes in memory (libsndfile virtual I/O), for embedding; peak-normalized
/// copies are not made: samples beyond full scale are scaled down to avoid clipping.
std::string wav_bytes(std::span<const float> samples, double sample_rate_hz);

/// RFC 4648 base64.
std::string base64_encode(std::string_view bytes);

}  // namespace wane
