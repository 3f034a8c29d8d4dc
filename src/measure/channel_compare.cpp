// Channel-by-channel comparison (see channel_compare.hpp).
#include "measure/channel_compare.hpp"

#include <algorithm>
#include <cstddef>

namespace wane {

channel_comparison compare_channels(std::span<const float> a_left, std::span<const float> a_right,
                                    std::span<const float> b_left, std::span<const float> b_right,
                                    double sample_rate_hz, const compare_result& mix, const compare_params& params) {
    channel_comparison s;
    s.left = compare_signals(a_left, b_left, sample_rate_hz, params);
    s.right = compare_signals(a_right, b_right, sample_rate_hz, params);
    // b[n + lag] lines up with a[n] (measure/align.hpp).
    const std::size_t onset_a = mix.align.onset_a_frames;
    const std::ptrdiff_t onset_b = static_cast<std::ptrdiff_t>(onset_a) + mix.align.lag_frames;
    s.a = inter_channel(a_left, a_right, sample_rate_hz, onset_a);
    s.b = inter_channel(b_left, b_right, sample_rate_hz, static_cast<std::size_t>(std::max<std::ptrdiff_t>(0, onset_b)));
    return s;
}

}  // namespace wane
