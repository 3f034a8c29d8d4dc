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
// share a pool frame (no coherent sums). Seeded and deterministic; frames where every band is
// below -160 dB are skipped, and bands below it are left out of a frame, so attack noise costs
// only while it sounds.
#pragma once

#include <cstdint>
#include <optional>
#include <span>

#include "core/patch.hpp"

namespace wane {

struct noise_render_params {
    double sample_rate_hz = 48000.0;
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

/// Adds the bands' noise into out (out[n] at t = n / rate). Bands above Nyquist are clipped to it.
void add_noise_bands(std::span<const noise_band> bands, const noise_render_params& params, std::span<float> out);

/// The frame length in samples the renderer and the analysis use at a rate (power of two).
int noise_frame_size(double sample_rate_hz, double frame_s);

}  // namespace wane
