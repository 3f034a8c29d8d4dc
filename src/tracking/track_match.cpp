// Which measured track belongs to a fitted partial (see track_match.hpp).
#include "tracking/track_match.hpp"

#include <algorithm>
#include <cmath>

#include "core/units.hpp"

namespace wane {

double track_mean_freq_hz(const partial_track& t) {
    double sum = 0.0;
    for (const track_point& p : t.points) sum += p.freq_hz;
    return t.points.empty() ? 0.0 : sum / static_cast<double>(t.points.size());
}

int matching_track(const partial& part, const tracking_result& tracking, double sample_rate_hz) {
    // The tracker's continuation tolerance (tracking/tracker.hpp): max(2 bins, 1% of f).
    constexpr double tolerance_bins = 2.0, tolerance_fraction = 0.01;
    const double bin_hz = tracking.fft_size > 0 && sample_rate_hz > 0.0 ? sample_rate_hz / tracking.fft_size : 0.0;
    const double tolerance_hz = std::max(tolerance_bins * bin_hz, tolerance_fraction * part.freq_hz);
    // First a track with the partial's own harmonic number, else one carrying no number.
    for (const bool same_number : {true, false}) {
        if (same_number && part.harmonic <= 0) continue;
        int best = -1;
        double best_distance_hz = infinity;
        for (std::size_t i = 0; i < tracking.tracks.size(); ++i) {
            const partial_track& t = tracking.tracks[i];
            const bool eligible = same_number ? t.harmonic == part.harmonic : (t.harmonic == 0 || part.harmonic == 0);
            if (!eligible) continue;
            const double d = std::abs(track_mean_freq_hz(t) - part.freq_hz);
            if (d <= tolerance_hz && d < best_distance_hz) {
                best_distance_hz = d;
                best = static_cast<int>(i);
            }
        }
        if (best >= 0) return best;
    }
    return -1;
}

}  // namespace wane
