// The renderer (src/synthesis/render.cpp) against a direct double-precision evaluation of the patch
// formula written from the format's definition (patches/README.md; tests/unit/render_reference.hpp):
// accuracy at every rate and over minutes, the attack, the end fade, determinism (decay and
// spectra measured by Schroeder integration and FFTW: test_render_spectra.cpp; the kernel clones:
// test_render_kernels.cpp).
#include <catch2/catch.hpp>

#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <vector>

#include "core/patch.hpp"
#include "synthesis/damped_kernels.hpp"
#include "synthesis/render.hpp"
#include "render_reference.hpp"
#include "test_signals.hpp"

using Catch::Matchers::WithinAbs;
using namespace wane;
using namespace wane::test;

namespace {

/// 10 log10(error energy / signal energy) over frames first, first + stride, ... < last.
double error_energy_db(const std::vector<float>& y, const direct_render& ref, std::size_t first,
                       std::size_t last, std::size_t stride) {
    double sig = 0.0;
    double err = 0.0;
    for (std::size_t n = first; n < last; n += stride) {
        const double r = ref.at(n);
        const double e = static_cast<double>(y[n]) - r;
        sig += r * r;
        err += e * e;
    }
    return 10.0 * std::log10(err / sig);
}

/// 200 random partials with 1-4 decay segments (falling, held and rising), attacks 0-30 ms; most
/// below the fade zone, a few inside it and a few above Nyquist.
patch random_patch(std::uint32_t seed, double rate_hz, double length_s) {
    splitmix64 rng{seed};
    const test::uniform_draw<double> unit{0.0, 1.0};
    const double nyquist_hz = 0.5 * rate_hz;
    std::vector<partial> parts;
    for (int k = 0; k < 200; ++k) {
        double freq_hz = std::exp(std::log(30.0) + (std::log(0.94 * nyquist_hz) - std::log(30.0)) * unit(rng));
        if (k < 6) freq_hz = nyquist_hz * (band_fade_start_fraction + (1.0 - band_fade_start_fraction) * unit(rng));
        if (k >= 6 && k < 10) freq_hz = nyquist_hz * (1.0 + 0.1 * unit(rng));
        const double attack_s = k % 10 == 3 ? 0.0 : 0.0005 + 0.03 * unit(rng);
        std::vector<decay_segment> decay;
        const int segments = 1 + static_cast<int>(4.0 * unit(rng)) % 4;
        double t = attack_s;
        for (int s = 0; s < segments; ++s) {
            const double u = unit(rng);
            const double t60_s = u < 0.15 ? infinity : u < 0.25 ? -(5.0 + 15.0 * unit(rng)) : 0.3 + 8.0 * unit(rng);
            t += 0.05 + 2.0 * unit(rng);
            const bool last = s + 1 == segments;
            decay.push_back({.t60_s = t60_s, .until_s = last ? std::optional<double>{} : std::optional<double>{t}});
        }
        parts.push_back(make_partial(freq_hz, two_pi * unit(rng), attack_s, -60.0 + 40.0 * unit(rng), decay));
    }
    return make_patch(std::move(parts), length_s);
}

}  // namespace

TEST_CASE("200 partials over 10 s match a direct double evaluation within -100 dB", "[render]") {
    const double rate_hz = 48000.0;
    const patch p = random_patch(12345, rate_hz, 10.0);
    const render_params params{.sample_rate_hz = rate_hz, .gain_db = -3.0};
    const std::vector<float> y = render_patch(p, params);
    REQUIRE(y.size() == 480000);
    const direct_render ref(p, params);
    // The direct evaluation (std::pow + std::cos per partial and sample) over all 96M terms takes
    // several seconds, so it is evaluated on every 7th frame (7 is prime to the lane count and to
    // the anchor interval, so every lane position and anchor offset is sampled).
    const double err_db = error_energy_db(y, ref, 0, y.size(), 7);
    CAPTURE(err_db);
    CHECK(err_db <= -100.0);
    // Also on the first 50 ms, every frame: the attacks and the first anchors.
    const double attack_err_db = error_energy_db(y, ref, 0, 2400, 1);
    CAPTURE(attack_err_db);
    CHECK(attack_err_db <= -100.0);
}

TEST_CASE("accuracy holds at every output rate", "[render]") {
    // The same kind of random patch (frequencies relative to each rate's Nyquist) at the ends and
    // the middle of the accepted range, 2 s, every frame compared.
    const double rate_hz = GENERATE(8000.0, 22050.0, 44100.0, 96000.0, 192000.0);
    const patch p = random_patch(999, rate_hz, 2.0);
    const render_params params{.sample_rate_hz = rate_hz, .gain_db = 6.0};
    const std::vector<float> y = render_patch(p, params);
    const direct_render ref(p, params);
    // Every frame below 32 kHz; above, an odd stride (3, 7, 13: prime to the lane count and the
    // anchor interval, so every lane position is sampled) keeps the direct evaluation near 6M terms.
    const std::size_t stride = 2 * static_cast<std::size_t>(rate_hz / 32000.0) + 1;
    const double err_db = error_energy_db(y, ref, 0, y.size(), stride);
    CAPTURE(rate_hz, err_db);
    CHECK(err_db <= -100.0);
}

TEST_CASE("float drift stays bounded over minutes", "[render]") {
    const double rate_hz = 48000.0;
    const double length_s = 300.0;
    std::vector<partial> parts;
    parts.reserve(5);
    for (int k = 0; k < 5; ++k) {
        parts.push_back(make_partial(110.0 * (k + 1) * 1.0013 + 0.37 * k, 0.3 * k, 0.01, -12.0 - 3.0 * k,
                                     {{.t60_s = infinity, .until_s = {}}}));
    }
    const patch p = make_patch(parts, length_s);
    const render_params params{.sample_rate_hz = rate_hz};
    const std::vector<float> y = render_patch(p, params);
    const direct_render ref(p, params);
    const auto second = static_cast<std::size_t>(rate_hz);
    const double first_db = error_energy_db(y, ref, second, 2 * second, 1);
    const double last_db = error_energy_db(y, ref, y.size() - 2 * second, y.size() - second, 1);
    CAPTURE(first_db, last_db);
    CHECK(first_db <= -100.0);
    CHECK(last_db <= -100.0);
    // Exact ground truth: the error does not grow with time (within 6 dB of the first second's).
    CHECK(last_db <= first_db + 6.0);
}

TEST_CASE("the attack follows the format's definition", "[render]") {
    const double rate_hz = 48000.0;
    const double attack_s = 0.02;  // 960 frames
    const double peak_amp = std::pow(10.0, -3.0 / 20.0);
    const patch p = make_patch({make_partial(440.0, 0.7, attack_s, -3.0, {{.t60_s = 1.5, .until_s = {}}})}, 0.5);
    const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz});
    CHECK(y[0] == 0.0F);  // amplitude 0 at t = 0
    double max_err = 0.0;
    for (std::size_t n = 0; n < 960; ++n) {
        const double t = static_cast<double>(n) / rate_hz;
        const double expected = peak_amp * t / attack_s * std::cos(two_pi * 440.0 * t + 0.7);  // the format's linear attack
        max_err = std::max(max_err, std::abs(static_cast<double>(y[n]) - expected));
    }
    // At the end of the attack the level is the peak, then falls 60 dB per 1.5 s.
    for (const std::size_t n : {960u, 961u, 4800u, 20000u}) {
        const double t = static_cast<double>(n) / rate_hz;
        const double expected = peak_amp * std::pow(10.0, -60.0 / 1.5 * (t - attack_s) / 20.0) *
                                std::cos(two_pi * 440.0 * t + 0.7);
        max_err = std::max(max_err, std::abs(static_cast<double>(y[n]) - expected));
    }
    // The renderer's float error budget (src/synthesis/render.cpp): at most
    // render_anchor_frames / render_lanes float steps from an exact anchor, ~2 * 2^-24 each.
    const double steps = static_cast<double>(render_anchor_frames) / static_cast<double>(render_lanes);
    const double tolerance = steps * 2.0 * std::ldexp(1.0, -24) * peak_amp;
    CAPTURE(max_err, tolerance);
    CHECK(max_err <= tolerance);

    // attack_s = 0: full amplitude at frame 0.
    const patch q = make_patch({make_partial(440.0, 0.7, 0.0, -3.0, {{.t60_s = 1.5, .until_s = {}}})}, 0.5);
    const std::vector<float> z = render_patch(q, {.sample_rate_hz = rate_hz});
    CHECK_THAT(static_cast<double>(z[0]), WithinAbs(peak_amp * std::cos(0.7), 1e-7));
}

TEST_CASE("the end of a render fades to 0 with the stated raised cosine", "[render]") {
    const double rate_hz = 48000.0;
    const patch p = make_patch({make_partial(100.0, 0.0, 0.0, -6.0, {{.t60_s = infinity, .until_s = {}}})}, 1.0);
    const std::vector<float> y = render_patch(p, {.sample_rate_hz = rate_hz});
    REQUIRE(y.size() == 48000);
    CHECK(y.back() == 0.0F);
    CHECK(end_fade_gain(48000 - 480 - 1, 48000, rate_hz) == 1.0);  // 10 ms = 480 frames
    CHECK_THAT(end_fade_gain(48000 - 240 - 1, 48000, rate_hz), WithinAbs(0.5, 1e-12));  // half way
    const std::size_t n = 48000 - 240 - 1;
    const double expected = std::pow(10.0, -6.0 / 20.0) * 0.5 * std::cos(two_pi * 100.0 * static_cast<double>(n) / rate_hz);
    CHECK_THAT(static_cast<double>(y[n]), WithinAbs(expected, 1e-6));
}

TEST_CASE("rendering is deterministic and leaves out what it should", "[render]") {
    const patch p = random_patch(777, 44100.0, 2.0);
    const render_params params{.sample_rate_hz = 44100.0};
    const std::vector<float> a = render_patch(p, params);
    const std::vector<float> b = render_patch(p, params);
    REQUIRE(a.size() == b.size());
    CHECK(std::memcmp(a.data(), b.data(), a.size() * sizeof(float)) == 0);

    // Only a partial at 24 kHz, rendered at 48 kHz: at Nyquist, left out, silence.
    const patch q = make_patch({make_partial(24000.0, 0.0, 0.0, -6.0, {{.t60_s = 2.0, .until_s = {}}})}, 0.1);
    const std::vector<float> z = render_patch(q, {.sample_rate_hz = 48000.0});
    CHECK(std::all_of(z.begin(), z.end(), [](float v) { return v == 0.0F; }));
    CHECK(summarize_render(q, {.sample_rate_hz = 48000.0}).partials_above_nyquist == 1);

    // A patch with noise bands: the summary counts them, and none with the noise left out.
    patch with_noise = q;
    with_noise.noise.push_back({.low_hz = 100.0, .high_hz = 200.0, .env = q.partials[0].env});
    CHECK(summarize_render(with_noise, {.sample_rate_hz = 48000.0}).noise_bands_rendered == 1);
    CHECK(summarize_render(with_noise, {.sample_rate_hz = 48000.0, .include_noise = false}).noise_bands_rendered == 0);
}
