// A floor band's level between the onset and its first fitted frame.
//
// The floor bands (analysis/noise_model.hpp) are fitted on the frames whose long window lies wholly
// inside the recording, which start half a window (up to 150 ms) after the onset; the fitted first
// line runs back to the onset from there. A steep first line run back that far can stand far over
// what the recording holds at its start (harpsichord_d2's 20-112 Hz band: 23 dB over it in the
// first 10 ms). The frames centred between the onset and the first fitted one see the band through
// a window partly before the onset (zeros there): what such a frame measures of a band with
// envelope env is env's power weighted by the window's power over the part after the onset, over
// the whole window's power. Where the run-back's prediction stands more than margin_db over what
// those frames measured (mean over them of the difference in dB), the band holds its level back to the onset from the latest frame time that
// makes every such frame's prediction agree (core/envelope.hpp held_before); else it runs back.
#pragma once

#include <cstddef>
#include <span>

#include "core/envelope.hpp"
#include "spectrum/window.hpp"

namespace wane {

struct onset_frames {
    window_kind window = window_kind::blackman_harris_4;
    double window_s = 0.0;
    double hop_s = 0.0;                ///< frame i is centred at i * hop_s, seconds from the onset
    std::span<const float> level_db;   ///< measured band level per frame, dB
    std::size_t first = 0;             ///< the first fitted frame; frames [0, first) are checked
    /// How far the predictions may stand over the frames' levels on their mean, dB. Measured: a
    /// true decay from the onset stood 5.6 dB over (test_noise's 1 kHz band, whose bins the
    /// tracker partly took as partials, so the frames across the onset read it low); the run-backs
    /// this is for stood 10-19 dB over (harpsichord_d2's 20-112 and 446-562 Hz bands, harp_gs2's).
    double margin_db = 6.0;
};

/// Level a frame centred at centre_s measures of a band with envelope env, dB (the rule above).
double framed_level_db(const envelope& env, window_kind window, double window_s, double centre_s);

/// env run back to the onset as far as the frames before the first fitted one agree (rule above).
envelope limit_run_back(const envelope& env, const onset_frames& frames);

}  // namespace wane
