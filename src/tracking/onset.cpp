#include "tracking/onset.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <vector>

#include "core/units.hpp"

namespace wane {

std::int64_t detect_onset(std::span<const float> samples, double sample_rate_hz,
                          const onset_params& params) {
    const auto block = std::max<std::int64_t>(1, std::llround(params.block_s * sample_rate_hz));
    const auto size = static_cast<std::int64_t>(samples.size());
    const std::int64_t blocks = (size + block - 1) / block;
    assert(blocks > 0);
    std::vector<double> energy_db(static_cast<std::size_t>(blocks));
    for (std::int64_t b = 0; b < blocks; ++b) {
        double sum = 0.0;
        const std::int64_t end = std::min(size, (b + 1) * block);
        for (std::int64_t n = b * block; n < end; ++n) sum += double(samples[n]) * double(samples[n]);
        energy_db[b] = 10.0 * std::log10(std::max(sum / double(end - b * block), 1e-30));
    }
    const auto peak_it = std::max_element(energy_db.begin(), energy_db.end());
    const double peak_db = *peak_it;
    // The quiet level from the loudest block on: noise runs under the note, so the note's tail
    // (or the noise it decays into) bounds it from above, and silence or room noise before the
    // note cannot lower it; over the whole file a lead-in did, the threshold fell with it and the
    // onset moved up to 4 ms early (tests/unit/test_onset_lead.cpp, the pluck after room noise).
    std::vector<double> sorted(peak_it, energy_db.end());
    const auto q = static_cast<std::size_t>(params.quiet_quantile * double(sorted.size() - 1));
    std::nth_element(sorted.begin(), sorted.begin() + q, sorted.end());
    const double quiet_db = sorted[q];
    // Never above peak - min_below_peak_db: a steady sound starts at its first loud block.
    const double threshold_db = std::min(peak_db - params.min_below_peak_db,
                                         std::max(peak_db - params.below_peak_db, quiet_db + params.above_noise_db));
    std::int64_t b = 0;
    while (b < blocks && energy_db[b] < threshold_db) ++b;
    const auto max_back = static_cast<std::int64_t>(params.max_backtrack_s / params.block_s);
    // The level before the rise: the median of up to before_rise_blocks blocks ending where the
    // walk back could reach (none: the note starts within max_back of the file's start). The walk
    // stops above it too: a quiet tail left the quiet level under noise that came only before the
    // note, and the walk went on into that noise wherever two of its blocks happened to fall.
    double before_rise_db = -infinity;
    if (b > max_back) {
        const std::int64_t first = std::max<std::int64_t>(0, b - max_back - params.before_rise_blocks);
        std::vector<double> before(energy_db.begin() + first, energy_db.begin() + (b - max_back));
        std::nth_element(before.begin(), before.begin() + static_cast<std::ptrdiff_t>(before.size() / 2), before.end());
        before_rise_db = before[before.size() / 2];
    }
    for (std::int64_t back = 0; back < max_back && b > 0 && energy_db[b - 1] < energy_db[b] &&
                                energy_db[b - 1] > quiet_db + 3.0 && energy_db[b - 1] > before_rise_db + params.above_before_rise_db;
         ++back)
        --b;
    return b * block;
}

}  // namespace wane
