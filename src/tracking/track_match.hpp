// Which measured track belongs to a fitted partial (for the report's envelope plots).
#pragma once

#include "core/patch.hpp"
#include "tracking/track.hpp"

namespace wane {

/// The measured track of a partial: the track whose frequency (track_frequency_hz, the tracker's
/// own definition) is nearest the partial's, within
/// max(2 bins, 1% of the partial's frequency) (the tracker's continuation tolerance), taken first
/// among tracks with the partial's harmonic number, else among tracks where one of the two has no
/// number. Index into tracking.tracks, or -1.
int matching_track(const partial& part, const tracking_result& tracking, double sample_rate_hz);

}  // namespace wane
