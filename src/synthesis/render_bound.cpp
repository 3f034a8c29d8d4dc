#include "synthesis/render_bound.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <span>
#include <vector>

#include "core/noise_bands.hpp"
#include "core/units.hpp"
#include "synthesis/noise_render.hpp"
#include "synthesis/rate_convert.hpp"

namespace wane {

namespace {

/// Frames of noise overlap this many times (noise_render.cpp's synthesis_overlap): their periodic
/// Hann windows sum to 2 at hop N/4.
constexpr int noise_overlap = 4;
constexpr double overlapped_hann_sum = 2.0;
/// A unit frame's samples: the inverse FFT of `count` unit bins and their mirror images.
constexpr double unit_frame_bound_per_bin = 2.0;

}  // namespace

render_bound::render_bound(const patch& p, const render_params& params)
    : frames_(render_frames(p, params)), rate_hz_(params.sample_rate_hz) {
    const double total_gain = to_amp(level_db{p.note.gain_db + params.gain_db}).lin;
    for (const partial& part : p.partials) {
        const double gain = total_gain * band_limit_gain(part.freq_hz, rate_hz_);
        if (!(gain > 0.0) || !(to_amp(part.env.peak).lin > 0.0)) continue;
        partials_.push_back({.env = part.env, .pieces = envelope_pieces(part.env), .gain = gain});
    }
    if (!params.include_noise || p.noise.empty()) return;
    const noise_render_params noise = noise_params_of(p, params);
    const double draw_rate_hz = noise_draw_rate_hz(rate_hz_);
    const int n_fft = noise_frame_size(draw_rate_hz, noise.frame_s);
    const double bin_hz = draw_rate_hz / n_fft;
    // Periodic Hann: sum w^2 = 3 N / 8 (the renderer sums it in double: equal to rounding).
    const double window_power_sum = 0.375 * n_fft;
    double converter_gain = 1.0;
    noise_reach_s_ = static_cast<double>(n_fft) / draw_rate_hz;
    if (draw_rate_hz != rate_hz_) {
        converter_gain = rate_convert_gain(draw_rate_hz, rate_hz_);
        noise_reach_s_ += static_cast<double>(rate_convert_taps(draw_rate_hz, rate_hz_)) / draw_rate_hz;
    }
    // A stereo channel's bins mix shared and own noise: |sqrt(c) u + sqrt(1 - c) v| <= sqrt(2).
    const double noise_gain = to_amp(level_db{noise.gain_db}).lin * (noise.own_seed ? std::sqrt(2.0) : 1.0);
    for (const noise_band& b : p.noise) {
        const double high_hz = std::min(b.high_hz, 0.5 * draw_rate_hz);
        if (b.low_hz >= high_hz) continue;  // left out by the renderer too
        const double count = std::max(1.0, (high_hz - b.low_hz) / bin_hz + 1.0);
        // The bin magnitude of amplitude 1 (noise_render.cpp's bin_scale), the inverse FFT unnormalized.
        const double bin_amp = std::sqrt(bin_power_for_band(1.0, static_cast<int>(std::ceil(count)), n_fft,
                                                            n_fft / noise_overlap, window_power_sum)) / n_fft;
        const double gain = overlapped_hann_sum * unit_frame_bound_per_bin * std::ceil(count) * bin_amp * noise_gain * converter_gain;
        bands_.push_back({.env = b.env, .pieces = envelope_pieces(b.env), .gain = gain});
    }
}

double render_bound::largest(const source& s, double from_s, double to_s) {
    from_s = std::max(from_s, 0.0);
    if (!(to_s >= from_s)) return 0.0;
    double amp = 0.0;
    const double attack_s = s.env.attack_s;
    if (from_s < attack_s) amp = to_amp(s.env.peak).lin * std::min(to_s, attack_s) / attack_s;  // the rising ramp
    double level = -infinity;
    for (const envelope_piece& p : s.pieces) {
        if (p.end_s < from_s) continue;
        if (p.start_s > to_s) break;
        // A straight piece: its largest value at one of its ends within [from_s, to_s].
        const double lo_s = std::max(from_s, p.start_s);
        const double hi_s = std::min(to_s, p.end_s);
        level = std::max(level, p.start_level.db + p.slope_db_per_s * (lo_s - p.start_s));
        if (std::isfinite(hi_s)) level = std::max(level, p.start_level.db + p.slope_db_per_s * (hi_s - p.start_s));
        else if (p.slope_db_per_s > 0.0) return infinity;
    }
    return render_bound_margin * s.gain * std::max(amp, to_amp(level_db{level}).lin);
}

double render_bound::partials_from(std::size_t first) const {
    assert(first <= frames_);
    const double from_s = static_cast<double>(first) / rate_hz_;
    const double end_s = static_cast<double>(frames_) / rate_hz_;
    double sum = 0.0;
    for (const source& s : partials_) sum += largest(s, from_s, end_s);
    return sum;
}

double render_bound::noise_over(std::size_t first, std::size_t last) const {
    assert(first <= last && last <= frames_);
    const double from_s = static_cast<double>(first) / rate_hz_ - noise_reach_s_;
    const double to_s = static_cast<double>(last) / rate_hz_ + noise_reach_s_;
    double sum = 0.0;
    for (const source& s : bands_) sum += largest(s, from_s, to_s);
    return sum;
}

void loudness_blocks::add(std::span<const float> partials, std::size_t first, const render_bound& bound) {
    assert(first % render_anchor_frames == 0 && most.size() == first / render_anchor_frames);
    for (std::size_t b0 = 0; b0 < partials.size(); b0 += render_anchor_frames) {
        const std::size_t b1 = std::min(b0 + render_anchor_frames, partials.size());
        float top = 0.0f;
        for (std::size_t n = b0; n < b1; ++n) top = std::max(top, std::abs(partials[n]));
        const double noise = bound.noise_over(first + b0, first + b1);
        least_peak = std::max(least_peak, static_cast<double>(top) - noise);
        most.push_back(static_cast<double>(top) + noise);
    }
}

std::size_t loudness_blocks::frames_reaching(double level) const {
    std::size_t blocks = most.size();
    while (blocks > 0 && most[blocks - 1] < level) --blocks;
    return blocks * render_anchor_frames;
}

namespace {

/// Partials rendered per step while looking for where a render stops mattering.
constexpr std::size_t bounded_step_frames = 8 * render_anchor_frames;

/// frames_within, leaving the partials of the frames it gives in kept when they are at most
/// keep_frames and short of the end fade (else kept is empty): they need only the noise then.
/// least_lin: a level the render's peak is taken to reach at least (0: none; the peak found must
/// be checked against it), which stops the search earlier than the partials alone prove.
std::size_t frames_within_keeping(const patch& p, const render_params& params, const render_bound& bound, double within_db,
                                  std::size_t keep_frames, std::vector<float>& kept, double least_lin = 0.0) {
    const partial_renderer partials(p, params);
    const std::size_t frames = partials.frames();
    assert(frames == bound.frames());
    // Strictly under the level (the margin also covers the level's rounding where it is compared).
    const double ratio = to_amp(level_db{-within_db}).lin / render_bound_margin;
    std::vector<float> step;
    kept.clear();
    loudness_blocks blocks;
    std::size_t end = 0;
    while (end < frames) {
        const std::size_t step_end = std::min(frames, end + bounded_step_frames);
        std::span<float> part;
        if (step_end <= keep_frames) {
            kept.resize(step_end);
            part = std::span(kept).subspan(end);
        } else {
            kept = {};
            step.resize(std::min(frames, bounded_step_frames));
            part = std::span(step).first(step_end - end);
        }
        partials.render(end, part);
        blocks.add(part, end, bound);
        end = step_end;
        if (bound.from(end) < ratio * std::max(least_lin, blocks.least_peak)) break;
    }
    const std::size_t within = std::min(end, blocks.frames_reaching(ratio * std::max(least_lin, blocks.least_peak)));
    const auto fade_frames = std::min(frames, static_cast<std::size_t>(std::llround(end_fade_s * params.sample_rate_hz)));
    // The end fade scales partials and noise together: a render that reaches it is taken whole.
    if (within + fade_frames > frames) {
        kept = {};
        return frames;
    }
    kept.resize(std::min(kept.size(), within));
    if (kept.size() < within) kept = {};
    return within;
}

/// Appends the peaks of x's blocks of render_anchor_frames (x starting at a block) to r.
void add_block_peaks(std::span<const float> x, block_peaks& r) {
    for (std::size_t b0 = 0; b0 < x.size(); b0 += render_anchor_frames) {
        float top = 0.0f;
        for (std::size_t n = b0; n < std::min(x.size(), b0 + render_anchor_frames); ++n) top = std::max(top, std::abs(x[n]));
        r.peaks.push_back(top);
        r.peak = std::max(r.peak, top);
    }
}

}  // namespace

std::size_t frames_within(const patch& p, const render_params& params, const render_bound& bound, double within_db) {
    std::vector<float> none;
    return frames_within_keeping(p, params, bound, within_db, 0, none);
}

namespace {

/// block_peaks_within, the search stopped by least_lin as well (frames_within_keeping).
block_peaks block_peaks_over(const patch& p, const render_params& params, const render_bound& bound, double within_db,
                             std::size_t stretch_frames, double least_lin) {
    assert(stretch_frames > 0 && stretch_frames % render_anchor_frames == 0);
    std::vector<float> kept;
    block_peaks r{.frames = frames_within_keeping(p, params, bound, within_db, stretch_frames, kept, least_lin),
                  .peak = 0.0f, .peaks = {}, .samples = {}, .partials = {}};
    if (r.frames == 0) return r;
    if (kept.size() == r.frames) {
        // A short render: its partials (no end fade in them) and the noise over them.
        r.partials = kept;
        if (params.include_noise && !p.noise.empty())
            add_noise_bands_part(p.noise, noise_params_of(p, params), bound.frames(), 0, kept);
        add_block_peaks(kept, r);
        r.samples = std::move(kept);
        return r;
    }
    const partial_renderer renderer(p, params);
    std::vector<float> stretch(std::min(r.frames, stretch_frames));
    for (std::size_t first = 0; first < r.frames; first += stretch_frames) {
        const std::span<float> part = std::span(stretch).first(std::min(stretch_frames, r.frames - first));
        renderer.render_with_noise(p, params, first, part);
        add_block_peaks(part, r);
    }
    return r;
}

}  // namespace

block_peaks block_peaks_within(const patch& p, const render_params& params, const render_bound& bound, double within_db,
                               std::size_t stretch_frames) {
    return block_peaks_over(p, params, bound, within_db, stretch_frames, 0.0);
}

float render_peak(const patch& p, const render_params& params, const render_bound& bound, double guess_lin) {
    // Every frame left out stays under guess_lin / render_bound_margin: when the frames kept
    // reach guess_lin, their peak is the render's.
    if (guess_lin > 0.0) {
        const float peak = block_peaks_over(p, params, bound, 0.0, peak_stretch_frames, guess_lin).peak;
        if (static_cast<double>(peak) >= guess_lin) return peak;
    }
    return block_peaks_within(p, params, bound, 0.0).peak;
}

std::size_t block_peaks::end_at_or_above(const patch& p, const render_params& params, float level) const {
    std::size_t block = peaks.size();
    while (block > 0 && peaks[block - 1] < level) --block;
    if (block == 0) return 0;
    // The samples of that block, kept or again (bit for bit: it starts at an anchor), the last one at or over level.
    const std::size_t first = (block - 1) * render_anchor_frames;
    const std::size_t size = std::min(render_anchor_frames, frames - first);
    std::vector<float> rendered;
    std::span<const float> x;
    if (samples.size() == frames) {
        x = std::span(samples).subspan(first, size);
    } else {
        rendered.resize(size);
        partial_renderer(p, params).render_with_noise(p, params, first, rendered);
        x = rendered;
    }
    std::size_t end = x.size();
    while (end > 0 && std::abs(x[end - 1]) < level) --end;
    return first + end;
}

}  // namespace wane
