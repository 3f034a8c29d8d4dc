// Stereo placement of a part (partial or noise band): the pan law, the inter-channel delay as a
// phase, the per-channel decay, and the mono view of one channel of a stereo patch.
//
// Pan law (constant power, sine law, normalized to 0 dB at centre): with theta = (pan + 1) pi / 4,
//   left gain  = sqrt(2) cos(theta),   right gain = sqrt(2) sin(theta)   (amplitude factors),
// so left^2 + right^2 = 2 for every pan: at pan 0 both channels sit at peak_db, hard left (-1)
// puts the left channel 3.01 dB above peak_db and silences the right. The right-minus-left level
// difference is 20 log10(tan theta) dB: pan +-0.5 is +-7.66 dB, pan +-0.1 is +-1.37 dB.
#pragma once

#include "core/patch.hpp"

namespace wane {

enum class channel_side { left = 0, right = 1 };

/// Limits of the stereo keys (patch_rules checks them): |delay_us| up to 50 ms (spaced microphones
/// 17 m apart; real pairs stay within a few ms), |spread_db_per_s| up to 1000 dB/s.
inline constexpr double max_abs_delay_us = 50000.0;
inline constexpr double max_abs_spread_db_per_s = 1000.0;

/// Amplitude factor of one channel at `pan` (-1..1) under the pan law above.
double pan_gain(double pan, channel_side side);
/// Right-minus-left level difference in dB of a part at `pan` (+-inf at the hard pans).
double pan_level_difference_db(double pan);
/// The pan whose right-minus-left level difference is diff_db (the inverse of the above).
double pan_of_level_difference(double diff_db);
/// The pan and the level (dB, at the pan law's centre normalization) of a part whose channel
/// amplitudes are left_amp and right_amp (>= 0, not both 0): level = 10 log10((l^2 + r^2) / 2).
struct pan_and_level {
    double pan = 0.0;
    double level_db = 0.0;
};
pan_and_level pan_of_amplitudes(double left_amp, double right_amp);

/// Phase offset of one channel of a partial at freq_hz delayed by delay_us between the channels:
/// +pi f d for the left channel, -pi f d for the right (so the right lags the left by d).
double channel_phase_offset_rad(double freq_hz, double delay_us, channel_side side);

/// The mono patch one channel of a stereo patch plays: every part's peak moved by its pan gain
/// (floored at the format's lowest level), each partial's phase moved by half its delay, every
/// decay segment's slope moved by -+spread/2 dB/s. Noise bands keep their coherence (the renderer
/// splits shared and own noise). A mono patch is returned unchanged for either side.
patch channel_patch(const patch& p, channel_side side);

}  // namespace wane
