// Rendering every channel of a patch (see render.hpp: render_channels).
#include <cmath>
#include <cstdint>
#include <vector>

#include "core/rng.hpp"
#include "core/stereo.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

/// The bands of one channel's noise at `share` of their power (c for the shared part, 1 - c for
/// the own part); bands with no share are left out.
std::vector<noise_band> noise_share(const std::vector<noise_band>& bands, bool shared) {
    std::vector<noise_band> out;
    for (const noise_band& b : bands) {
        const double share = shared ? b.coherence : 1.0 - b.coherence;
        if (!(share > 0.0)) continue;
        noise_band part = b;
        part.env.peak.db += 10.0 * std::log10(share);  // power share -> dB
        part.coherence = 1.0;
        out.push_back(std::move(part));
    }
    return out;
}

/// A seed of a channel's own noise, apart from the shared seed and from the other channel's.
std::uint64_t own_noise_seed(std::uint64_t seed, channel_side side) {
    splitmix64 rng{seed ^ (side == channel_side::left ? 0x6c656674ULL : 0x72696768ULL)};
    return rng.next();
}

}  // namespace

std::vector<std::vector<float>> render_channels(const patch& p, const render_params& params) {
    if (!is_stereo(p)) return {render_patch(p, params)};
    std::vector<std::vector<float>> out;
    for (const channel_side side : {channel_side::left, channel_side::right}) {
        patch channel = channel_patch(p, side);
        const std::vector<noise_band> bands = channel.noise;
        channel.noise = noise_share(bands, true);
        std::vector<float> samples = render_patch(channel, params);
        const std::vector<noise_band> own = noise_share(bands, false);
        if (params.include_noise && !own.empty()) {
            channel.partials.clear();
            channel.noise = own;
            render_params own_params = params;
            own_params.noise_seed = own_noise_seed(params.noise_seed, side);
            const std::vector<float> own_samples = render_patch(channel, own_params);
            for (std::size_t i = 0; i < samples.size(); ++i) samples[i] += own_samples[i];
        }
        out.push_back(std::move(samples));
    }
    return out;
}

}  // namespace wane
