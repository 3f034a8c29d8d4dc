// Decays that run on past a cut. When a recording stops while the note still sounds
// (analysis/recording_end.hpp), the level at its end is neither a hold nor the end of the decay:
// every partial's and noise band's last segment must keep falling after the cut.
//
// A last segment falls when its slope is at least min_decay_db_per_s down AND it fell at least
// min_fall_db over the stretch it was fitted on; otherwise it is a plateau (the level an unfinished
// or looped recording leaves at its end, or a rising stretch). The plateau is kept up to the cut
// (the copy stays faithful to what was recorded) and a segment after the cut falls at, in this order,
//  0. for a plateau that starts at a trough of its track's level (the segment before it falls and
//     the level rises at least min_swell_db after the knot: a beat of two close modes, where the
//     straight-segment fit puts its knot), the slower mode's slope of a two-mode fit of the
//     track's level over the last two segments (analysis/beat_level_fit.hpp), when that fit is
//     accepted and both modes decay: the level read from a trough rises with the beat and is
//     neither mode's slope, while past the cut the slower mode is what sounds on (banjo_g3's third
//     harmonic, 593 Hz: two modes about 1 Hz apart, a trough at 1.25 s and a cut at 2.01 s);
//     otherwise the least-squares slope of the part's measured level over the plateau's own stretch (the
//     fitted segment's slope for a part without a track), when it falls at least
//     min_decay_db_per_s: a slow late stage (a piano's aftersound) seen over too short
//     a stretch to fall min_fall_db is what the recording shows at its end, and the early stage's
//     slope would make the tail die faster than that;
//  1. the slope of the segment before the plateau, when that one falls: the part that decays;
//  2. the least-squares slope of the partial's measured level over its fitted stretch, when it falls;
//  3. the median last slope of the note's falling partials and bands (one resonator, one damping);
//  4. min_decay_db_per_s.
// Then the fade (fade_past_cut): past the cut no part, the partials the onset refinement and the
// pair split added included, keeps a T60 longer than fade_lengths times the recorded length
// (cut_s), nor, on a recording under 0.8 s, one that leaves the last second of a render
// fade_lengths lengths long within end_fall_db of the level at the cut. A cut recording cannot show how long the note would have rung on, and the sample sets
// that cut their notes while sounding (to be looped) often hold the level nearly flat over the
// recorded end; a copy rendered to 3 lengths has then fallen at least 60 * 2 / fade_lengths dB at
// the end of its render. A part already falling faster keeps its own slope.
#pragma once

#include <span>

#include "analysis/beat_level_fit.hpp"
#include "core/envelope.hpp"
#include "tracking/track.hpp"

namespace wane {

struct cut_tail_params {
    /// Slowest fall a part of a cut note is given, dB per second (T60 = 60 s). Reasoned choice: a
    /// recording of a few seconds cannot establish a longer T60, and a longer one renders as a drone.
    double min_decay_db_per_s = 1.0;
    /// Least fall of a last segment over its fitted stretch, dB. Reasoned choice: level wobbles of
    /// beating partials and noise reach a few dB, so a smaller fall does not show a decay.
    double min_fall_db = 3.0;
    /// A plateau starts at a beat's trough when its track rises this much (dB) above its lowest
    /// point within trough_search_s of the knot. Reasoned choice: over the track's frame-to-frame
    /// wobble (tenths of a dB on a clean partial), under the swells of the real notes' beats
    /// (banjo_g3's 593 Hz: 3.2 dB).
    double min_swell_db = 2.0;
    double trough_search_s = 0.05;
    beat_level_params beat{};
    /// Longest T60 a part keeps past the cut, in recorded lengths (cut_s); 0 keeps every slope
    /// the rules above give (the recording's own late slopes). Reasoned choice: 3 makes a copy
    /// rendered to three times the recording's length fall 40 dB from the cut to its end (20 dB
    /// or more over its last second, issue 16's measure, for recordings of 0.8 s and longer),
    /// the tail of a note that dies out rather than a drone; the recordings' own late slopes
    /// (bass, Rhodes, piano: 2 dB/s) would still sound after ten lengths.
    double fade_lengths = 3.0;
    /// ... and no slower than makes the last end_window_s of a render fade_lengths lengths long
    /// fall end_fall_db under the level at the cut (mean power; fade_slope_db_per_s): on a
    /// recording of 0.5-0.8 s the length rule alone can leave that last second 12-19 dB under the
    /// cut (issue 16's measure asks 20: cut at 0.55, 0.6 and 0.65 s by tools/cut_notes.py, the 24
    /// notes of tools/more_notes.py 1.5 s or longer fell under 20 dB in 62 of 71 cuts, min 11.7,
    /// tools/eval_texture.py on main 6141141; 71 of 71 at 21.0 or more with this rule). 21 dB:
    /// the measure's 20 and 1 dB for the level at the cut over its last 100 ms and the render's
    /// end. A recording shorter than
    /// end_window_s / (fade_lengths - 1) (0.5 s) has that window start before the cut: there the
    /// length rule alone holds.
    double end_fall_db = 21.0;
    double end_window_s = 1.0;
};

/// One part of the note whose decay may need to run on: its envelope, the track it was fitted to
/// (null for a noise band) and the stretch of time the fit used, seconds from the onset.
struct cut_part {
    envelope* env = nullptr;
    const partial_track* track = nullptr;
    double fit_start_s = 0.0;
    double fit_end_s = 0.0;
};

/// Makes every part's last segment fall after cut_s, seconds from the onset (rules above). Returns
/// how many parts were changed.
int continue_decays_past_cut(std::span<const cut_part> parts, double cut_s, const cut_tail_params& params = {});

/// The fade's slope past a cut at cut_s (seconds from the onset), dB per second (negative): the
/// steeper of -60 / (fade_lengths * cut_s) and the slope s whose fall over
/// [d, d + W] (d = (fade_lengths - 1) cut_s - W past the cut, W = end_window_s) has the mean power
///   P(s) = s d + 10 log10((1 - 10^(s W / 10)) / (-s W ln(10) / 10))  dB under the cut's level
/// (the integral of 10^(s t / 10) over the window, divided by W) equal to -end_fall_db, found by
/// bisection; only the length rule when d < 0 or fade_lengths is 0 (then 0: no fade).
double fade_slope_db_per_s(double cut_s, const cut_tail_params& params = {});

/// The fade above: every envelope whose last segment falls slower than fade_slope_db_per_s keeps
/// its segments up to cut_s and falls at that slope after it (a last segment that starts after
/// cut_s takes that slope). Returns how many envelopes were changed; none when fade_lengths is 0.
int fade_past_cut(std::span<envelope* const> envs, double cut_s, const cut_tail_params& params = {});

}  // namespace wane
