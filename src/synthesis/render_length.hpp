// How long a render lasts when it should follow the sound: the time at which every partial and
// noise band of a patch has fallen a stated number of dB below the note's loudest peak.
#pragma once

#include <optional>
#include <string>

#include "core/patch.hpp"

namespace wane {

/// Result of sound_length_s: either the time, or the part that never falls that far.
struct sound_length {
    std::optional<double> length_s;  ///< seconds from the onset; empty when some part holds
    std::string holding;             ///< when empty length_s: e.g. "partial 3" or "noise band 2"
};

/// The latest time (seconds from the onset) at which any partial or noise band of p is at or above
/// L = (loudest peak_db of all partials and bands) + below_peak_db, from each envelope's straight
/// dB pieces (core/envelope.hpp) solved exactly: a piece starting at level a with slope s (dB/s)
/// meets L at start + (L - a) / s. note.gain_db moves every part alike, so it does not matter.
/// A part whose last piece does not fall (t60_s = inf or rising) while at or above L never meets
/// it: the result names that part (numbered from 1 in file order) instead.
/// Precondition: below_peak_db < 0, p valid.
sound_length sound_length_s(const patch& p, double below_peak_db);

}  // namespace wane
