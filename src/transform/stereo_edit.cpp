// Stereo edits (see stereo_edit.hpp).
#include "transform/stereo_edit.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "core/stereo.hpp"

namespace wane {

namespace {

/// The pan whose level difference is the given one scaled by width and moved by offset_db
/// (hard pans stay hard unless width is 0).
double moved_pan(double pan, double width, double offset_db) {
    const double diff_db = pan_level_difference_db(pan);
    if (std::isinf(offset_db)) return offset_db > 0 ? 1.0 : -1.0;
    if (std::isinf(diff_db)) return width == 0.0 ? pan_of_level_difference(offset_db) : pan;
    return pan_of_level_difference(width * diff_db + offset_db);
}

void scale_place(stereo_place& place, double width) {
    place.pan = moved_pan(place.pan, width, 0.0);
    place.delay_us = std::clamp(place.delay_us * width, -max_abs_delay_us, max_abs_delay_us);
    place.spread_db_per_s = std::clamp(place.spread_db_per_s * width, -max_abs_spread_db_per_s, max_abs_spread_db_per_s);
}

}  // namespace

patch scale_width(const patch& p, double width) {
    assert(width >= 0.0);
    patch out = p;
    if (!is_stereo(p)) return out;
    for (partial& q : out.partials) scale_place(q.place, width);
    for (noise_band& b : out.noise) {
        scale_place(b.place, width);
        b.place.delay_us = 0.0;
        b.coherence = std::clamp(1.0 - width * (1.0 - b.coherence), 0.0, 1.0);
    }
    return out;
}

patch pan_note(const patch& p, double pan) {
    assert(pan >= -1.0 && pan <= 1.0);
    patch out = p;
    out.note.channels = 2;
    const double offset_db = pan_level_difference_db(pan);
    for (partial& q : out.partials) q.place.pan = moved_pan(q.place.pan, 1.0, offset_db);
    for (noise_band& b : out.noise) b.place.pan = moved_pan(b.place.pan, 1.0, offset_db);
    return out;
}

}  // namespace wane
