// A self-contained HTML report of one analysis: headline figure and difference sentences,
// spectrograms of the source, the copy and their difference, the onset close up, every partial's
// and noise band's measured level with its fitted envelope, the patch table, comparison figures
// and audio players. Everything is embedded (PNG via libpng and WAV via libsndfile as data: URIs,
// SVG inline, one inline script that draws nothing from outside), so the file opens from disk
// with no network.
#pragma once

#include <span>
#include <string>
#include <vector>

#include "core/patch.hpp"
#include "measure/channel_compare.hpp"
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
    /// The copy placed where it lines up with the source (same rate and length as source_audio,
    /// zero where the copy does not reach); empty: no copy views (difference, onset, residual).
    std::span<const float> copy_in_source;
    /// The copy's partials alone, placed the same way (the measured noise bands are the source
    /// minus these); empty: the noise bands get no measured level.
    std::span<const float> partials_in_source;
    /// Extra players, from the onset: the partials alone and the noise alone.
    std::span<const float> partials_audio;
    std::span<const float> noise_audio;
    double extra_player_max_s = 30.0;  ///< partials, noise and residual players cut here
    std::string source_name;  ///< file name shown beside the source player
    std::string info_table;   ///< the text of `wane info`
    /// Source (a) against render (b) with the default compare_params (the page states their
    /// ranges); null: none.
    const compare_result* comparison = nullptr;
    std::string comparison_note;                 ///< why there is no comparison, when null
    double comparison_from_s = 0.0;  ///< where in the source file the compared audio (a) starts
    /// A stereo source and copy: each channel against the same channel and the inter-channel
    /// figures (a section 'stereo' after 'compare'); null for a mono one.
    const channel_comparison* stereo = nullptr;
    int envelope_group = 16;  ///< envelope plots per group (every partial is drawn)
    double max_plot_freq_hz = 0.0;  ///< top of the spectrograms; 0 = the source's Nyquist frequency
};

/// The whole HTML page. Sections in order, by id: summary, spectrogram, onset, envelopes, noise,
/// patch, compare, (stereo, when in.stereo), listen. The summary holds the headline figure (id 'headline') and the
/// difference sentences (<li class='difference'>). Each envelope plot is an <svg class='envelope'> with data-freq-hz (the
/// partial) and data-track-freq-hz (track_frequency_hz of the measured track drawn, absent when no
/// track matched).
std::string make_report_html(const report_inputs& in);


}  // namespace wane
