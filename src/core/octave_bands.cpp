// The octave bands of IEC 61260-1:2014 (see octave_bands.hpp).
#include "core/octave_bands.hpp"

#include <array>
#include <cassert>
#include <cmath>

namespace wane {

namespace {

// Nominal mid-band frequencies of the octave bands x = -5 .. 4 (IEC 61260-1:2014, Annex E,
// Table E.1; the ISO 266 preferred numbers).
constexpr int lowest_band_index = -5;
constexpr std::array<double, 10> nominal_mid_hz{31.5, 63.0, 125.0, 250.0, 500.0,
                                               1000.0, 2000.0, 4000.0, 8000.0, 16000.0};

}  // namespace

octave_band octave_band_at(int index) {
    assert(index >= lowest_band_index &&
           index < lowest_band_index + static_cast<int>(nominal_mid_hz.size()));
    const double mid_hz = octave_reference_hz * std::pow(octave_ratio_base10, index);
    const double half_band = std::sqrt(octave_ratio_base10);  // G^(1/2)
    return octave_band{.index = index,
                       .nominal_hz = nominal_mid_hz[static_cast<std::size_t>(index - lowest_band_index)],
                       .exact_mid_hz = mid_hz,
                       .lower_edge_hz = mid_hz / half_band,
                       .upper_edge_hz = mid_hz * half_band};
}

std::vector<octave_band> octave_bands_within(double sample_rate_hz, double lowest_nominal_hz,
                                             double highest_nominal_hz, double max_edge_fraction) {
    std::vector<octave_band> bands;
    const double nyquist_hz = 0.5 * sample_rate_hz;
    for (int x = lowest_band_index; x < lowest_band_index + static_cast<int>(nominal_mid_hz.size()); ++x) {
        const octave_band b = octave_band_at(x);
        if (b.nominal_hz < lowest_nominal_hz || b.nominal_hz > highest_nominal_hz) continue;
        if (b.upper_edge_hz >= max_edge_fraction * nyquist_hz) continue;
        bands.push_back(b);
    }
    return bands;
}

}  // namespace wane
