// Onset alignment of two recordings of a note by cross-correlation: first of their onset-strength
// envelopes (coarse, one envelope hop), then of the waveforms around the reference's onset
// (to the sample).
#pragma once

#include <cstddef>
#include <span>
#include <vector>

namespace wane {

struct align_onset_params {
    double hop_s = 0.001;          ///< envelope hop
    double frame_s = 0.002;        ///< RMS window of the level envelope
    double floor_below_peak_db = 80.0;  ///< level envelope floored this far below its peak frame
    double threshold_below_peak_db = 20.0;  ///< onset: first frame within this of the peak frame level
    double rise_lookback_s = 0.020;  ///< onset strength: rise above the maximum of the last 20 ms
    double max_lag_s = 0.5;        ///< largest lag searched either way
    double refine_window_s = 0.05; ///< waveform window after the reference onset for the fine search
};

/// Short-time level in dB at hop_s (RMS over frame_s), floored floor_below_peak_db below its peak.
std::vector<double> level_envelope_db(std::span<const float> x, double sample_rate_hz,
                                      const align_onset_params& params);

/// Onset strength: how far each envelope frame rises above the loudest of the lookback_frames
/// before it, in dB (0 when it does not). Frames before the start count as the envelope's floor.
/// The pitch-period ripple of a sounding note never rises above its own recent maximum, so only
/// attacks score.
std::vector<double> onset_strength(std::span<const double> level_db, std::size_t lookback_frames);

/// Onset in samples: the start of the first envelope frame whose level is within
/// threshold_below_peak_db of the loudest frame. 0 for a silent signal.
std::size_t find_onset_frames(std::span<const float> x, double sample_rate_hz, const align_onset_params& params = {});

struct alignment {
    /// b[n + lag_frames] lines up with a[n] (positive: b starts later than a).
    std::ptrdiff_t lag_frames = 0;
    std::ptrdiff_t coarse_lag_frames = 0;  ///< from the onset envelopes alone
    double waveform_correlation = 0.0;     ///< normalised correlation at the chosen lag (1 = same shape)
    std::size_t onset_a_frames = 0;        ///< onset of a (the reference), in samples
};

/// Aligns b to a (same sample rate).
alignment align_onsets(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                       const align_onset_params& params = {});

/// b shifted so it lines up with a: out[n] = b[n + lag] (zero outside b), length out_frames.
std::vector<float> shift_by_lag(std::span<const float> b, std::ptrdiff_t lag_frames, std::size_t out_frames);

}  // namespace wane
