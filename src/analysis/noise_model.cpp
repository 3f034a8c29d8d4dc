#include "analysis/noise_model.hpp"

#include <algorithm>
#include <cmath>
#include <functional>
#include <optional>
#include <utility>

#include "analysis/band_leakage.hpp"
#include "analysis/floor_onset.hpp"
#include "core/noise_bands.hpp"
#include "spectrum/stft.hpp"
#include "synthesis/render.hpp"
#include "tracking/track.hpp"

namespace wane {

namespace {

/// Main-lobe half-width of the 4-term Blackman-Harris window in bins of the unpadded window
/// (Harris 1978: the main lobe spans +-4 bins).
constexpr double bh4_half_lobe_bins = 4.0;
/// FFT size over window length: at most this. The attack's short window is padded so to have
/// bins enough in the narrow bands.
constexpr int zero_padding = 2;
/// The floor takes the median of the bins between partials: unpadded bins are independent for
/// white noise (the exponential median's premise), and a long window (a low note) has bins enough
/// without padding. A window shorter than 1 / floor_bin_hz is padded (up to zero_padding) to bins
/// of this width, so the narrow bands below a few hundred hertz keep their free bins near them
/// (measured: with 10 Hz bins a 60 ms window's borrowed bins around 200 Hz take up a loud band's
/// skirt at 500 Hz, test_noise; with 8 Hz they do not).
constexpr double floor_bin_hz = 8.0;
/// A level that stands for digital silence, dB.
constexpr double silence_db = -200.0;
/// The leakage under a band (analysis/band_leakage.hpp) is the median's expectation over a skirt
/// that falls steeply across the band's bins; a band level this close above it is not trusted as
/// the band's own (reasoned choice: measured 3-5 dB above the estimate on a band that holds only
/// its neighbour's skirt).
constexpr double leak_margin_db = 6.0;
/// The streamed residual is formed this many renderer anchor blocks at a time (plus one window).
constexpr std::size_t residual_blocks = 64;

/// Fills dest with residual samples [first, first + dest.size()) (all inside the residual).
using residual_source = std::function<void(std::size_t first, std::span<float> dest)>;
/// A source measured on the frames centred before until_s (seconds from the onset) only.
struct timed_source {
    const residual_source* read = nullptr;
    double until_s = infinity;
};

/// Expected median of n independent unit-mean exponential variables (the power of one noise bin):
/// the k-th smallest has mean sum_{j = n - k + 1}^{n} 1 / j (Renyi's representation); an even n
/// takes the mean of the two middle ones. Tends to ln 2 for large n.
double expected_exponential_median(std::size_t n) {
    auto order_mean = [n](std::size_t k) {
        double s = 0.0;
        for (std::size_t j = n - k + 1; j <= n; ++j) s += 1.0 / static_cast<double>(j);
        return s;
    };
    return n % 2 == 1 ? order_mean(n / 2 + 1) : 0.5 * (order_mean(n / 2) + order_mean(n / 2 + 1));
}

/// One STFT measurement of the bands: the window, hop, span and each band's bins.
struct band_plan {
    window_kind window = window_kind::hann;
    double window_s = 0.0;
    double hop_s = 0.0;
    double span_s = 0.0;  ///< frames centred before this; 0 = the whole residual
    bool median = false;  ///< median of the bins scaled to the mean (else their mean)
    double widest_bin_hz = 0.0;  ///< pad (up to zero_padding) to bins no wider; 0: pad fully
    std::vector<band_edges> bands;
    std::vector<std::vector<int>> bins;  ///< bins measured per band
    std::vector<int> band_total_bins;    ///< all bins inside each band (the band power's K)
    std::vector<std::pair<int, int>> ranges;  ///< first and last bin inside each band
    std::vector<std::vector<band_leak>> leak;  ///< what each band's bins take from the others
};

stft_config plan_config(const band_plan& plan, double sample_rate_hz) {
    const int window_length = std::max(33, static_cast<int>(std::lround(plan.window_s * sample_rate_hz)) | 1);
    int size = zero_padding * window_length;
    if (plan.widest_bin_hz > 0.0)
        size = std::clamp(static_cast<int>(std::ceil(sample_rate_hz / plan.widest_bin_hz)), window_length, size);
    return {.window = plan.window, .window_length = window_length, .fft_size = fast_fft_size(size)};
}

/// The plan's band-to-band leakage through its window (analysis/band_leakage.hpp).
void add_leakage(band_plan& plan, double sample_rate_hz) {
    const stft_plan stft(plan_config(plan, sample_rate_hz));
    plan.leak = band_leakage(stft.window_samples(), stft.fft_size(), plan.bins, plan.ranges, plan.median);
}

/// The floor measurement: bins away from every partial, borrowed from nearby when too few.
band_plan floor_plan(double sample_rate_hz, std::span<const double> partial_freqs_hz, double f0_hz,
                     const noise_model_params& params) {
    const double window_s = floor_window_s(partial_freqs_hz, f0_hz, params);
    band_plan plan{.window = window_kind::blackman_harris_4, .window_s = window_s,
                   .hop_s = std::max(params.hop_s, window_s / params.floor_hops_per_window), .median = true,
                   .widest_bin_hz = floor_bin_hz, .bands = {}, .bins = {}, .band_total_bins = {}, .ranges = {}, .leak = {}};
    const stft_config config = plan_config(plan, sample_rate_hz);
    const int n_bins = config.fft_size / 2 + 1;
    const double bin_hz = sample_rate_hz / config.fft_size;
    const double guard_hz = params.partial_guard_lobes * bh4_half_lobe_bins * sample_rate_hz / config.window_length;
    std::vector<int> free_bins;
    for (int k = 1; k < n_bins - 1; ++k) {
        const double f = k * bin_hz;
        if (std::none_of(partial_freqs_hz.begin(), partial_freqs_hz.end(),
                         [&](double pf) { return std::abs(pf - f) < guard_hz; }))
            free_bins.push_back(k);
    }
    for (const band_edges& e : noise_band_layout(sample_rate_hz / 2.0)) {
        const int first = std::max(1, static_cast<int>(std::ceil(e.low_hz / bin_hz)));
        const int last = std::min(n_bins - 2, static_cast<int>(std::ceil(e.high_hz / bin_hz)) - 1);
        if (last < first || free_bins.empty()) continue;
        std::vector<int> chosen;
        for (int k : free_bins)
            if (k >= first && k <= last) chosen.push_back(k);
        if (chosen.size() < static_cast<std::size_t>(params.min_free_bins)) {
            // Borrow the free bins nearest the band's centre in log frequency.
            const double centre_hz = std::sqrt(e.low_hz * e.high_hz);
            chosen = free_bins;
            const auto n = std::min(chosen.size(), static_cast<std::size_t>(params.min_free_bins));
            std::partial_sort(chosen.begin(), chosen.begin() + static_cast<std::ptrdiff_t>(n), chosen.end(), [&](int a, int b) {
                return std::abs(std::log(a * bin_hz / centre_hz)) < std::abs(std::log(b * bin_hz / centre_hz));
            });
            chosen.resize(n);
        }
        plan.bands.push_back(e);
        plan.bins.push_back(std::move(chosen));
        plan.band_total_bins.push_back(last - first + 1);
        plan.ranges.emplace_back(first, last);
    }
    add_leakage(plan, sample_rate_hz);
    return plan;
}

/// The attack measurement: all bins of the bands wide enough for the short window.
band_plan attack_plan(double sample_rate_hz, const noise_model_params& params) {
    band_plan plan{.window = window_kind::hann, .window_s = params.attack_window_s, .hop_s = params.attack_hop_s,
                   .span_s = 2.0 * params.attack_span_s, .median = false, .widest_bin_hz = 0.0, .bands = {}, .bins = {},
                   .band_total_bins = {}, .ranges = {}, .leak = {}};
    const stft_config config = plan_config(plan, sample_rate_hz);
    const int n_bins = config.fft_size / 2 + 1;
    const double bin_hz = sample_rate_hz / config.fft_size;
    const double window_bin_hz = sample_rate_hz / config.window_length;
    for (const band_edges& e : noise_band_layout(sample_rate_hz / 2.0)) {
        if ((e.high_hz - e.low_hz) < params.attack_min_bins * window_bin_hz) continue;
        const int first = std::max(1, static_cast<int>(std::ceil(e.low_hz / bin_hz)));
        const int last = std::min(n_bins - 2, static_cast<int>(std::ceil(e.high_hz / bin_hz)) - 1);
        if (last < first) continue;
        std::vector<int> bins(static_cast<std::size_t>(last - first + 1));
        for (int k = first; k <= last; ++k) bins[static_cast<std::size_t>(k - first)] = k;
        plan.bands.push_back(e);
        plan.bins.push_back(std::move(bins));
        plan.band_total_bins.push_back(last - first + 1);
        plan.ranges.emplace_back(first, last);
    }
    add_leakage(plan, sample_rate_hz);
    return plan;
}

/// The band measurement over a residual of `total` samples read through `source`. Frames are
/// analysed in order; the samples each needs are fetched into a buffer that slides forward, so
/// only one buffer of residual is held. Frames near the ends read zeros outside the residual,
/// exactly as stft_plan does on the whole residual.
std::vector<noise_band_track> measure_bands(std::size_t total, const residual_source& source, double sample_rate_hz,
                                            const band_plan& bp, double until_s = infinity) {
    stft_plan plan(plan_config(bp, sample_rate_hz));
    const int n_fft = plan.fft_size();
    double window_power_sum = 0.0;
    for (float w : plan.window_samples()) window_power_sum += static_cast<double>(w) * static_cast<double>(w);
    const double amp_scale_sq = plan.amp_scale() * plan.amp_scale();

    const auto hop = static_cast<std::size_t>(std::max<std::int64_t>(1, std::llround(bp.hop_s * sample_rate_hz)));
    std::size_t end = total;
    if (bp.span_s > 0.0) end = std::min(total, static_cast<std::size_t>(std::llround(bp.span_s * sample_rate_hz)));
    if (until_s < static_cast<double>(end) / sample_rate_hz)
        end = static_cast<std::size_t>(std::ceil(std::max(0.0, until_s) * sample_rate_hz));
    const std::size_t frame_count = end == 0 ? 0 : (end - 1) / hop + 1;
    std::vector<noise_band_track> tracks(bp.bands.size());
    // Per band, once: the expected median of its bins' count of unit exponentials.
    std::vector<double> unit_median(bp.bands.size(), 1.0);
    std::size_t most_bins = 0;
    for (std::size_t b = 0; b < bp.bands.size(); ++b) {
        tracks[b] = {.low_hz = bp.bands[b].low_hz, .high_hz = bp.bands[b].high_hz,
                     .hop_s = static_cast<double>(hop) / sample_rate_hz, .level_db = {}, .leak_db = {}};
        tracks[b].level_db.reserve(frame_count);
        if (bp.median && !bp.bins[b].empty()) unit_median[b] = expected_exponential_median(bp.bins[b].size());
        most_bins = std::max(most_bins, bp.bins[b].size());
    }
    std::vector<float> scratch(most_bins);

    // The buffer holds residual [buf_first, buf_first + buf.size()); it starts at a multiple of
    // the renderer's anchor length (so the partials come out as in one whole render).
    const auto half = static_cast<std::size_t>(plan.half_length());
    const std::size_t buf_capacity =
        std::min(total, residual_blocks * render_anchor_frames + 2 * half + render_anchor_frames);
    std::vector<float> buf;
    buf.reserve(buf_capacity);
    std::size_t buf_first = 0;
    for (std::size_t centre = 0; centre < end; centre += hop) {
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
        auto local_centre = static_cast<std::int64_t>(centre - buf_first);
        if (!at_start && !at_end) {
            view = view.subspan(lo - buf_first, hi - lo);
            local_centre = static_cast<std::int64_t>(half);
        }
        plan.analyze(view, local_centre);
        const auto power = plan.power();
        for (std::size_t b = 0; b < bp.bands.size(); ++b) {
            const std::vector<int>& bins = bp.bins[b];
            double mean_bin_power = 0.0;
            if (bp.median) {
                const auto first = scratch.begin();
                const auto last = first + static_cast<std::ptrdiff_t>(bins.size());
                for (std::size_t i = 0; i < bins.size(); ++i) scratch[i] = power[static_cast<std::size_t>(bins[i])];
                const auto mid = first + static_cast<std::ptrdiff_t>(bins.size() / 2);
                std::nth_element(first, mid, last);
                double median = *mid;
                if (bins.size() % 2 == 0) median = 0.5 * (median + static_cast<double>(*std::max_element(first, mid)));
                mean_bin_power = median / unit_median[b] / amp_scale_sq;
            } else {
                double sum = 0.0;
                for (int k : bins) sum += static_cast<double>(power[static_cast<std::size_t>(k)]);
                mean_bin_power = sum / static_cast<double>(bins.size()) / amp_scale_sq;
            }
            const double band_power = band_power_from_bins(mean_bin_power, bp.band_total_bins[b], n_fft, window_power_sum);
            tracks[b].level_db.push_back(static_cast<float>(std::max(silence_db, power_to_db(band_power))));
        }
    }
    return tracks;
}

/// Frames [first, end) of a band level track as a partial track for the envelope fit; the floor
/// under each frame is floor_db or the neighbours' leakage, whichever is higher.
partial_track as_track(const noise_band_track& t, std::size_t first, std::size_t end, double floor_db) {
    partial_track track;
    const double centre_hz = std::sqrt(t.low_hz * t.high_hz);
    for (std::size_t i = first; i < std::min(end, t.level_db.size()); ++i) {
        const double leak_db = i < t.leak_db.size() ? static_cast<double>(t.leak_db[i]) + leak_margin_db : silence_db;
        track.points.push_back({.time_s = static_cast<double>(i) * t.hop_s, .freq_hz = centre_hz,
                                .level_db = static_cast<double>(t.level_db[i]), .phase_rad = 0.0,
                                .floor_db = std::max(floor_db, leak_db)});
    }
    return track;
}

/// Median of the track's levels over [from_s, to_s) (the whole track when that is empty), dB.
double median_level_db(const noise_band_track& t, double from_s, double to_s) {
    std::vector<float> v;
    for (std::size_t i = 0; i < t.level_db.size(); ++i) {
        const double time_s = static_cast<double>(i) * t.hop_s;
        if (time_s >= from_s && time_s < to_s) v.push_back(t.level_db[i]);
    }
    if (v.empty()) v = t.level_db;
    if (v.empty()) return silence_db;
    std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(v.size() / 2), v.end());
    return static_cast<double>(v[v.size() / 2]);
}

/// The attack band of one band: the burst in the short-window track's first attack span, fitted
/// where it stands clear of the track's median over the second. Empty when there is no burst.
std::optional<noise_band> fit_attack_band(const noise_band_track& attack, const noise_model_params& params) {
    const double after_db = median_level_db(attack, params.attack_span_s, 2.0 * params.attack_span_s);
    noise_band_track burst = attack;
    burst.level_db.resize(std::min(burst.level_db.size(),
                                   static_cast<std::size_t>(std::ceil(params.attack_span_s / attack.hop_s))));
    if (burst.level_db.size() < 2) return std::nullopt;
    const double peak_db = static_cast<double>(*std::max_element(burst.level_db.begin(), burst.level_db.end()));
    // A burst stands clear of the band's later level and of what its neighbours leak into it.
    bool clear = false;
    for (std::size_t i = 0; i < burst.level_db.size(); ++i) {
        const double leak_db = i < burst.leak_db.size() ? static_cast<double>(burst.leak_db[i]) + leak_margin_db : silence_db;
        clear = clear || static_cast<double>(burst.level_db[i]) >= std::max(after_db, leak_db) + params.attack_above_floor_db;
    }
    if (!clear) return std::nullopt;
    envelope_fit_params fit = params.attack_fit;
    fit.window_s = params.attack_window_s;
    auto result = fit_partial(as_track(burst, 0, burst.level_db.size(), after_db), fit);
    const double t60_s = result ? result->env.decay.back().t60_s : 0.0;
    if (!(t60_s >= params.min_attack_t60_s && t60_s <= params.max_attack_t60_s)) return std::nullopt;
    // The 1 ms hop sees the burst's peak: a fitted line run back above it is not trusted.
    if (result->env.peak.db > peak_db) result->env.peak = level_db{peak_db};
    return noise_band{.low_hz = attack.low_hz, .high_hz = attack.high_hz, .env = result->env, .place = {}, .coherence = 1.0};
}

std::vector<noise_band> fit_bands(const std::vector<noise_band_track>& floors,
                                  const std::vector<noise_band_track>& attacks, double window_s,
                                  double loudest_partial_db, const noise_model_params& params) {
    std::vector<noise_band> bands;
    const double keep_db = loudest_partial_db - params.keep_within_db;
    for (const noise_band_track& t : floors) {
        if (t.level_db.size() < 2) continue;
        std::optional<noise_band> attack;
        for (const noise_band_track& a : attacks) {
            if (a.low_hz == t.low_hz && !a.level_db.empty()) attack = fit_attack_band(a, params);
        }
        // The floor band is fitted on the frames whose window lies wholly inside the recording (a
        // frame across the onset, or across the end of a recording cut while it sounds, sees it
        // through a window cut in half, whose skirts spread the partials over every band), its
        // first line run back to the onset as far as those frames agree (analysis/floor_onset.hpp);
        // with an attack band it also starts past where the
        // burst still carries half the band's power (the two do not overlap). The floor band's
        // own steady end is part of it (the recording's hiss holds), so the fit runs to the end:
        // no floor under it but the neighbours' leakage.
        const auto half_window = static_cast<std::size_t>(std::ceil(0.5 * window_s / t.hop_s));
        if (t.level_db.size() < 2 * half_window + 2) continue;
        const std::size_t end = t.level_db.size() - half_window;
        std::size_t first = half_window;
        if (attack) {
            while (first + 2 < end &&
                   envelope_level(attack->env, static_cast<double>(first) * t.hop_s).db >
                       static_cast<double>(t.level_db[first]) - 3.0)
                ++first;
        }
        envelope_fit_params fit = params.fit;
        fit.window_s = window_s;
        auto result = fit_partial(as_track(t, first, end, silence_db), fit);
        if (result)
            result->env = limit_run_back(result->env, {.window = window_kind::blackman_harris_4, .window_s = window_s,
                                                       .hop_s = t.hop_s, .level_db = t.level_db, .first = first});
        // Bounded like the partials' fits (analyze.cpp): a peak beyond what the format holds (an
        // attack extrapolated far above the measured levels) is no band of this note.
        // A floor band is kept down to digital silence (the recording's own hiss is part of its
        // sound between the partials); an attack band only within keep_within_db of the partials.
        auto keep = [&](const envelope& env, double least_db) { return env.peak.db >= least_db && env.peak.db <= max_peak_db; };
        if (result && keep(result->env, params.least_floor_band_db)) bands.push_back({.low_hz = t.low_hz, .high_hz = t.high_hz, .env = result->env, .place = {}, .coherence = 1.0});
        if (attack && keep(attack->env, keep_db)) bands.push_back(*attack);
    }
    return bands;
}

/// sources: the residual of the partials as fitted, of the partials started at their peak
/// (attack_s = 0), and the recording itself. The partials' true rise is known only to a frame, and
/// what a wrong rise leaves of a partial is a broadband click; and a residual louder than the
/// recording is the subtraction's error, not noise. The bands take, frame by frame, the lowest of
/// the levels: what neither rise explains, and never more than was recorded.
std::vector<noise_band> model_from(std::size_t total, std::span<const timed_source> sources,
                                   double sample_rate_hz, std::span<const double> partial_freqs_hz, double f0_hz,
                                   double loudest_partial_db, const noise_model_params& params) {
    auto lower_of_both = [&](const band_plan& plan) {
        auto tracks = measure_bands(total, *sources[0].read, sample_rate_hz, plan);
        for (std::size_t k = 1; k < sources.size(); ++k) {
            const auto other = measure_bands(total, *sources[k].read, sample_rate_hz, plan, sources[k].until_s);
            for (std::size_t b = 0; b < tracks.size(); ++b)
                for (std::size_t i = 0; i < std::min(tracks[b].level_db.size(), other[b].level_db.size()); ++i)
                    tracks[b].level_db[i] = std::min(tracks[b].level_db[i], other[b].level_db[i]);
        }
        std::vector<std::span<const float>> levels;
        levels.reserve(tracks.size());
        for (const noise_band_track& t : tracks) levels.emplace_back(t.level_db);
        auto leak = leakage_levels_db(plan.leak, levels, plan.band_total_bins);
        for (std::size_t b = 0; b < tracks.size(); ++b) tracks[b].leak_db = std::move(leak[b]);
        return tracks;
    };
    const band_plan floor = floor_plan(sample_rate_hz, partial_freqs_hz, f0_hz, params);
    const auto floors = lower_of_both(floor);
    const auto attacks = lower_of_both(attack_plan(sample_rate_hz, params));
    return fit_bands(floors, attacks, floor.window_s, loudest_partial_db, params);
}

}  // namespace

double floor_window_s(std::span<const double> partial_freqs_hz, double f0_hz, const noise_model_params& params) {
    if (f0_hz > 0.0)
        return std::clamp(params.floor_window_spacings / f0_hz, params.min_floor_window_s, params.max_floor_window_s);
    std::vector<double> f(partial_freqs_hz.begin(), partial_freqs_hz.end());
    std::sort(f.begin(), f.end());
    std::vector<double> gaps;
    for (std::size_t i = 1; i < f.size(); ++i) gaps.push_back(f[i] - f[i - 1]);
    double spacing_hz = f.empty() ? 0.0 : f.front();
    if (!gaps.empty()) {
        std::nth_element(gaps.begin(), gaps.begin() + static_cast<std::ptrdiff_t>(gaps.size() / 2), gaps.end());
        spacing_hz = gaps[gaps.size() / 2];
    }
    if (!(spacing_hz > 0.0)) return params.min_floor_window_s;
    return std::clamp(params.floor_window_spacings / spacing_hz, params.min_floor_window_s, params.max_floor_window_s);
}

std::vector<std::vector<noise_band_track>> measure_noise_bands(std::span<const std::span<const float>> residuals,
                                                               double sample_rate_hz,
                                                               std::span<const double> partial_freqs_hz, double f0_hz,
                                                               const noise_model_params& params) {
    const band_plan plan = floor_plan(sample_rate_hz, partial_freqs_hz, f0_hz, params);
    std::vector<std::vector<noise_band_track>> out;
    for (const std::span<const float> residual : residuals) {
        const residual_source source = [&](std::size_t first, std::span<float> dest) {
            std::copy_n(residual.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
        };
        out.push_back(measure_bands(residual.size(), source, sample_rate_hz, plan));
    }
    return out;
}

std::vector<noise_band_track> measure_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                                  std::span<const double> partial_freqs_hz, double f0_hz,
                                                  const noise_model_params& params) {
    const std::span<const float> one[] = {residual};
    return std::move(measure_noise_bands(one, sample_rate_hz, partial_freqs_hz, f0_hz, params).front());
}

std::vector<noise_band> fit_noise_bands(std::span<const float> residual, double sample_rate_hz,
                                        std::span<const double> partial_freqs_hz, double loudest_partial_db,
                                        const noise_model_params& params, std::span<const float> recording) {
    const residual_source source = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(residual.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    const residual_source original = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(recording.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    const timed_source both[] = {{.read = &source}, {.read = &original}};
    const auto sources = std::span<const timed_source>(both).first(recording.empty() ? 1 : 2);
    return model_from(residual.size(), sources, sample_rate_hz, partial_freqs_hz, 0.0, loudest_partial_db, params);
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
    const render_params render{.sample_rate_hz = sample_rate_hz,
                               .length_s = static_cast<double>(note.size()) / sample_rate_hz, .include_noise = false};
    // An attack shorter than the tracker's window cannot be told from an abrupt start.
    patch abrupt_patch = p;
    const double unresolved_s = p.source.analysis ? p.source.analysis->window_s : infinity;
    double longest_removed_s = 0.0;  // the longest attack the abrupt copy drops
    for (partial& q : abrupt_patch.partials) {
        if (q.env.attack_s > unresolved_s) continue;
        longest_removed_s = std::max(longest_removed_s, q.env.attack_s);
        q.env.attack_s = 0.0;
    }
    const partial_renderer partials(p, render);
    const partial_renderer abrupt_partials(abrupt_patch, render);
    const std::size_t common = std::min(note.size(), partials.frames());
    std::vector<float> rendered;
    auto residual_of = [&](const partial_renderer& r) {
        return [&, rp = &r](std::size_t first, std::span<float> dest) {
            std::copy_n(note.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
            if (first >= common) return;
            const std::size_t n = std::min(dest.size(), common - first);
            rendered.resize(n);
            rp->render(first, rendered);
            for (std::size_t i = 0; i < n; ++i) dest[i] -= rendered[i];
        };
    };
    const residual_source source = residual_of(partials);
    const residual_source abrupt = residual_of(abrupt_partials);
    const residual_source recording = [&](std::size_t first, std::span<float> dest) {
        std::copy_n(note.begin() + static_cast<std::ptrdiff_t>(first), dest.size(), dest.begin());
    };
    // The two rises differ by a click at the onset; later the abrupt copy's partials are only
    // shifted in level, which the floor's bins between the partials do not see. So the abrupt
    // residual is measured on the frames centred within one floor window after the longest rise
    // it drops (on none without one: the two residuals are then the same).
    const double abrupt_until_s =
        longest_removed_s > 0.0 ? longest_removed_s + floor_window_s(freqs_hz, p.note.f0_hz, params) : 0.0;
    const timed_source sources[] = {{.read = &source}, {.read = &abrupt, .until_s = abrupt_until_s}, {.read = &recording}};
    return model_from(note.size(), sources, sample_rate_hz, freqs_hz, p.note.f0_hz, loudest_db, params);
}

}  // namespace wane

