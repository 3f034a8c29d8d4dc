#include "analysis/noise_model.hpp"

#include <algorithm>
#include <cmath>

#include "core/noise_bands.hpp"
#include "spectrum/stft.hpp"
#include "tracking/track.hpp"

namespace wane {

namespace {

/// Main-lobe half-width of the Hann window in bins of the unpadded window (common practice:
/// the Hann main lobe spans +-2 bins).
constexpr double hann_half_lobe_bins = 2.0;
constexpr int zero_padding = 2;
/// A level floor that stands for digital silence, dB.
constexpr double silence_db = -200.0;
/// The band's floor is the median level over the last quarter of the residual.
constexpr double tail_fraction = 0.25;

}  // namespace

std::vector<noise_band_track> measure_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                                  std::span<const double> partial_freqs_hz,
                                                  const noise_model_params& params) {
    const double nyquist_hz = sample_rate_hz / 2.0;
    const auto layout = noise_band_layout(nyquist_hz);
    int window_length = static_cast<int>(std::lround(params.window_s * sample_rate_hz)) | 1;
    window_length = std::max(window_length, 33);
    const stft_config config{.window = window_kind::hann, .window_length = window_length,
                             .fft_size = fast_fft_size(zero_padding * window_length)};
    stft_plan plan(config);
    const int n_fft = plan.fft_size();
    const int n_bins = n_fft / 2 + 1;
    const double bin_hz = sample_rate_hz / n_fft;
    double window_power_sum = 0.0;
    for (float w : plan.window_samples()) window_power_sum += static_cast<double>(w) * static_cast<double>(w);
    const double amp_scale_sq = plan.amp_scale() * plan.amp_scale();

    // Bins that carry a band's noise: inside the band, away from every partial's main lobe.
    const double guard_hz = params.partial_guard_lobes * hann_half_lobe_bins * sample_rate_hz / window_length;
    std::vector<std::vector<int>> band_bins(layout.size());
    std::vector<int> band_total_bins(layout.size(), 0);
    for (std::size_t b = 0; b < layout.size(); ++b) {
        for (int k = 1; k < n_bins - 1; ++k) {
            const double f = k * bin_hz;
            if (f < layout[b].low_hz || f >= layout[b].high_hz) continue;
            ++band_total_bins[b];
            const bool near_partial = std::any_of(partial_freqs_hz.begin(), partial_freqs_hz.end(),
                                                  [&](double pf) { return std::abs(pf - f) < guard_hz; });
            if (!near_partial) band_bins[b].push_back(k);
        }
    }

    std::vector<noise_band_track> tracks(layout.size());
    for (std::size_t b = 0; b < layout.size(); ++b) {
        tracks[b].low_hz = layout[b].low_hz;
        tracks[b].high_hz = layout[b].high_hz;
    }
    const auto hop = std::max<std::int64_t>(1, std::llround(params.hop_s * sample_rate_hz));
    const auto total = static_cast<std::int64_t>(residual.size());
    for (std::int64_t centre = 0; centre < total; centre += hop) {
        plan.analyze(residual, centre);
        const auto power = plan.power();
        for (std::size_t b = 0; b < layout.size(); ++b) {
            if (band_bins[b].empty()) continue;
            double sum = 0.0;
            for (int k : band_bins[b]) sum += static_cast<double>(power[static_cast<std::size_t>(k)]);
            const double mean_bin_power = sum / static_cast<double>(band_bins[b].size()) / amp_scale_sq;
            const double band_power = band_power_from_bins(mean_bin_power, band_total_bins[b], n_fft, window_power_sum);
            tracks[b].time_s.push_back(static_cast<double>(centre) / sample_rate_hz);
            tracks[b].level_db.push_back(std::max(silence_db, power_to_db(band_power)));
        }
    }
    std::erase_if(tracks, [](const noise_band_track& t) { return t.time_s.empty(); });
    return tracks;
}

std::vector<noise_band> fit_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                        std::span<const double> partial_freqs_hz, double loudest_partial_db,
                                        const noise_model_params& params) {
    const auto tracks = measure_noise_bands(residual, sample_rate_hz, partial_freqs_hz, params);
    std::vector<noise_band> bands;
    for (const noise_band_track& t : tracks) {
        // Floor: the median level of the residual's tail (steady hiss or digital silence).
        const auto n = t.level_db.size();
        std::vector<double> tail(t.level_db.end() - static_cast<std::ptrdiff_t>(std::max<std::size_t>(1, static_cast<std::size_t>(static_cast<double>(n) * tail_fraction))),
                                 t.level_db.end());
        std::nth_element(tail.begin(), tail.begin() + static_cast<std::ptrdiff_t>(tail.size() / 2), tail.end());
        const double floor_db = tail[tail.size() / 2];

        partial_track track;
        track.points.reserve(n);
        const double centre_hz = std::sqrt(t.low_hz * t.high_hz);
        for (std::size_t i = 0; i < n; ++i) {
            track.points.push_back({.time_s = t.time_s[i], .freq_hz = centre_hz, .level_db = t.level_db[i],
                                    .phase_rad = 0.0, .floor_db = floor_db});
        }
        envelope_fit_params fit = params.fit;
        fit.window_s = params.window_s;
        const auto result = fit_partial(track, fit);
        if (!result) continue;
        if (result->env.peak.db < loudest_partial_db - params.keep_within_db) continue;
        bands.push_back({.low_hz = t.low_hz, .high_hz = t.high_hz, .env = result->env});
    }
    return bands;
}

}  // namespace wane
