// Joining the frame loop's fragments of one partial, and bridging gaps in a track (see
// tracker_steps.hpp).
#include <algorithm>
#include <array>
#include <cmath>
#include <numeric>

#include "core/units.hpp"
#include "tracking/tracker_steps.hpp"

namespace wane::tracker_steps {

void bridge_gap(partial_track& track, int frames, const track_point& next, double hop_s) {
    const track_point before = track.points.back();
    for (int g = 1; g <= frames; ++g) {
        const double a = double(g) / (frames + 1);
        const track_point& prev = track.points.back();
        const double f = before.freq_hz + a * (next.freq_hz - before.freq_hz);
        track.points.push_back(
            {.time_s = before.time_s + g * hop_s,
             .freq_hz = f,
             .level_db = before.level_db + a * (next.level_db - before.level_db),
             .phase_rad = std::remainder(prev.phase_rad + two_pi * 0.5 * (prev.freq_hz + f) * hop_s, two_pi),
             .floor_db = before.floor_db + a * (next.floor_db - before.floor_db)});
    }
}

namespace {

/// Median frequency of the first (or last) few points of a track: its ends can sit on a fading or
/// rising edge where a single frame reads off.
double edge_freq_hz(const partial_track& t, bool at_start) {
    constexpr std::size_t edge_points = 5;
    const std::size_t k = std::min(edge_points, t.points.size());
    std::array<double, edge_points> f{};
    for (std::size_t i = 0; i < k; ++i) f[i] = t.points[at_start ? i : t.points.size() - 1 - i].freq_hz;
    for (std::size_t i = 1; i < k; ++i)  // insertion sort of <= 5 values
        for (std::size_t j = i; j > 0 && f[j - 1] > f[j]; --j) std::swap(f[j - 1], f[j]);
    return f[k / 2];
}

}  // namespace

void join_fragments(std::vector<partial_track>& tracks, std::vector<double>& peak_db, double hop_s,
                    double max_gap_s, double rel_tol) {
    std::vector<std::size_t> order(tracks.size());
    std::iota(order.begin(), order.end(), std::size_t{0});
    std::sort(order.begin(), order.end(),
              [&](auto a, auto c) { return tracks[a].points.front().time_s < tracks[c].points.front().time_s; });
    std::vector<bool> absorbed(tracks.size(), false);
    for (std::size_t oi = 0; oi < order.size(); ++oi) {
        const std::size_t later = order[oi];
        const track_point& first = tracks[later].points.front();
        std::size_t best = tracks.size();
        double best_dist = rel_tol;
        for (std::size_t oj = 0; oj < oi; ++oj) {
            const std::size_t earlier = order[oj];
            if (absorbed[earlier] || tracks[earlier].cut_by_end) continue;
            const track_point& last = tracks[earlier].points.back();
            const double gap_s = first.time_s - last.time_s;
            if (gap_s <= 0.5 * hop_s || gap_s > max_gap_s) continue;
            const double dist = std::abs(edge_freq_hz(tracks[later], true) / edge_freq_hz(tracks[earlier], false) - 1.0);
            if (dist < best_dist) best_dist = dist, best = earlier;
        }
        if (best == tracks.size()) continue;
        partial_track& into = tracks[best];
        const int gap_frames =
            static_cast<int>(std::lround((first.time_s - into.points.back().time_s) / hop_s)) - 1;
        bridge_gap(into, gap_frames, first, hop_s);
        into.points.insert(into.points.end(), tracks[later].points.begin(), tracks[later].points.end());
        into.cut_by_end = tracks[later].cut_by_end;
        peak_db[best] = std::max(peak_db[best], peak_db[later]);
        absorbed[later] = true;
        // The joined track now ends where `later` ended: let it be found again by later fragments.
        order[oi] = best;
        absorbed[best] = false;
    }
    std::size_t keep = 0;
    for (std::size_t i = 0; i < tracks.size(); ++i) {
        if (absorbed[i]) continue;
        if (keep != i) {
            tracks[keep] = std::move(tracks[i]);
            peak_db[keep] = peak_db[i];
        }
        ++keep;
    }
    tracks.resize(keep);
    peak_db.resize(keep);
}

}  // namespace wane::tracker_steps
