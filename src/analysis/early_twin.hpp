// Early twins: a second steady mode a few cents off a strong partial. A note played from two
// layered samples, or a string in a course of two, sounds its strong partials as two close modes
// that beat: on the held-out notes the recording's strongest partials jump by tens of cents from
// one 30 ms window to the next where the copy's stay within a few (banjo 376.3 Hz: -18, +10, +5,
// +6, -66 cents), and one more damped sinusoid within +-60 cents of each of the six strongest
// partials, fitted on what the copy leaves of the first 150 ms, lifted the first-100 ms SNR median
// of the 40 held-out notes 13.63 -> 16.13 dB in sample (an upper bound). The close-modes pass
// (analysis/mode_split.hpp) skips partials that glide and looks within a few Hz; this pass runs on
// the finished copy, gliding partials included, with offsets in cents.
//
// Rule: per partial, loudest first (its level at the end of its attack within range_db of the
// loudest; at most max_partials; one search per frequency), on d = x - copy over the first check_s
// after the onset:
//   for each offset c on a grid of cents_step within +-max_cents (none nearer than min_cents to
//   any of the patch's partials), and each T60 of t60_grid_s (a resonance: Q >= min_q), the least
//   squares complex amplitude of exp(-ln1000 t / T60) cos(2 pi f 2^(c/1200) t + phi) on d's first
//   span_s (analysis/decaying_fit.hpp); the best offset, if inside the range (at its edge the fit
//   follows something wider: a glide, a level error), refined by the vertex of the parabola
//   through it and its neighbours' fits (taken where it explains more);
//   at that offset, the T60s whose twin takes at least min_gain_share of the recording's energy
//   over the span, the most first: the first that stays no louder than its partial from span_s to
//   the note's end (max_over_partial_db), and whose band around the partial
//   (analysis/mode_band.hpp) follows the recording's block levels over [late.from_s, check_s) no
//   worse than the copy's without it (late_tolerance_db; read over at least min_late_blocks
//   blocks), and which keeps the copy's heard peak at the recording's (max_heard_shift_cents, at
//   the note's pitch and transposed: analysis/heard_shift.hpp), is kept. A lasting twin sounds over the
//   note's body: it must be there in the recording.
// A twin is taken off d before the next partial. It is written as a partial of its own (an instant
// start, one decay) with its parent's harmonic number (two partials with one harmonic number sum).
// Measured (tools/bench_fidelity against main ddfdaf4): see analysis_params::early_twins.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

#include "analysis/heard_shift.hpp"
#include "analysis/mode_band.hpp"
#include "core/patch.hpp"

namespace wane {

struct early_twin_params {
    double span_s = 0.15;         ///< the span the twin is fitted on (the onset fit's)
    double check_s = 1.0;         ///< d's energy over [span_s, check_s) must not rise
    std::size_t max_partials = 6; ///< the strongest partials searched
    double range_db = 20.0;       ///< ... within this of the loudest start
    double max_cents = 60.0;      ///< the twin within this of its partial
    double cents_step = 5.0;      ///< the offset grid; the best refined by a parabola
    double min_cents = 4.0;       ///< no twin nearer than this to any partial of the patch
    /// T60s tried, seconds: from a short stage to a steady mode.
    std::vector<double> t60_grid_s{0.1, 0.2, 0.4, 0.8, 1.6, 3.2};
    /// A twin is kept when it takes at least this share of the recording's energy over the span
    /// (-33 dB). Chosen on the 20 held-out notes at odd places (tools/bench_fidelity), in an
    /// earlier form (one-cent refinement, no edge rule): 0.002 / 0.001 / 0.0005 gave a first-100 ms
    /// SNR median of 14.40 / 14.44 / 14.54 dB against 14.04 without, each note's log-spectral
    /// distance within 0.04 dB.
    double min_gain_share = 0.0005;
    double min_q = 10.0;          ///< quality factor pi f T60 / ln1000 at least this (early_companion's)
    /// The later note: the band around the partial (analysis/mode_band.hpp) of the copy with the
    /// twin follows the recording's block levels over these blocks (to check_s) no worse than the
    /// copy without it, within late_tolerance_db (mean |dB| difference, mode_split's test).
    late_band_span late{.from_s = 0.3, .block_s = 0.05, .range_db = 40.0};
    double late_tolerance_db = 0.25;  ///< 0 / 0.25 / 0.5 there (with 0.0005): 14.54 / 15.12 / 15.12 dB
    /// ... over at least this many blocks: no twin where the note is too short or its band too
    /// quiet for the test to read (a 0.37 s koto note's twins changed its noise model).
    int min_late_blocks = 2;
    /// From span_s to the note's end a twin stays no louder than its partial by more than this
    /// (dB), read every under_step_s.
    double max_over_partial_db = 0.0;
    double under_step_s = 0.05;
    /// The band's rate: this share of the partial's frequency, within the limits below (Hz), so
    /// that it holds the twin and little of the neighbouring partials.
    double late_band_share = 0.2;
    double min_band_rate_hz = 20.0;
    double max_band_rate_hz = 200.0;
    /// With the recording's heard spectrum given (analysis/heard_peaks; heard_shift.hpp): the copy's
    /// heard peak near the partial, at the note's pitch and transposed by each of heard_ratios with
    /// the decays kept (render --to-note: an octave down halves the offset in Hz), stays within this
    /// many cents of the recording's peak (times the ratio), or no further than the copy without
    /// the twin. A third of the 1 cent issue 17's to-note check allows (our choice); shared
    /// timpani_d2's 222.6 Hz partial, with a twin 17 cents up, moved 2.3 cents an octave down.
    double max_heard_shift_cents = 0.3;
    std::vector<double> heard_ratios{1.0, 0.5};
    heard_shift_params heard{};
};

struct early_twin_summary {
    int added = 0;        ///< twins added
    int refused_late = 0; ///< twins that passed the span's test and were refused for the later note
    int refused_pitch = 0; ///< ... and for moving their partial's heard peak (max_heard_shift_cents)
};

/// Adds the early twins of p's strongest partials, fitted on note (note[0] at p's onset, where its
/// phases count from), as partials at the end of p.partials. Mono.
early_twin_summary add_early_twins(patch& p, std::span<const float> note, double sample_rate_hz,
                                   const early_twin_params& params, const heard_span_spectrum* heard = nullptr);

}  // namespace wane
