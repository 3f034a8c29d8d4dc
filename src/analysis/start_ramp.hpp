// A sub-millisecond rise for the partials that start at once.
//
// The onset refinement (analysis/onset_refine.hpp) gives most partials an instant start at their
// fitted level and phase, and puts the patch's onset where the modes fit best, often after the
// recording has begun to rise. The copy then jumps from silence to the sum of those partials at
// t = 0: measured on the shared notes, bass_ds2's copy starts at 0.70 of its first 10 ms' peak,
// rhodes_c3's at 0.48, guitar_nylon_d3's at 0.40, while the recording's largest step from one
// sample to the next around its onset is 0.22, 0.20 and 0.08 of its peak. A jump of many
// partials in phase is a click on every render.
//
// Rule: the partials that start at once get one common linear rise (the envelope's attack)
// ending at the level their envelope has there, so from the end of the rise on every envelope is
// the same as before. The rise is the shortest on the patch's 0.1 ms time grid for which no step
// of the copy's rise (from silence before it, and the sample after it) is larger than both the
// recording's largest step over [onset - before_s, onset + after_s) and the largest step the
// instant copy itself takes after its first sample (its own waveform); at most max_ramp_s. None
// where the instant start is not clearly steeper than that (steeper_factor).
//
// The rise lies after the onset. Measured on the shared notes, moving the note's start back by the
// rise into the recording's own rise (phases and segment ends moved with it) lowered
// bench_fidelity's SNR over the first 100 ms (marimba_c3 11.43 -> 11.21, bass_ds2 17.71 ->
// 17.07 dB, a shift of a fraction of a sample against the recording's grid), so it is not done.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

#include "core/patch.hpp"

namespace wane {

struct start_ramp_params {
    double before_s = 0.005;    ///< the recording's steps are read from this long before the onset ...
    double after_s = 0.002;     ///< ... to this long after it, and the copy's over its first after_s
    double max_ramp_s = 0.001;  ///< longest rise (sub-millisecond: a rise, not an attack)
    /// A rise is given only where the copy's first step is more than this many times the allowed
    /// one (reasoned choice: the clicking copies of the shared notes started 2.3-6 times steeper
    /// than their recordings' steepest step; a synthetic note whose copy's fitted levels are a
    /// little off its own instant start stands within a few percent of it).
    double steeper_factor = 1.5;
};

struct start_ramp_result {
    double rise_s = 0.0;            ///< the rise, seconds (0: none), a multiple of 0.1 ms
    double recording_step = 0.0;    ///< the recording's largest step, full scale 1
    double copy_step_before = 0.0;  ///< the copy's largest step with the instant start
    double copy_step_after = 0.0;   ///< and with the rise
};

/// q with a linear rise of rise_s if it starts at once (attack_s 0): attack_s = rise_s, the peak
/// the level its envelope had at rise_s.
partial with_rise(const partial& q, double rise_s);

/// The copy's first samples at the recording's rate (partials only, note gain 0 dB), every partial
/// with the rise: n < count, t = n / rate, as the renderer plays it (amplitude envelope_amp times
/// cos(2 pi f t + phase)).
std::vector<double> copy_start(const patch& p, double sample_rate_hz, std::size_t count, double rise_s);

/// Applies the rule above to p's partials in place. part[onset] is the recording's sample at p's
/// onset (the samples before it are read as they are).
start_ramp_result soften_start(patch& p, std::span<const float> part, std::size_t onset, double sample_rate_hz,
                               const start_ramp_params& params);

}  // namespace wane
