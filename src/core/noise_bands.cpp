#include "core/noise_bands.hpp"

#include <algorithm>

namespace wane {

std::vector<band_edges> noise_band_layout(double max_hz) {
    constexpr int lowest_index = -9;   // 1000 G^(-9/3) = 125.9 Hz, nominal 125 Hz
    constexpr int highest_index = 13;  // 1000 G^(13/3) = 19953 Hz, nominal 20 kHz
    constexpr double lowest_band_low_hz = 20.0;
    // G^(1/3) and G^(1/6): one-third-octave step and half-band ratio (IEC 61260-1:2014, 5.4 and
    // 5.6 with b = 3).
    const double third = std::cbrt(octave_ratio_base10);
    const double half_third = std::sqrt(third);
    std::vector<band_edges> bands;
    const double first_low = octave_reference_hz * std::pow(third, lowest_index) / half_third;
    if (lowest_band_low_hz < max_hz) bands.push_back({lowest_band_low_hz, std::min(first_low, max_hz)});
    for (int k = lowest_index; k <= highest_index; ++k) {
        const double mid = octave_reference_hz * std::pow(third, k);
        const double low = mid / half_third;
        const double high = mid * half_third;
        if (low >= max_hz) break;
        bands.push_back({low, std::min(high, max_hz)});
    }
    return bands;
}

}  // namespace wane
