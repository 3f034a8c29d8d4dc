#include "synthesis/render_length.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "core/envelope.hpp"

namespace wane {

namespace {

/// The last time the envelope is at or above threshold_db, or +inf when it stays there for ever.
/// -inf when it never reaches it. The attack rises to the peak, so only the pieces matter (the
/// first starts at the peak, at attack_s).
double last_time_at_or_above(const envelope& env, double threshold_db) {
    double last_s = -infinity;
    for (const envelope_piece& piece : envelope_pieces(env)) {
        const double start_db = piece.start_level.db;
        const double end_db = std::isinf(piece.end_s) ? (piece.slope_db_per_s < 0.0 ? -infinity : start_db)
                                                      : start_db + piece.slope_db_per_s * (piece.end_s - piece.start_s);
        if (start_db < threshold_db && end_db < threshold_db) continue;
        if (std::isinf(piece.end_s) && piece.slope_db_per_s >= 0.0) return infinity;
        if (end_db >= threshold_db) {
            last_s = std::max(last_s, piece.end_s);
        } else {  // falls through the threshold inside the piece
            last_s = std::max(last_s, piece.start_s + (threshold_db - start_db) / piece.slope_db_per_s);
        }
    }
    return last_s;
}

}  // namespace

sound_length sound_length_s(const patch& p, double below_peak_db) {
    assert(below_peak_db < 0.0);
    double loudest_db = -infinity;
    for (const partial& q : p.partials) loudest_db = std::max(loudest_db, q.env.peak.db);
    for (const noise_band& b : p.noise) loudest_db = std::max(loudest_db, b.env.peak.db);
    const double threshold_db = loudest_db + below_peak_db;
    double end_s = 0.0;
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        const double t = last_time_at_or_above(p.partials[i].env, threshold_db);
        if (std::isinf(t) && t > 0.0) return {.length_s = {}, .holding = "partial " + std::to_string(i + 1)};
        end_s = std::max(end_s, t);
    }
    for (std::size_t i = 0; i < p.noise.size(); ++i) {
        const double t = last_time_at_or_above(p.noise[i].env, threshold_db);
        if (std::isinf(t) && t > 0.0) return {.length_s = {}, .holding = "noise band " + std::to_string(i + 1)};
        end_s = std::max(end_s, t);
    }
    return {.length_s = end_s, .holding = {}};
}

}  // namespace wane
