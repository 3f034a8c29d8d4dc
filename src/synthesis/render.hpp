// Rendering a patch to samples: an oscillator bank of exponentially damped sinusoids (plus the
// noise bands of synthesis/noise_render.hpp).
//
// What a render is (the patch format v1 formula, evaluated at t = n / sample_rate_hz, n = 0, 1, ...):
//   y(t) = G * sum over partials k of  band_limit_gain(f_k) * A_k(t) * cos(2 pi f_k t + phase_k)
//   A_k(t): the partial's envelope (core/envelope.hpp): linear attack ramp from 0 at t = 0 to the
//           peak at attack_s, then straight dB segments;
//   G = 10^((note.gain_db + params.gain_db) / 20);
// then the last end_fade_s of the render is multiplied by a raised-cosine fade to 0.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <vector>

#include "core/patch.hpp"

namespace wane {

/// The output rate of a render at default settings, Hz: the one home of this default (render,
/// keymap and edit's --rate, the noise renderer's, and the peak match's default-copy render).
inline constexpr double default_output_rate_hz = 48000.0;

struct render_params {
    double sample_rate_hz = default_output_rate_hz;
    double length_s = 0.0;        ///< 0 = the patch's note.length_s
    double gain_db = 0.0;         ///< added to the patch's note.gain_db
    bool include_noise = true;
    double noise_gain_db = 0.0;
    std::uint64_t noise_seed = 1;
    /// Seed of a stereo channel's own noise (noise_render_params::own_seed; render_channels sets
    /// it); empty for a mono render.
    std::optional<std::uint64_t> own_noise_seed = std::nullopt;
};

/// Output rates the renderer accepts (the CLI validates --rate against these).
inline constexpr double min_render_rate_hz = 8000.0;
inline constexpr double max_render_rate_hz = 192000.0;

/// Band limiting: a partial at or above the output Nyquist frequency is left out; from this
/// fraction of Nyquist up to Nyquist its amplitude is faded by a raised cosine (1 -> 0).
inline constexpr double band_fade_start_fraction = 0.95;
/// Length of the raised-cosine fade at the end of every render.
inline constexpr double end_fade_s = 0.010;
/// The oscillator state is re-anchored from exact double-precision values at least this often
/// (and at every envelope segment boundary).
inline constexpr std::size_t render_anchor_frames = 1024;
/// Independent oscillator lanes per partial: lane l holds z_(n+l), all advanced by m^render_lanes,
/// so a lane runs render_anchor_frames / render_lanes float steps between exact anchors.
inline constexpr std::size_t render_lanes = 32;
/// Below this level a partial's stretch of samples is left out: far below any output format's
/// resolution (float32 output of a full-scale signal resolves ~ -150 dB).
inline constexpr level_db render_silence_level{-300.0};

/// Gain of the band-limit fade for a partial at freq_hz (one home of the formula):
///   1 below band_fade_start_fraction * nyquist, 0 at or above nyquist, and between them
///   0.5 * (1 + cos(pi * (f - f_start) / (nyquist - f_start))), continuous with continuous slope.
double band_limit_gain(double freq_hz, double sample_rate_hz);

/// Gain of the end fade at frame n of a render of total_frames (one home of the formula): 1
/// before the last fade_frames = min(total, round(end_fade_s * rate)); for the k-th of them
/// (k = 0 .. fade_frames - 1): 0.5 * (1 + cos(pi * (k + 1) / fade_frames)), so the last sample is 0.
double end_fade_gain(std::size_t n, std::size_t total_frames, double sample_rate_hz);

/// Number of frames a render lasts: round(length_s * sample_rate_hz), length_s from params or the
/// patch's note.length_s.
std::size_t render_frames(const patch& p, const render_params& params);

/// Renders the patch to mono float samples at params.sample_rate_hz. Deterministic: the same
/// patch and params give bit-identical samples, also across the AVX2 and generic kernel clones
/// (element-wise IEEE operations, no fused multiply-add, no reassociation; this holds for builds
/// without -march flags that enable FMA, as the project builds).
/// Preconditions (asserted): a valid patch, rate in [min_render_rate_hz, max_render_rate_hz],
/// render length in (0, max_length_s].
/// Noise bands (patch.noise) are added when params.include_noise (synthesis/noise_render.hpp).
std::vector<float> render_patch(const patch& p, const render_params& params);

/// Renders every channel of a patch: one vector for a mono patch (render_patch's samples), left
/// and right for a stereo one. Each channel is the render of channel_patch(p, side)
/// (core/stereo.hpp): the same kernels, per-channel levels, phases and decays. A noise band of
/// coherence c plays shared noise (seed params.noise_seed, the same in both channels) scaled by
/// sqrt(c) plus the channel's own noise (a seed of its own) scaled by sqrt(1 - c), mixed in one
/// noise pass per channel (noise_render_params::own_seed): a stereo render costs two mono renders.
/// Preconditions as render_patch's.
std::vector<std::vector<float>> render_channels(const patch& p, const render_params& params);

/// The partials of a render, one stretch of frames at a time: what render_patch gives with
/// include_noise off (end fade included), without holding the whole render (the analysis forms
/// the residual of a long file this way). A stretch starting at a multiple of
/// render_anchor_frames is bit-identical to the same frames of render_patch; others differ only
/// by float rounding (the oscillators are anchored at the stretch's first frame).
/// Preconditions as render_patch's (asserted).
class partial_renderer {
public:
    partial_renderer(const patch& p, const render_params& params);
    ~partial_renderer();
    partial_renderer(const partial_renderer&) = delete;
    partial_renderer& operator=(const partial_renderer&) = delete;
    std::size_t frames() const;  ///< render_frames(p, params)
    /// Writes frames [first_frame, first_frame + out.size()) into out; that range must lie
    /// inside [0, frames()).
    void render(std::size_t first_frame, std::span<float> out) const;
    /// Frames [first_frame, first_frame + out.size()) of render_patch(p, params) itself, noise
    /// included (synthesis/noise_render.hpp: add_noise_bands_part), p and params those this
    /// renderer was made from: bit for bit when first_frame is a multiple of render_anchor_frames.
    void render_with_noise(const patch& p, const render_params& params, std::size_t first_frame, std::span<float> out) const;

private:
    struct state;
    std::unique_ptr<state> state_;
    double sample_rate_hz_ = 0.0;
};

/// What a render will contain, for messages (cheap: no samples computed).
struct render_summary {
    std::size_t frames = 0;
    std::size_t partials_rendered = 0;      ///< below Nyquist, with a non-zero peak
    std::size_t partials_above_nyquist = 0; ///< left out: at or above the output Nyquist
    std::size_t partials_faded = 0;         ///< inside the band-limit fade zone (attenuated)
    /// Noise bands rendered (0 with include_noise off).
    std::size_t noise_bands_rendered = 0;
};
render_summary summarize_render(const patch& p, const render_params& params);

}  // namespace wane
