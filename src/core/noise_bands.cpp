#include "core/noise_bands.hpp"

#include <algorithm>

namespace wane {

std::vector<band_edges> noise_band_layout(double max_hz) {
    constexpr double reference_hz = 1000.0;  // IEC 61260-1 reference frequency
    constexpr int lowest_index = -9;         // 1000 G^-9 = 125.9 Hz, nominal 125 Hz
    constexpr int highest_index = 12;        // 1000 G^12 = 15849 Hz, nominal 16 kHz
    constexpr int step = 3;                  // octave = 3 steps of G^(1/3)... in base-10 thirds
    constexpr double lowest_band_low_hz = 20.0;
    const double third = std::pow(10.0, 0.1);  // G^(1/3)
    std::vector<band_edges> bands;
    const double first_low = reference_hz * std::pow(third, lowest_index) / std::sqrt(octave_ratio_base10);
    if (lowest_band_low_hz < max_hz) bands.push_back({lowest_band_low_hz, std::min(first_low, max_hz)});
    for (int k = lowest_index; k <= highest_index; k += step) {
        const double mid = reference_hz * std::pow(third, k);
        const double low = mid / std::sqrt(octave_ratio_base10);
        const double high = mid * std::sqrt(octave_ratio_base10);
        if (low >= max_hz) break;
        bands.push_back({low, std::min(high, max_hz)});
    }
    return bands;
}

}  // namespace wane
