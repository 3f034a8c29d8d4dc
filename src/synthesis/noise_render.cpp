#include "synthesis/noise_render.hpp"

#include <kiss_fftr.h>

#include <algorithm>
#include <array>
#include <bit>
#include <cassert>
#include <cmath>
#include <memory>
#include <optional>
#include <vector>

#include "core/noise_bands.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "synthesis/kernel_clones.hpp"
#include "synthesis/rate_convert.hpp"

namespace wane {

namespace {

/// Frames overlap four times: Hann^2 windows sum to a constant at hop N/4, so the power follows
/// the envelopes without ripple, and Hann's low sidelobes keep the bands' skirts steep.
constexpr int synthesis_overlap = 4;
/// Unit frames per band: one per overlapping frame, so frames that overlap never share one.
constexpr int pool_frames = synthesis_overlap;
constexpr int phase_table_bits = 12;
constexpr std::size_t phase_table_size = std::size_t{1} << phase_table_bits;
/// Frames whose every band is this far below full scale are skipped (silent, costs nothing).
constexpr double silent_level_db = -160.0;
/// The lowest draw rate (noise_draw_rate_hz). Its frame (1024 samples at the default frame_s) is
/// a power of two, and so is every draw rate's frame, twice as long at twice the rate: the same
/// bins in Hz, the same frame times and shifts in seconds, the same phases per bin.
constexpr double draw_base_rate_hz = 48000.0;

struct unit_phasors {
    std::array<float, phase_table_size> re{}, im{};
    unit_phasors() {
        for (std::size_t i = 0; i < phase_table_size; ++i) {
            const double a = two_pi * static_cast<double>(i) / static_cast<double>(phase_table_size);
            re[i] = static_cast<float>(std::cos(a));
            im[i] = static_cast<float>(std::sin(a));
        }
    }
};

struct kiss_cfg_deleter {
    void operator()(kiss_fftr_cfg cfg) const { kiss_fftr_free(cfg); }
};

struct band_bins {
    int first = 0;  ///< first bin
    int count = 0;  ///< number of bins
    const noise_band* band = nullptr;
    /// The envelope as core/envelope.hpp evaluates it, prepared once: the decay pieces, the
    /// peak's linear amplitude, and the piece the frames (in time order) have reached.
    std::vector<envelope_piece> pieces;
    double peak_lin = 0.0;
    std::size_t piece = 0;
    std::uint64_t pool_seed = 0;  ///< seed of this band's unit frames
    std::optional<std::uint64_t> own_pool_seed;  ///< a stereo channel's own noise (see make_pool)
    bool pool_ready = false;
};

/// The band's level at time_s >= 0, the same arithmetic as envelope_level (core/envelope.cpp)
/// without its per-call piece list; time_s must not decrease between calls.
level_db band_level(band_bins& b, double time_s) {
    const envelope& env = b.band->env;
    if (time_s < env.attack_s) return to_level(amp_lin{b.peak_lin * time_s / env.attack_s});
    while (b.piece + 1 < b.pieces.size() && !(time_s < b.pieces[b.piece].end_s)) ++b.piece;
    const envelope_piece& p = b.pieces[b.piece];
    if (!(time_s < p.end_s)) return level_db{-infinity};  // unreachable: the last piece ends at +inf
    return level_db{p.start_level.db + p.slope_db_per_s * (time_s - p.start_s)};
}

// acc[n] += gain * src[n], n < count (a multiply, then an add: the same bits in every clone).
WANE_KERNEL_CLONES
void add_scaled(float* __restrict acc, const float* __restrict src, float gain, std::size_t count) {
    for (std::size_t n = 0; n < count; ++n) acc[n] += gain * src[n];
}

// out[n] += frame[n] * window[n], n < count.
WANE_KERNEL_CLONES
void add_windowed(float* __restrict out, const float* __restrict frame, const float* __restrict window,
                  std::size_t count) {
    for (std::size_t n = 0; n < count; ++n) out[n] += frame[n] * window[n];
}

/// The band's pool: pool_frames periodic unit frames of n_fft samples, each stored twice in a row
/// (2 n_fft floats), so a frame at any circular shift s is the contiguous [s, s + n_fft).
/// Each is the unnormalized inverse real FFT of unit-magnitude bins with random phases inside the
/// band (bins first .. first + count - 1), zero elsewhere. With an own seed (a stereo channel)
/// every bin is sqrt(c) e^(j a) + sqrt(1 - c) e^(j b), c the band's coherence, a drawn from the
/// shared pool seed (the same in every channel) and b from the own one: by linearity the frame of
/// the shared noise at power c plus the channel's own at 1 - c, for one inverse FFT.
void make_pool(const band_bins& b, int n_fft, kiss_fftr_cfg plan, std::span<kiss_fft_cpx> spectrum,
               std::span<float> pool) {
    static const unit_phasors phasors;
    const auto n = static_cast<std::size_t>(n_fft);
    assert(pool.size() == static_cast<std::size_t>(pool_frames) * 2 * n);
    splitmix64 rng{b.pool_seed};
    splitmix64 own_rng{b.own_pool_seed.value_or(0)};
    const double c = b.own_pool_seed ? std::clamp(b.band->coherence, 0.0, 1.0) : 1.0;
    const auto shared_gain = static_cast<float>(std::sqrt(c));
    const auto own_gain = static_cast<float>(std::sqrt(1.0 - c));
    for (int j = 0; j < pool_frames; ++j) {
        std::fill(spectrum.begin(), spectrum.end(), kiss_fft_cpx{0.0f, 0.0f});
        for (int k = 0; k < b.count; ++k) {
            const std::size_t idx = static_cast<std::size_t>(rng.next() >> (64 - phase_table_bits));
            kiss_fft_cpx bin{phasors.re[idx], phasors.im[idx]};
            if (b.own_pool_seed) {
                const std::size_t own = static_cast<std::size_t>(own_rng.next() >> (64 - phase_table_bits));
                bin = {shared_gain * bin.r + own_gain * phasors.re[own], shared_gain * bin.i + own_gain * phasors.im[own]};
            }
            spectrum[static_cast<std::size_t>(b.first) + static_cast<std::size_t>(k)] = bin;
        }
        float* unit = pool.data() + static_cast<std::size_t>(j) * 2 * n;
        kiss_fftri(plan, spectrum.data(), unit);
        std::copy(unit, unit + n, unit + n);
    }
}

/// Periodic Hann window of n_fft samples; window_power_sum = sum(w^2). Overlap-added at hop
/// N/4, w^2 sums to exactly 3/2 = sum(w^2) / hop.
std::vector<float> periodic_hann(int n_fft, double& window_power_sum) {
    std::vector<float> window(static_cast<std::size_t>(n_fft));
    window_power_sum = 0.0;
    for (int n = 0; n < n_fft; ++n) {
        const double w = 0.5 - 0.5 * std::cos(two_pi * n / n_fft);
        window[static_cast<std::size_t>(n)] = static_cast<float>(w);
        window_power_sum += w * w;
    }
    return window;
}

/// Bins of each band: centres in [low, high), DC and Nyquist excluded; at least one bin. Draws
/// one pool seed per band from rng, in band order (also for a band left out above Nyquist), and
/// likewise an own pool seed per band from own_rng when there is one.
std::vector<band_bins> band_layout(std::span<const noise_band> bands, splitmix64& rng,
                                   std::optional<splitmix64>& own_rng, double bin_hz, double nyquist_hz, int n_bins) {
    std::vector<band_bins> layout;
    for (const noise_band& b : bands) {
        const std::uint64_t pool_seed = rng.next();
        std::optional<std::uint64_t> own_pool_seed;
        if (own_rng) own_pool_seed = own_rng->next();
        const double high_hz = std::min(b.high_hz, nyquist_hz);
        if (b.low_hz >= high_hz) continue;
        int first = std::max(1, static_cast<int>(std::ceil(b.low_hz / bin_hz)));
        int last = std::min(n_bins - 2, static_cast<int>(std::ceil(high_hz / bin_hz)) - 1);
        if (last < first) {
            first = std::clamp(static_cast<int>(std::lround(0.5 * (b.low_hz + high_hz) / bin_hz)), 1, n_bins - 2);
            last = first;
        }
        layout.push_back({.first = first, .count = last - first + 1, .band = &b, .pieces = envelope_pieces(b.env),
                          .peak_lin = to_amp(b.env.peak).lin, .pool_seed = pool_seed,
                          .own_pool_seed = own_pool_seed});
    }
    return layout;
}

}  // namespace

int noise_frame_size(double sample_rate_hz, double frame_s) {
    int n = 64;
    while (n < sample_rate_hz * frame_s) n *= 2;
    return n;
}

namespace {

/// The bands' noise at a draw rate (noise_draw_rate_hz of itself), added into out.
void add_noise_at_draw_rate(std::span<const noise_band> bands, const noise_render_params& params,
                            std::span<float> out) {
    assert(noise_draw_rate_hz(params.sample_rate_hz) == params.sample_rate_hz);
    const int n_fft = noise_frame_size(params.sample_rate_hz, params.frame_s);
    const int hop = n_fft / synthesis_overlap;
    const int n_bins = n_fft / 2 + 1;
    const double bin_hz = params.sample_rate_hz / n_fft;
    const double nyquist_hz = params.sample_rate_hz / 2.0;
    assert(std::has_single_bit(static_cast<unsigned>(n_fft)));
    // Shifts are drawn in steps of the frame at the lowest draw rate (shift_steps of them), so
    // every draw rate shifts a frame by the same time.
    const int shift_steps = noise_frame_size(draw_base_rate_hz, params.frame_s);
    const int shift_bits = std::countr_zero(static_cast<unsigned>(shift_steps));
    const auto shift_stride = static_cast<std::size_t>(std::max(1, n_fft / shift_steps));

    double window_power_sum = 0.0;
    const std::vector<float> window = periodic_hann(n_fft, window_power_sum);

    // Random streams: one seed per band for its pool, then the frames' shifts. Drawn in band
    // order up front, so a band's noise does not depend on when (or whether) others sound.
    splitmix64 rng{params.seed};

    std::optional<splitmix64> own_rng;
    if (params.own_seed) own_rng = splitmix64{*params.own_seed};
    std::vector<band_bins> layout = band_layout(bands, rng, own_rng, bin_hz, nyquist_hz, n_bins);
    if (layout.empty()) return;

    const auto n = static_cast<std::size_t>(n_fft);
    const std::size_t pool_floats = static_cast<std::size_t>(pool_frames) * 2 * n;
    const double gain_lin = to_amp(level_db{params.gain_db}).lin;
    const double inverse_scale = 1.0 / n_fft;  // kiss_fftri is unnormalized
    std::unique_ptr<kiss_fftr_state, kiss_cfg_deleter> plan(kiss_fftr_alloc(n_fft, 1, nullptr, nullptr));
    std::vector<kiss_fft_cpx> spectrum(static_cast<std::size_t>(n_bins));
    std::vector<float> pools(layout.size() * pool_floats);  // filled when a band first sounds
    std::vector<float> frame(n);
    std::vector<float> bin_amp(layout.size());

    const auto total = static_cast<long>(out.size());
    // Frame m is centred on sample m * hop and spans [m hop - N/2, m hop + N/2); it draws one
    // shift per band (sounding or not), so a frame's noise does not depend on the others.
    for (long m = 0; m * hop - n_fft / 2 < total; ++m) {
        const double centre_s = static_cast<double>(m * hop) / params.sample_rate_hz;
        bool audible = false;
        for (std::size_t i = 0; i < layout.size(); ++i) {
            const level_db level = band_level(layout[i], centre_s);
            if (!(level.db > silent_level_db)) {  // left out, as whole silent frames are
                bin_amp[i] = 0.0f;
                continue;
            }
            audible = true;
            const double amp = to_amp(level).lin;
            const double bin_power = bin_power_for_band(amp * amp, layout[i].count, n_fft, hop, window_power_sum);
            bin_amp[i] = static_cast<float>(std::sqrt(bin_power) * gain_lin * inverse_scale);
        }
        if (!audible) {
            rng.skip(layout.size());
            continue;
        }
        std::fill(frame.begin(), frame.end(), 0.0f);
        const auto pool_index = static_cast<std::size_t>(m % pool_frames);
        for (std::size_t i = 0; i < layout.size(); ++i) {
            const auto shift = static_cast<std::size_t>(rng.next() >> (64 - shift_bits)) * shift_stride;
            if (bin_amp[i] == 0.0f) continue;
            const std::span<float> pool(pools.data() + i * pool_floats, pool_floats);
            if (!layout[i].pool_ready) {
                make_pool(layout[i], n_fft, plan.get(), spectrum, pool);
                layout[i].pool_ready = true;
            }
            add_scaled(frame.data(), pool.data() + pool_index * 2 * n + shift, bin_amp[i], n);
        }
        const long start = m * hop - n_fft / 2;
        const long from = std::max(0L, -start);
        const long to = std::min<long>(n_fft, total - start);
        add_windowed(out.data() + start + from, frame.data() + from, window.data() + from,
                     static_cast<std::size_t>(to - from));
    }
}

}  // namespace

double noise_draw_rate_hz(double sample_rate_hz) {
    double rate_hz = draw_base_rate_hz;
    while (rate_hz < sample_rate_hz) rate_hz *= 2.0;
    return rate_hz;
}

void add_noise_bands(std::span<const noise_band> bands, const noise_render_params& params, std::span<float> out) {
    if (bands.empty() || out.empty()) return;
    const double draw_rate_hz = noise_draw_rate_hz(params.sample_rate_hz);
    if (draw_rate_hz == params.sample_rate_hz) {
        add_noise_at_draw_rate(bands, params, out);
        return;
    }
    // Drawn at the draw rate over the output's time plus the samples the converter's kernel
    // reads past its end, then converted (synthesis/rate_convert.hpp).
    const auto margin_frames = static_cast<std::size_t>(rate_convert_taps(draw_rate_hz, params.sample_rate_hz));
    const auto drawn_frames = static_cast<std::size_t>(std::ceil(static_cast<double>(out.size()) * draw_rate_hz /
                                                                 params.sample_rate_hz)) + margin_frames;
    std::vector<float> drawn(drawn_frames, 0.0f);
    noise_render_params at_draw = params;
    at_draw.sample_rate_hz = draw_rate_hz;
    add_noise_at_draw_rate(bands, at_draw, drawn);
    add_rate_converted(drawn, draw_rate_hz, params.sample_rate_hz, out);
}

}  // namespace wane
