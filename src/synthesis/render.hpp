// Rendering a patch to samples: an oscillator bank of exponentially damped sinusoids (plus the
// noise bands, once the noise model lands). Owned by the renderer work.
#pragma once

#include <cstdint>
#include <vector>

#include "core/patch.hpp"

namespace wane {

struct render_params {
    double sample_rate_hz = 48000.0;
    double length_s = 0.0;        ///< 0 = the patch's note.length_s
    double gain_db = 0.0;         ///< added to the patch's note.gain_db
    bool include_noise = true;
    double noise_gain_db = 0.0;
    std::uint64_t noise_seed = 1;
};

/// Renders the patch to mono float samples at params.sample_rate_hz. Deterministic.
std::vector<float> render_patch(const patch& p, const render_params& params);

}  // namespace wane
