// The oscillator kernels' one body (synthesis/damped_kernels.hpp) compiled for AVX2 and for the
// x86-64 baseline give the same bits (render.cpp's kernel clones rely on it).
#include <catch2/catch.hpp>

#include <bit>
#include <cstdint>
#include <vector>

#include "synthesis/damped_kernels.hpp"
#include "test_signals.hpp"

using namespace wane;

#if defined(__x86_64__)
namespace {

// The oscillator kernels' one body (synthesis/damped_kernels.hpp) compiled here for AVX2 and for
// the x86-64 baseline, as render.cpp's kernel clones are (kernel_clones.hpp).
[[gnu::target("avx2")]] void damped_avx2(float* out, std::size_t frames, const float* re0, const float* im0,
                                         float step_re, float step_im) {
    damped_kernels::add_damped_lanes(out, frames, re0, im0, step_re, step_im);
}
void damped_generic(float* out, std::size_t frames, const float* re0, const float* im0, float step_re,
                    float step_im) {
    damped_kernels::add_damped_lanes(out, frames, re0, im0, step_re, step_im);
}
[[gnu::target("avx2")]] void ramped_avx2(float* out, std::size_t frames, const float* re0, const float* im0,
                                         const float* amp0, float step_re, float step_im, float amp_step) {
    damped_kernels::add_ramped_lanes(out, frames, re0, im0, amp0, step_re, step_im, amp_step);
}
void ramped_generic(float* out, std::size_t frames, const float* re0, const float* im0, const float* amp0,
                    float step_re, float step_im, float amp_step) {
    damped_kernels::add_ramped_lanes(out, frames, re0, im0, amp0, step_re, step_im, amp_step);
}

/// Index of the first float whose bits differ, or a.size() when all are equal.
std::size_t first_bit_difference(const std::vector<float>& a, const std::vector<float>& b) {
    for (std::size_t i = 0; i < a.size(); ++i) {
        if (std::bit_cast<std::uint32_t>(a[i]) != std::bit_cast<std::uint32_t>(b[i])) return i;
    }
    return a.size();
}

}  // namespace

TEST_CASE("the oscillator kernels compiled for AVX2 and for baseline x86-64 give the same bits", "[render][kernels]") {
    if (!__builtin_cpu_supports("avx2")) {
        WARN("this CPU has no AVX2: only the baseline kernel runs here, nothing to compare");
        return;
    }
    const std::size_t frames = GENERATE(std::size_t{1}, std::size_t{31}, std::size_t{32}, std::size_t{33},
                                        std::size_t{1000}, render_anchor_frames);
    CAPTURE(frames);
    splitmix64 rng{20261202 + frames};
    // Lane states: a damped phasor of random frequency (|m| just below 1) from a random start.
    const double w = rng.uniform(0.001, 3.1);
    const double r = 1.0 - rng.uniform(0.0, 1e-3);
    std::vector<float> re0(render_lanes), im0(render_lanes), amp0(render_lanes);
    for (std::size_t l = 0; l < render_lanes; ++l) {
        const double mag = std::pow(r, static_cast<double>(l));
        re0[l] = static_cast<float>(mag * std::cos(w * static_cast<double>(l) + 0.3));
        im0[l] = static_cast<float>(mag * std::sin(w * static_cast<double>(l) + 0.3));
        amp0[l] = static_cast<float>(1e-3 * static_cast<double>(l + 1));
    }
    const double lanes_d = static_cast<double>(render_lanes);
    const auto step_re = static_cast<float>(std::pow(r, lanes_d) * std::cos(w * lanes_d));
    const auto step_im = static_cast<float>(std::pow(r, lanes_d) * std::sin(w * lanes_d));
    std::vector<float> base(frames);
    for (float& v : base) v = static_cast<float>(rng.uniform(-0.5, 0.5));  // the block already holds other partials

    std::vector<float> a = base, b = base;
    damped_avx2(a.data(), frames, re0.data(), im0.data(), step_re, step_im);
    damped_generic(b.data(), frames, re0.data(), im0.data(), step_re, step_im);
    CHECK(a != base);  // the kernel added something
    const std::size_t damped_diff = first_bit_difference(a, b);
    CAPTURE(damped_diff);
    CHECK(damped_diff == frames);

    a = base;
    b = base;
    ramped_avx2(a.data(), frames, re0.data(), im0.data(), amp0.data(), step_re, step_im, 0.03f);
    ramped_generic(b.data(), frames, re0.data(), im0.data(), amp0.data(), step_re, step_im, 0.03f);
    CHECK(a != base);
    const std::size_t ramped_diff = first_bit_difference(a, b);
    CAPTURE(ramped_diff);
    CHECK(ramped_diff == frames);
}
#endif
