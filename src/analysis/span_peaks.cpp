#include "analysis/span_peaks.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

namespace wane {

namespace {

/// The bins of s within [low_hz, high_hz] that have two neighbours: [first, last].
std::pair<std::size_t, std::size_t> bins_within(const heard_span_spectrum& s, double low_hz, double high_hz) {
    const auto last = s.mag.size() - 1;
    return {std::clamp<std::size_t>(static_cast<std::size_t>(std::ceil(low_hz / s.bin_hz)), 1, last - 1),
            std::clamp<std::size_t>(static_cast<std::size_t>(std::floor(high_hz / s.bin_hz)), 1, last - 1)};
}

/// Whether bin k is a local maximum of s.mag.
bool is_peak(const heard_span_spectrum& s, std::size_t k) { return s.mag[k] > s.mag[k - 1] && s.mag[k] >= s.mag[k + 1]; }

}  // namespace

std::size_t strongest_peak(const heard_span_spectrum& s, double low_hz, double high_hz) {
    const auto [lo, hi] = bins_within(s, low_hz, high_hz);
    std::size_t best = 0;
    for (std::size_t k = lo; k <= hi; ++k)
        if (is_peak(s, k) && (best == 0 || s.mag[k] > s.mag[best])) best = k;
    return best;
}

double peak_freq_hz(const heard_span_spectrum& s, std::size_t k) {
    const double a = std::log(s.mag[k - 1]), b = std::log(s.mag[k]), c = std::log(s.mag[k + 1]);
    const double den = a - 2.0 * b + c;
    const double offset = den < 0.0 ? 0.5 * (a - c) / den : 0.0;
    return (static_cast<double>(k) + offset) * s.bin_hz;
}

double group_centre_hz(const heard_span_spectrum& s, std::size_t k, double low_hz, double high_hz, double within_db) {
    const auto [lo, hi] = bins_within(s, low_hz, high_hz);
    const double floor_mag = s.mag[k] * std::pow(10.0, -within_db / 20.0);
    double sum = 0.0, weight = 0.0;
    for (std::size_t j = lo; j <= hi; ++j) {
        if (!is_peak(s, j) || s.mag[j] < floor_mag) continue;
        const double w = s.mag[j] * s.mag[j];
        sum += w * peak_freq_hz(s, j), weight += w;
    }
    return weight > 0.0 ? sum / weight : peak_freq_hz(s, k);
}

}  // namespace wane
