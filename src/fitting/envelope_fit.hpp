// Envelope fit of one partial track: an attack, then K >= 1 continuous straight segments of the
// level in dB (patch format v1), breakpoints by segmented least squares (Bellman 1961) refined
// under the continuity constraint, K by a penalized likelihood (BIC, Schwarz 1978).
#pragma once

#include <optional>
#include <span>

#include "core/envelope.hpp"
#include "tracking/track.hpp"

namespace wane {

struct envelope_fit_params {
    int max_segments = 3;
    /// The fit stops where the (smoothed) level comes within this many dB of the noise floor.
    double floor_margin_db = 8.0;
    /// Shortest decay segment, seconds (keeps breakpoints from chasing beats and noise).
    double min_segment_s = 0.1;
    /// Frames are averaged in groups so the breakpoint search sees at most this many points.
    int max_fit_points = 100;
    /// Least model error of one frame in dB, added in quadrature to the noise term in the
    /// weights (the fit estimates any larger model error from its residuals).
    double model_sigma_db = 0.05;
    /// Adjacent segments must differ in slope by this fraction of the steeper one ...
    double min_slope_change_rel = 0.2;
    /// ... and by at least this much, dB per second; otherwise fewer segments are used.
    double min_slope_change_db_per_s = 1.0;
    /// ... and must move the level by at least this much over the shorter of its two segments.
    double min_knee_effect_db = 3.0;
    /// Each slope change must also be this many standard errors from zero (Wald test), so a
    /// short, noisy tail near the floor does not earn a segment of its own.
    double min_change_z = 3.0;
    /// Analysis window length, seconds: the level peaks half a window after an abrupt onset.
    double window_s = 0.0;
    /// How many reliable frames after the peak give the phase at t = 0.
    int phase_frames = 3;
};

struct partial_fit {
    envelope env;
    double freq_hz = 0.0;
    double phase_rad = 0.0;    ///< phase at t = 0 of cos(2 pi f t + phase), in (-pi, pi]
    double fit_start_s = 0.0;  ///< first frame time in the fit
    double fit_end_s = 0.0;    ///< last frame time in the fit
    int fitted_frames = 0;
    /// Sum over the fitted frames of (level - envelope)^2 and their count, so errors pool.
    double weighted_sq_error_db2 = 0.0;
    double weight_sum = 0.0;
    double rms_error_db = 0.0;  ///< sqrt(weighted_sq_error_db2 / weight_sum)
};

/// Fits one track. Empty when fewer than two frames are above the noise floor by the margin.
std::optional<partial_fit> fit_partial(const partial_track& track, const envelope_fit_params& params);

/// The continuous piecewise-linear fit of points (time_s, level_db, weight), times ascending:
/// returns the knots (segment boundaries, K - 1 of them), the level at times[0] and the K slopes.
struct level_line_fit {
    std::vector<double> knots_s;
    double start_level_db = 0.0;
    std::vector<double> slopes_db_per_s;
    double weighted_rss = 0.0;  ///< chi^2 of the chosen fit under the calibrated weights
};
level_line_fit fit_level_lines(std::span<const double> times_s, std::span<const double> levels_db,
                               std::span<const double> weights, const envelope_fit_params& params);

}  // namespace wane
