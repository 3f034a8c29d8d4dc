// Which measured track belongs to a fitted partial (for the report's envelope plots).
#pragma once

#include "core/patch.hpp"
#include "tracking/track.hpp"

namespace wane {

/// Plain mean of a track's point frequencies (0 for an empty track).
double track_mean_freq_hz(const partial_track& t);

/// The measured track of a partial: the track with mean frequency nearest the partial's, within
/// max(2 bins, 1% of the partial's frequency) (the tracker's continuation tolerance), taken first
/// among tracks with the partial's harmonic number, else among tracks where one of the two has no
/// number. Index into tracking.tracks, or -1.
int matching_track(const partial& part, const tracking_result& tracking, double sample_rate_hz);

}  // namespace wane
