// Rendering every channel of a patch (see render.hpp: render_channels).
#include <cstdint>
#include <vector>

#include "core/rng.hpp"
#include "core/stereo.hpp"
#include "synthesis/render.hpp"

namespace wane {

namespace {

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
        render_params channel_params = params;
        channel_params.own_noise_seed = own_noise_seed(params.noise_seed, side);
        out.push_back(render_patch(channel_patch(p, side), channel_params));
    }
    return out;
}

}  // namespace wane
