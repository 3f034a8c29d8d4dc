#include "core/patch.hpp"

#include <algorithm>

namespace wane {

void canonicalize(patch& p) {
    std::stable_sort(p.partials.begin(), p.partials.end(),
                     [](const partial& a, const partial& b) { return a.freq_hz < b.freq_hz; });
    std::stable_sort(p.noise.begin(), p.noise.end(), [](const noise_band& a, const noise_band& b) {
        return a.low_hz != b.low_hz ? a.low_hz < b.low_hz : a.high_hz < b.high_hz;
    });
}

}  // namespace wane
