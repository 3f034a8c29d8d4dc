// STFT peak tracking of a recorded note: onset, f0, partial tracks, inharmonicity.
// Owned by the Analysis I work; tracking_params gains fields as that work needs them.
#pragma once

#include <optional>
#include <span>

#include "tracking/track.hpp"

namespace wane {

struct tracking_params {
    std::optional<double> f0_hz;        ///< override the pitch estimate (--f0)
    std::optional<double> window_s;     ///< override the automatic window length (--window-s)
    std::optional<int> fft_size;        ///< override the FFT size (--fft-size)
    std::optional<double> hop_s;        ///< override the hop (--hop-s)
    int max_partials = 80;              ///< keep at most this many tracks, strongest first
};

/// Finds the onset, f0 and the partial tracks of a mono note. Throws std::invalid_argument with
/// a user-facing message when there is nothing to track (e.g. "no partials above the noise floor").
tracking_result track_note(std::span<const float> samples, double sample_rate_hz,
                           const tracking_params& params);

}  // namespace wane
