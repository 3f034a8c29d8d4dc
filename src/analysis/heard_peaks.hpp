// Each partial's constant frequency from the recording's own long spectrum: where a long FFT of the
// note's first second finds the partial, so a copy (and a transposed copy) puts its partials where
// the recording's were.
//
// fitting/partial_freq gives each partial the peak of its track's own spectrum over the same span.
// That spectrum is built from STFT frames a few tens of ms long, so when a partial is a group of
// components closer than the STFT window resolves (a course of two or three strings, a string
// section in unison, a drum head's split mode), the track follows a mixture and its peak can sit on
// a weaker member of the group. Here the recording itself is transformed over the span, and a
// partial that stands alone for its neighbourhood moves to the strongest peak of that
// neighbourhood.
#pragma once

#include <span>

#include "core/patch.hpp"
#include "tracking/track.hpp"

namespace wane {

struct heard_peak_params {
    /// The span: 0.1 s to 1.1 s after the onset; a note shorter than span_end_s + 0.1 s uses
    /// short_start_s to its end (the span the real notes' README measures f0 over; common
    /// practice: after the strike's transient, where a plucked or struck note's pitch is heard).
    double span_start_s = 0.1;
    double span_s = 1.0;
    double short_start_s = 0.05;
    double min_span_s = 0.25;       ///< shorter: nothing is moved
    /// How far a partial may move, in main-lobe half-widths (2 / T Hz for a Hann window over T s):
    /// two, the distance inside which a span of T s cannot tell two components apart cleanly.
    double capture_half_widths = 2.0;
    double max_move_cents = 50.0;   ///< never more than a quarter tone: the partial keeps its note
    /// The peak must carry the partial's own level over the span within this (dB): a peak much
    /// stronger or weaker than the partial is another partial's.
    double level_gate_db = 12.0;
    int zero_padding = 8;           ///< FFT size >= zero_padding x span length
};

/// Moves partial i (tracks[i] its track; nullptr: left alone) to the strongest local peak of the
/// Hann-windowed spectrum of note (samples from the onset on) within the capture distance, when
/// no partial stronger over the span lies within that distance of it, and re-anchors its phase
/// at t = 0 to the new frequency. Returns how many partials moved by more than 0.01 cents.
int move_to_heard_peaks(patch& p, std::span<const partial_track* const> tracks, std::span<const float> note,
                        double sample_rate_hz, const heard_peak_params& params);

}  // namespace wane
