// The random stream each noise band of a render draws from (synthesis/noise_render.hpp): its pool
// seed first, then one shift per frame.
#pragma once

#include <cstdint>

#include "core/patch.hpp"
#include "core/rng.hpp"

namespace wane {

/// This band's stream of the render's seed: keyed by its edges and how many bands before it have
/// the same edges (a floor band and the burst on top of it), so a band's noise does not change
/// when another band comes or goes (a change of the analysis adds or drops a burst band; with one
/// stream drawn in band order every later band's noise changed, and with it the copy's peak by up
/// to 2 dB on guitar_nylon_d3, whose low bands carry the noise's peak). The edges are read as the
/// patch file keeps them (core/patch_numbers.hpp), so a band reads the same stream before and
/// after a write and read.
splitmix64 band_stream(std::uint64_t seed, const noise_band& b, int same_edges_before);

}  // namespace wane
