// A bound on how loud a render can get: for any stretch of frames, a level no sample of the
// render (partials plus noise, any noise seed) reaches. The peak match (analysis/peak_match)
// renders a copy only as far as the bound says its peak (or the samples near it) can still come.
//
// Partials: |sum_k g_k A_k(t) cos(...)| <= sum_k g_k max A_k over the stretch, A_k the envelope
// (core/envelope.hpp: a linear ramp, then straight dB pieces, so its maximum over an interval lies
// at the interval's ends or a piece's ends), g_k the gain times the band-limit gain (synthesis/render.hpp).
//
// Noise (synthesis/noise_render.hpp): sample n is the sum over the frames covering it of the Hann
// window times the band's bin magnitude c times a unit frame, the unnormalized inverse FFT of
// `count` unit-magnitude bins (DC and Nyquist excluded), so |unit| <= 2 count. Periodic Hann
// windows at hop N/4 sum to 2, hence |band noise| <= 4 count c max A over the frames covering n
// (the level at a frame's centre, or the envelope sample by sample in a fast frame: within a frame
// of n either way). count <= (high - low) / bin_hz + 1 (the layout's bins lie inside the band, at
// least one). A render at another rate than the noise's draw rate converts it by a kernel whose
// taps' magnitudes sum to at most rate_convert_gain, reading one kernel length around n. A stereo
// channel's bins (noise_render_params::own_seed) are sqrt(c) u + sqrt(1 - c) v, |.| <= sqrt(2).
//
// Float rounding: the renders' relative errors (~4e-6, synthesis/render.cpp) are covered by a
// margin of render_bound_margin on every bound.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

#include "core/envelope.hpp"
#include "core/patch.hpp"
#include "synthesis/render.hpp"

namespace wane {

/// Every bound is multiplied by this (float rounding of the renders; a reasoned margin, far over
/// the ~1e-5 relative error of a sum of float partials and frames).
inline constexpr double render_bound_margin = 1.01;

class render_bound {
public:
    /// The bound of render_patch(p, params) (params.gain_db, noise_gain_db and include_noise as
    /// there; any noise seed).
    render_bound(const patch& p, const render_params& params);

    std::size_t frames() const { return frames_; }
    /// Bound on |partials| over frames [first, frames()).
    double partials_from(std::size_t first) const;
    /// Bound on |noise| over frames [first, last) (last <= frames()).
    double noise_over(std::size_t first, std::size_t last) const;
    /// Bound on |render| over frames [first, frames()).
    double from(std::size_t first) const { return partials_from(first) + noise_over(first, frames_); }

private:
    struct source {
        envelope env;
        std::vector<envelope_piece> pieces;
        double gain = 0.0;  ///< amplitude per unit of envelope amplitude
    };
    /// Largest envelope amplitude of s over [from_s, to_s] (to_s may be infinite), times s.gain.
    static double largest(const source& s, double from_s, double to_s);

    std::size_t frames_ = 0;
    double rate_hz_ = 0.0;
    std::vector<source> partials_;
    std::vector<source> bands_;
    double noise_reach_s_ = 0.0;  ///< how far from a sample the noise's envelopes reach it
};

/// Per block of render_anchor_frames of a render, from its partials' samples and the render's
/// bound: the most the render (any noise draw) can reach there, and the least its peak can be
/// (|partials| less the noise's bound, at its best block).
struct loudness_blocks {
    std::vector<double> most;
    double least_peak = 0.0;

    /// Adds the blocks of partials, frames [first, first + partials.size()) (first a multiple of
    /// render_anchor_frames, the blocks before it added).
    void add(std::span<const float> partials, std::size_t first, const render_bound& bound);
    /// One past the last frame of the blocks that can reach level (a multiple of render_anchor_frames).
    std::size_t frames_reaching(double level) const;
};

/// Where a render stops mattering: no frame from it on comes within within_db of the
/// render's peak (bound: render_bound(p, params)). The partials a step at a time until the bound
/// of the rest falls under that level, then the blocks that can still reach it (partials plus the
/// noise's bound); the whole render when those reach the end fade.
std::size_t frames_within(const patch& p, const render_params& params, const render_bound& bound, double within_db);


/// Figures of frames [0, frames) of render_patch(p, params), frames = frames_within(...), made a
/// stretch at a time (partial_renderer::render_with_noise, bit for bit) without holding them: the
/// peak |sample| of every block of render_anchor_frames and of all.
struct block_peaks {
    std::size_t frames = 0;
    float peak = 0.0f;
    std::vector<float> peaks;  ///< per block
    /// A render made in one piece (frames within the stretch, short of the end fade): its frames,
    /// and its partials' alone (no noise), kept so that nothing needs rendering again (the
    /// loud end below; the peak match's other draws share the partials). Empty otherwise.
    std::vector<float> samples;
    std::vector<float> partials;

    /// One past the last of the frames whose |sample| is at or over level (0 if none): the last
    /// block that reaches it read from samples, or rendered again when they were not kept (p
    /// and params those the figures were made from).
    std::size_t end_at_or_above(const patch& p, const render_params& params, float level) const;
};
/// Frames block_peaks_within renders at once by default, and the longest render whose partials
/// it keeps from frames_within's pass (4 MB: a render up to ~22 s at 48 kHz is rendered once, as
/// every real note; a longer one a stretch at a time, its partials twice, the noise's frames
/// across a stretch's edges drawn twice).
inline constexpr std::size_t peak_stretch_frames = 1024 * render_anchor_frames;
/// stretch_frames: a multiple of render_anchor_frames (the figures do not depend on it).
block_peaks block_peaks_within(const patch& p, const render_params& params, const render_bound& bound, double within_db,
                               std::size_t stretch_frames = peak_stretch_frames);

/// The peak |sample| of render_patch(p, params) (bound: render_bound(p, params)), as
/// block_peaks_within(p, params, bound, 0.0).peak: rendered first only as far as a level of
/// guess_lin (0: none) proves nothing later can reach, which holds when the peak found reaches
/// it (a good guess: a level a little under the peak, known from another render of p); else
/// sought again without it. The same peak either way; only the cost depends on the guess.
float render_peak(const patch& p, const render_params& params, const render_bound& bound, double guess_lin);

}  // namespace wane
