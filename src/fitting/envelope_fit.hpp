// Envelope fit of one partial track: an attack, then K >= 1 continuous straight segments of the
// level in dB (patch format v1), breakpoints by segmented least squares (Bellman 1961) refined
// under the continuity constraint, K by a penalized likelihood (BIC, Schwarz 1978).
//
// How (fit_partial):
//  - the attack ends at the level peak less half a window (frame smearing of an abrupt onset);
//  - the fit runs from the peak to where the level comes within floor_margin_db of the noise
//    floor (first from the smoothed data, then from the fitted envelope itself), or to the end;
//    what the track holds after that, when it comes back clearly over the floor, is its late part
//    (late_part_start), fitted on its own by the caller;
//  - frame weights are 1 / (model^2 + noise^2), the noise term from the expected level above
//    the floor (capped by the level's local roughness); frames are averaged in groups to at most
//    max_fit_points points;
//  - for each K: Bellman's dynamic program (discontinuous runs, on a coarse boundary grid) gives
//    starting knots; the continuous hinge-basis least squares is then minimized over the knots by
//    coordinate scans and golden-section search;
//  - the noise scale is calibrated from the richest model's residuals (extra model error such as
//    beating), residual correlation shrinks the effective sample count, and K minimizes BIC among
//    fits whose every knee is both statistically (Wald z) and practically significant;
//  - the level is then offset to the power mean of the frames about the dB line, so a beating
//    pair is fitted through its mean energy, not its dips; the last slope runs on past the fit.
#pragma once

#include <optional>
#include <span>

#include "core/envelope.hpp"
#include "tracking/track.hpp"

namespace wane {

/// Most decay segments one fit can have.
inline constexpr int max_fit_segments = 8;

struct envelope_fit_params {
    int max_segments = 3;  ///< 1..max_fit_segments
    /// The fit stops where the (smoothed) level comes within this many dB of the noise floor.
    double floor_margin_db = 8.0;
    /// A track that comes back this many dB over the margin after its fit ended has a late part
    /// (late_part_start).
    double rebound_db = 10.0;
    /// ... and counts (fit_track) when its level peaks at least this long after it comes back,
    /// seconds: a rise, where two beating modes' next maximum comes within a beat period (a few
    /// tenths of a second at most for close strings and bars; common practice, not from a source).
    double min_late_rise_s = 0.25;
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
    /// Whether the fit finds the frequency and the phase at t = 0 too (a noise band's envelope
    /// needs neither: its frames carry no phase).
    bool frequency_and_phase = true;
};

struct partial_fit {
    envelope env;
    double freq_hz = 0.0;
    double phase_rad = 0.0;    ///< phase at t = 0 of cos(2 pi f t + phase), in (-pi, pi]
    double fit_start_s = 0.0;  ///< first frame time in the fit
    double fit_end_s = 0.0;    ///< last frame time in the fit
    int fitted_frames = 0;
    /// Sum over the fitted frames of (level - envelope)^2 and their count, so errors pool.
    double weighted_sq_error_db2 = 0.0;  ///< unweighted: every fitted frame counts once
    double weight_sum = 0.0;             ///< number of fitted frames
    double rms_error_db = 0.0;           ///< sqrt(weighted_sq_error_db2 / weight_sum)
};

/// Fits one track. Empty when fewer than two frames are above the noise floor by the margin.
std::optional<partial_fit> fit_partial(const partial_track& track, const envelope_fit_params& params);

/// Where a track comes back clearly over its floor after its fit ended (a sympathetic string
/// rising as the struck one fades, the second stage of two beating modes): the first frame after
/// fit.fit_end_s from which the running median of (level - floor) is back over floor_margin_db,
/// when a later frame's stands rebound_db over that margin; empty when none does.
std::optional<std::size_t> late_part_start(const partial_track& track, const partial_fit& fit,
                                           const envelope_fit_params& params);

/// The envelope of two components heard as one: the earlier one's (smaller attack_s) until the
/// later one is first louder (searched up to end_s), then the later one's (its linear rise replaced
/// from there by one straight dB segment up to its peak).
envelope spliced_envelope(const envelope& early, const envelope& late, double end_s);

/// fit (fit_partial's of track) with the track's late part (late_part_start) when that part rises
/// (peaks min_late_rise_s or more after it comes back): the late part fitted on its own and
/// spliced in (spliced_envelope), the fitted stretch then running to the late fit's end. A
/// sympathetic string swelling as the struck one fades: the dip where they cancel reaches the
/// floor, where fit_partial stops.
partial_fit fit_track(const partial_fit& fit, const partial_track& track, const envelope_fit_params& params);

/// The continuous piecewise-linear fit of points (time_s, level_db, weight), times ascending,
/// weights the inverse noise variances of the points (the fit adds model error when the residuals
/// call for it): K, the knots (segment boundaries, K - 1 of them), the level at times[0] and the
/// K slopes. Uses max_segments, min_segment_s and the significance settings of params.
struct level_line_fit {
    std::vector<double> knots_s;
    double start_level_db = 0.0;
    std::vector<double> slopes_db_per_s;
    double weighted_rss = 0.0;  ///< chi^2 of the chosen fit under the calibrated weights
};
level_line_fit fit_level_lines(std::span<const double> times_s, std::span<const double> levels_db,
                               std::span<const double> weights, const envelope_fit_params& params);

}  // namespace wane
