// Blending two patches into one: the partials the two share are interpolated, the others fade.
//
// Matching: when both patches have a pitch centre (f0 > 0), harmonic partials (harmonic > 0) are
// paired by harmonic number. Every partial still unpaired (off the series, or without a partner
// of the same number, or all of them when a patch has no f0) is paired with the nearest-frequency
// unpaired partial of the other patch within match_tolerance_cents, closest pairs first.
//
// A paired partial is interpolated with mix m (0 = A, 1 = B): frequency geometrically
// (exp((1-m) ln fa + m ln fb)), attack_s linearly, peak level linearly in dB; the decay is
// re-segmented on the union of both envelopes' breakpoints and in each piece T60 is interpolated
// on a log scale (exp((1-m) ln Ta + m ln Tb)) when both T60s are finite and positive, and
// otherwise (a hold or a rise) through the slope in dB/s, linearly. Phase and harmonic number come
// from the dominant patch (A when m <= 0.5). The pitch glide (core/glide.hpp): its cents linearly
// (a partial without a glide counts 0 cents), its time constant geometrically when both glide,
// else the gliding one's.
//
// Unpaired partials and all noise bands keep their shape and are faded by their patch's weight
// (1 - m for A, m for B): level + 20 log10(weight); a weight of 0 removes them.
// The note: f0 geometric (when both are pitched, else the dominant's), B, length_s and gain_db
// linear, source from the dominant patch. mix = 0 returns A and mix = 1 returns B unchanged.
#pragma once

#include "core/patch.hpp"

namespace wane {

inline constexpr double default_blend_tolerance_cents = 50.0;  // a quarter tone: our choice

struct blend_params {
    double mix = 0.5;  ///< 0 = A only, 1 = B only
    double match_tolerance_cents = default_blend_tolerance_cents;
};

/// Blends a and b. Throws transform_error (param "version") when the format versions differ.
patch blend(const patch& a, const patch& b, const blend_params& params);

/// The glide of a paired partial between a (weight 1 - mix) and b (weight mix), as described above:
/// sets out.glide_cents and out.glide_s (both 0 when neither glides).
void blend_glide(const partial& a, const partial& b, double mix, partial& out);

/// The envelope between ea (weight 1 - mix) and eb (weight mix), as described above.
envelope blend_envelopes(const envelope& ea, const envelope& eb, double mix);

}  // namespace wane
