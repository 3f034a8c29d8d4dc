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
#include "report/media.hpp"
#include "spectrum/spectrogram.hpp"
#include "tracking/track.hpp"
#include "tracking/track_match.hpp"
#include "tracking/tracker.hpp"

namespace wane {

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
/// partial) and data-track-freq-hz (track_frequency_hz of the measured track drawn, absent when no
/// track matched).
std::string make_report_html(const report_inputs& in);


}  // namespace wane
