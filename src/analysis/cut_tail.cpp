#include "analysis/cut_tail.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <optional>
#include <vector>

#include "analysis/beat_level_fit.hpp"
#include "core/line_fit.hpp"

namespace wane {

namespace {

bool steep_enough(double slope_db_per_s, const cut_tail_params& params) {
    return slope_db_per_s <= -params.min_decay_db_per_s;
}

double last_segment_start_s(const envelope& env) {
    return env.decay.size() > 1 ? env.decay[env.decay.size() - 2].until_s.value_or(env.attack_s) : env.attack_s;
}

/// Whether the part's last segment falls: steep enough, and by min_fall_db over its fitted stretch.
bool last_segment_falls(const cut_part& part, const cut_tail_params& params) {
    const double slope = t60_to_slope_db_per_s(part.env->decay.back().t60_s);
    if (!steep_enough(slope, params)) return false;
    return -slope * std::max(0.0, part.fit_end_s - last_segment_start_s(*part.env)) >= params.min_fall_db;
}

/// Least-squares slope of the track's level (dB) over [from_s, to_s], dB per second (core/line_fit),
/// from 3 points or more.
std::optional<double> level_slope(const cut_part& part, double from_s, double to_s) {
    if (part.track == nullptr) return std::nullopt;
    line_sums sums;
    for (const track_point& q : part.track->points)
        if (q.time_s >= from_s && q.time_s <= to_s) sums.add(q.time_s, q.level_db);
    return sums.slope(3.0);
}

/// Rule 0 for a plateau that starts at a beat's trough (cut_tail.hpp): the segment before it
/// falls and the track rises at least min_swell_db above its lowest point near the knot within the
/// plateau. Then the slower mode's slope of the two-mode fit of the track's level over the last two
/// segments (analysis/beat_level_fit.hpp), when that fit is accepted and both modes decay
/// (at least min_decay_db_per_s: a slower one would render as a drone); nullopt otherwise.
std::optional<double> beat_tail(const cut_part& part, const cut_tail_params& params) {
    const envelope& env = *part.env;
    if (part.track == nullptr || env.decay.size() < 2) return std::nullopt;
    if (!steep_enough(t60_to_slope_db_per_s(env.decay[env.decay.size() - 2].t60_s), params)) return std::nullopt;
    const double knot_s = last_segment_start_s(env);
    const double from_s = std::max(
        part.fit_start_s, env.decay.size() > 2 ? env.decay[env.decay.size() - 3].until_s.value_or(env.attack_s) : env.attack_s);
    double trough_db = infinity, swell_db = -infinity;
    std::vector<double> time_s, level_db;
    for (const track_point& q : part.track->points) {
        if (q.time_s < from_s || q.time_s > part.fit_end_s) continue;
        time_s.push_back(q.time_s);
        level_db.push_back(q.level_db);
        if (std::abs(q.time_s - knot_s) <= params.trough_search_s) trough_db = std::min(trough_db, q.level_db);
        if (q.time_s > knot_s) swell_db = std::max(swell_db, q.level_db);
    }
    if (!(swell_db - trough_db >= params.min_swell_db)) return std::nullopt;
    const auto fit = fit_beat_levels(time_s, level_db, params.beat);
    if (!fit || !(std::max(fit->slope_a_db_per_s, fit->slope_b_db_per_s) < 0.0)) return std::nullopt;
    return std::min(std::max(fit->slope_a_db_per_s, fit->slope_b_db_per_s), -params.min_decay_db_per_s);
}

/// Rules 0, 1 and 2: the slope the part falls at after the cut, when its own data show one.
std::optional<double> own_decay(const cut_part& part, const cut_tail_params& params) {
    const envelope& env = *part.env;
    if (const auto beat = beat_tail(part, params)) return beat;
    // Rule 0: the last part falls, if slowly (the late stage of a two-stage decay, measured on a
    // stretch too short to fall min_fall_db): it falls on at the slope its track shows there
    // (the fitted segment's slope without a track).
    const double last_start_s = last_segment_start_s(env);
    const auto late = part.track != nullptr ? level_slope(part, last_start_s, part.fit_end_s)
                                            : std::optional<double>{t60_to_slope_db_per_s(env.decay.back().t60_s)};
    if (late && steep_enough(*late, params)) return late;
    if (env.decay.size() >= 2) {
        const double before = t60_to_slope_db_per_s(env.decay[env.decay.size() - 2].t60_s);
        if (steep_enough(before, params)) return before;
    }
    const auto slope = level_slope(part, part.fit_start_s, part.fit_end_s);
    if (slope && steep_enough(*slope, params)) return slope;
    return std::nullopt;
}

/// Keeps the plateau up to the cut and falls at slope_db_per_s after it.
void fall_after(envelope& env, double cut_s, double slope_db_per_s) {
    const double t60_s = slope_db_per_s_to_t60(slope_db_per_s);
    if (cut_s > last_segment_start_s(env)) {
        env.decay.back().until_s = cut_s;
        env.decay.push_back({.t60_s = t60_s, .until_s = {}});
    } else {
        env.decay.back().t60_s = t60_s;
    }
}

}  // namespace

int continue_decays_past_cut(std::span<const cut_part> parts, double cut_s, const cut_tail_params& params) {
    std::vector<const cut_part*> plateaus;
    std::vector<std::optional<double>> own;
    std::vector<double> falling;
    for (const cut_part& part : parts) {
        assert(part.env != nullptr && !part.env->decay.empty());
        if (last_segment_falls(part, params)) {
            falling.push_back(t60_to_slope_db_per_s(part.env->decay.back().t60_s));
            continue;
        }
        plateaus.push_back(&part);
        own.push_back(own_decay(part, params));
        if (own.back()) falling.push_back(*own.back());
    }
    double median = -params.min_decay_db_per_s;  // rule 4
    if (!falling.empty()) {                      // rule 3
        std::nth_element(falling.begin(), falling.begin() + static_cast<std::ptrdiff_t>(falling.size() / 2),
                         falling.end());
        median = falling[falling.size() / 2];
    }
    for (std::size_t i = 0; i < plateaus.size(); ++i) fall_after(*plateaus[i]->env, cut_s, own[i].value_or(median));
    return static_cast<int>(plateaus.size());
}

double fade_slope_db_per_s(double cut_s, const cut_tail_params& params) {
    assert(params.fade_lengths >= 0.0 && cut_s > 0.0 && params.end_window_s > 0.0);
    if (params.fade_lengths == 0.0) return 0.0;
    const double by_length = -60.0 / (params.fade_lengths * cut_s);
    const double window_s = params.end_window_s;
    const double from_s = (params.fade_lengths - 1.0) * cut_s - window_s;  // d, past the cut
    if (from_s < 0.0) return by_length;
    // P(s) of the header: mean power over the window, dB relative to the level at the cut.
    const auto mean_power_db = [&](double slope) {
        const double k = -slope * std::log(10.0) / 10.0;  // power falls as e^(-k t)
        return slope * from_s + 10.0 * std::log10(-std::expm1(-k * window_s) / (k * window_s));
    };
    if (mean_power_db(by_length) <= -params.end_fall_db) return by_length;
    // P falls monotonically as the slope steepens; -1e6 dB/s is past any window of a microsecond.
    double slow = by_length, steep = -1e6;
    for (int i = 0; i < 100 && slow - steep > 1e-9 * -steep; ++i) {
        const double mid = 0.5 * (slow + steep);
        (mean_power_db(mid) <= -params.end_fall_db ? steep : slow) = mid;
    }
    return steep;
}

int fade_past_cut(std::span<envelope* const> envs, double cut_s, const cut_tail_params& params) {
    assert(params.fade_lengths >= 0.0 && cut_s > 0.0);
    if (params.fade_lengths == 0.0) return 0;
    const double fade_db_per_s = fade_slope_db_per_s(cut_s, params);
    int changed = 0;
    for (envelope* env : envs) {
        assert(env != nullptr && !env->decay.empty());
        // A held or rising last segment (t60 inf or negative: slope >= 0) is slower than any fall.
        if (t60_to_slope_db_per_s(env->decay.back().t60_s) <= fade_db_per_s) continue;
        fall_after(*env, cut_s, fade_db_per_s);
        ++changed;
    }
    return changed;
}

}  // namespace wane
