#include "tracking/onset.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <vector>

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
    const double peak_db = *std::max_element(energy_db.begin(), energy_db.end());
    std::vector<double> sorted = energy_db;
    const auto q = static_cast<std::size_t>(params.quiet_quantile * double(sorted.size() - 1));
    std::nth_element(sorted.begin(), sorted.begin() + q, sorted.end());
    const double quiet_db = sorted[q];
    // Never above peak - min_below_peak_db: a steady sound starts at its first loud block.
    const double threshold_db = std::min(peak_db - params.min_below_peak_db,
                                         std::max(peak_db - params.below_peak_db, quiet_db + params.above_noise_db));
    std::int64_t b = 0;
    while (b < blocks && energy_db[b] < threshold_db) ++b;
    const auto max_back = static_cast<std::int64_t>(params.max_backtrack_s / params.block_s);
    for (std::int64_t back = 0; back < max_back && b > 0 && energy_db[b - 1] < energy_db[b] &&
                                energy_db[b - 1] > quiet_db + 3.0;
         ++back)
        --b;
    return b * block;
}

}  // namespace wane
