// Early companions: a second mode at a partial's own frequency that starts at once and dies within
// the first 150 ms. The onset fit (analysis/onset_refine.hpp) gives each partial one shape over its
// first 150 ms: a damped exponential from t = 0 (with its chosen attack), or, where that comes out
// far under the STFT envelope's peak, the STFT envelope's own attack ramp from silence (a slow
// rise). A piano's second harmonic sounds at once, falls 8 dB in 50 ms and swells again (piano_d2,
// 146.6 Hz: -13 dB at 10 ms, -21 dB at 50 ms, -14 dB at 100 ms, its copy's ramp -37 dB at 10 ms);
// a harpsichord's upper partial is loud at 10 ms where its ramp is still 20 dB under it. One shape
// cannot follow such a start. So once the partials' starts, glides and close modes are fitted,
// each partial may take one more mode at its frequency: an instant start with a T60 from a grid,
// fitted by least squares on what the copy's partials leave of the recording's first span_s. Its
// own phase lets the pair's sum dip and swell as the recording does. The patch keeps it as a
// partial of its own at the same frequency (two partials at one frequency sum, as a sinusoid in two
// stages does). Fitted after the glides and close modes, it takes no part in theirs.
#pragma once

#include <span>
#include <vector>

#include "core/envelope.hpp"
#include "core/patch.hpp"
#include "modes/damped_mode.hpp"
#include "modes/mode_shape.hpp"

namespace wane {

struct early_companion_params {
    /// Span of the recording after the patch's onset the companions are fitted on, seconds (the
    /// onset fit's).
    double span_s = 0.15;
    /// T60s tried for a companion, seconds: it dies within the span or a little past it (-36 dB
    /// at 0.15 s for the longest).
    std::vector<double> t60_grid_s{0.015, 0.03, 0.06, 0.12, 0.25};
    /// Only partials whose loudest level over the span is within this of the loudest partial's get one.
    double range_db = 40.0;
    /// A companion is kept when it lowers the residual energy of the span by at least this share
    /// of the recording's energy there (1/10 of the attack search's margin, analysis/onset_attack.hpp:
    /// a secondary partial's early stage holds a few tenths of a percent of a note's first 150 ms).
    double min_gain_share = 0.0002;
    /// ... and at least this share of its partial's own energy over the span (-13 dB): a
    /// strong partial's small level or decay error is no early stage (a clean note of three
    /// damped modes got companions of 0.02-0.05% of its energy without this).
    double min_partial_share = 0.05;
    /// A companion is a resonance, not a burst of the attack's noise at the partial's frequency:
    /// its quality factor pi f / d (f over its bandwidth; d = ln1000 / T60) is at least this (the
    /// onset fit's min_new_q for its new modes). A level cap in its place (no louder than its
    /// partial's STFT envelope over the span) kept out the companions piano_d2's second and third
    /// harmonics need (the STFT has them 15-20 dB low at 10 ms); with neither, pizzicato_c2's
    /// first-100 ms SNR fell 0.3 dB (its companions of T60 15-30 ms at 65-390 Hz: Q 1-6).
    double min_q = 10.0;
    /// In the onset fit, a companion beside a partial's STFT shape starts at most this far over
    /// that envelope's loudest level over the span (the swell the STFT saw and its early stage;
    /// with no cap there, glockenspiel_g6's log-spectral distance rose 0.45 dB).
    double max_over_stft_db = 0.0;
    /// In the onset fit, a partial's STFT shape is taken only with a scale within this many dB of
    /// the envelope's (the fit's slow_rise_db: a shaped partial's level moves by at most this).
    double max_shape_scale_db = 6.0;
};

/// In the onset fit: the STFT shape of each partial it fits (modes[i] with shapes[i], as fitted on
/// its target) where that shape rises and may be taken, and the loudest level of its STFT envelope
/// over the span (sampled every 5 ms and at the attack's end), dB; add_stft_start per partial.
struct stft_starts {
    std::vector<mode_shape> shapes;  ///< empty: none
    std::vector<double> peak_db;
};
void add_stft_start(stft_starts& out, const envelope& env, bool may_take, double sample_rate_hz, std::size_t count);

/// In the onset fit, after its passes: the partials (indices into modes) that start better with
/// their STFT shape and a companion than with their fitted shape, with or without one. Each is
/// refitted alone on the fit's residual with its own part put back (joint: target minus every
/// fitted mode, analysis/onset_attack.hpp's joint_residual): its fitted shape alone, then with a
/// companion of each grid T60 (min_q), then its STFT shape (level within max_shape_scale_db of the
/// envelope's) with one (max_over_stft_db); the choice is taken into the residual before the next
/// partial (by energy over the span, the strongest first). The STFT shape wins when it lowers the residual by
/// min_gain_share of span_energy more than the best with the fitted shape. The companions
/// themselves are fitted again at the end (add_early_companions). companions: the one chosen with
/// each STFT shape (freq_hz, decay_per_s, amp at t = 0), for the fit's last pass.
struct stft_switch {
    std::vector<std::size_t> partials;
    std::vector<damped_mode> companions;
};
stft_switch choose_stft_starts(std::span<const double> joint, double sample_rate_hz, std::span<const damped_mode> modes,
                               std::span<const mode_shape> shapes, const stft_starts& stft, std::span<const double> energy,
                               double span_energy, const early_companion_params& params);

/// Adds the early companions of p's partials, fitted on note (note[0] at p's onset, where its
/// phases count from), as partials at the end of p.partials; the number added.
int add_early_companions(patch& p, std::span<const float> note, double sample_rate_hz,
                         const early_companion_params& params);

}  // namespace wane
