// Two stereo signals compared channel by channel (each channel against the same channel:
// compare_signals) and by their inter-channel figures (measure/inter_channel). Used by `compare`
// of two stereo files and by the report of a stereo patch.
#pragma once

#include <span>

#include "measure/compare.hpp"
#include "measure/inter_channel.hpp"

namespace wane {

struct channel_comparison {
    compare_result left;
    compare_result right;
    inter_channel_figures a;  ///< the reference's, from its onset
    inter_channel_figures b;  ///< the other's, from the same instant (aligned on the mix)
};

/// a_left/a_right the reference's channels, b_left/b_right the other's, at one rate; mix is the
/// comparison of their mixes (its onset and alignment place b's channels for the inter-channel
/// figures; each channel's own comparison aligns itself).
channel_comparison compare_channels(std::span<const float> a_left, std::span<const float> a_right,
                                    std::span<const float> b_left, std::span<const float> b_right,
                                    double sample_rate_hz, const compare_result& mix, const compare_params& params);

}  // namespace wane
