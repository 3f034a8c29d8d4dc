#include "measure/compare.hpp"
#include "measure/tuning.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include "core/units.hpp"
#include "tracking/tracker.hpp"

namespace wane {

double snr_db(std::span<const float> a, std::span<const float> b, std::size_t begin, std::size_t end) {
    double signal = 0.0, error = 0.0;
    for (std::size_t n = begin; n < end; ++n) {
        const double va = n < a.size() ? static_cast<double>(a[n]) : 0.0;
        const double vb = n < b.size() ? static_cast<double>(b[n]) : 0.0;
        signal += va * va;
        error += (va - vb) * (va - vb);
    }
    if (signal == 0.0 && error == 0.0) return not_measured;
    if (error == 0.0) return infinity;
    return power_to_db(signal / error);
}

compare_result compare_signals(std::span<const float> a, std::span<const float> b, double sample_rate_hz,
                               const compare_params& params) {
    const bool silent = std::all_of(a.begin(), a.end(), [](float v) { return v == 0.0f; });
    if (silent) throw analysis_error("the reference is silent");
    compare_result r;
    r.sample_rate_hz = sample_rate_hz;
    r.align = align_onsets(a, b, sample_rate_hz, params.onset);
    r.compared_frames = a.size();
    const std::vector<float> b_aligned = shift_by_lag(b, r.align.lag_frames, a.size());

    const std::size_t onset = r.align.onset_a_frames;
    const std::size_t early_end =
        std::min(a.size(), onset + static_cast<std::size_t>(std::llround(params.early_window_s * sample_rate_hz)));
    if (early_end <= onset) throw analysis_error("the reference ends at its onset");
    r.early_window_s = static_cast<double>(early_end - onset) / sample_rate_hz;

    spectral_distance_params spectral = params.spectral;
    if (params.spectral_max_freq_hz > 0.0) {
        spectral.band_limit_fraction = std::min(1.0, params.spectral_max_freq_hz / (0.5 * sample_rate_hz));
    }
    // Bin k of size N counts while k <= floor(fraction * N / 2): report the top of the range.
    r.spectral_max_freq_hz = spectral.band_limit_fraction * 0.5 * sample_rate_hz;
    spectral_distance_params whole = spectral;
    whole.start_frames = 0;
    whole.end_frames = a.size();
    r.whole = spectral_distance(a, b_aligned, whole);
    spectral_distance_params early = spectral;
    early.start_frames = onset;
    early.end_frames = early_end;
    r.early = spectral_distance(a, b_aligned, early);
    r.early_snr_db = snr_db(a, b_aligned, onset, early_end);
    remark_params remarks = params.remarks;
    if (params.spectral_max_freq_hz > 0.0) remarks.cells.max_freq_hz = r.spectral_max_freq_hz;
    r.remarks = remark_on_copy(a, b_aligned, sample_rate_hz, onset, remarks);

    const std::span<const float> a_decay = a.subspan(onset);
    const std::span<const float> b_decay = std::span<const float>(b_aligned).subspan(onset);
    for (const octave_band& band : octave_bands_within(sample_rate_hz, params.lowest_band_nominal_hz,
                                                       params.highest_band_nominal_hz)) {
        const octave_filter filter(band, sample_rate_hz);
        const std::vector<float> fa = filter.apply(a_decay);
        const std::vector<float> fb = filter.apply(b_decay);
        r.bands.push_back(band_decay_pair{.band = band,
                                          .a = measure_decay(fa, sample_rate_hz, params.decay),
                                          .b = measure_decay(fb, sample_rate_hz, params.decay)});
    }
    // f0 of both by the analysis's own estimator (default settings); left empty when either
    // sound has no pitch centre or cannot be tracked.
    try {
        const tracking_result ta = track_note(a, sample_rate_hz, {});
        const tracking_result tb = track_note(b, sample_rate_hz, {});
        if (ta.f0_hz > 0.0 && tb.f0_hz > 0.0) r.f0_difference_cents = cents_between(tb.f0_hz, ta.f0_hz);
        if (const auto t = tuning_between(ta.tracks, tb.tracks)) {
            r.tuning_difference_cents = t->cents;
            r.tuning_pairs = t->pairs;
        }
    } catch (const analysis_error&) {
    }
    return r;
}

}  // namespace wane
