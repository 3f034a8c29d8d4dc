// The band of a target around a partial's frequency, for analysis/mode_split: the target moved
// to 0 Hz at freq_hz and low-passed by three running means of d samples, the last one decimating
// (see band_of), so a mode z^n of the target comes out as (z^d)^m.
#pragma once

#include <complex>
#include <cstddef>
#include <span>
#include <vector>

namespace wane {

/// The band of x around freq_hz, one sample per d of x (d >= 3): see mode_band.cpp.
std::vector<std::complex<double>> band_of(std::span<const float> x, double freq_hz, double sample_rate_hz, std::size_t d);

}  // namespace wane
