// Which measured track belongs to a fitted partial (see track_match.hpp).
#include "tracking/track_match.hpp"

#include <algorithm>
#include <cmath>

#include "core/units.hpp"
#include "tracking/tracker.hpp"
#include "tracking/tracker_tuning.hpp"

namespace wane {

int matching_track(const partial& part, const tracking_result& tracking, double sample_rate_hz) {
    // The tracker's continuation tolerance: max(2 bins, 1% of f) (tracker_tuning.hpp).
    const double bin_hz = tracking.fft_size > 0 && sample_rate_hz > 0.0 ? sample_rate_hz / tracking.fft_size : 0.0;
    const double tolerance_hz = std::max(tracker_tuning::dev_min_bins * bin_hz, tracker_tuning::dev_rel * part.freq_hz);
    // First a track with the partial's own harmonic number, else one carrying no number.
    for (const bool same_number : {true, false}) {
        if (same_number && part.harmonic <= 0) continue;
        int best = -1;
        double best_distance_hz = infinity;
        for (std::size_t i = 0; i < tracking.tracks.size(); ++i) {
            const partial_track& t = tracking.tracks[i];
            const bool eligible = same_number ? t.harmonic == part.harmonic : (t.harmonic == 0 || part.harmonic == 0);
            if (!eligible) continue;
            const double d = std::abs(track_frequency_hz(t, tracking.window_s) - part.freq_hz);
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
