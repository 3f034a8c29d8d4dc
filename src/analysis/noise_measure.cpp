#include "analysis/noise_measure.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstdint>
#include <memory>

#include "core/order_select.hpp"
#include "synthesis/render.hpp"

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
/// The streamed residual is formed this many renderer anchor blocks at a time (plus one window;
/// 1 MB of floats: a 5 s note at 48 kHz in one block, so the window's overlap between blocks is
/// rendered again less often, measured 24.0 -> 22.5 M instructions of partial rendering on the
/// synthetic 4 s note, the same samples).
constexpr std::size_t residual_blocks = 256;
/// A band's median is looked for first within a factor 1 + median_bracket_sigmas / sqrt(n) of
/// the previous frame's (n bins): the median of n unit exponentials has a relative standard
/// deviation of about 1.44 / sqrt(n) (1 / (2 f(m) sqrt(n)) over m = ln 2), and the frames overlap
/// by most of a window. Only the cost depends on it (core/order_select.hpp: the value is exact).
constexpr double median_bracket_sigmas = 4.0;

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

/// The plan's band-to-band leakage through its window (analysis/band_leakage.hpp).
void add_leakage(band_plan& plan, double sample_rate_hz) {
    // The window stft_plan makes for this config (no FFT state needed here).
    const stft_config config = plan_config(plan, sample_rate_hz);
    const std::vector<float> window = make_window(config.window, config.window_length, window_symmetry::symmetric);
    plan.leak = band_leakage(window, config.fft_size, plan.bins, plan.ranges, plan.median);
}

/// Appends one band to the plan: its edges, the bins measured, and the bins inside it [first, last].
void add_band(band_plan& plan, const band_edges& e, std::vector<int> bins, int first, int last) {
    plan.bands.push_back(e);
    plan.bins.push_back(std::move(bins));
    plan.band_total_bins.push_back(last - first + 1);
    plan.ranges.emplace_back(first, last);
}

}  // namespace

stft_config plan_config(const band_plan& plan, double sample_rate_hz) {
    const int window_length = std::max(33, static_cast<int>(std::lround(plan.window_s * sample_rate_hz)) | 1);
    int size = zero_padding * window_length;
    if (plan.widest_bin_hz > 0.0)
        size = std::clamp(static_cast<int>(std::ceil(sample_rate_hz / plan.widest_bin_hz)), window_length, size);
    return {.window = plan.window, .window_length = window_length, .fft_size = fast_fft_size(size)};
}

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
    // A bin is free when no partial lies within guard_hz of it. The partials in order of frequency:
    // the nearest to a bin on either side is the first at or over it or the one before that
    // (|pf - f| only grows away from f), and bins come in order, so one sweep tests every bin.
    std::vector<double> sorted_hz(partial_freqs_hz.begin(), partial_freqs_hz.end());
    std::sort(sorted_hz.begin(), sorted_hz.end());
    std::vector<int> free_bins;
    std::size_t over = 0;  // the first partial at or over the bin's frequency
    for (int k = 1; k < n_bins - 1; ++k) {
        const double f = k * bin_hz;
        while (over < sorted_hz.size() && sorted_hz[over] < f) ++over;
        const bool near_over = over < sorted_hz.size() && std::abs(sorted_hz[over] - f) < guard_hz;
        const bool near_under = over > 0 && std::abs(sorted_hz[over - 1] - f) < guard_hz;
        if (!near_over && !near_under) free_bins.push_back(k);
    }
    for (const band_edges& e : noise_band_layout(sample_rate_hz / 2.0)) {
        const int first = std::max(1, static_cast<int>(std::ceil(e.low_hz / bin_hz)));
        const int last = std::min(n_bins - 2, static_cast<int>(std::ceil(e.high_hz / bin_hz)) - 1);
        if (last < first || free_bins.empty()) continue;
        // The free bins inside the band (free_bins ascends).
        std::vector<int> chosen(std::lower_bound(free_bins.begin(), free_bins.end(), first),
                                std::upper_bound(free_bins.begin(), free_bins.end(), last));
        if (chosen.size() < static_cast<std::size_t>(params.min_free_bins)) {
            // Borrow the free bins nearest the band's centre in log frequency: in order of
            // frequency they lie on either side of it, each side's further from it the further out,
            // so the nearest are taken by walking out from it, the nearer of the two sides first.
            const double centre_hz = std::sqrt(e.low_hz * e.high_hz);
            auto distance = [&](int k) { return std::abs(std::log(k * bin_hz / centre_hz)); };
            const auto n = std::min(free_bins.size(), static_cast<std::size_t>(params.min_free_bins));
            auto above = std::lower_bound(free_bins.begin(), free_bins.end(), centre_hz / bin_hz,
                                         [](int k, double c) { return k < c; });
            auto below = above;
            chosen.clear();
            while (chosen.size() < n) {
                const bool take_below = below != free_bins.begin() && (above == free_bins.end() || distance(*(below - 1)) <= distance(*above));
                chosen.push_back(take_below ? *--below : *above++);
            }
        }
        add_band(plan, e, std::move(chosen), first, last);
    }
    add_leakage(plan, sample_rate_hz);
    return plan;
}

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
        add_band(plan, e, std::move(bins), first, last);
    }
    add_leakage(plan, sample_rate_hz);
    return plan;
}

namespace {

/// What the frame loop keeps per band between frames, made once per measurement.
struct band_selection {
    explicit band_selection(const band_plan& bp) : unit_median(bp.bands.size(), 1.0), spread(bp.bands.size(), 1.0),
                                                   last_median(bp.bands.size(), 0.0f) {
        std::size_t most_bins = 0;
        for (std::size_t b = 0; b < bp.bands.size(); ++b) {
            const std::size_t n = bp.bins[b].size();
            most_bins = std::max(most_bins, n);
            if (!bp.median || n == 0) continue;
            unit_median[b] = expected_exponential_median(n);
            spread[b] = 1.0 + median_bracket_sigmas / std::sqrt(static_cast<double>(n));
        }
        values.resize(most_bins);
        scratch.resize(most_bins);
    }
    std::vector<double> unit_median;  ///< the expected median of the band's count of unit exponentials
    std::vector<double> spread;       ///< the median's bracket factor
    std::vector<float> last_median;   ///< the previous frame's median (0: none yet)
    std::vector<float> values, scratch;
};

/// Band b's mean power per bin in one frame (power: the frame's bins, sinusoid scale times
/// amp_scale_sq): the median over its bins scaled to a mean, or their mean.
double mean_bin_power(const band_plan& bp, std::size_t b, std::span<const float> power, double amp_scale_sq,
                      band_selection& sel) {
    const std::vector<int>& bins = bp.bins[b];
    const std::size_t n = bins.size();
    assert(n > 0);
    if (!bp.median) {
        double sum = 0.0;
        for (int k : bins) sum += static_cast<double>(power[static_cast<std::size_t>(k)]);
        return sum / static_cast<double>(n) / amp_scale_sq;
    }
    gather_values(power, bins, sel.values);
    const order_values mid = select_order(std::span(sel.values).first(n), n / 2, n % 2 == 0,
                                          bracket_around(sel.last_median[b], sel.spread[b]), sel.scratch);
    sel.last_median[b] = mid.kth;
    double median = mid.kth;
    if (n % 2 == 0) median = 0.5 * (median + static_cast<double>(mid.below));
    return median / sel.unit_median[b] / amp_scale_sq;
}

}  // namespace

namespace {

/// The hop of a band plan in samples, and how many frames it measures over a residual of total
/// samples (frames centred before until_s).
struct frame_grid {
    std::size_t hop = 1;
    std::size_t frame_count = 0;
    frame_grid(std::size_t total, double sample_rate_hz, const band_plan& bp, double until_s)
        : hop(static_cast<std::size_t>(std::max<std::int64_t>(1, std::llround(bp.hop_s * sample_rate_hz)))) {
        std::size_t end = total;
        if (bp.span_s > 0.0) end = std::min(total, static_cast<std::size_t>(std::llround(bp.span_s * sample_rate_hz)));
        if (until_s < static_cast<double>(end) / sample_rate_hz)
            end = static_cast<std::size_t>(std::ceil(std::max(0.0, until_s) * sample_rate_hz));
        frame_count = end == 0 ? 0 : (end - 1) / hop + 1;
    }
    /// The frames read nothing past the last one's window.
    [[nodiscard]] std::size_t read_end(std::size_t total, std::size_t half) const {
        return frame_count == 0 ? 0 : std::min(total, (frame_count - 1) * hop + half + 1);
    }
};

}  // namespace

std::size_t measure_read_end(std::size_t total, double sample_rate_hz, const band_plan& bp, int half_length,
                             double until_s) {
    return frame_grid(total, sample_rate_hz, bp, until_s).read_end(total, static_cast<std::size_t>(half_length));
}

std::vector<noise_band_track> measure_bands(std::size_t total, const residual_source& source, double sample_rate_hz,
                                            const band_plan& bp, stft_plan& plan, double until_s) {
    assert(plan.fft_size() == plan_config(bp, sample_rate_hz).fft_size);
    const int n_fft = plan.fft_size();
    double window_power_sum = 0.0;
    for (float w : plan.window_samples()) window_power_sum += static_cast<double>(w) * static_cast<double>(w);
    const double amp_scale_sq = plan.amp_scale() * plan.amp_scale();

    const frame_grid grid(total, sample_rate_hz, bp, until_s);
    const std::size_t hop = grid.hop;
    const std::size_t frame_count = grid.frame_count;
    std::vector<noise_band_track> tracks(bp.bands.size());
    for (std::size_t b = 0; b < bp.bands.size(); ++b) {
        tracks[b] = {.low_hz = bp.bands[b].low_hz, .high_hz = bp.bands[b].high_hz,
                     .hop_s = static_cast<double>(hop) / sample_rate_hz, .level_db = {}, .leak_db = {}};
        tracks[b].level_db.reserve(frame_count);
    }
    band_selection selection(bp);

    // The buffer holds residual [buf_first, buf_first + buf.size()) (source writes it whole: not
    // zeroed); it starts at a multiple of the renderer's anchor length (as in one whole render).
    const auto half = static_cast<std::size_t>(plan.half_length());
    const std::size_t buf_capacity =
        std::min(total, residual_blocks * render_anchor_frames + 2 * half + render_anchor_frames);
    // The frames read nothing past the last one's window: the buffer stops there.
    const std::size_t read_end = grid.read_end(total, half);
    const auto buf_store = std::make_unique_for_overwrite<float[]>(std::min(buf_capacity, read_end));
    std::span<float> buf;
    std::size_t buf_first = 0;
    const std::size_t dense_frames = std::isfinite(bp.dense_span_s) && bp.sparse_hops > 1
                                         ? static_cast<std::size_t>(std::max(0.0, std::ceil(bp.dense_span_s * sample_rate_hz / static_cast<double>(hop))))
                                         : frame_count;
    const auto sparse = static_cast<std::size_t>(std::max(1, bp.sparse_hops));
    auto measured = [&](std::size_t i) { return i < dense_frames || (i - dense_frames) % sparse == 0 || i + 1 == frame_count; };
    for (std::size_t i = 0; i < frame_count; ++i) {
        const std::size_t centre = i * hop;
        if (!measured(i)) {
            for (noise_band_track& t : tracks) t.level_db.push_back(0.0f);  // interpolated below
            continue;
        }
        const std::size_t lo = centre >= half ? centre - half : 0;
        const std::size_t hi = std::min(total, centre + half + 1);
        if (buf.empty() || lo < buf_first || hi > buf_first + buf.size()) {
            buf_first = lo / render_anchor_frames * render_anchor_frames;
            buf = {buf_store.get(), std::min(buf_capacity, read_end - buf_first)};
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
        plan.analyze_power(view, local_centre);
        const auto power = plan.power();
        for (std::size_t b = 0; b < bp.bands.size(); ++b) {
            const double band_power = band_power_from_bins(mean_bin_power(bp, b, power, amp_scale_sq, selection),
                                                           bp.band_total_bins[b], n_fft, window_power_sum);
            tracks[b].level_db.push_back(static_cast<float>(std::max(noise_silence_db, power_to_db(band_power))));
        }
    }
    // The frames left out lie between two measured ones: straight in dB between them (the line
    // a decay follows; measured against their power straight between, which let one band of
    // guitar_nylon_d3 fall out of the patch).
    for (std::size_t i = dense_frames; i < frame_count; ++i) {
        if (measured(i)) continue;
        const std::size_t before = i - (i - dense_frames) % sparse;
        const std::size_t after = std::min(frame_count - 1, before + sparse);
        const double u = static_cast<double>(i - before) / static_cast<double>(after - before);
        for (noise_band_track& t : tracks)
            t.level_db[i] = static_cast<float>((1.0 - u) * static_cast<double>(t.level_db[before]) +
                                               u * static_cast<double>(t.level_db[after]));
    }
    return tracks;
}

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

}  // namespace wane
