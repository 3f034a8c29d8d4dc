#include "synthesis/noise_render.hpp"

#include <kiss_fftr.h>

#include <algorithm>
#include <array>
#include <cassert>
#include <cmath>
#include <memory>
#include <vector>

#include "core/noise_bands.hpp"
#include "core/units.hpp"

namespace wane {

namespace {

/// splitmix64 (Steele, Lea and Flood 2014): small, fast, fully specified, so the noise is the
/// same on every platform (std:: distributions are implementation-defined).
struct splitmix64 {
    static constexpr std::uint64_t increment = 0x9e3779b97f4a7c15ULL;
    std::uint64_t state;
    std::uint64_t next() {
        std::uint64_t z = (state += increment);
        z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
        z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
        return z ^ (z >> 31);
    }
    /// Skips `draws` values: the state only ever advances by the increment, so this leaves it
    /// exactly where `draws` calls of next() would.
    void skip(std::uint64_t draws) { state += draws * increment; }
};

/// Frames overlap four times: Hann^2 windows sum to a constant at hop N/4, so the power follows
/// the envelopes without ripple, and Hann's low sidelobes keep the bands' skirts steep.
constexpr int synthesis_overlap = 4;
constexpr int phase_table_bits = 12;
constexpr std::size_t phase_table_size = std::size_t{1} << phase_table_bits;
/// Frames whose every band is this far below full scale are skipped (silent, costs nothing).
constexpr double silent_level_db = -160.0;

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

}  // namespace

int noise_frame_size(double sample_rate_hz, double frame_s) {
    int n = 64;
    while (n < sample_rate_hz * frame_s) n *= 2;
    return n;
}

void add_noise_bands(std::span<const noise_band> bands, const noise_render_params& params, std::span<float> out) {
    if (bands.empty() || out.empty()) return;
    static const unit_phasors phasors;
    const int n_fft = noise_frame_size(params.sample_rate_hz, params.frame_s);
    const int hop = n_fft / synthesis_overlap;
    const int n_bins = n_fft / 2 + 1;
    const double bin_hz = params.sample_rate_hz / n_fft;
    const double nyquist_hz = params.sample_rate_hz / 2.0;

    // Periodic Hann window; w^2 overlap-added at hop N/4 is exactly 3/2 = sum(w^2) / hop.
    std::vector<float> window(static_cast<std::size_t>(n_fft));
    double window_power_sum = 0.0;
    for (int n = 0; n < n_fft; ++n) {
        const double w = 0.5 - 0.5 * std::cos(two_pi * n / n_fft);
        window[static_cast<std::size_t>(n)] = static_cast<float>(w);
        window_power_sum += w * w;
    }

    // Bins of each band: centres in [low, high), DC and Nyquist excluded; at least one bin.
    std::vector<band_bins> layout;
    for (const noise_band& b : bands) {
        const double high_hz = std::min(b.high_hz, nyquist_hz);
        if (b.low_hz >= high_hz) continue;
        int first = std::max(1, static_cast<int>(std::ceil(b.low_hz / bin_hz)));
        int last = std::min(n_bins - 2, static_cast<int>(std::ceil(high_hz / bin_hz)) - 1);
        if (last < first) {
            first = std::clamp(static_cast<int>(std::lround(0.5 * (b.low_hz + high_hz) / bin_hz)), 1, n_bins - 2);
            last = first;
        }
        layout.push_back({.first = first, .count = last - first + 1, .band = &b, .pieces = envelope_pieces(b.env),
                          .peak_lin = to_amp(b.env.peak).lin});
    }
    if (layout.empty()) return;

    const double gain_lin = to_amp(level_db{params.gain_db}).lin;
    const double inverse_scale = 1.0 / n_fft;  // kiss_fftri is unnormalized
    std::unique_ptr<kiss_fftr_state, kiss_cfg_deleter> plan(kiss_fftr_alloc(n_fft, 1, nullptr, nullptr));
    std::vector<kiss_fft_cpx> spectrum(static_cast<std::size_t>(n_bins));
    std::vector<float> frame(static_cast<std::size_t>(n_fft));
    std::vector<float> bin_amp(layout.size());
    std::vector<bool> band_audible(layout.size());
    std::uint64_t draws_per_frame = 0;
    for (const band_bins& b : layout) draws_per_frame += static_cast<std::uint64_t>(b.count);
    splitmix64 rng{params.seed};

    const auto total = static_cast<long>(out.size());
    // Frame m is centred on sample m * hop and spans [m hop - N/2, m hop + N/2).
    for (long m = 0; m * hop - n_fft / 2 < total; ++m) {
        const double centre_s = static_cast<double>(m * hop) / params.sample_rate_hz;
        bool audible = false;
        for (std::size_t i = 0; i < layout.size(); ++i) {
            const level_db level = band_level(layout[i], centre_s);
            band_audible[i] = level.db > silent_level_db;
            audible = audible || band_audible[i];
            const double amp = to_amp(level).lin;
            const double band_power = amp * amp;
            const double bin_power = bin_power_for_band(band_power, layout[i].count, n_fft, hop, window_power_sum);
            bin_amp[i] = static_cast<float>(std::sqrt(bin_power) * gain_lin * inverse_scale);
        }
        // Every frame uses its own stretch of the random sequence (draws_per_frame phases, silent
        // bands and frames skip theirs), so a frame's noise does not depend on the others.
        if (!audible) {
            rng.skip(draws_per_frame);
            continue;
        }
        std::fill(spectrum.begin(), spectrum.end(), kiss_fft_cpx{0.0f, 0.0f});
        for (std::size_t i = 0; i < layout.size(); ++i) {
            if (!band_audible[i]) {  // below silent_level_db: left out, as whole silent frames are
                rng.skip(static_cast<std::uint64_t>(layout[i].count));
                continue;
            }
            const float a = bin_amp[i];
            kiss_fft_cpx* bins = spectrum.data() + layout[i].first;
            for (int k = 0; k < layout[i].count; ++k) {
                const std::size_t idx = static_cast<std::size_t>(rng.next() >> (64 - phase_table_bits));
                bins[k] = {a * phasors.re[idx], a * phasors.im[idx]};
            }
        }
        kiss_fftri(plan.get(), spectrum.data(), frame.data());
        const long start = m * hop - n_fft / 2;
        const long from = std::max(0L, -start);
        const long to = std::min<long>(n_fft, total - start);
        for (long n = from; n < to; ++n) {
            out[static_cast<std::size_t>(start + n)] += frame[static_cast<std::size_t>(n)] * window[static_cast<std::size_t>(n)];
        }
    }
}

}  // namespace wane
