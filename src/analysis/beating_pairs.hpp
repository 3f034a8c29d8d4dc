// Beating pairs: two modes a fraction of a hertz to a few hertz apart (unison strings, bell
// doublets) read as one partial whose level ripples. Each strong partial's narrow band over the
// whole note (modes/narrowband.hpp) is fitted with one and with two damped modes (ESPRIT of order
// 1 and 2, complex amplitudes by least squares); when two explain clearly more (a penalized
// criterion, as the envelope fit's BIC), the partial becomes two, each with its own frequency,
// level, phase and decay. Runs before the onset refinement, which then fits their starts.
#pragma once

#include <span>

#include "core/patch.hpp"

namespace wane {

struct beating_pair_params {
    double half_width_hz = 6.0;      ///< band around each partial; pairs up to half of it apart
    double min_rate_hz = 40.0;       ///< band sample rate, at least
    double skip_start_s = 0.1;       ///< the attack is left to the onset refinement
    double min_span_s = 0.8;         ///< shortest usable band after the skips
    double min_gain_db = 3.0;        ///< two modes must leave this much less residual than one ...
    double bic_factor = 2.0;         ///< ... and beat one mode by this times the BIC penalty
    double min_separation_hz = 0.15; ///< closer modes are one (a decay change, not a beat)
    double max_weaker_db = 30.0;     ///< the weaker mode is within this of the stronger
    double keep_within_db = 40.0;    ///< partials this far under the strongest are not tried
    /// The pair's power-weighted mean frequency lies within this fraction of its separation of
    /// the partial's frequency.
    double centroid_tolerance = 0.5;
};

/// Splits the beating partials of p in place (note[0] at p's onset); returns how many were split.
int split_beating_pairs(patch& p, std::span<const float> note, double sample_rate_hz,
                        const beating_pair_params& params);

}  // namespace wane
