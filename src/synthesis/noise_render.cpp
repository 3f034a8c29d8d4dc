#include "synthesis/noise_render.hpp"

#include <algorithm>
#include <array>
#include <bit>
#include <cassert>
#include <cmath>
#include <complex>
#include <memory>
#include <optional>
#include <vector>

#include "core/noise_bands.hpp"
#include "core/rng.hpp"
#include "core/units.hpp"
#include "spectrum/stft.hpp"
#include "synthesis/amplitude_runs.hpp"
#include "synthesis/noise_kernels.hpp"
#include "synthesis/noise_streams.hpp"
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
/// A band whose level changes by more than this across a frame (or that starts inside it) is
/// shaped sample by sample in that frame, not by its level at the frame's centre: a burst of a few
/// milliseconds (a mallet's, analysis/burst_fit.hpp) lives inside one 21 ms frame, and sampled at
/// frame centres 5 ms apart it was rendered 10-20 dB low or late (reasoned choice: 1 dB keeps the
/// centre-sampled power within a fraction of a dB of the envelope's, measured in test_noise).
constexpr double fast_change_db = 1.0;
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
    splitmix64 shifts{};          ///< this band's frame shifts, one per frame
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

/// The band's level at any time_s (-inf before the onset), without the frames' piece cursor.
double level_at(const band_bins& b, double time_s) {
    const envelope& env = b.band->env;
    if (time_s < 0.0) return -infinity;
    if (time_s < env.attack_s) return to_level(amp_lin{b.peak_lin * time_s / env.attack_s}).db;
    for (const envelope_piece& p : b.pieces)
        if (time_s < p.end_s) return p.start_level.db + p.slope_db_per_s * (time_s - p.start_s);
    return -infinity;
}

/// Whether the band's level changes by more than fast_change_db over [from_s, to_s) (checked at
/// its ends, its centre and the end of the attack when that falls inside), and its loudest level
/// among those points.
struct frame_change {
    bool fast = false;
    double loudest_db = -infinity;
};
frame_change change_over(const band_bins& b, double from_s, double to_s) {
    std::array<double, 4> db{level_at(b, from_s), level_at(b, 0.5 * (from_s + to_s)), level_at(b, to_s), -infinity};
    if (b.band->env.attack_s > from_s && b.band->env.attack_s < to_s) db[3] = b.band->env.peak.db;
    const double loudest = *std::max_element(db.begin(), db.end());
    const double quietest = *std::min_element(db.begin(), db.begin() + 3);
    return {.fast = !(loudest - quietest <= fast_change_db), .loudest_db = loudest};
}

/// The band's pool: pool_frames periodic unit frames of n_fft samples, each stored twice in a row
/// (2 n_fft floats), so a frame at any circular shift s is the contiguous [s, s + n_fft).
/// Each is the unnormalized inverse real FFT of unit-magnitude bins with random phases inside the
/// band (bins first .. first + count - 1), zero elsewhere. With an own seed (a stereo channel)
/// every bin is sqrt(c) e^(j a) + sqrt(1 - c) e^(j b), c the band's coherence, a drawn from the
/// shared pool seed (the same in every channel) and b from the own one: by linearity the frame of
/// the shared noise at power c plus the channel's own at 1 - c, for one inverse FFT.
void make_pool(const band_bins& b, int n_fft, inverse_real_fft& inverse, std::span<float> pool) {
    static const unit_phasors phasors;
    const auto n = static_cast<std::size_t>(n_fft);
    assert(pool.size() == static_cast<std::size_t>(pool_frames) * 2 * n);
    splitmix64 rng{b.pool_seed};
    splitmix64 own_rng{b.own_pool_seed.value_or(0)};
    const double c = b.own_pool_seed ? std::clamp(b.band->coherence, 0.0, 1.0) : 1.0;
    const auto shared_gain = static_cast<float>(std::sqrt(c));
    const auto own_gain = static_cast<float>(std::sqrt(1.0 - c));
    for (int j = 0; j < pool_frames; ++j) {
        const std::span<std::complex<float>> spectrum = inverse.spectrum();
        std::fill(spectrum.begin(), spectrum.end(), std::complex<float>{0.0f, 0.0f});
        for (int k = 0; k < b.count; ++k) {
            const std::size_t idx = static_cast<std::size_t>(rng.next() >> (64 - phase_table_bits));
            std::complex<float> bin{phasors.re[idx], phasors.im[idx]};
            if (b.own_pool_seed) {
                const std::size_t own = static_cast<std::size_t>(own_rng.next() >> (64 - phase_table_bits));
                bin = {shared_gain * bin.real() + own_gain * phasors.re[own], shared_gain * bin.imag() + own_gain * phasors.im[own]};
            }
            spectrum[static_cast<std::size_t>(b.first) + static_cast<std::size_t>(k)] = bin;
        }
        float* unit = pool.data() + static_cast<std::size_t>(j) * 2 * n;
        inverse.run({unit, n});
        std::copy(unit, unit + n, unit + n);
    }
}

/// What turns a band's power into its bins' magnitude in a frame (core/noise_bands.hpp).
struct bin_scale {
    int n_fft = 0;
    int hop = 0;
    double window_power_sum = 0.0;
    double gain_lin = 1.0;
    double inverse_scale = 1.0;  ///< the inverse FFT is unnormalized
    [[nodiscard]] float of(const band_bins& b, double amp) const {
        const double bin_power = bin_power_for_band(amp * amp, b.count, n_fft, hop, window_power_sum);
        return static_cast<float>(std::sqrt(bin_power) * gain_lin * inverse_scale);
    }
};

/// How a band plays in one frame: left out (bin_amp 0), at its level at the frame's centre, or
/// (fast) shaped sample by sample, bin_amp then being the magnitude of amplitude 1.
struct band_in_frame {
    float bin_amp = 0.0f;
    bool fast = false;
};

/// Each band's part in the frame centred at centre_s spanning [from_s, to_s); whether any sounds.
/// The centre levels are read in time order (band_level's cursor) from the frames at the onset on.
bool plan_frame(std::vector<band_bins>& layout, std::span<band_in_frame> plays, const bin_scale& scale,
                double centre_s, double from_s, double to_s) {
    bool audible = false;
    for (std::size_t i = 0; i < layout.size(); ++i) {
        const frame_change change = change_over(layout[i], from_s, to_s);
        plays[i] = {};
        if (change.fast) {
            if (!(change.loudest_db > silent_level_db)) continue;
            plays[i] = {.bin_amp = scale.of(layout[i], 1.0), .fast = true};
            audible = true;
            continue;
        }
        if (centre_s < 0.0) continue;
        const level_db level = band_level(layout[i], centre_s);
        if (!(level.db > silent_level_db)) continue;  // left out, as whole silent frames are
        plays[i].bin_amp = scale.of(layout[i], to_amp(level).lin);
        audible = true;
    }
    return audible;
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

/// Bins of each band: centres in [low, high), DC and Nyquist excluded; at least one bin. Each
/// band's pool seed is the first draw of its stream (band_stream), its frames' shifts the next
/// ones; likewise its own pool seed from the own seed's stream when there is one.
std::vector<band_bins> band_layout(std::span<const noise_band> bands, std::uint64_t seed,
                                   std::optional<std::uint64_t> own_seed, double bin_hz, double nyquist_hz, int n_bins) {
    std::vector<band_bins> layout;
    for (std::size_t i = 0; i < bands.size(); ++i) {
        const noise_band& b = bands[i];
        const auto same = static_cast<int>(std::count_if(bands.begin(), bands.begin() + static_cast<std::ptrdiff_t>(i),
                                                         [&](const noise_band& o) { return o.low_hz == b.low_hz && o.high_hz == b.high_hz; }));
        splitmix64 stream = band_stream(seed, b, same);
        const std::uint64_t pool_seed = stream.next();
        std::optional<std::uint64_t> own_pool_seed;
        if (own_seed) own_pool_seed = band_stream(*own_seed, b, same).next();
        const double high_hz = std::min(b.high_hz, nyquist_hz);
        if (b.low_hz >= high_hz) continue;
        int first = std::max(1, static_cast<int>(std::ceil(b.low_hz / bin_hz)));
        int last = std::min(n_bins - 2, static_cast<int>(std::ceil(high_hz / bin_hz)) - 1);
        if (last < first) {
            first = std::clamp(static_cast<int>(std::lround(0.5 * (b.low_hz + high_hz) / bin_hz)), 1, n_bins - 2);
            last = first;
        }
        layout.push_back({.first = first, .count = last - first + 1, .band = &b, .pieces = envelope_pieces(b.env),
                          .peak_lin = to_amp(b.env.peak).lin, .pool_seed = pool_seed, .shifts = stream,
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

/// One frame's bands into each draw's frame (frames: draw d at d * n_fft): a fast band's
/// amplitude once for all the draws, each draw its own shift per band (drawn whether the band
/// sounds or not) and its own pool (made when the band first sounds in it).
struct draw_player {
    draw_player(int n_fft, std::size_t bands, std::size_t draws, int shift_bits, std::size_t shift_stride,
                std::span<float> frames)
        : n_fft_(n_fft), n_(static_cast<std::size_t>(n_fft)), pool_floats_(static_cast<std::size_t>(pool_frames) * 2 * n_),
          shift_bits_(shift_bits), shift_stride_(shift_stride), frames_(frames),
          inverse_(n_fft), pools_(std::make_unique_for_overwrite<float[]>(draws * bands * pool_floats_)),
          amp_(amp_rows * n_), row_of_(bands, 0) {
        runs_.reserve(2 * amp_rows);  // a band makes a run per piece it crosses in a frame: rarely two
    }

    void play(std::vector<std::vector<band_bins>>& layouts, std::span<const band_in_frame> plays, double start_s,
              double dt_s, std::size_t pool_index) {
        const std::size_t bands = layouts.front().size();
        // The first band that sounds writes the frames (onto_zero), the others add to them.
        first_sounding_ = 0;
        while (first_sounding_ < bands && plays[first_sounding_].bin_amp == 0.0f) ++first_sounding_;
        if (first_sounding_ == bands) std::fill(frames_.begin(), frames_.end(), 0.0f);
        // Bands in turn, a few fast ones at a time: their amplitudes first, each in a row of its
        // own (their runs played side by side), then every band's draws in band order.
        for (std::size_t i0 = 0; i0 < bands;) {
            runs_.clear();
            std::size_t rows = 0;
            std::size_t i1 = i0;
            for (; i1 < bands && rows < amp_rows; ++i1) {
                if (plays[i1].bin_amp == 0.0f || !plays[i1].fast) continue;
                row_of_[i1] = rows;
                const band_bins& band = layouts.front()[i1];
                fill_amplitude(band.band->env, band.pieces, band.peak_lin, start_s, dt_s,
                               std::span(amp_).subspan(rows++ * n_, n_), runs_);
            }
            play_runs(runs_);
            for (std::size_t i = i0; i < i1; ++i) play_band(layouts, plays, i, pool_index);
            i0 = i1;
        }
    }

private:
    /// Band i's draws into their frames (its amplitude, when fast, in row row_of_[i] of amp_).
    void play_band(std::vector<std::vector<band_bins>>& layouts, std::span<const band_in_frame> plays, std::size_t i,
                   std::size_t pool_index) {
        const std::size_t bands = layouts.front().size();
        const bool sounds = plays[i].bin_amp != 0.0f;
        for (std::size_t d = 0; d < layouts.size(); ++d) {
            band_bins& b = layouts[d][i];
            const auto shift = static_cast<std::size_t>(b.shifts.next() >> (64 - shift_bits_)) * shift_stride_;
            if (!sounds) continue;
            const std::span<float> pool(pools_.get() + (d * bands + i) * pool_floats_, pool_floats_);
            if (!b.pool_ready) {
                make_pool(b, n_fft_, inverse_, pool);
                b.pool_ready = true;
            }
            const float* unit = pool.data() + pool_index * 2 * n_ + shift;
            float* frame = frames_.data() + d * n_;
            if (plays[i].fast) {
                noise_kernels::add_modulated(frame, unit, amp_.data() + row_of_[i] * n_, plays[i].bin_amp, n_, i == first_sounding_);
            } else {
                noise_kernels::add_scaled(frame, unit, plays[i].bin_amp, n_, i == first_sounding_);
            }
        }
    }

    /// Fast bands whose amplitudes are made together (play_runs plays four runs side by side).
    static constexpr std::size_t amp_rows = 4;
    int n_fft_;
    std::size_t n_;
    std::size_t pool_floats_;
    int shift_bits_;
    std::size_t shift_stride_;
    std::span<float> frames_;
    inverse_real_fft inverse_;
    /// Each draw's bands' pools, written whole (make_pool) when a band first sounds: not zeroed.
    std::unique_ptr<float[]> pools_;
    std::vector<float> amp_;  ///< a few fast bands' amplitudes in the frame, a row of n_fft each
    std::vector<std::size_t> row_of_;  ///< each band's row of amp_ (while it is being played)
    std::size_t first_sounding_ = 0;   ///< the frame's first band that sounds (play)
    std::vector<amplitude_run> runs_;
};

/// The bands' noise at a draw rate (noise_draw_rate_hz of itself) of a render of total frames, one
/// draw per seed, its frames [first, first + outs[d].size()) added into outs[d] (all the same
/// length): each sample gets the frames that cover it in frame order, as in the whole render, the
/// frames before only draw their shifts. The frames' plan and the fast bands' amplitudes depend on
/// the bands alone: worked out once per frame for every draw, each draw a render of its seed alone.
void add_noise_at_draw_rate(std::span<const noise_band> bands, const noise_render_params& params,
                            std::span<const std::uint64_t> seeds, [[maybe_unused]] std::size_t total_frames,
                            std::size_t first_frame, std::span<const std::span<float>> outs) {
    assert(noise_draw_rate_hz(params.sample_rate_hz) == params.sample_rate_hz);
    assert(seeds.size() == outs.size() && !seeds.empty());
    const int n_fft = noise_frame_size(params.sample_rate_hz, params.frame_s);
    const int hop = n_fft / synthesis_overlap;
    const int n_bins = n_fft / 2 + 1;
    const double bin_hz = params.sample_rate_hz / n_fft;
    assert(std::has_single_bit(static_cast<unsigned>(n_fft)));
    // Shifts are drawn in steps of the frame at the lowest draw rate (shift_steps of them), so
    // every draw rate shifts a frame by the same time.
    const int shift_steps = noise_frame_size(draw_base_rate_hz, params.frame_s);
    const int shift_bits = std::countr_zero(static_cast<unsigned>(shift_steps));
    const auto shift_stride = static_cast<std::size_t>(std::max(1, n_fft / shift_steps));

    double window_power_sum = 0.0;
    const std::vector<float> window = periodic_hann(n_fft, window_power_sum);

    // Random streams: one per band (band_stream), its pool's seed first, then its frames' shifts,
    // so a band's noise does not depend on when (or whether) others sound. Which bands are laid
    // out does not depend on the seed; the first draw's layout keeps the frames' piece cursor.
    std::vector<std::vector<band_bins>> layouts;
    for (const std::uint64_t seed : seeds)
        layouts.push_back(band_layout(bands, seed, params.own_seed, bin_hz, params.sample_rate_hz / 2.0, n_bins));
    std::vector<band_bins>& layout = layouts.front();
    if (layout.empty()) return;

    const auto n = static_cast<std::size_t>(n_fft);
    const std::size_t draws = seeds.size();
    std::vector<float> frames(draws * n);
    draw_player player(n_fft, layout.size(), draws, shift_bits, shift_stride, frames);
    std::vector<band_in_frame> plays(layout.size());
    const bin_scale scale{.n_fft = n_fft, .hop = hop, .window_power_sum = window_power_sum,
                          .gain_lin = to_amp(level_db{params.gain_db}).lin, .inverse_scale = 1.0 / n_fft};  // the inverse FFT is unnormalized

    assert(first_frame + outs.front().size() <= total_frames);
    const auto first = static_cast<long>(first_frame);
    const auto end = static_cast<long>(first_frame + outs.front().size());
    const double dt_s = 1.0 / params.sample_rate_hz;
    // Frame m is centred on sample m * hop and spans [m hop - N/2, m hop + N/2); it draws one
    // shift per band (sounding or not), so a frame's noise does not depend on the others. The
    // frames centred before the onset whose second half reaches past it come first.
    const long m_first = 1 - n_fft / 2 / hop;
    const long m_stretch = first / hop + 1 - n_fft / 2 / hop;  // the first frame ending past first (first >= 0)
    for (std::vector<band_bins>& l : layouts) for (band_bins& b : l) b.shifts.skip(static_cast<std::uint64_t>(m_stretch - m_first));
    for (long m = m_stretch; m * hop - n_fft / 2 < end; ++m) {
        const long start = m * hop - n_fft / 2;
        const bool audible = plan_frame(layout, plays, scale, static_cast<double>(m * hop) * dt_s,
                                        static_cast<double>(start) * dt_s, static_cast<double>(start + n_fft) * dt_s);
        if (!audible) {
            for (std::vector<band_bins>& l : layouts)
                for (band_bins& b : l) b.shifts.skip(1);
            continue;
        }
        const auto pool_index = static_cast<std::size_t>(((m % pool_frames) + pool_frames) % pool_frames);
        player.play(layouts, plays, static_cast<double>(start) * dt_s, dt_s, pool_index);
        const long from = std::max(0L, first - start);
        const long to = std::min<long>(n_fft, end - start);
        for (std::size_t d = 0; d < draws; ++d)
            noise_kernels::add_windowed(outs[d].data() + (start + from - first), frames.data() + d * n + from, window.data() + from,
                         static_cast<std::size_t>(to - from));
    }
}

}  // namespace

double noise_draw_rate_hz(double sample_rate_hz) {
    double rate_hz = draw_base_rate_hz;
    while (rate_hz < sample_rate_hz) rate_hz *= 2.0;
    return rate_hz;
}

void add_noise_band_draws_part(std::span<const noise_band> bands, const noise_render_params& params,
                               std::span<const std::uint64_t> seeds, std::size_t total_frames, std::size_t first_frame,
                               std::span<const std::span<float>> outs) {
    assert(seeds.size() == outs.size());
    if (bands.empty() || outs.empty() || outs.front().empty()) return;
    for (const std::span<float> out : outs) assert(out.size() == outs.front().size());
    assert(first_frame + outs.front().size() <= total_frames);
    const double draw_rate_hz = noise_draw_rate_hz(params.sample_rate_hz);
    if (draw_rate_hz == params.sample_rate_hz) return add_noise_at_draw_rate(bands, params, seeds, total_frames, first_frame, outs);
    // Drawn at the draw rate over the output's time plus the samples the converter's kernel reads
    // past its end, then converted (synthesis/rate_convert.hpp); only the samples the stretch reads.
    const auto drawn_frames = static_cast<std::size_t>(std::ceil(static_cast<double>(total_frames) * draw_rate_hz / params.sample_rate_hz)) +
                              static_cast<std::size_t>(rate_convert_taps(draw_rate_hz, params.sample_rate_hz));
    const rate_convert_reach reach = rate_convert_reads(draw_rate_hz, params.sample_rate_hz, first_frame, outs.front().size(), drawn_frames);
    const std::size_t size = reach.end - reach.first;
    std::vector<float> drawn(seeds.size() * size, 0.0f);
    std::vector<std::span<float>> drawn_outs;
    for (std::size_t d = 0; d < seeds.size(); ++d) drawn_outs.emplace_back(drawn.data() + d * size, size);
    noise_render_params at_draw = params;
    at_draw.sample_rate_hz = draw_rate_hz;
    if (size > 0) add_noise_at_draw_rate(bands, at_draw, seeds, drawn_frames, reach.first, drawn_outs);
    for (std::size_t d = 0; d < seeds.size(); ++d)
        add_rate_converted_part(drawn_outs[d], reach.first, drawn_frames, draw_rate_hz, params.sample_rate_hz, first_frame, outs[d]);
}

noise_render_params noise_params_of(const patch& p, const render_params& params) {
    return {.sample_rate_hz = params.sample_rate_hz, .gain_db = p.note.gain_db + params.gain_db + params.noise_gain_db,
            .seed = params.noise_seed, .own_seed = params.own_noise_seed};
}

void add_noise_bands_part(std::span<const noise_band> bands, const noise_render_params& params, std::size_t total_frames,
                          std::size_t first_frame, std::span<float> out) {
    const std::uint64_t seeds[] = {params.seed};
    const std::span<float> outs[] = {out};
    add_noise_band_draws_part(bands, params, seeds, total_frames, first_frame, outs);
}

}  // namespace wane
