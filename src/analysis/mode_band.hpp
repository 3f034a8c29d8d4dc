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

/// The blocks a late level check reads: block_s long, from from_s on, while the recording's band
/// stays within range_db of its loudest block.
struct late_band_span {
    double from_s = 0.3;
    double block_s = 0.05;
    double range_db = 40.0;
};

/// Mean |dB| difference of a band's block levels (energy per block), candidate against recording,
/// over span's blocks (band samples at band_rate_hz, as band_of gives them; 0 with no block): how
/// far a copy's late level strays from the recording's around one frequency (analysis/mode_split,
/// analysis/early_twin). blocks_read: where given, the number of blocks read.
double late_band_error_db(std::span<const std::complex<double>> rec, std::span<const std::complex<double>> cand,
                          double band_rate_hz, const late_band_span& span, int* blocks_read = nullptr);

}  // namespace wane
