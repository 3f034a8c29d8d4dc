// Renders that must repeat bit for bit: a patch with noise bands under one seed (and not under
// another), and the partials rendered a stretch at a time (partial_renderer, how the analysis forms
// a long residual) against the whole render.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cstddef>
#include <vector>

#include "core/noise_bands.hpp"
#include "core/patch.hpp"
#include "synthesis/render.hpp"

using namespace wane;

namespace {

constexpr double rate_hz = 48000.0;

}  // namespace

TEST_CASE("a patch with noise bands renders bit-identically with the same seed", "[noise]") {
    patch p;
    p.note.length_s = 1.0;
    p.partials.push_back({.freq_hz = 440.0, .harmonic = 1, .phase_rad = 0.3,
                          .env = {.attack_s = 0.002, .peak = level_db{-12.0}, .decay = {{.t60_s = 2.0, .until_s = {}}}}});
    for (const band_edges& e : noise_band_layout(24000.0)) {
        p.noise.push_back({.low_hz = e.low_hz, .high_hz = e.high_hz,
                           .env = {.attack_s = 0.001, .peak = level_db{-40.0}, .decay = {{.t60_s = 0.1, .until_s = {}}}}});
    }
    const auto a = render_patch(p, {.sample_rate_hz = rate_hz, .noise_seed = 7});
    const auto b = render_patch(p, {.sample_rate_hz = rate_hz, .noise_seed = 7});
    const auto c = render_patch(p, {.sample_rate_hz = rate_hz, .noise_seed = 8});
    const auto quiet = render_patch(p, {.sample_rate_hz = rate_hz, .include_noise = false});
    CHECK(a == b);
    CHECK(a != c);
    CHECK(a != quiet);
}

TEST_CASE("the partials rendered a stretch at a time equal the whole render bit for bit", "[noise]") {
    // partial_renderer (how the analysis forms a long residual) against render_patch without
    // noise: stretches starting at multiples of render_anchor_frames, the last one through the
    // end fade, must give the same samples.
    patch p;
    p.note.length_s = 1.3;
    for (int h = 1; h <= 12; ++h) {
        p.partials.push_back({.freq_hz = 196.0 * h, .harmonic = h, .phase_rad = 0.1 * h,
                              .env = {.attack_s = 0.003, .peak = level_db{-10.0 - 2.0 * h},
                                      .decay = {{.t60_s = 0.3, .until_s = 0.2}, {.t60_s = 2.5, .until_s = {}}}}});
    }
    canonicalize(p);
    const render_params params{.sample_rate_hz = rate_hz, .include_noise = false};
    const std::vector<float> whole = render_patch(p, params);
    const partial_renderer stream(p, params);
    REQUIRE(stream.frames() == whole.size());
    const std::size_t stretch = 5 * render_anchor_frames;
    std::vector<float> pieces;
    for (std::size_t first = 0; first < whole.size(); first += stretch) {
        std::vector<float> part(std::min(stretch, whole.size() - first));
        stream.render(first, part);
        pieces.insert(pieces.end(), part.begin(), part.end());
    }
    std::size_t differing = 0;
    for (std::size_t i = 0; i < whole.size(); ++i) differing += whole[i] != pieces[i] ? 1 : 0;
    CAPTURE(whole.size(), differing);
    CHECK(differing == 0);
}
