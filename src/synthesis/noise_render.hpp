// Band noise of a patch's [[noise]] tables, by spectral shaping: short frames whose spectrum is
// random-phase noise in each band's bins, with the bins' magnitude following the band's envelope,
// Hann-windowed and overlap-added at a quarter frame (Hann^2 windows at 75% overlap sum to a
// constant, so the power follows the envelopes without ripple). Band-limited by construction:
// only bins inside a band carry energy, and the Hann window's sidelobes keep the skirts low
// (measured in tests/unit/test_noise.cpp).
//
// Cost: a frame's band noise is not drawn and inverse-transformed afresh. Each band gets a pool
// of `synthesis_overlap` periodic unit frames (inverse real FFT, KissFFT, of unit-magnitude bins
// with seeded random phases inside the band), made once per render when the band first sounds.
// Frame m takes pool frame m mod synthesis_overlap of every sounding band at a random circular
// shift (a shift by s multiplies bin k by e^(j 2 pi k s / N): still unit magnitude, only the
// band's bins), scaled by the band's bin magnitude at the frame's centre. So a frame is still a
// random-phase spectrum with exactly the bins and magnitudes of the per-frame method, at N
// multiply-adds per band instead of an inverse FFT per frame, and the frames that overlap never
// share a pool frame (no coherent sums). Seeded and deterministic, each band from its own stream
// of the seed (its pool seed, then one shift per frame), so a band's noise does not change when
// another band comes or goes; frames where every band is below -160 dB are skipped, and bands
// below it are left out of a frame, so attack noise costs only while it sounds.
//
// Where a band's level changes by more than 1 dB across a frame (an attack burst of a few
// milliseconds, a fast first decay, the onset), that frame plays the band's noise times its
// envelope's amplitude sample by sample instead of at its level at the frame's centre (the
// overlap-added frames' power then follows the envelope exactly); the frame centred a hop before
// the onset plays its second half, so the first hop has the power of every other.
//
// The same sound at every output rate: the noise is drawn at a draw rate (noise_draw_rate_hz:
// 48 kHz times a power of two, the lowest one at or above the output rate) and, where the output
// rate differs, converted to it (synthesis/rate_convert.hpp). Every draw rate has the same frame time and
// bins in Hz (the frame is a power of two that doubles with the rate), the same phases per bin
// and the same frame shifts in seconds, so a patch's noise is one signal, sampled at each rate
// (tests/unit/test_noise_rates.cpp). Drawn per output rate, a band below ~200 Hz (one or two
// bins) was a tone whose frequency moved with the rate, and a copy's peak moved with it.
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <span>

#include "core/patch.hpp"
#include "synthesis/render.hpp"

namespace wane {

struct noise_render_params {
    double sample_rate_hz = default_output_rate_hz;
    double gain_db = 0.0;        ///< applied to every band
    std::uint64_t seed = 1;
    /// A channel of a stereo render: each band plays sqrt(coherence) of the shared noise (the
    /// pools of `seed`, the same in every channel) plus sqrt(1 - coherence) of noise of its own
    /// (pools drawn from this seed), mixed in the band's unit frames (one inverse FFT per pool
    /// frame), so a channel costs what a mono render costs. The frames' shifts come from `seed`
    /// for both parts. Empty: the shared noise alone at full power (the mono render).
    std::optional<std::uint64_t> own_seed = std::nullopt;
    /// Frame length in seconds (rounded up to a power of two in samples); ~21 ms: short enough
    /// for attack transients, long enough for several bins in the lowest band.
    double frame_s = 0.0213;
};

/// The noise parameters render_patch(p, params) draws p's bands with (one home: the renderer and
/// the peak match's renders of a prefix).
noise_render_params noise_params_of(const patch& p, const render_params& params);

/// Frames [first_frame, first_frame + out.size()) of the noise add_noise_bands adds into a render
/// of total_frames, added into out bit for bit as there (each sample gets the frames that cover it,
/// in the same order; the earlier frames only draw their shifts; at a converted rate, only the
/// drawn samples the stretch reads are drawn): a long render's noise a stretch at a time.
void add_noise_bands_part(std::span<const noise_band> bands, const noise_render_params& params, std::size_t total_frames,
                          std::size_t first_frame, std::span<float> out);

/// add_noise_band_draws over frames [first_frame, first_frame + outs[d].size()) of renders of
/// total_frames (as add_noise_bands_part is to add_noise_bands).
void add_noise_band_draws_part(std::span<const noise_band> bands, const noise_render_params& params,
                               std::span<const std::uint64_t> seeds, std::size_t total_frames, std::size_t first_frame,
                               std::span<const std::span<float>> outs);

/// Draws of the same bands, seeds[d] added into outs[d] (every out the same length), each bit for
/// bit what add_noise_bands gives with params.seed = seeds[d] (params.seed is not read): the
/// frames' plan and the sample-by-sample envelopes of the fast bands are worked out once for all
/// the draws (tests/unit/test_noise_rates.cpp).
inline void add_noise_band_draws(std::span<const noise_band> bands, const noise_render_params& params,
                                 std::span<const std::uint64_t> seeds, std::span<const std::span<float>> outs) {
    if (!outs.empty()) add_noise_band_draws_part(bands, params, seeds, outs.front().size(), 0, outs);
}
/// Adds the bands' noise into out (out[n] at t = n / rate). Bands above Nyquist are clipped to it.
inline void add_noise_bands(std::span<const noise_band> bands, const noise_render_params& params, std::span<float> out) {
    add_noise_bands_part(bands, params, out.size(), 0, out);
}

/// The frame length in samples the renderer and the analysis use at a rate (power of two).
int noise_frame_size(double sample_rate_hz, double frame_s);

/// The rate the noise of a render at sample_rate_hz is drawn at: 48 kHz times 2^k, k >= 0, the
/// lowest one at or above sample_rate_hz.
double noise_draw_rate_hz(double sample_rate_hz);

}  // namespace wane
