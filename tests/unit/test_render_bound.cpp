// The render bound (synthesis/render_bound.hpp) against full renders (render_patch, the reference:
// the bound is worked out from the patch alone, never from samples): over a sweep of random
// patches, rates and noise seeds (and a stereo channel's noise), no sample from a block on is louder than the bound from that
// block, and no block's noise (the render less its partials alone) is louder than the noise's
// bound there. The truncated render (frames_within's frames, render_with_noise) is the full render's first frames bit
// for bit, and every frame after them stays under the stated distance from the full render's peak.
// Renders and noise draws made a stretch at a time equal the whole ones bit for bit, and the
// streamed figures (block_peaks_within) equal those of the full render, held notes peaking late included.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <vector>

#include "core/noise_bands.hpp"
#include "core/rng.hpp"
#include "synthesis/noise_render.hpp"
#include "synthesis/render.hpp"
#include "synthesis/render_bound.hpp"

using namespace wane;

namespace {

/// An envelope: an attack of up to max_attack_s (none half the time), a first decay, and half the
/// time a rising or held second piece before a last decay.
envelope random_envelope(splitmix64& rng, double peak_db, double max_attack_s) {
    envelope env{.attack_s = rng.unit() < 0.5 ? 0.0 : rng.uniform(0.0005, max_attack_s), .peak = level_db{peak_db}, .decay = {}};
    const double first_t60_s = rng.uniform(0.02, 3.0);
    if (rng.unit() < 0.5) {
        env.decay.push_back({.t60_s = first_t60_s, .until_s = env.attack_s + rng.uniform(0.01, 0.2)});
        // A swell (negative T60: the level rises) or a hold, then a decay.
        env.decay.push_back({.t60_s = rng.unit() < 0.5 ? -rng.uniform(0.5, 4.0) : infinity,
                             .until_s = *env.decay.back().until_s + rng.uniform(0.01, 0.2)});
        env.decay.push_back({.t60_s = rng.uniform(0.05, 2.0), .until_s = {}});
    } else {
        env.decay.push_back({.t60_s = first_t60_s, .until_s = {}});
    }
    return env;
}

/// A random patch of 0.5-0.8 s: 1-8 partials (20 Hz to 21 kHz, -40 to -6 dB), a random half of
/// the one-third-octave noise bands (-80 to -20 dB, attacks up to 10 ms: fast frames).
patch random_patch(std::uint64_t seed) {
    splitmix64 rng{seed};
    patch p;
    p.note.length_s = rng.uniform(0.5, 0.8);
    const auto partials = 1 + static_cast<int>(rng.unit() * 8.0);
    for (int k = 0; k < partials; ++k)
        p.partials.push_back({.freq_hz = rng.uniform(20.0, 21000.0), .harmonic = 0, .phase_rad = rng.uniform(-3.0, 3.0),
                              .env = random_envelope(rng, rng.uniform(-40.0, -6.0), 0.05)});
    for (const band_edges& e : noise_band_layout(20000.0)) {
        if (rng.unit() < 0.5) continue;
        p.noise.push_back({.low_hz = e.low_hz, .high_hz = e.high_hz, .env = random_envelope(rng, rng.uniform(-80.0, -20.0), 0.01),
                           .place = {}, .coherence = rng.unit()});
    }
    canonicalize(p);
    return p;
}

float peak_of(std::span<const float> x) {
    float m = 0.0f;
    for (float v : x) m = std::max(m, std::abs(v));
    return m;
}

}  // namespace

TEST_CASE("render_bound: no sample of a full render exceeds the bound from its block on, nor its noise the noise bound",
          "[render_bound]") {
    const auto seed = GENERATE(range(std::uint64_t{1}, std::uint64_t{13}));
    const double rate_hz = GENERATE(48000.0, 44100.0, 22050.0, 96000.0);
    const patch p = random_patch(seed);
    const render_params partials_only{.sample_rate_hz = rate_hz, .include_noise = false};
    const std::vector<float> partials = render_patch(p, partials_only);
    // Three mono draws, and a stereo channel's (its own noise mixed in by each band's coherence).
    for (const std::uint64_t noise_seed : {std::uint64_t{1}, std::uint64_t{2}, std::uint64_t{7}, std::uint64_t{0}}) {
        const render_params params{.sample_rate_hz = rate_hz, .noise_seed = noise_seed == 0 ? 5 : noise_seed,
                                   .own_noise_seed = noise_seed == 0 ? std::optional<std::uint64_t>{11} : std::nullopt};
        const render_bound bound(p, params);
        const std::vector<float> full = render_patch(p, params);
        REQUIRE(full.size() == bound.frames());
        // Worst ratio of what the render reaches to its bound, over every block.
        double worst_from = 0.0, worst_noise = 0.0;
        float suffix = 0.0f;
        const std::size_t blocks = (full.size() + render_anchor_frames - 1) / render_anchor_frames;
        for (std::size_t b = blocks; b-- > 0;) {
            const std::size_t first = b * render_anchor_frames;
            const std::size_t last = std::min(full.size(), first + render_anchor_frames);
            suffix = std::max(suffix, peak_of(std::span(full).subspan(first, last - first)));
            worst_from = std::max(worst_from, static_cast<double>(suffix) / bound.from(first));
            float noise = 0.0f;
            for (std::size_t n = first; n < last; ++n) noise = std::max(noise, std::abs(full[n] - partials[n]));
            worst_noise = std::max(worst_noise, static_cast<double>(noise) / bound.noise_over(first, last));
        }
        CAPTURE(seed, rate_hz, noise_seed, worst_from, worst_noise);
        CHECK(worst_from <= 1.0);
        CHECK(worst_noise <= 1.0);
    }
}

namespace {

/// Frames [0, frames_within(...)) of render_patch(p, params), rendered by render_with_noise.
std::vector<float> render_while_within(const patch& p, const render_params& params, const render_bound& bound,
                                       double within_db) {
    std::vector<float> out(frames_within(p, params, bound, within_db));
    if (!out.empty()) partial_renderer(p, params).render_with_noise(p, params, 0, out);
    return out;
}

}  // namespace

TEST_CASE("frames_within: the full render's first frames bit for bit, every later frame under the distance from its peak",
          "[render_bound]") {
    const auto seed = GENERATE(range(std::uint64_t{1}, std::uint64_t{13}));
    const double rate_hz = GENERATE(48000.0, 44100.0);
    const double within_db = GENERATE(0.0, 6.0);
    const patch p = random_patch(seed);
    const render_params params{.sample_rate_hz = rate_hz, .noise_seed = 3};
    const std::vector<float> full = render_patch(p, params);
    const std::vector<float> kept = render_while_within(p, params, render_bound(p, params), within_db);
    REQUIRE(kept.size() <= full.size());
    CHECK(std::equal(kept.begin(), kept.end(), full.begin()));
    const double peak = peak_of(full);
    const double rest = peak_of(std::span(full).subspan(kept.size()));
    CAPTURE(seed, rate_hz, within_db, full.size(), kept.size(), peak, rest);
    CHECK(rest < peak * std::pow(10.0, -within_db / 20.0));
}

TEST_CASE("frames_within stops early on a note that falls far under its peak", "[render_bound]") {
    // One partial at -6 dB falling 60 dB in 0.2 s over a 2 s note, a faint noise band: past
    // ~0.1 s (30 dB down with the noise) nothing can come within 6 dB of the peak.
    patch p;
    p.note.length_s = 2.0;
    p.partials.push_back({.freq_hz = 440.0, .harmonic = 1, .phase_rad = 0.0,
                          .env = {.attack_s = 0.0, .peak = level_db{-6.0}, .decay = {{.t60_s = 0.2, .until_s = {}}}}});
    p.noise.push_back({.low_hz = 1120.0, .high_hz = 1410.0,
                       .env = {.attack_s = 0.0, .peak = level_db{-60.0}, .decay = {{.t60_s = 1.0, .until_s = {}}}}});
    canonicalize(p);
    const render_params params{};
    const std::vector<float> kept = render_while_within(p, params, render_bound(p, params), 6.0);
    CAPTURE(kept.size());
    CHECK(kept.size() <= std::size_t{16} * render_anchor_frames);
}

namespace {

/// A held note whose peak comes late: partials that swell (negative T60) for swell_s, then hold
/// for hold_s and decay, a noise band that holds; length_s in all.
patch late_peak_patch(std::uint64_t seed, double swell_s, double hold_s, double length_s) {
    splitmix64 rng{seed};
    patch p;
    p.note.length_s = length_s;
    for (int k = 1; k <= 6; ++k)
        p.partials.push_back({.freq_hz = 220.0 * k * rng.uniform(0.99, 1.01), .harmonic = k, .phase_rad = rng.uniform(-3.0, 3.0),
                              .env = {.attack_s = 0.01, .peak = level_db{rng.uniform(-30.0, -12.0)},
                                      .decay = {{.t60_s = -rng.uniform(20.0, 60.0), .until_s = swell_s},
                                                {.t60_s = infinity, .until_s = swell_s + hold_s},
                                                {.t60_s = rng.uniform(1.0, 5.0), .until_s = {}}}}});
    p.noise.push_back({.low_hz = 1120.0, .high_hz = 1410.0,
                       .env = {.attack_s = 0.0, .peak = level_db{-50.0}, .decay = {{.t60_s = infinity, .until_s = {}}}},
                       .place = {}, .coherence = 0.5});
    canonicalize(p);
    return p;
}

}  // namespace

TEST_CASE("render_with_noise: stretches of any anchored length are the full render's frames bit for bit", "[render_bound]") {
    const auto seed = GENERATE(range(std::uint64_t{1}, std::uint64_t{7}));
    const double rate_hz = GENERATE(48000.0, 44100.0, 96000.0);
    const std::size_t stretch = render_anchor_frames * GENERATE(std::size_t{1}, std::size_t{3}, std::size_t{8});
    const bool stereo = GENERATE(false, true);
    const patch p = random_patch(seed);
    const render_params params{.sample_rate_hz = rate_hz, .noise_seed = 4,
                               .own_noise_seed = stereo ? std::optional<std::uint64_t>{9} : std::nullopt};
    const std::vector<float> full = render_patch(p, params);
    const partial_renderer renderer(p, params);
    std::vector<float> pieces(full.size());
    for (std::size_t first = 0; first < full.size(); first += stretch)
        renderer.render_with_noise(p, params, first, std::span(pieces).subspan(first, std::min(stretch, full.size() - first)));
    std::size_t differing = 0;
    for (std::size_t n = 0; n < full.size(); ++n) differing += full[n] != pieces[n] ? 1 : 0;
    CAPTURE(seed, rate_hz, stretch, stereo, full.size());
    CHECK(differing == 0);
}

TEST_CASE("block_peaks_within: the streamed peak, block peaks and end of the loud frames equal the full render's",
          "[render_bound]") {
    // Random short patches, and held notes of 3 s whose peak comes 1.5 s or 2.5 s in.
    const auto which = GENERATE(range(0, 10));
    const double rate_hz = GENERATE(48000.0, 44100.0);
    const double within_db = GENERATE(0.0, 6.0);
    const std::size_t stretch = render_anchor_frames * GENERATE(std::size_t{2}, std::size_t{64});
    const patch p = which < 6 ? random_patch(static_cast<std::uint64_t>(which) + 20)
                              : late_peak_patch(static_cast<std::uint64_t>(which), which < 8 ? 1.5 : 2.5, 0.3, 3.0);
    const render_params params{.sample_rate_hz = rate_hz, .noise_seed = 3};
    const render_bound bound(p, params);
    const block_peaks r = block_peaks_within(p, params, bound, within_db, stretch);
    // The reference: the full render's first frames_within frames, whole.
    const std::vector<float> full = render_patch(p, params);
    const std::span<const float> kept = std::span(full).first(frames_within(p, params, bound, within_db));
    REQUIRE(r.frames == kept.size());
    std::vector<float> block_ref;
    for (std::size_t b = 0; b < kept.size(); b += render_anchor_frames)
        block_ref.push_back(peak_of(kept.subspan(b, std::min(render_anchor_frames, kept.size() - b))));
    const float peak_ref = peak_of(kept);
    // Floors at and under the peak: the last frame at or over each.
    std::size_t worst_end_miss = 0;
    for (const float level : {peak_ref, 0.5f * peak_ref, 0.1f * peak_ref, 0.01f * peak_ref}) {
        std::size_t end_ref = kept.size();
        while (end_ref > 0 && std::abs(kept[end_ref - 1]) < level) --end_ref;
        const std::size_t end = r.end_at_or_above(p, params, level);
        worst_end_miss = std::max(worst_end_miss, end > end_ref ? end - end_ref : end_ref - end);
    }
    CAPTURE(which, rate_hz, within_db, stretch, kept.size(), full.size(), r.peak, peak_ref, worst_end_miss);
    CHECK(r.peak == peak_ref);
    CHECK(r.peaks == block_ref);
    CHECK(worst_end_miss == 0);
    if (which >= 6 && within_db == 6.0) CHECK(kept.size() > static_cast<std::size_t>(1.5 * rate_hz));  // the late peak is reached
}

TEST_CASE("render_peak: the full render's peak whether the guessed level lies under the peak, over it or is missing",
          "[render_bound]") {
    // Random short patches, and held notes of 3 s whose peak comes 1.5 s or 2.5 s in; the guess a
    // factor of the true peak (0: none; over 1 the render falls short of it and is sought again).
    const auto which = GENERATE(range(0, 10));
    const double rate_hz = GENERATE(48000.0, 44100.0);
    const double guess_of_peak = GENERATE(0.0, 0.5, 0.97, 1.0, 1.5);
    const patch p = which < 6 ? random_patch(static_cast<std::uint64_t>(which) + 60)
                              : late_peak_patch(static_cast<std::uint64_t>(which), which < 8 ? 1.5 : 2.5, 0.3, 3.0);
    const render_params params{.sample_rate_hz = rate_hz, .noise_seed = 5};
    const float peak_ref = peak_of(render_patch(p, params));
    const float peak = render_peak(p, params, render_bound(p, params), guess_of_peak * static_cast<double>(peak_ref));
    CAPTURE(which, rate_hz, guess_of_peak, peak, peak_ref);
    CHECK(peak == peak_ref);
}

TEST_CASE("add_noise_band_draws_part: several draws a stretch at a time equal the whole draws bit for bit", "[render_bound]") {
    const auto seed = GENERATE(range(std::uint64_t{1}, std::uint64_t{5}));
    const double rate_hz = GENERATE(48000.0, 44100.0);
    const std::size_t stretch = render_anchor_frames * GENERATE(std::size_t{1}, std::size_t{5});
    const patch p = random_patch(seed + 40);
    const std::size_t frames = render_frames(p, {.sample_rate_hz = rate_hz});
    const std::uint64_t seeds[] = {2, 5, 8};
    const noise_render_params params{.sample_rate_hz = rate_hz, .gain_db = 0.0};
    std::vector<float> whole(3 * frames, 0.0f), pieces(3 * frames, 0.0f);
    const std::span<float> whole_outs[] = {std::span(whole).first(frames), std::span(whole).subspan(frames, frames),
                                           std::span(whole).subspan(2 * frames, frames)};
    add_noise_band_draws(p.noise, params, seeds, whole_outs);
    for (std::size_t first = 0; first < frames; first += stretch) {
        const std::size_t size = std::min(stretch, frames - first);
        const std::span<float> outs[] = {std::span(pieces).subspan(first, size), std::span(pieces).subspan(frames + first, size),
                                         std::span(pieces).subspan(2 * frames + first, size)};
        add_noise_band_draws_part(p.noise, params, seeds, frames, first, outs);
    }
    std::size_t differing = 0;
    for (std::size_t n = 0; n < whole.size(); ++n) differing += whole[n] != pieces[n] ? 1 : 0;
    CAPTURE(seed, rate_hz, stretch, frames);
    CHECK(differing == 0);
}
