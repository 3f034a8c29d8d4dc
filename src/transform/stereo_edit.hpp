// Stereo edits: the width of a stereo patch and the place of the whole note between the channels.
#pragma once

#include "core/patch.hpp"

namespace wane {

/// Scales every difference between the channels by width (>= 0): each part's right-minus-left
/// level difference (pan law, core/stereo.hpp), delay and spread are multiplied by width, and a
/// noise band's incoherence 1 - coherence too (clamped to 0..1). 0 makes both channels alike (a
/// centred stereo patch), 1 changes nothing, 2 doubles the differences. A mono patch is returned
/// as it is (it has no differences to scale).
patch scale_width(const patch& p, double width);

/// Places the whole note at pan (-1..1): every part's level difference moves by the difference
/// pan means (pan_level_difference_db), so the parts keep their places relative to each other;
/// pan +-1 puts every part in one channel. A mono patch becomes a stereo one, every part at pan.
patch pan_note(const patch& p, double pan);

}  // namespace wane
