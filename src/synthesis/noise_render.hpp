// Band noise of a patch's [[noise]] tables, by spectral shaping: short frames of random-phase
// spectra whose bin magnitudes follow each band's envelope, inverse real FFT (KissFFT), Hann
// window, overlap-add at a quarter frame (Hann^2 windows at 75% overlap sum to a constant, so the
// power follows the envelopes without ripple). Band-limited by construction: only bins inside a
// band carry energy, and the Hann window's sidelobes keep the skirts low (measured in
// tests/unit/test_noise.cpp). Seeded and deterministic; frames where every band is below
// -160 dB are skipped, and in the others the bins of bands below it are left empty (their random
// phases skipped, not drawn), so attack noise costs only while it sounds.
#pragma once

#include <cstdint>
#include <span>

#include "core/patch.hpp"

namespace wane {

struct noise_render_params {
    double sample_rate_hz = 48000.0;
    double gain_db = 0.0;        ///< applied to every band
    std::uint64_t seed = 1;
    /// Frame length in seconds (rounded up to a power of two in samples); ~21 ms: short enough
    /// for attack transients, long enough for several bins in the lowest band.
    double frame_s = 0.0213;
};

/// Adds the bands' noise into out (out[n] at t = n / rate). Bands above Nyquist are clipped to it.
void add_noise_bands(std::span<const noise_band> bands, const noise_render_params& params, std::span<float> out);

/// The frame length in samples the renderer and the analysis use at a rate (power of two).
int noise_frame_size(double sample_rate_hz, double frame_s);

}  // namespace wane
