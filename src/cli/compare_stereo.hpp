// `compare` of two stereo files: each channel against the same channel (log-spectral distance,
// spectral convergence, early SNR) and the inter-channel figures of both (measure/inter_channel).
#pragma once

#include <string>

#include "io/audio_file.hpp"
#include "measure/channel_compare.hpp"
#include "measure/compare.hpp"

namespace wane::cli {

using stereo_compare = channel_comparison;

/// a and b hold two channels each (mono_audio::channels), at the same rate; mix is the comparison
/// of their mixes (its alignment places b's channels).
stereo_compare compare_stereo(const mono_audio& a, const mono_audio& b, const compare_result& mix,
                              const compare_params& params);

/// The figures as a table section, and as the value of a JSON key "stereo".
std::string stereo_table(const stereo_compare& s);
std::string stereo_json(const stereo_compare& s);

}  // namespace wane::cli
