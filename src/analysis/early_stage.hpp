// A strong partial's early stage (its first 100-150 ms) refitted on the waveform.
//
// The STFT fit draws a partial's envelope from frame levels: a decay that is faster over the
// first tens of milliseconds than later is smoothed into one line, and the copy's partial runs
// 1-3 dB off the recording's there (measured on the held-out notes by a free linear envelope per
// partial over 100 ms: koto_c5's top partials 1.1-2.0 dB too quiet over the first 50 ms, banjo_4's
// 753 Hz partial right at the onset and 2.7 dB too quiet at 50 ms). analysis/early_refit moves
// only a partial's start level, within 3 dB, along the envelope's first segment.
//
// Here the partial's level in dB is offset by a line through three knots: start_db at the end of
// its attack (and over the attack: the rise is scaled), knee_db at knee_s, 0 from join_s on, so
// its envelope becomes attack + a segment to knee_s + a segment to join_s + its own segments from
// join_s on (with_early_stage): the later part is the STFT fit's. The offsets are the least
// squares of the waveform y ~ w(t) 10^(g(t) / 20) over the span (w the partial as rendered, y
// what the copy leaves with w put back, g the offset line, taken constant over blocks of 32
// frames whose sums of w^2 and y w are made once): one Gauss-Newton step from g = 0 for
// each (knee_s, join_s) of the grids, the pair whose step lowers the residual most taken further
// by gauss_newton_steps more steps while the residual falls. Each step's residual is the model's
// (w times the offset's gain), so the renderer is needed only for the candidate the caller keeps
// or drops (early_refit: the copy's residual over the span must fall
// and over [span, check) not rise).
#pragma once

#include <cstddef>
#include <optional>
#include <span>
#include <vector>

#include "core/envelope.hpp"

namespace wane {

struct early_stage_params {
    bool enabled = true;
    std::vector<double> knee_s{0.02, 0.05, 0.08};  ///< the first segment's ends tried
    std::vector<double> join_s{0.1, 0.15};         ///< where the offset returns to 0 (at most the span)
    double min_knee_after_attack_s = 0.005;        ///< a knee at least this long after the attack's end
    double max_change_db = 9.0;                    ///< each knot's offset at most this far either way
    int gauss_newton_steps = 2;                    ///< steps past the first for the chosen pair
    /// The sums are taken per block of this many frames, the offset constant over each (0.67 ms at
    /// 48 kHz): the candidate handed back is rendered and tested on the frames by the caller.
    std::size_t block_frames = 32;
    /// A candidate is handed back only where the model's residual over the span falls by this much
    /// of the recording's energy there (-40 dB): smaller changes are not worth a render.
    double min_fall = 1e-4;
};

struct early_stage_fit {
    double knee_s = 0.0;
    double join_s = 0.0;
    double start_db = 0.0;  ///< offset at the attack's end
    double knee_db = 0.0;   ///< offset at knee_s
    double fall = 0.0;      ///< the model's fall of the span's residual energy (the recording's units)
};

/// The early stage of the partial rendered as w (its frames from the onset at rate_hz), on d = the
/// recording minus the whole copy over the same frames (w.size() <= d.size(); the span is w's
/// frames), attack_s its attack: none where no pair of the grids lowers the model's residual by
/// min_fall * signal.
std::optional<early_stage_fit> fit_early_stage(std::span<const double> d, std::span<const float> w, double attack_s,
                                               double rate_hz, double signal, const early_stage_params& params);

/// env with its level offset by fit's line (above): attack and peak (start_db added), a segment to
/// knee_s, a segment to join_s ending at env's level there, env's own segments from join_s on.
/// Precondition: env.attack_s < fit.knee_s < fit.join_s.
envelope with_early_stage(const envelope& env, const early_stage_fit& fit);

}  // namespace wane
