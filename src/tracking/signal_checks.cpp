#include "tracking/signal_checks.hpp"

#include <algorithm>
#include <cmath>
#include <cstddef>

namespace wane {

clipping_report find_clipping(std::span<const float> samples, const clipping_params& params) {
    const std::span<const float> x = samples;
    clipping_report r;
    if (x.empty()) return r;
    const auto [lo_it, hi_it] = std::minmax_element(x.begin(), x.end());
    const float lo = *lo_it, hi = *hi_it;
    r.peak_lin = std::max(std::abs(double(lo)), std::abs(double(hi)));
    if (r.peak_lin == 0.0) return r;
    const double min_step = params.min_entry_step * r.peak_lin;
    for (const float extreme : {hi, lo}) {
        if (std::abs(double(extreme)) < params.min_level_lin) continue;
        std::size_t i = 1;
        while (i < x.size()) {
            if (x[i] != extreme || x[i - 1] == extreme) {
                ++i;
                continue;
            }
            // A run starts at i, entered from x[i - 1].
            const double step = std::abs(double(x[i]) - double(x[i - 1]));
            std::size_t j = i;
            while (j < x.size() && x[j] == extreme) ++j;
            if (static_cast<int>(j - i) >= params.min_run_samples && step >= min_step) ++r.runs;
            i = j;
        }
    }
    r.clipped = r.runs >= params.min_runs;
    return r;
}

}  // namespace wane
