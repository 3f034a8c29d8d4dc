// The constant frequency a partial is given: where a long spectrum of the recording finds it.
#pragma once

#include <cstddef>
#include <span>

#include "tracking/track.hpp"

namespace wane {

/// The partial's frequency as a long spectrum of the note's first second finds it: the peak of
/// |S(f)|, S(f) = sum_k w_k a_k exp(i (phi_k - 2 pi f t_k)), the spectrum of the track's own
/// frames (amplitude a_k, phase phi_k of cos at the frame centre t_k) under a Hann window w over
/// [0.1 s, 1.1 s] after the onset, searched within +-search_hz of the frames' mean frequency and
/// refined by a parabola through the peak. Real partials wander by several cents (a string pulled
/// sharp by the pluck, beating with a neighbour), so one constant frequency can match only one
/// span; this is the one where a plucked or struck note's pitch is heard, after the strike's
/// transient (common practice, not from a source). Only frames 20 dB or more above the noise floor
/// count (a noisy phase would move the peak); with fewer than 8 of them in the span (a weak or
/// short-lived partial): the amplitude-weighted mean frequency over the fitted frames [peak, end).
double heard_freq_hz(std::span<const track_point> pts, std::size_t peak, std::size_t end);

}  // namespace wane
