// The envelope shared by partials and noise bands (patch format v1):
//   0 <= t < attack_s : amplitude rises linearly from 0 to the peak amplitude;
//   t >= attack_s     : the level in dB follows straight segments, each falling 60 dB per t60_s,
//                       from where the previous one ended until its until_s; the last runs on.
// t60_s = inf holds the level; a negative t60_s rises at 60 / |t60_s| dB per second.
#pragma once

#include <optional>
#include <span>
#include <vector>

#include "core/units.hpp"

namespace wane {

struct decay_segment {
    double t60_s = infinity;
    /// End of this segment in seconds from onset; empty for the last segment (runs to the end).
    std::optional<double> until_s;
    friend bool operator==(const decay_segment&, const decay_segment&) = default;
};

struct envelope {
    double attack_s = 0.0;
    level_db peak{};  ///< level at the end of the attack (key peak_db)
    std::vector<decay_segment> decay;  ///< at least one segment in a valid envelope
    friend bool operator==(const envelope&, const envelope&) = default;
};

/// One straight piece of the level line after the attack: level(t) = start_level + slope * (t - start).
struct envelope_piece {
    double start_s = 0.0;
    double end_s = infinity;  ///< exclusive; the last piece ends at +inf
    level_db start_level{};
    double slope_db_per_s = 0.0;
};

/// The decay as straight pieces in time order, starting at attack_s. Segments whose until_s is not
/// after their start give empty pieces and are skipped. Precondition: env.decay is not empty.
std::vector<envelope_piece> envelope_pieces(const envelope& env);

/// Level in dB at time_s (seconds from onset). -inf before t = 0 and at t = 0 when attack_s > 0.
level_db envelope_level(const envelope& env, double time_s);

/// Linear amplitude at time_s: 10^(level/20), or the attack's linear ramp.
amp_lin envelope_amp(const envelope& env, double time_s);

/// The same two with env's pieces made once by the caller (pieces = envelope_pieces(env)): for
/// loops over many times, which would otherwise make them (and allocate) at every call.
level_db envelope_level(const envelope& env, std::span<const envelope_piece> pieces, double time_s);
amp_lin envelope_amp(const envelope& env, std::span<const envelope_piece> pieces, double time_s);

/// env with its level before from_s held at its level at from_s where the line run back from
/// from_s would stand higher (a decay measured only from from_s on, not extrapolated up towards
/// the onset): attack 0, a held segment until from_s, then env's segments unchanged. env itself
/// when its attack ends at or after from_s or its level does not fall over [attack_s, from_s].
envelope held_before(const envelope& env, double from_s);

}  // namespace wane
