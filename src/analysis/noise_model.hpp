// The stochastic part of a note (Serra and Smith 1990): what is left after the partials'
// resynthesis is subtracted from the source, measured as energy over time in the noise bands of
// core/noise_bands.hpp and fitted with the same envelope form and fit as a partial.
#pragma once

#include <span>
#include <vector>

#include "core/patch.hpp"
#include "fitting/envelope_fit.hpp"

namespace wane {

struct noise_model_params {
    double window_s = 0.0213;  ///< Hann analysis window, seconds (same scale as the renderer's frames)
    double hop_s = 0.005;      ///< analysis hop, seconds (a T60 of 50 ms spans ~10 frames)
    /// Bins this close to a partial (in window main-lobe half-widths) are left out of a band's
    /// mean, so partial energy the subtraction missed is not counted again as noise.
    double partial_guard_lobes = 1.0;
    /// Bands whose fitted peak is further than this below the loudest partial are dropped.
    double keep_within_db = 60.0;
    envelope_fit_params fit{.max_segments = 2, .min_segment_s = 0.03};
};

struct noise_band_track {
    double low_hz = 0.0;
    double high_hz = 0.0;
    double hop_s = 0.0;           ///< frame i is centred at i * hop_s, seconds from the onset
    std::vector<float> level_db;  ///< band level per frame, dB re RMS 1 (core/noise_bands.hpp)
};

/// Band levels of a residual over time (residual[0] is the onset).
std::vector<noise_band_track> measure_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                                  std::span<const double> partial_freqs_hz,
                                                  const noise_model_params& params);

/// Fits every band's level track; drops bands too quiet to matter (keep_within_db re
/// loudest_partial_db). Bands come out in ascending frequency.
std::vector<noise_band> fit_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                        std::span<const double> partial_freqs_hz, double loudest_partial_db,
                                        const noise_model_params& params);

/// The noise model of a note (note[0] is the onset): the residual note - partials (the render of
/// p's partials, synthesis/render.hpp partial_renderer) is formed a block at a time and measured
/// as it goes, so it is never held whole (a long file costs the band levels only: 4 bytes per band
/// and hop), then fitted as fit_noise_bands does. Same bands as fit_noise_bands on the residual
/// held whole (the blocks start at multiples of the renderer's anchor length: the same samples).
std::vector<noise_band> fit_note_noise(std::span<const float> note, double sample_rate_hz, const patch& p,
                                       const noise_model_params& params);

}  // namespace wane
