// Note onset: where the energy first rises out of the leading silence or noise.
#pragma once

#include <cstdint>
#include <span>

namespace wane {

struct onset_params {
    double block_s = 0.002;        ///< energy measured in blocks of this length
    double below_peak_db = 30.0;   ///< the onset block reaches at least peak - this
    double above_noise_db = 20.0;  ///< ... and at least the quiet level + this
    double min_below_peak_db = 10.0; ///< ... but the threshold never exceeds peak - this
    double quiet_quantile = 0.1;   ///< the quiet level: this quantile of the block energies (dB) from the loudest on
    double max_backtrack_s = 0.01; ///< walk back at most this far while the energy keeps falling
    /// ... and while the block stays this far over the level before the rise (the median of the
    /// before_rise_blocks blocks before the walk's reach); 6 dB: twice the power (reasoned choice,
    /// a 2 ms block of white noise scatters by about 1 dB at 44.1 kHz)
    double above_before_rise_db = 6.0;
    int before_rise_blocks = 10;
};

/// Sample index of the onset: start of the first block whose mean-square energy passes both
/// thresholds, moved back over the preceding blocks of the same rise. 0 when the sound starts at once.
std::int64_t detect_onset(std::span<const float> samples, double sample_rate_hz,
                          const onset_params& params = {});

}  // namespace wane
