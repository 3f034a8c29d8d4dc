#include "synthesis/noise_streams.hpp"

#include <bit>
#include <charconv>
#include <string>

#include "core/patch_numbers.hpp"

namespace wane {

namespace {

/// An edge as the patch file keeps it (core/patch_numbers.hpp).
double file_edge(double hz) {
    const std::string text = patch_numbers::fmt_band_edge(hz);
    double out = hz;
    std::from_chars(text.data(), text.data() + text.size(), out);
    return out;
}

}  // namespace

splitmix64 band_stream(std::uint64_t seed, const noise_band& b, int same_edges_before) {
    std::uint64_t key = splitmix64_mix(std::bit_cast<std::uint64_t>(file_edge(b.low_hz)));
    key = splitmix64_mix(key ^ std::bit_cast<std::uint64_t>(file_edge(b.high_hz)));
    key = splitmix64_mix(key + static_cast<std::uint64_t>(same_edges_before));
    return splitmix64{seed ^ key};
}

}  // namespace wane
