// Peaks of the heard span's spectrum (analysis/heard_peaks.hpp): where they are, how their
// frequency is read, and the centre of a group of them.
#pragma once

#include <cstddef>

#include "analysis/heard_peaks.hpp"

namespace wane {

/// Index of the strongest local maximum of s.mag within [low_hz, high_hz]; 0 when there is none.
std::size_t strongest_peak(const heard_span_spectrum& s, double low_hz, double high_hz);

/// Frequency of the peak at bin k: vertex of the parabola through the log magnitudes of k - 1, k,
/// k + 1 (with zero padding of 8 or more the bias is far below a hundredth of a bin).
double peak_freq_hz(const heard_span_spectrum& s, std::size_t k);

/// The frequency heard for the group of peaks of s within [low_hz, high_hz] around its strongest,
/// the peak at bin k: the power-weighted mean of the peak frequencies of every local maximum there
/// within within_db of k's (the members of a beating pair or a course); k's own when it stands alone.
double group_centre_hz(const heard_span_spectrum& s, std::size_t k, double low_hz, double high_hz, double within_db);

}  // namespace wane
