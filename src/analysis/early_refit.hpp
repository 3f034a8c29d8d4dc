// The strong partials' phases and start levels refitted on the finished copy's first span_s.
//
// The onset fit (analysis/onset_refine.hpp) gives every partial its level and phase at the onset
// by least squares over the first 150 ms, jointly with the other modes as that fit models them.
// The stages after it change the copy around those partials: a neighbour takes a glide
// (analysis/onset_glide.hpp), a partial becomes close modes (analysis/mode_split.hpp), a partial
// takes an early companion (analysis/early_companion.hpp), and short-lived modes and slow rises are
// rendered with the envelope the patch holds, not the shape the fit used. Nothing fits the other
// partials again, so their phases are left where they best fitted a copy that no longer exists:
// measured on the shared notes, timpani_d2's strongest partial (128.1 Hz, 40% of its first 100 ms)
// played 23 degrees ahead of the recording over its first 30 ms, and a least-squares complex
// scale of its own waveform alone on what the copy leaves took 3.3% of the span's energy off the
// 24.5% the copy missed.
//
// Rule: per partial k, loudest first (its level at the end of its attack, within range_db of the
// loudest), on y = x - (the copy's other partials) over the first span_s after the onset:
//   w[n]  the partial as rendered (synthesis/render: glide, attack and segments included);
//   w'[n] the same partial with phase_rad + pi/2 (its quadrature: a partial's render is
//         Re(a(t) e^(j theta(t))), so a phase change of phi gives cos(phi) w + sin(phi) w');
//   (alpha, beta) the least squares of y ~ alpha w + beta w', z = alpha + j beta.
// The partial takes phase_rad + arg(z) and its start level scaled by |z| (at most
// max_level_change_db either way; the first decay segment keeps its level at its end, so only the
// early decay changes: onset_glide's scale_envelope_start), and keeps them only where the copy's
// residual over the span falls and its residual over [span_s, check_s) does not rise: a phase is
// the partial's for the whole note, and a partial whose pitch falls slowly (banjo_g3's 790.8 Hz
// runs 76 degrees ahead of its copy at 0.15-0.3 s, 117 at 0.3-0.5 s) would otherwise buy its
// first 150 ms with what follows (banjo_g3's first-100 ms SNR fell 7.23 -> 5.63 dB without the
// check, tools/bench_fidelity: the evaluation's alignment, the cross-correlation over 0.5 s, moved
// by a sample). The next partial is fitted on the copy with it. One pass, loudest first, so a weak
// partial cannot take what a strong one's phase explains.
//
// Rises: the onset fit gives a partial a linear rise of a frame or more where its first frames
// fit that best, and a rise that is too long holds the copy under the recording at the start
// (held-out pizz_e4's 171 Hz partial, most of its first 100 ms, rises over 109 ms: 7-12 dB
// under the recording at 5-10 ms). A partial whose rise lasts from min_attack_s to span_s is first
// tried with the rise at each of attack_fractions of it, its level from the old rise's end on kept
// (so only the span changes: the peak moves by the decay between the two ends); the one whose copy
// leaves least over the span, where that is less than with the partial as it is, is a candidate as
// it is (no late test: its later part is the partial's) and refitted as above, beside the partial
// refitted as it was; the candidate that leaves least and passes the tests is kept. Measured on
// the 40 held-out notes (tools/bench_fidelity): first-100 ms SNR median 14.15 -> 14.25 dB, 12
// notes up (steeldrum_c6 +0.52, fretless_d2 +0.25), none down.
//
// Early stage: then, on the copy with the partial as kept above, its level over the span is
// offset by a start and a knee offset (analysis/early_stage.hpp: two segments to a join at 100 or
// 150 ms, its own segments from there on), kept under the same two tests (the later part's
// residual may differ by the renders' rounding only, as the level from the join on is the
// partial's). Measured on the 40 held-out notes against the above (tools/bench_fidelity):
// first-100 ms SNR median 14.25 -> 15.51 dB, 37 notes up (finger_bass_a1 +5.1, banjo_4 +4.7),
// none down; LSD median 4.98 kept, xylophone_c6's 2.43 -> 2.64 the largest rise.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

#include "analysis/early_stage.hpp"
#include "core/patch.hpp"

namespace wane {

struct early_refit_params {
    double span_s = 0.15;              ///< the onset fit's span
    double range_db = 40.0;            ///< partials whose start is within this of the loudest start
    double max_level_change_db = 3.0;  ///< the start level moves at most this far (onset_glide's)
    /// A refit is kept only where the copy's residual over [span_s, check_s) does not rise: twice
    /// the span. Measured against 0.5 s (bench_fidelity): banjo_g3's first-100 ms SNR 7.12 -> 7.21
    /// dB, piano_as4's 13.76 -> 13.98, no note lower, and a shorter render per partial.
    double check_s = 0.3;
    /// A partial whose attack lasts from min_attack_s to span_s is first tried with its attack
    /// shortened to each of these fractions, its level from its old attack end on kept; the one
    /// whose copy leaves least over the span, where that is less than with the partial as it is,
    /// stands for the partial in the refit (and is kept as it is where its refit is not).
    double min_attack_s = 0.002;
    std::vector<double> attack_fractions{0.0, 0.5};
    /// Then each partial's early stage refitted (analysis/early_stage.hpp), kept where the span's
    /// residual falls and the later part's does not rise by more than late_rounding of the span's
    /// signal energy.
    early_stage_params stage{};
    /// The renders' rounding there reaches 1.2e-8 of the span's energy, either sign (pizzicato_c2's
    /// 65 Hz partial: -1.2e-8 as recorded, +6.9e-9 and +4.1e-9 at -0.01 and -0.02 dB gain, where
    /// 1e-9 refused a stage taking the span's residual 27% -> 11% of its energy, and the copy's
    /// first-100 ms SNR at its own onset fell 12.6 -> 4.0 dB); 1e-6 is 60 dB under the span.
    double late_rounding = 1e-6;
};

struct early_refit_summary {
    int refitted = 0;                  ///< partials whose phase or level moved
    double residual_before_db = 0.0;   ///< the copy's residual over the span re the recording's energy
    double residual_after_db = 0.0;
};

/// Refits the phases and start levels of p's strong partials on note (note[0] at the patch's
/// onset, where its phases count from), in place, as described above. Mono: a stereo mix's
/// channels are placed from the mix's phases.
early_refit_summary refit_early_phases(patch& p, std::span<const float> note, double sample_rate_hz,
                                       const early_refit_params& params);

}  // namespace wane
