#include "measure/tuning.hpp"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <vector>

#include "core/units.hpp"

namespace wane {

namespace {

constexpr double cents_per_octave = 1200.0;

struct summary {
    double freq_hz = 0.0;
    double peak_db = -1e300;
    double amp = 0.0;  ///< linear amplitude at the peak
};

/// Amplitude-weighted mean frequency and peak level of a track.
summary summarize(const partial_track& t) {
    double fa = 0.0, w = 0.0;
    summary s;
    for (const track_point& p : t.points) {
        const double a = to_amp(level_db{p.level_db}).lin;
        fa += a * p.freq_hz;
        w += a;
        s.peak_db = std::max(s.peak_db, p.level_db);
    }
    s.freq_hz = w > 0.0 ? fa / w : 0.0;
    s.amp = to_amp(level_db{s.peak_db}).lin;
    return s;
}

}  // namespace

std::optional<tuning_difference> tuning_between(std::span<const partial_track> a, std::span<const partial_track> b,
                                                const tuning_params& params) {
    std::vector<summary> sa, sb;
    for (const auto& t : a)
        if (!t.points.empty()) sa.push_back(summarize(t));
    for (const auto& t : b)
        if (!t.points.empty()) sb.push_back(summarize(t));
    std::sort(sa.begin(), sa.end(), [](const summary& x, const summary& y) { return x.peak_db > y.peak_db; });
    if (sa.size() > params.strongest) sa.resize(params.strongest);
    std::vector<double> cents, weight;
    for (const summary& x : sa) {
        double best = params.max_offset_cents;
        bool found = false;
        for (const summary& y : sb) {
            const double c = cents_per_octave * std::log2(y.freq_hz / x.freq_hz);
            if (std::abs(c) <= std::abs(best)) best = c, found = true;
        }
        if (!found) continue;
        cents.push_back(best);
        weight.push_back(x.amp);
    }
    if (cents.empty()) return std::nullopt;
    // Weighted median: robust to one partial that paired with a neighbour.
    std::vector<std::size_t> idx(cents.size());
    std::iota(idx.begin(), idx.end(), std::size_t{0});
    std::sort(idx.begin(), idx.end(), [&](auto i, auto j) { return cents[i] < cents[j]; });
    const double half = 0.5 * std::accumulate(weight.begin(), weight.end(), 0.0);
    double acc = 0.0;
    for (const std::size_t i : idx)
        if ((acc += weight[i]) >= half) return tuning_difference{.cents = cents[i], .pairs = cents.size()};
    return tuning_difference{.cents = cents[idx.back()], .pairs = cents.size()};
}

}  // namespace wane
