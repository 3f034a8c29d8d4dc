#include "core/envelope.hpp"

#include <cassert>
#include <cmath>

namespace wane {

std::vector<envelope_piece> envelope_pieces(const envelope& env) {
    assert(!env.decay.empty());
    std::vector<envelope_piece> pieces;
    pieces.reserve(env.decay.size());
    double start_s = env.attack_s;
    double level = env.peak.db;
    for (std::size_t i = 0; i < env.decay.size(); ++i) {
        const decay_segment& seg = env.decay[i];
        const bool last = i + 1 == env.decay.size();
        const double end_s = last ? infinity : seg.until_s.value_or(infinity);
        const double slope = t60_to_slope_db_per_s(seg.t60_s);
        if (end_s <= start_s) continue;
        pieces.push_back({.start_s = start_s, .end_s = end_s, .start_level = level_db{level},
                          .slope_db_per_s = slope});
        if (last || std::isinf(end_s)) break;
        level += slope * (end_s - start_s);
        start_s = end_s;
    }
    return pieces;
}

level_db envelope_level(const envelope& env, std::span<const envelope_piece> pieces, double time_s) {
    if (time_s < 0.0) return level_db{-infinity};
    if (time_s < env.attack_s) {
        return to_level(amp_lin{to_amp(env.peak).lin * time_s / env.attack_s});
    }
    for (const envelope_piece& p : pieces) {
        if (time_s < p.end_s) return level_db{p.start_level.db + p.slope_db_per_s * (time_s - p.start_s)};
    }
    return level_db{-infinity};  // unreachable for a valid envelope: the last piece ends at +inf
}

level_db envelope_level(const envelope& env, double time_s) {
    if (time_s < env.attack_s) return envelope_level(env, {}, time_s);  // no pieces needed
    return envelope_level(env, envelope_pieces(env), time_s);
}

amp_lin envelope_amp(const envelope& env, std::span<const envelope_piece> pieces, double time_s) {
    if (time_s < 0.0) return amp_lin{0.0};
    if (time_s < env.attack_s) return amp_lin{to_amp(env.peak).lin * time_s / env.attack_s};
    return to_amp(envelope_level(env, pieces, time_s));
}

amp_lin envelope_amp(const envelope& env, double time_s) {
    if (time_s < env.attack_s) return envelope_amp(env, {}, time_s);  // no pieces needed
    return envelope_amp(env, envelope_pieces(env), time_s);
}

envelope held_before(const envelope& env, double from_s) {
    assert(!env.decay.empty());
    if (!(from_s > env.attack_s)) return env;
    const level_db from_level = envelope_level(env, from_s);
    if (!(env.peak.db > from_level.db)) return env;
    envelope held{.attack_s = 0.0, .peak = from_level, .decay = {{.t60_s = infinity, .until_s = from_s}}};
    // The segments that end after from_s, unchanged: the level line from from_s on is env's.
    for (std::size_t i = 0; i < env.decay.size(); ++i) {
        const bool last = i + 1 == env.decay.size();
        if (last || env.decay[i].until_s.value_or(infinity) > from_s) held.decay.push_back(env.decay[i]);
    }
    return held;
}

}  // namespace wane
