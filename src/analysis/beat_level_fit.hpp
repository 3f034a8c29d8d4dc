// Two close modes read from a partial's level alone. A partial that is two modes f_b apart (two
// strings of a course, a string's two polarizations) has the level, in dB,
//   L(t) = c + s tau + 20 log10 |1 + r(tau) e^(i theta(tau))|,   tau = t - t0,
//   r(tau) = exp(u + rho tau),   theta(tau) = 2 pi f_b tau + phi,
// mode A falling s dB/s (level c at t0) and mode B, r(tau) times A's amplitude, falling
// s + db_per_neper * rho dB/s. Its troughs (theta = pi) are where a straight-segment fit puts a knot,
// and the stretch after a trough rises before it falls: a slope read there is neither mode's.
// The mean of 20 log10 |1 + r e^(i theta)| over a whole beat is 20 log10 max(1, r) (Jensen's
// formula), so the level follows the stronger mode on average and, once the faster one has died
// away, the slower one: the decay a tail past the end of a recording keeps.
//
// The fit: the six parameters by least squares on the track's (time, dB) points, Levenberg-Marquardt
// from the best few starts of a grid over f_b, phi and rho (c and s solved linearly at each start),
// the grid scouted on fewer points than the best starts are refined on.
#pragma once

#include <optional>
#include <span>

namespace wane {

struct beat_level_params {
    /// The stretch holds at least this many beats: f_b from min_beats / span (Hz) ...
    double min_beats = 1.0;
    /// ... up to this rate, Hz. Reasoned choice: a faster beat is a few track frames (10 ms hops
    /// of a 40 ms window) per period, smoothed away by the window.
    double max_beat_hz = 4.0;
    /// The points read are at least this far apart, seconds (the track's 10 ms frames thinned: a
    /// 4 Hz beat keeps 12 points per period; the fit's cost is in the points).
    double point_spacing_s = 0.02;
    /// The grid's starts are scouted on points at least this far apart, seconds (6 points per
    /// period of a 4 Hz beat); the best go on on all the points read.
    double scout_point_spacing_s = 0.04;
    double beat_step_hz = 0.2;  ///< grid step of f_b for the starts
    int phase_steps = 4;        ///< grid steps of phi over one turn
    int scout_iterations = 4;   ///< Levenberg-Marquardt steps from every grid point ...
    int starts_refined = 4;     ///< ... then the best this many go on
    int max_iterations = 60;    ///< ... for up to this many steps
    /// Accepted when the fit's RMS error is at most this (dB) ...
    double max_rms_db = 1.0;
    /// ... and a straight line's RMS error over the same points is at least this times it.
    double min_line_ratio = 2.0;
};

struct beat_level_fit {
    double slope_a_db_per_s = 0.0;  ///< mode A's slope, dB per second
    double slope_b_db_per_s = 0.0;  ///< mode B's slope, dB per second
    double beat_hz = 0.0;           ///< f_b, the modes' distance
    double rms_db = 0.0;            ///< RMS error of the fit, dB
    double line_rms_db = 0.0;       ///< RMS error of the least-squares line, dB
};

/// The two-mode fit of the level points (time_s ascending, level_db of the same size), when it is
/// accepted (rules above); nullopt for fewer than 12 points or a fit that explains no more than a line.
std::optional<beat_level_fit> fit_beat_levels(std::span<const double> time_s, std::span<const double> level_db,
                                              const beat_level_params& params = {});

}  // namespace wane
