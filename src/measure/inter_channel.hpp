// Figures between the two channels of a stereo recording (or render): the right-minus-left level
// difference per octave band and the correlation of the channels, both over a stretch from the
// onset. Used by `compare` for recording and copy alike.
#pragma once

#include <span>
#include <vector>

namespace wane {

struct inter_channel_params {
    double span_s = 1.0;                      ///< from the onset
    double lowest_band_nominal_hz = 250.0;    ///< octave bands of measure/octave_filter
    double highest_band_nominal_hz = 8000.0;
};

struct inter_channel_figures {
    std::vector<double> band_nominal_hz;
    /// 10 log10(E_right / E_left) per band, E the band-filtered energy over the span (IEC 61260-1
    /// octave filters); +-inf when one channel is silent in the band.
    std::vector<double> level_difference_db;
    /// Pearson correlation at zero lag over the span: sum l r / sqrt(sum l^2 sum r^2) (no mean
    /// removed: audio has none); NaN when a channel is silent.
    double correlation = 0.0;
};

/// left and right from frame onset on, at most span_s of them.
inter_channel_figures inter_channel(std::span<const float> left, std::span<const float> right, double sample_rate_hz,
                                    std::size_t onset, const inter_channel_params& params = {});

}  // namespace wane
