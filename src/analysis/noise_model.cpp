#include "analysis/noise_model.hpp"

#include <algorithm>
#include <cmath>
#include <functional>

#include "core/noise_bands.hpp"
#include "spectrum/stft.hpp"
#include "synthesis/render.hpp"
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
/// The streamed residual is formed this many renderer anchor blocks at a time (plus one window).
constexpr std::size_t residual_blocks = 64;

/// Fills dest with residual samples [first, first + dest.size()) (all inside the residual).
using residual_source = std::function<void(std::size_t first, std::span<float> dest)>;

/// The bins of each band (centres in [low, high), DC and Nyquist excluded): band_total_bins[b]
/// counts them all, band_bins[b] lists those farther than guard_hz from every partial.
void select_band_bins(const std::vector<band_edges>& layout, int n_bins, double bin_hz,
                      std::span<const double> partial_freqs_hz, double guard_hz,
                      std::vector<std::vector<int>>& band_bins, std::vector<int>& band_total_bins) {
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
}

/// The band measurement over a residual of `total` samples read through `source`. Frames are
/// analysed in order; the samples each needs are fetched into a buffer that slides forward, so
/// only one buffer of residual is held. Frames near the ends read zeros outside the residual,
/// exactly as stft_plan does on the whole residual.
std::vector<noise_band_track> measure_bands(std::size_t total, const residual_source& source, double sample_rate_hz,
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
    select_band_bins(layout, n_bins, bin_hz, partial_freqs_hz, guard_hz, band_bins, band_total_bins);

    const auto hop = static_cast<std::size_t>(std::max<std::int64_t>(1, std::llround(params.hop_s * sample_rate_hz)));
    const std::size_t frame_count = total == 0 ? 0 : (total - 1) / hop + 1;
    std::vector<noise_band_track> tracks(layout.size());
    for (std::size_t b = 0; b < layout.size(); ++b) {
        tracks[b].low_hz = layout[b].low_hz;
        tracks[b].high_hz = layout[b].high_hz;
        tracks[b].hop_s = static_cast<double>(hop) / sample_rate_hz;
        if (!band_bins[b].empty()) tracks[b].level_db.reserve(frame_count);
    }

    // The buffer holds residual [buf_first, buf_first + buf.size()); it starts at a multiple of
    // the renderer's anchor length (so the partials come out as in one whole render).
    const auto half = static_cast<std::size_t>(plan.half_length());
    const std::size_t buf_capacity =
        std::min(total, residual_blocks * render_anchor_frames + 2 * half + render_anchor_frames);
    std::vector<float> buf;
    buf.reserve(buf_capacity);
    std::size_t buf_first = 0;
    for (std::size_t centre = 0; centre < total; centre += hop) {
        const std::size_t lo = centre >= half ? centre - half : 0;
        const std::size_t hi = std::min(total, centre + half + 1);
        if (buf.empty() || lo < buf_first || hi > buf_first + buf.size()) {
            buf_first = lo / render_anchor_frames * render_anchor_frames;
            buf.resize(std::min(buf_capacity, total - buf_first));
            source(buf_first, buf);
        }
        // Frames that reach past either end of the residual see the buffer's edges there too
        // (the buffer starts at 0 or ends at total when they do), so zeros are read as before.
        const bool at_start = centre < half;
        const bool at_end = centre + half + 1 > total;
        std::span<const float> view(buf);
        std::int64_t local_centre = static_cast<std::int64_t>(centre - buf_first);
        if (!at_start && !at_end) {
            view = view.subspan(lo - buf_first, hi - lo);
            local_centre = static_cast<std::int64_t>(half);
        }
        plan.analyze(view, local_centre);
        const auto power = plan.power();
        for (std::size_t b = 0; b < layout.size(); ++b) {
            if (band_bins[b].empty()) continue;
            double sum = 0.0;
            for (int k : band_bins[b]) sum += static_cast<double>(power[static_cast<std::size_t>(k)]);
            const double mean_bin_power = sum / static_cast<double>(band_bins[b].size()) / amp_scale_sq;
            const double band_power = band_power_from_bins(mean_bin_power, band_total_bins[b], n_fft, window_power_sum);
            tracks[b].level_db.push_back(static_cast<float>(std::max(silence_db, power_to_db(band_power))));
        }
    }
    std::erase_if(tracks, [](const noise_band_track& t) { return t.level_db.empty(); });
    return tracks;
}

std::vector<noise_band> fit_bands(const std::vector<noise_band_track>& tracks, double loudest_partial_db,
                                  const noise_model_params& params) {
    std::vector<noise_band> bands;
    partial_track track;
    for (const noise_band_track& t : tracks) {
        // Floor: the median level of the residual's tail (steady hiss or digital silence).
        const auto n = t.level_db.size();
        std::vector<float> tail(t.level_db.end() - static_cast<std::ptrdiff_t>(std::max<std::size_t>(1, static_cast<std::size_t>(static_cast<double>(n) * tail_fraction))),
                                t.level_db.end());
        std::nth_element(tail.begin(), tail.begin() + static_cast<std::ptrdiff_t>(tail.size() / 2), tail.end());
        const double floor_db = static_cast<double>(tail[tail.size() / 2]);

        track.points.clear();
        track.points.reserve(n);
        const double centre_hz = std::sqrt(t.low_hz * t.high_hz);
        for (std::size_t i = 0; i < n; ++i) {
            track.points.push_back({.time_s = static_cast<double>(i) * t.hop_s, .freq_hz = centre_hz,
                                    .level_db = static_cast<double>(t.level_db[i]), .phase_rad = 0.0,
                                    .floor_db = floor_db});
        }
        envelope_fit_params fit = params.fit;
        fit.window_s = params.window_s;
        const auto result = fit_partial(track, fit);
        // Bounded like the partials' fits (analyze.cpp): a peak beyond what the format holds (an
        // attack extrapolated far above the measured levels) is no band of this note.
        if (!result || result->env.peak.db > max_peak_db) continue;
        if (result->env.peak.db < loudest_partial_db - params.keep_within_db) continue;
        bands.push_back({.low_hz = t.low_hz, .high_hz = t.high_hz, .env = result->env});
    }
    return bands;
}

}  // namespace

std::vector<noise_band_track> measure_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                                  std::span<const double> partial_freqs_hz,
                                                  const noise_model_params& params) {
    const residual_source source = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(residual.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    return measure_bands(residual.size(), source, sample_rate_hz, partial_freqs_hz, params);
}

std::vector<noise_band> fit_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                        std::span<const double> partial_freqs_hz, double loudest_partial_db,
                                        const noise_model_params& params) {
    return fit_bands(measure_noise_bands(residual, sample_rate_hz, partial_freqs_hz, params), loudest_partial_db,
                     params);
}

std::vector<noise_band> fit_note_noise(std::span<const float> note, double sample_rate_hz, const patch& p,
                                       const noise_model_params& params) {
    if (note.empty()) return {};
    std::vector<double> freqs_hz;
    double loudest_db = -infinity;
    for (const partial& q : p.partials) {
        freqs_hz.push_back(q.freq_hz);
        loudest_db = std::max(loudest_db, q.env.peak.db);
    }
    const partial_renderer partials(p, {.sample_rate_hz = sample_rate_hz,
                                        .length_s = static_cast<double>(note.size()) / sample_rate_hz,
                                        .include_noise = false});
    const std::size_t common = std::min(note.size(), partials.frames());
    std::vector<float> rendered;
    const residual_source source = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(note.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
        if (first >= common) return;
        const std::size_t n = std::min(dest.size(), common - first);
        rendered.resize(n);
        partials.render(first, rendered);
        for (std::size_t i = 0; i < n; ++i) dest[i] -= rendered[i];
    };
    return fit_bands(measure_bands(note.size(), source, sample_rate_hz, freqs_hz, params), loudest_db, params);
}

}  // namespace wane
